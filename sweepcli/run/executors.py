"""Executors by duck typing: anything with ``imap(func, tasks)`` yielding results as they finish.

The runner needs nothing else, so serial, joblib (loky) and dask.distributed are thin
adapters. Results are stored by grid index, so the order of completion does not matter.
"""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from typing import Any

from ..errors import SweepError


class SerialExecutor:
    """Evaluate in this process, in order (one worker; easiest to debug).

    BLAS is limited to one thread here too: the batched matrices are small, and threaded BLAS
    was measured up to 100x slower on them on a loaded 2-core machine.
    """

    workers = 1

    def imap(self, func: Callable, tasks: Iterable[tuple]) -> Iterator[Any]:
        from threadpoolctl import threadpool_limits

        with threadpool_limits(limits=1, user_api="blas"):
            for args in tasks:
                yield func(*args)


class JoblibExecutor:
    """joblib's loky process pool with BLAS pinned to one thread per worker.

    :meth:`warm` starts the pool in a background thread (the workers start and import the
    sweep code while this process reads the job and writes the results file); :meth:`imap`
    then finds it started. Tasks go to the workers one by one (``batch_size=1``): the runner
    sizes its chunks itself (:mod:`sweepcli.run.chunking`).
    """

    def __init__(self, workers: int) -> None:
        self.workers = workers
        self._warming: threading.Thread | None = None

    @contextmanager
    def _parallel(self, **options):
        from joblib import Parallel, parallel_config

        # One BLAS thread per worker: the workers already fill the cores, and oversubscribed
        # BLAS threads make a batched eigh slower, not faster. The same settings for warm()
        # and imap(), so that loky reuses the pool the first started.
        with parallel_config(backend="loky", inner_max_num_threads=1):
            yield Parallel(n_jobs=self.workers, batch_size=1, **options)

    def warm(self) -> JoblibExecutor:
        """Start the pool and import the worker code in each worker, in a background thread;
        returns self. A failure here is left for :meth:`imap` to meet and report."""
        def start() -> None:
            from joblib import delayed

            try:
                with self._parallel() as parallel:
                    parallel(delayed(_import_worker)() for _ in range(self.workers))
            except Exception:  # noqa: BLE001, S110 - imap starts the pool again and raises
                pass

        if self._warming is None:
            self._warming = threading.Thread(target=start, name="sweepcli-warm", daemon=True)
            self._warming.start()
        return self

    def close(self) -> None:
        """Wait for a warm-up still running (the pool itself is joblib's, reused or shut
        down at exit)."""
        if self._warming is not None:
            self._warming.join()

    def imap(self, func: Callable, tasks: Iterable[tuple]) -> Iterator[Any]:
        from joblib import delayed

        self.close()
        with self._parallel(return_as="generator_unordered", pre_dispatch="2*n_jobs") as parallel:
            yield from parallel(delayed(func)(*args) for args in tasks)


def _import_worker() -> None:
    """A warm-up task: import what a worker needs to evaluate points."""
    from . import worker  # noqa: F401


def make_executor(workers: int):
    return SerialExecutor() if workers == 1 else JoblibExecutor(workers)


class WorkersLost(SweepError):
    """A dask cluster had no worker for longer than the executor's ``lost_timeout``."""


class _QuietGatherExit(logging.Filter):
    """Drops asyncio's "Task exception was never retrieved" for distributed's internal
    ``AllExit``: a result being gathered when its worker dies leaves that task behind, and its
    traceback on stderr says nothing the run does not report itself."""

    def filter(self, record: logging.LogRecord) -> bool:
        exc = record.exc_info[1] if record.exc_info else None
        return not (exc is not None and type(exc).__name__ == "AllExit")


class DaskExecutor:
    """dask.distributed: tasks submitted to a client, at most two per worker thread in flight.

    The worker threads are counted again at every ``poll`` (a worker that joins, as slurm:N
    jobs do one by one, raises the limit; one that leaves lowers it). Results are awaited
    ``poll`` seconds at a time, so Ctrl-C and SIGTERM are seen at once; when no worker has been
    there for ``lost_timeout`` seconds, :class:`WorkersLost` ends the run (the runner saves the
    finished points first).
    """

    def __init__(self, client, *, lost_timeout: float = 60.0, poll: float = 1.0) -> None:
        self.client = client
        self.lost_timeout = lost_timeout
        self.poll = poll
        self.threads = self._threads()
        self.workers = max(1, self.threads)
        self.in_flight = 0  # futures submitted and not yet returned (read by tests)
        self.stop = None  # a threading.Event the runner sets on Ctrl-C / SIGTERM
        quiet = logging.getLogger("asyncio")
        if not any(isinstance(f, _QuietGatherExit) for f in quiet.filters):
            quiet.addFilter(_QuietGatherExit())

    def _threads(self) -> int:
        """Worker threads the scheduler has now (0 when it cannot be asked)."""
        try:
            return int(sum(self.client.nthreads().values()))
        except Exception:  # noqa: BLE001 - a scheduler that cannot answer has no usable worker
            return 0

    def _watch(self, seen: float) -> float:
        """Count the workers again; returns when one was last seen. Raises KeyboardInterrupt
        when the runner's stop flag is set and :class:`WorkersLost` after ``lost_timeout``
        seconds without any worker."""
        if self.stop is not None and self.stop.is_set():
            raise KeyboardInterrupt
        now = time.monotonic()
        self.threads = self._threads()
        if self.threads:
            return now
        if now - seen > self.lost_timeout:
            raise WorkersLost(f"all dask workers were lost (none for "
                              f"{self.lost_timeout:g} s, --dask-lost-timeout)")
        return seen

    def imap(self, func: Callable, tasks: Iterable[tuple]) -> Iterator[Any]:
        from distributed import wait

        tasks = iter(tasks)
        futures: set = set()
        exhausted = False
        seen = counted = time.monotonic()
        try:
            while True:
                while not exhausted and len(futures) < 2 * max(1, self.threads):
                    args = next(tasks, None)
                    if args is None:
                        exhausted = True
                    else:
                        futures.add(self.client.submit(func, *args, pure=False))
                self.in_flight = len(futures)
                if not futures:
                    return
                try:
                    done, _ = wait(list(futures), timeout=self.poll,
                                   return_when="FIRST_COMPLETED")
                except TimeoutError:
                    done = ()
                if self.stop is not None and self.stop.is_set():
                    raise KeyboardInterrupt  # a signal whose own exception Python dropped
                for future in done:
                    futures.discard(future)
                    while True:
                        # A finished result whose worker has died is computed again: it may
                        # never come back, so it too is awaited a poll at a time.
                        try:
                            result = future.result(timeout=self.poll)
                            break
                        except TimeoutError:
                            seen = self._watch(seen)
                    future.release()
                    self.in_flight = len(futures)
                    yield result
                now = time.monotonic()
                if now - counted < self.poll and self.threads:
                    continue
                counted = now
                seen = self._watch(seen)
        finally:
            for future in futures:
                future.release()
            self.in_flight = 0


def _probe() -> str:
    import sweepcli

    return sweepcli.__version__


def connect_dask(address: str | None = None, cluster: str | None = None, *, wait: float = 600.0):
    """A dask client: to a running scheduler at ``address``, or to a new cluster
    ``cluster`` = ``local:N``, ``slurm:N`` or ``pbs:N`` (N worker jobs; dask-jobqueue reads the
    queue, account, cores and memory from its configuration, ~/.config/dask/jobqueue.yaml or
    ``DASK_JOBQUEUE__SLURM__CORES``-style environment variables).

    Raises a SweepError naming the install extra when dask is missing, and checks that the
    workers can import sweepcli (a scheduler whose workers cannot hangs without an error).
    """
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise SweepError("the dask engine needs the 'cluster' extra: "
                         "pip install 'sweepcli[cluster]'.") from None
    made = None
    if cluster is not None:
        kind, _, count = cluster.partition(":")
        try:
            n = int(count)
        except ValueError:
            n = 0
        if kind not in ("local", "slurm", "pbs") or n < 1:
            raise SweepError(f"--dask-cluster must be local:N, slurm:N or pbs:N; got {cluster!r}.")
        if kind == "local":
            made = LocalCluster(n_workers=n, threads_per_worker=1, host="127.0.0.1",
                                dashboard_address=None)
        else:
            try:
                import dask_jobqueue
            except ImportError:
                raise SweepError("--dask-cluster slurm/pbs needs dask-jobqueue: "
                                 "pip install 'sweepcli[cluster]'.") from None
            made = (dask_jobqueue.SLURMCluster if kind == "slurm" else dask_jobqueue.PBSCluster)()
            made.scale(jobs=n)
        client = Client(made)
    else:
        try:
            client = Client(address, timeout=60)
        except OSError as exc:
            raise SweepError(f"--scheduler {address}: cannot connect ({exc}).") from None
    try:
        client.wait_for_workers(1, timeout=wait)
        client.submit(_probe, pure=False).result(timeout=wait)
    except Exception as exc:  # noqa: BLE001 - any failure here means the engine is unusable
        client.close()
        if made is not None:
            made.close()
        raise SweepError(f"the dask workers did not start or cannot import sweepcli ({exc}); "
                         "install sweepcli in the workers' environment.") from None
    return client, made
