"""A fresh :class:`Results` for a job, with the provenance header every results file carries."""

from __future__ import annotations

import platform
import socket
import sys
from datetime import datetime, timezone

import h5py
import numpy as np
import scipy

from .. import __version__
from ..jobfile import Job
from ..physics.models import MODELS
from .results import SCHEMA_VERSION, AxisData, Results, Variable


def now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def new_results(job: Job, argv: list[str] | None = None) -> Results:
    """Preallocated results for every grid point of ``job``, nothing computed yet."""
    axes = []
    for a in job.axes:
        param = MODELS[job.model].param(a.name) if job.model in MODELS else None
        units = param.units if param is not None and param.units else "1"
        long_name = param.doc if param is not None and param.doc else a.name
        axes.append(AxisData(a.name, np.array(a.values), units, long_name, a.spacing))
    variables = []
    for measurement, quantities in job.quantities():
        for q in quantities:
            variables.append(Variable(q.name, q.dtype, q.units, q.long_name, measurement))
        variables.append(Variable(f"{measurement}_reason", "uint8", "1",
                                  f"why {measurement} is missing (0 = not missing)", measurement))
    for rule in job.consistency_rules():
        q = rule.quantity
        variables.append(Variable(q.name, q.dtype, q.units, q.long_name, "consistency"))
    attrs = {
        "title": job.title,
        "job_name": job.name,
        "job_path": job.path,
        "job_text": job.text,
        "job_normalised": job.normalised,
        "job_sha256": job.sha256,
        "schema_version": SCHEMA_VERSION,
        "sweepcli_version": __version__,
        "python_version": platform.python_version(),
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "h5py_version": h5py.__version__,
        "hdf5_version": h5py.version.hdf5_version,
        "host": socket.gethostname(),
        "command_line": " ".join(argv if argv is not None else sys.argv),
        "started": now(),
        "finished": "",
    }
    if job.refine is not None:
        attrs["refine_by"] = job.refine.by
        attrs["refine_stride"] = str(job.refine.stride)
    return Results(axes, variables, attrs)
