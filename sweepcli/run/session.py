"""One `sweepcli run` and one `sweepcli merge`, start to finish, as library calls.

:class:`RunSession` decides which file a run writes and whether it may (``force``, ``resume``,
the job's sha256 and shard label must match the file it continues), connects dask when asked,
runs the sweep with checkpoints (the predicted transitions are computed by the same workers,
beside the points) and, when it finishes, adds them and the finish time. :func:`merge_shards`
merges shard files and, for a complete grid, adds what shards skip. The command line only
turns options into these calls and their results into text.
"""

from __future__ import annotations

import fcntl
import os
import signal
import sys
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import SweepError, shown
from ..jobfile import Job, job_from_results, load_job, output_path_problem
from ..store import Results
from ..store.merge import SHARDS_TABLE, MergeReport, merge_results
from ..store.provenance import now
from .layout import confirm_attrs, results_for_job
from .predict import Predictions
from .runner import RunSummary, run_job
from .shards import Shard, parse_shard


def start_pool(workers: int):
    """A joblib executor of ``workers`` processes, started in the background (see
    :meth:`sweepcli.run.executors.JoblibExecutor.warm`)."""
    from .executors import JoblibExecutor

    return JoblibExecutor(workers).warm()


@dataclass(frozen=True)
class SessionSummary:
    """What a run did: its counts (:class:`RunSummary`), where it wrote and how to go on."""

    run: RunSummary
    output: Path
    resume_command: str  # the command that continues an interrupted run
    saved: bool = True  # whether the output file was written (not when the first write failed)


@dataclass
class RunSession:
    """Evaluate every grid point of a job file (or one shard of them) into one results file.

    Parameters mirror ``sweepcli run``: ``output`` defaults to the job's ``[output] path`` with
    the shard suffix for a shard; ``force`` starts afresh over an existing file, ``resume``
    continues one written by the same job (same sha256) and shard; ``shard`` is ``I/N``,
    ``auto`` or ``auto/N`` (:func:`sweepcli.run.shards.parse_shard`); ``scheduler`` or
    ``dask_cluster`` run on dask (:func:`sweepcli.run.executors.connect_dask`); ``argv`` is the
    command line recorded in the file (default ``sys.argv``).
    """

    job_file: Path
    output: Path | None = None
    workers: int = 1
    force: bool = False
    resume: bool = False
    shard: str | None = None
    chunk_size: int | None = None
    checkpoint_every: float = 60.0
    progress: bool = True
    scheduler: str | None = None
    dask_cluster: str | None = None
    lost_timeout: float = 60.0
    heartbeat: float = 60.0
    argv: list[str] = field(default_factory=lambda: list(sys.argv))
    # The executor to run on (default: one made for ``workers``, its pool started at once, in
    # the background, while the job is read and the file written); a dask run makes its own.
    executor: object = None
    # When the run started (``time.monotonic()``; default: when :meth:`run` is called). The
    # command line passes the moment it started the worker pool, so that the reported time
    # holds the pool start that overlaps the parent's imports too.
    started: float | None = None

    def run(self, say: Callable[[str], None] | None = None) -> SessionSummary:
        """Run the session; ``say`` (if given) receives one line on what is about to be computed.

        The summary's ``seconds`` count all the user waits for, from ``started`` (or this call)
        to the last write of the file: the pool start, reading the job, the first write, the
        points, the predicted transitions and the final write.

        Raises
        ------
        SweepError
            On a bad job file or option, an existing output without ``force`` or ``resume``, a
            file of another job or shard to resume, or a dask cluster that does not start.
        """
        if self.output is not None:
            problem = output_path_problem(self.output)
            if problem:
                raise SweepError(f"--output must be a file path that can be created; got "
                                 f"{shown(str(self.output))}. {problem}")
        if self.force and self.resume:
            raise SweepError("--force and --resume exclude each other: --force starts afresh, "
                             "--resume continues the existing file.")
        if self.scheduler and self.dask_cluster:
            raise SweepError("give --scheduler or --dask-cluster, not both.")
        started = time.monotonic() if self.started is None else self.started
        executor = self.executor
        if executor is None and self.workers > 1 and not (self.scheduler or self.dask_cluster):
            executor = start_pool(self.workers)
        try:
            done = self._run(executor, say)
        finally:
            close = getattr(executor, "close", None)
            if close is not None:
                close()
        done.run.seconds = time.monotonic() - started
        return done

    def _run(self, executor, say: Callable[[str], None] | None) -> SessionSummary:
        job = load_job(self.job_file)
        part = parse_shard(self.shard) if self.shard is not None else None
        out = self.output or Path(job.output)
        if part is not None and self.output is None:
            out = out.with_name(out.stem + part.suffix() + out.suffix)
        if self.output is None:
            problem = output_path_problem(out)
            if problem:
                raise SweepError(f"{job.path}: [output] path must give a file path that can be "
                                 f"created; got {shown(str(out))}. {problem}")
        with output_lock(out):
            return self._run_locked(job, part, out, say, executor)

    def _run_locked(self, job: Job, part: Shard | None, out: Path,
                    say: Callable[[str], None] | None, executor=None) -> SessionSummary:
        results = self._open(job, part, out)
        selection = part.indices(job.size) if part else None
        saved = {}  # counts of the last file written: what an interruption leaves on disk

        def write(r: Results) -> None:
            r.write(out)
            own = r.done.ravel() if selection is None else r.done.ravel()[selection]
            fail = r.failure.ravel() if selection is None else r.failure.ravel()[selection]
            saved.update(done=int(own.sum()), failed=int(np.count_nonzero(fail != "")))

        client = cluster = None
        summary = None
        try:
            with _sigterm_as_interrupt():
                # The file first, so that an interruption from here on (dask still starting,
                # Ctrl-C, SIGTERM, lost workers, the final write) leaves one to resume.
                out.parent.mkdir(parents=True, exist_ok=True)
                write(results)
                if self.scheduler or self.dask_cluster:
                    from .executors import DaskExecutor, connect_dask

                    client, cluster = connect_dask(self.scheduler, self.dask_cluster)
                    executor = DaskExecutor(client, lost_timeout=self.lost_timeout)
                if say is not None:
                    todo = results.size - results.n_done
                    say(f"{job.path}: {job.title}; {results.n_done} of {results.size} points "
                        f"done, {todo} to go" + (f" (shard {part.label()})" if part else "")
                        + f"; {executor.workers if executor else self.workers} worker(s); "
                        f"measurements: {', '.join(n for n, _ in job.measurements)}"
                        + (f" ({', '.join(job.confirm.measurements)} on selected cells only)"
                           if job.confirm else "") + f"; -> {out}")
                # Predicted transitions (whole grids only) are tasks beside the points.
                predictions = (Predictions(job) if job.predict is not None and part is None
                               else None)
                summary = run_job(job, results, workers=self.workers,
                                  chunk_size=self.chunk_size, checkpoint=write,
                                  checkpoint_every=self.checkpoint_every,
                                  progress=self.progress, heartbeat=self.heartbeat,
                                  executor=executor, predictions=predictions,
                                  selection=selection)
                if not summary.interrupted:
                    if predictions is not None:
                        results.tables["transitions"] = predictions.table()
                    results.attrs["finished"] = now()
                    write(results)
        except KeyboardInterrupt:
            # Ctrl-C or SIGTERM outside the sweep loop (dask starting, a checkpoint or the
            # final write): the file on disk is the last complete one written.
            total = results.size if selection is None else len(selection)
            summary = RunSummary(done=saved.get("done", 0), total=total,
                                 failed=saved.get("failed", 0), interrupted=True,
                                 seconds=0.0 if summary is None else summary.seconds,
                                 reason="" if summary is None else "while writing the results")
        finally:
            if client is not None:
                client.close()
            if cluster is not None:
                cluster.close()
        again = " ".join(["sweepcli run", str(self.job_file), "-o", str(out), "--resume"]
                         + (["--shard", part.label()] if part else []))
        return SessionSummary(summary, out, again, saved=bool(saved))

    def _open(self, job: Job, part: Shard | None, out: Path) -> Results:
        """The results to continue (``resume`` and the file exists) or a fresh one."""
        if self.resume and out.exists():
            results = Results.read(out)
            if results.attrs.get("job_sha256") != job.sha256:
                raise SweepError(f"{out}: was written by a different job (sha256 "
                                 f"{results.attrs.get('job_sha256', '?')[:12]}, this job "
                                 f"{job.sha256[:12]}); refusing to resume. Run without --resume "
                                 "and with -o NEW_FILE, or --force to start afresh.")
            if results.attrs.get("shard", "") != (part.label() if part else ""):
                raise SweepError(f"{out}: holds shard {results.attrs.get('shard') or 'none'!r}, "
                                 f"not {part.label() if part else 'none'!r}; refusing to resume.")
            results.attrs["command_line"] += " ; " + " ".join(self.argv)
            # [confirm] is no part of the sha256: the file records the selection last run with.
            results.attrs["job_text"] = job.text
            results.attrs.update(confirm_attrs(job))
            return results
        if out.exists() and not self.force:
            raise SweepError(f"{out}: exists; refusing to overwrite it. Use --force to start "
                             "afresh or --resume to continue it.")
        results = results_for_job(job, self.argv)
        if part is not None:
            results.attrs["shard"] = part.label()
        return results


@contextmanager
def _sigterm_as_interrupt() -> Iterator[None]:
    """SIGTERM raises KeyboardInterrupt (as Ctrl-C does) while this block runs in the main
    thread: the run stops cleanly, saves what it has and exits 3, and its worker pools shut
    down (the default action killed the process at once and leaked joblib's folder)."""
    def on_term(signum, frame):
        raise KeyboardInterrupt

    try:
        previous = signal.signal(signal.SIGTERM, on_term)
    except ValueError:  # not the main thread: leave signals alone
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


@contextmanager
def output_lock(out: Path) -> Iterator[Path]:
    """Hold an exclusive lock on ``OUT.lock`` (:func:`fcntl.flock`) while a run writes ``out``;
    a second run on the same file refuses at once. The lock file is removed on release; the
    kernel releases the lock itself when a process dies, so a stale file never blocks."""
    lock = out.with_name(out.name + ".lock")
    while True:
        try:
            out.parent.mkdir(parents=True, exist_ok=True)
            fd = os.open(lock, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as exc:
            raise SweepError(f"{lock}: cannot create the lock file of {out} "
                             f"({exc.strerror or exc}).") from None
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            raise SweepError(f"{lock}: another run is writing {out} and holds this lock; "
                             "refusing to write the same file at once. Wait for it to finish "
                             "or use -o OTHER_FILE.") from None
        mine = os.fstat(fd)
        try:
            now_there = os.stat(lock)
        except FileNotFoundError:
            now_there = None
        if now_there is not None and (now_there.st_dev, now_there.st_ino) == (mine.st_dev,
                                                                              mine.st_ino):
            break
        os.close(fd)  # its holder removed it between our open and lock: take the new one
    try:
        os.ftruncate(fd, 0)
        os.write(fd, f"{os.getpid()}\n".encode())
        yield lock
    finally:
        lock.unlink(missing_ok=True)
        os.close(fd)


def merge_shards(shards: list[Path], output: Path, *, partial: bool = False,
                 force: bool = False, replace: bool = False) -> tuple[MergeReport, list[str]]:
    """Merge the shard files of one job into ``output``; returns the report and warnings.

    A complete merged grid gets the predicted transitions that shards skip, as a full run.
    The file is written whole to ``output.tmp`` and renamed into place, so an earlier merged
    file stays intact until the new one is complete. ``replace`` overwrites ``output`` only
    when it is an earlier merge of the same job (it has the ``shards`` table and the same
    ``job_sha256``): what the merge script does when it is run again after a shard was redone.

    Raises
    ------
    SweepError
        If ``output`` exists without ``force`` (or, with ``replace``, is not an earlier merge of
        this job), the shards do not belong together, or points are missing without
        ``partial``.
    """
    if output.exists() and not force and not replace:
        raise SweepError(f"{output}: exists; refusing to overwrite it. Use --force (or "
                         "--replace for an earlier merge of the same shards).")
    merged, report = merge_results(shards)
    if output.exists() and not force:
        _check_replaceable(output, merged.attrs.get("job_sha256", ""))
    warnings = []
    if not report.complete:
        first = "; ".join(", ".join(f"{k}={v:g}" for k, v in p.items()) for p in report.missing)
        msg = (f"{report.n_missing} of {report.total} points are in none of the {report.files} "
               f"shards (first: {first})")
        if not partial:
            raise SweepError(msg + "; refusing to merge an incomplete set (use --partial).")
        warnings.append(f"warning: {msg}.")
    else:
        job = job_from_results(merged, str(shards[0]))
        if job.predict is not None:
            from .predict import predict_transitions

            merged.tables["transitions"] = predict_transitions(job)
    output.parent.mkdir(parents=True, exist_ok=True)
    merged.write(output)
    return report, warnings


def _check_replaceable(output: Path, job_sha256: str) -> None:
    """Refuse (``SweepError``) to replace ``output`` unless it is a merged file of the job
    ``job_sha256``."""
    try:
        earlier = Results.read(output)
    except SweepError as exc:
        raise SweepError(f"{output}: exists and is not a merged results file ({exc}); refusing "
                         "to replace it. Use --force to overwrite it.") from None
    if SHARDS_TABLE not in earlier.tables:
        raise SweepError(f"{output}: exists and is not a merged file (no '{SHARDS_TABLE}' "
                         "table: a run's own file?); refusing to replace it. Use --force to "
                         "overwrite it.")
    if earlier.attrs.get("job_sha256") != job_sha256:
        raise SweepError(f"{output}: is the merge of another job (job_sha256 "
                         f"{earlier.attrs.get('job_sha256', '?')[:12]}, these shards "
                         f"{job_sha256[:12]}); refusing to replace it. Use --force to overwrite "
                         "it.")
