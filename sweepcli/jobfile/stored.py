"""The job a results file was written by, rebuilt from the job file stored in it."""

from __future__ import annotations

import tomllib
from typing import Any

import numpy as np

from .. import __version__
from ..errors import JobError, ResultsError
from .load import build_job
from .spec import Job


def job_from_results(results: Any, label: str = "the results file") -> Job:
    """The :class:`~sweepcli.jobfile.Job` stored in ``results`` (``attrs["job_text"]``).

    Parameters
    ----------
    results : a :class:`sweepcli.store.Results` (read only through ``attrs``, ``shape`` and
        ``axes``, each axis with ``name`` and ``values``, so this package needs no store import).
    label : how error messages name the file.

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
    same = job.shape == tuple(results.shape) and all(
        a.name == b.name and np.allclose(a.values, b.values, rtol=1e-12, atol=1e-12)
        for a, b in zip(job.axes, results.axes))
    if not same:
        raise ResultsError(f"{label}: the stored job gives a grid ({_grid_text(job.axes)}) "
                           f"different from the file's ({_grid_text(results.axes)}); was the "
                           "file written by another version of sweepcli?")
    return job


def _grid_text(axes) -> str:
    return " x ".join(f"{a.name}[{len(a.values)}]" for a in axes)
