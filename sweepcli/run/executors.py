"""Executors by duck typing: anything with ``imap(func, tasks)`` yielding results as they finish.

The runner needs nothing else, so serial, joblib (loky) and, later, dask.distributed are thin
adapters. Results are stored by grid index, so the order of completion does not matter.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator
from typing import Any


class SerialExecutor:
    """Evaluate in this process, in order (one worker; easiest to debug)."""

    workers = 1

    def imap(self, func: Callable, tasks: Iterable[tuple]) -> Iterator[Any]:
        for args in tasks:
            yield func(*args)


class JoblibExecutor:
    """joblib's loky process pool with BLAS pinned to one thread per worker."""

    def __init__(self, workers: int) -> None:
        self.workers = workers

    def imap(self, func: Callable, tasks: Iterable[tuple]) -> Iterator[Any]:
        from joblib import Parallel, delayed, parallel_config

        # One BLAS thread per worker: the workers already fill the cores, and oversubscribed
        # BLAS threads make a batched eigh slower, not faster.
        with parallel_config(backend="loky", inner_max_num_threads=1):
            parallel = Parallel(n_jobs=self.workers, return_as="generator_unordered",
                                pre_dispatch="2*n_jobs")
            yield from parallel(delayed(func)(*args) for args in tasks)


def make_executor(workers: int):
    return SerialExecutor() if workers == 1 else JoblibExecutor(workers)
