"""A fresh :class:`Results` for a job, with the provenance header every results file carries."""

from __future__ import annotations

import platform
import socket
import sys
import tomllib
from datetime import UTC, datetime

import h5py
import numpy as np
import scipy

from .. import __version__
from ..errors import JobError, ResultsError
from ..jobfile import Job, build_job
from ..physics.models import MODELS
from .results import SCHEMA_VERSION, AxisData, Results, Variable


def now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def new_results(job: Job, argv: list[str] | None = None) -> Results:
    """Preallocated results for every grid point of ``job``, nothing computed yet."""
    axes = []
    for a in job.axes:
        param = MODELS[job.model].param(a.name) if job.model in MODELS else None
        units = a.units or (param.units if param is not None and param.units else "1")
        long_name = a.doc or (param.doc if param is not None and param.doc else a.name)
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
    if job.main is not None:
        attrs["main_variable"] = job.main
    if job.refine is not None:
        attrs["refine_by"] = job.refine.by
        attrs["refine_stride"] = str(job.refine.stride)
    return Results(axes, variables, attrs)


def stored_job(results: Results, label: str = "the results file"):
    """The :class:`~sweepcli.jobfile.Job` stored in ``results`` (``attrs["job_text"]``).

    Raises
    ------
    ResultsError
        If the file holds no job, or the stored job is not valid in this version of sweepcli, or
        it no longer gives the file's grid.
    """
    text = results.attrs.get("job_text", "")
    if not text.strip():
        raise ResultsError(f"{label}: holds no job file (attribute 'job_text'), so its samples "
                           "cannot be rebuilt; only files written by `sweepcli run` can be "
                           "inspected.")
    path = results.attrs.get("job_path", "") or "job.toml"
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ResultsError(f"{label}: the stored job file is not valid TOML ({exc}).") from None
    try:
        job = build_job(doc, text=text, path=path)
    except JobError as exc:
        raise ResultsError(f"{label}: the job stored in it is not valid in sweepcli "
                           f"{__version__}: {exc}") from None
    same = job.shape == results.shape and all(
        a.name == b.name and np.allclose(a.values, b.values, rtol=1e-12, atol=1e-12)
        for a, b in zip(job.axes, results.axes))
    if not same:
        raise ResultsError(f"{label}: the stored job gives a grid ({_grid_text(job.axes)}) "
                           f"different from the file's ({_grid_text(results.axes)}); was the "
                           "file written by another version of sweepcli?")
    return job


def _grid_text(axes) -> str:
    return " x ".join(f"{a.name}[{len(a.values)}]" for a in axes)
