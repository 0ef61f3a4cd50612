"""The sweep loop: pending points in chunks through an executor, checkpoints to the store.

Only this (parent) process writes the results file. Workers return ``(index, values, failure)``
records; the parent stores them in memory and writes a complete file at each checkpoint
(every ``checkpoint_every`` seconds, at the end, and when the run is interrupted).
"""

from __future__ import annotations

import math
import signal
import sys
import threading
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np

from ..errors import SweepError
from ..jobfile import Job
from ..schema import POINT_SECONDS
from ..store import Results
from .chunking import CostMeter, fixed_size, plan_chunks
from .confirm import (
    NOT_COMPUTED,
    NOT_REQUESTED,
    reason_arrays,
    reopen_not_requested,
    run_confirmed,
)
from .executors import WorkersLost, make_executor
from .predict import Predictions
from .progress import Progress
from .refine import base_indices, level_indices
from .worker import evaluate_task


class WorkerDied(SweepError):
    """A worker process died (killed, out of memory); finished points were saved."""


@dataclass
class RunSummary:
    done: int
    total: int
    failed: int
    interrupted: bool
    seconds: float
    # [confirm] runs: cells chosen for the boundary measurements (of the points this run
    # completes) and cells where they are computed; None for other jobs.
    chosen: int | None = None
    confirmed: int | None = None
    reason: str = ""  # how an interrupted run stopped, when not in the sweep loop


def pending_indices(results: Results, selection: np.ndarray | None = None) -> np.ndarray:
    """Flat indices not yet done (optionally within ``selection``), ascending."""
    todo = np.flatnonzero(results.done.ravel() == 0)
    if selection is not None:
        todo = np.intersect1d(todo, selection, assume_unique=True)
    return todo


def chunks(todo: np.ndarray, chunk_size: int) -> Iterator[np.ndarray]:
    """Strided chunks: chunk j holds todo[j::m], so each mixes points from the whole grid and
    chunks cost about the same (load balance) whatever region of parameters is expensive."""
    m = max(1, math.ceil(len(todo) / chunk_size))
    for j in range(m):
        yield todo[j::m]


def default_chunk_size(n_points: int, workers: int) -> int:
    """The fixed chunk size: before a cost is measured, and of the strided :func:`chunks`."""
    return fixed_size(n_points, workers)


def line_chunks(ids: list[int], workers: int) -> list[list[int]]:
    """Prediction lines in tasks: about 8 tasks per worker (strided, as :func:`chunks`)."""
    if not ids:
        return []
    m = min(len(ids), 8 * workers)
    return [ids[j::m] for j in range(m)]


def point_tasks(job: Job, results: Results, groups: list[tuple[np.ndarray, tuple | None]],
                side: list[tuple], workers: int, chunk_size: int | None = None):
    """The executor's tasks: the chunks of every group, with the ``side`` tasks spread evenly
    among them by points (side task ``j`` before the chunk that starts at point
    ``floor(j n / len(side))`` of the ``n`` points), so neither kind waits for the other.

    Returns ``(tasks, observe)``: ``tasks`` is drawn lazily, each chunk sized when it is drawn
    (:func:`sweepcli.run.chunking.plan_chunks`, or strided chunks of ``chunk_size`` when given);
    ``observe(records)`` feeds the measured ``point_seconds`` of finished points to the sizing.
    A resumed run starts from the times its file holds.
    """
    n = sum(len(g) for g, _ in groups)
    fixed = chunk_size or fixed_size(n, workers)
    stored = (results.data[POINT_SECONDS].reshape(-1)[results.done.ravel() != 0]
              if POINT_SECONDS in results.variables else np.zeros(0))
    # A pass of some measurements (only) costs less than the stored time of all of them.
    meters = [CostMeter.from_times(stored if only is None else np.zeros(0)) for _, only in groups]
    group_of = np.zeros(results.size, np.int32)
    for gi, (todo, _) in enumerate(groups):
        group_of[todo] = gi

    def tasks():
        handed = j = 0
        for gi, (todo, only) in enumerate(groups):
            cut = (chunks(todo, chunk_size) if chunk_size else
                   plan_chunks(todo, workers, meters[gi], fixed=fixed))
            for c in cut:
                while j < len(side) and j * n // len(side) <= handed:
                    yield side[j]
                    j += 1
                yield ("points", job, c, only)
                handed += len(c)
        yield from side[j:]

    def observe(records) -> None:
        for index, values, _ in records:
            seconds = values.get(POINT_SECONDS)
            if seconds is not None:
                meters[group_of[index]].add(float(seconds))

    return tasks(), observe


def evaluate_groups(job: Job, results: Results, groups: list[tuple[np.ndarray, tuple | None]],
                    store: Callable[[int, dict, str], None], *, total: int, already: int,
                    workers: int = 1, chunk_size: int | None = None,
                    checkpoint: Callable[[Results], None] | None = None,
                    checkpoint_every: float = 60.0, progress: bool = True, executor=None,
                    label: str = "", heartbeat: float = 60.0,
                    predictions: Predictions | None = None) -> bool:
    """Evaluate ``groups`` (``(flat indices, measurement names or None for all)``) through the
    executor, passing each record to ``store``; returns whether the run was interrupted.

    Points go in chunks sized by their measured cost (:func:`point_tasks`). The lines of
    ``predictions`` not yet computed go to the same executor as tasks spread evenly among the
    point chunks, shown in the progress and collected in
    ``predictions``, so that the workers compute them beside the points.

    ``checkpoint(results)`` is called every ``checkpoint_every`` seconds, at the end and on
    interruption; SIGTERM is turned into the same clean stop as Ctrl-C. ``progress`` draws a
    bar on a terminal; otherwise (or without it) a line is logged every ``heartbeat`` seconds
    (0: never). Raises :class:`WorkersLost` (after the checkpoint) when a dask cluster has had no
    worker for its ``lost_timeout``.
    """
    executor = executor or make_executor(workers)
    side = predictions.pending() if predictions is not None else []
    bar = Progress(total, already, bar=progress, interval=heartbeat, label=label,
                   side=(predictions.total - len(side), predictions.total) if side else None)
    interrupted = False
    last = time.monotonic()
    # Ctrl-C and SIGTERM raise KeyboardInterrupt, and also set ``stop``: Python drops an
    # exception raised while a weakref callback or __del__ runs ("Exception ignored in ..."), so
    # the loop (and a polling executor) checks the flag too, and the stop is never lost.
    stop = threading.Event()
    executor.stop = stop
    previous = {}

    def on_signal(signum, frame):
        stop.set()
        raise KeyboardInterrupt

    def unraisable(hook_args) -> None:
        # The dropped KeyboardInterrupt above is carried by ``stop``: Python's report of it
        # ("Exception ignored in ... Traceback") would only alarm the user.
        if not isinstance(hook_args.exc_value, KeyboardInterrupt):
            report(hook_args)

    report, sys.unraisablehook = sys.unraisablehook, unraisable

    for sig in (signal.SIGINT, signal.SIGTERM):
        try:
            previous[sig] = signal.signal(sig, on_signal)
        except ValueError:  # not the main thread: leave signals alone
            break
    died = lost = None
    try:
        side_tasks = [("predict", job, (ids, predictions.task(ids)), None)
                      for ids in line_chunks(side, executor.workers)]
        tasks, observe = point_tasks(job, results, groups, side_tasks, executor.workers,
                                     chunk_size)
        for kind, out in executor.imap(evaluate_task, tasks):
            if kind == "predict":
                predictions.record(*out)
                bar.side_update(len(out[0]))
                if stop.is_set():
                    raise KeyboardInterrupt
                continue
            observe(out)
            for index, values, failure in out:
                store(index, values, failure)
            bar.update(len(out))
            if stop.is_set():
                raise KeyboardInterrupt
            if checkpoint is not None and time.monotonic() - last >= checkpoint_every:
                checkpoint(results)
                last = time.monotonic()
    except KeyboardInterrupt:
        interrupted = True
    except WorkersLost as exc:
        lost = exc
    except Exception as exc:  # noqa: BLE001 - e.g. a worker process was killed
        # loky's TerminatedWorkerError; dask's KilledWorker (a task that killed 3 workers).
        if type(exc).__name__ not in ("TerminatedWorkerError", "KilledWorker"):
            raise
        died = exc
    finally:
        bar.close()
        for sig, handler in previous.items():
            signal.signal(sig, handler)
        sys.unraisablehook = report
        executor.stop = None
        if checkpoint is not None:
            checkpoint(results)
    if lost is not None:
        raise WorkersLost(f"{lost}; {results.n_done} finished points are saved; rerun with "
                          "--resume to continue.")
    if died is not None:
        raise WorkerDied(f"a worker process died ({died}); {results.n_done} finished points are "
                         "saved; rerun with --resume to continue.")
    return interrupted


def run_sweep(job: Job, results: Results, *, workers: int = 1, chunk_size: int | None = None,
              checkpoint: Callable[[Results], None] | None = None, checkpoint_every: float = 60.0,
              progress: bool = True, selection: np.ndarray | None = None,
              executor=None, heartbeat: float = 60.0,
              predictions: Predictions | None = None) -> RunSummary:
    """Evaluate every pending point of ``job`` into ``results`` (see :func:`evaluate_groups`)."""
    start = time.monotonic()
    todo = pending_indices(results, selection)
    total = results.size if selection is None else len(selection)
    interrupted = evaluate_groups(
        job, results, [(todo, None)], results.record, total=total, already=total - len(todo),
        workers=workers, chunk_size=chunk_size, checkpoint=checkpoint,
        checkpoint_every=checkpoint_every, progress=progress, executor=executor,
        heartbeat=heartbeat, predictions=predictions)
    sel_done = results.done.ravel() if selection is None else results.done.ravel()[selection]
    failed = results.failure.ravel() if selection is None else results.failure.ravel()[selection]
    return RunSummary(done=int(sel_done.sum()), total=total,
                      failed=int(np.count_nonzero(failed != "")), interrupted=interrupted,
                      seconds=time.monotonic() - start)


def run_confirm_job(job: Job, results: Results, *, selection: np.ndarray | None = None,
                    **options) -> RunSummary:
    """A job with ``[confirm]``: bulk on every point, then boundary on the chosen cells of
    ``selection`` (a shard's points; all by default); see :mod:`sweepcli.run.confirm`."""
    start = time.monotonic()

    def run_groups(groups, store, total, already, label) -> bool:
        return evaluate_groups(job, results, groups, store, total=total, already=already,
                               label=label, **options)

    interrupted, chosen, own = run_confirmed(job, results, share=selection,
                                             evaluate_groups=run_groups)
    done = results.done.ravel()[own]
    failed = results.failure.ravel()[own]
    confirmed = None
    if chosen is not None:
        computed = np.zeros(results.size, bool)
        for m in job.confirm.measurements:
            for r in reason_arrays(job, results, m):
                computed |= (r != NOT_COMPUTED) & (r != NOT_REQUESTED)
        confirmed = int((computed & own).sum())
    return RunSummary(done=int(done.sum()), total=int(own.sum()),
                      failed=int(np.count_nonzero(failed != "")), interrupted=interrupted,
                      seconds=time.monotonic() - start,
                      chosen=None if chosen is None else int((chosen & own).sum()),
                      confirmed=confirmed)


def run_job(job: Job, results: Results, *, selection: np.ndarray | None = None,
            **options) -> RunSummary:
    """Run a job: the whole grid (or ``selection``); with ``[refine]``, level by level; with
    ``[confirm]``, bulk then boundary (:func:`run_confirm_job`).

    ``predictions`` (:class:`sweepcli.run.predict.Predictions`), when given, are computed by the
    same workers beside the first points; lines still missing when every point is done (none
    were pending) are computed then, through the executor. The summary's time covers both.
    """
    start = time.monotonic()
    summary = _run_points(job, results, selection=selection, **options)
    predictions = options.get("predictions")
    if predictions is not None and not summary.interrupted and not predictions.complete:
        summary.interrupted = evaluate_groups(
            job, results, [], results.record, total=summary.total, already=summary.done,
            **{k: v for k, v in options.items() if k not in ("checkpoint", "selection")})
    summary.seconds = time.monotonic() - start
    return summary


def _run_points(job: Job, results: Results, *, selection: np.ndarray | None = None,
                **options) -> RunSummary:
    if job.confirm is not None:
        return run_confirm_job(job, results, selection=selection, **options)
    if job.refine is None:
        # A file written with [confirm]: without it every cell is chosen.
        reopen_not_requested(results, selection)
        return run_sweep(job, results, selection=selection, **options)
    if selection is not None:
        raise SweepError("a job with [refine] cannot be sharded: which points a level needs "
                         "depends on the previous level's results.")
    r = job.refine
    start = time.monotonic()
    summary = None
    for level in range(r.depth + 1):
        wanted = (base_indices(results.shape, r.stride) if level == 0 else
                  level_indices(results, r.by, r.stride, level, r.gap_below, r.gap_var))
        if len(wanted) == 0:
            break
        summary = run_sweep(job, results, selection=wanted, **options)
        if summary.interrupted:
            break
    # A refined sweep has no total known in advance: what is done, plus what an interrupted
    # level still wanted.
    interrupted = summary is not None and summary.interrupted
    done = results.n_done
    return RunSummary(done=done, total=done + (summary.total - summary.done if interrupted else 0),
                      failed=int(np.count_nonzero(results.failure.ravel() != "")),
                      interrupted=interrupted, seconds=time.monotonic() - start)
