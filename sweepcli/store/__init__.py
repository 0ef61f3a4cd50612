"""Results files: grid-shaped arrays in memory, written to HDF5 as complete, atomic files."""

from .results import FILL_INT, SCHEMA_VERSION, Results, Variable  # noqa: F401
