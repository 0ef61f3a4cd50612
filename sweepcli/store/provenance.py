"""A fresh :class:`Results` with the provenance header every results file carries."""

from __future__ import annotations

import platform
import socket
import sys
from collections.abc import Mapping
from datetime import UTC, datetime
from importlib.metadata import version

import h5py
import numpy as np

from .. import __version__
from .results import SCHEMA_VERSION, AxisData, Results, Variable


def now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def new_results(axes: list[AxisData], variables: list[Variable], job_attrs: Mapping[str, str],
                argv: list[str] | None = None) -> Results:
    """Preallocated results, nothing computed yet, with the provenance header.

    Parameters
    ----------
    axes, variables : the grid and the stored variables (the caller derives them from its job;
        :func:`sweepcli.run.layout.results_for_job`).
    job_attrs : attributes that describe the job (``job_text``, ``job_sha256``, ...;
        results-schema.md lists them); the versions of sweepcli, Python and the libraries, the
        host, the command line and the start time are added here.
    argv : the command line (default ``sys.argv``).
    """
    attrs = {
        **job_attrs,
        "schema_version": SCHEMA_VERSION,
        "sweepcli_version": __version__,
        "python_version": platform.python_version(),
        "numpy_version": np.__version__,
        # The version from the installed metadata: the store does not load scipy to learn it.
        "scipy_version": version("scipy"),
        "h5py_version": h5py.__version__,
        "hdf5_version": h5py.version.hdf5_version,
        "host": socket.gethostname(),
        "command_line": " ".join(argv if argv is not None else sys.argv),
        "started": now(),
        "finished": "",
    }
    return Results(axes, variables, attrs)
