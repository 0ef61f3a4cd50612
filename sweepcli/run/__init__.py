"""Orchestration: chunks of grid points, executors, progress and checkpoints."""
