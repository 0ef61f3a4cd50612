"""sweepcli: phase-diagram sweeps of static and periodically driven lattice models."""

__version__ = "0.1.0"
