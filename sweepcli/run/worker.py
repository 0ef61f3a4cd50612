"""What runs in a worker process: evaluate the measurements of a chunk of grid points."""

from __future__ import annotations

import time

from ..jobfile import Job
from ..physics.measurements import MEASUREMENTS, quantities_of, reason_names, split_reason
from ..physics.measurements.consistency import evaluate
from ..schema import POINT_SECONDS, Reason

Record = tuple[int, dict, str]


def evaluate_point(job: Job, index: int, only: tuple[str, ...] | None = None) -> Record:
    """All measurements of flat grid point ``index`` (or those named in ``only``):
    ``(index, values, failure message)``.

    The reasons are stored per reason variable (``<name>_reason``, or ``<name>_<group>_reason``
    for a measurement with one reason per gap). A measurement that raises is recorded as
    missing with ``Reason.FAILED`` in every one of its reason variables and its message, and the
    other measurements (and the sweep) go on. The consistency flags need every measurement,
    so they are added only without ``only`` (a ``[confirm]`` run adds them in the parent).
    ``values[POINT_SECONDS]`` is the time the worker spent on the point (wall clock, seconds).
    """
    start = time.perf_counter()
    point = job.point(index)
    driven = job.drive.kind != "static"
    values: dict = {}
    failures = []
    for name, options in job.measurements:
        if only is not None and name not in only:
            continue
        try:
            result = dict(MEASUREMENTS[name].func(point, **dict(options)))
            reasons = split_reason(name, result.pop("reason"), job.dim, driven)
        except Exception as exc:  # noqa: BLE001 - any failure of one point is recorded, not fatal
            result = {q.name: None for q in quantities_of(name, job.dim, driven)}
            reasons = {r: int(Reason.FAILED) for r in reason_names(name, job.dim, driven).values()}
            failures.append(f"{name}: {type(exc).__name__}: {exc}")
        values.update(result)
        values.update(reasons)
    if only is None:
        values.update(evaluate(job.consistency_rules(), values))
    values[POINT_SECONDS] = time.perf_counter() - start
    return index, values, "; ".join(failures)


def evaluate_chunk(job: Job, indices, only: tuple[str, ...] | None = None) -> list[Record]:
    return [evaluate_point(job, int(i), only) for i in indices]


def evaluate_task(kind: str, job: Job, payload, only: tuple[str, ...] | None = None):
    """One executor task: ``("points", records)`` of the flat indices ``payload``, or
    ``("predict", (line ids, rows per line))`` for ``payload = (ids, lines)``
    (:func:`sweepcli.run.predict.predict_lines`)."""
    if kind == "predict":
        from .predict import predict_lines

        ids, lines = payload
        return kind, (ids, predict_lines(job, lines))
    return kind, evaluate_chunk(job, payload, only)
