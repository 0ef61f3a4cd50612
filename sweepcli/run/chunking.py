"""How a run cuts its pending grid points into tasks: a fixed order, cut by the measured cost.

The points go out in one deterministic order, :func:`spread_order` (a van der Corput walk over
the pending points: any run of consecutive points in it is spread over the whole grid, so a
small chunk samples every region and chunks of equal length cost about the same). Only where
that order is cut into chunks depends on the run:

* the first chunks ramp up geometrically (``workers`` chunks of 1 point, then of 2, 4, ...), so
  the first results, and the first measured cost, come after one point rather than a chunk;
  once a cost is known, no chunk is planned shorter than :data:`MIN_TASK_SECONDS`;
* once a cost per point is known (the mean ``point_seconds`` of the points finished so far in
  this run, or stored in the file a run resumes), each chunk is sized to take
  ``remaining work / (4 x workers)`` seconds, between :data:`MIN_TASK_SECONDS` and
  :data:`MAX_TASK_SECONDS` (guided self-scheduling): chunks shrink as the work runs out, and
  the last ones are short, so no worker waits long for another's last chunk;
* before any cost is known the chunks ramp up to :func:`fixed_size` (the fixed size of
  earlier versions).

``--chunk-size N`` turns all this off: strided chunks of N points
(:func:`sweepcli.run.runner.chunks`), as earlier versions cut them.

Which points are evaluated, and every value stored, is the same however the order is cut: each
point is evaluated on its own.
"""

from __future__ import annotations

import math
import threading
from collections.abc import Iterator

import numpy as np

MIN_TASK_SECONDS = 0.1  # long against a task's own overhead (a few ms: the job, 4 KB, and results)
MAX_TASK_SECONDS = 10.0  # short enough for steady progress and little lost on an interruption


def fixed_size(n_points: int, workers: int) -> int:
    """Points per chunk without a measured cost: about 8 chunks per worker, at most 64 points."""
    return max(1, min(64, math.ceil(n_points / (8 * workers))))


def spread_order(todo: np.ndarray) -> np.ndarray:
    """``todo`` in van der Corput order (position ``i`` by the bit-reversal of ``i``): every
    run of ``k`` consecutive entries lies about ``len(todo) / k`` apart in ``todo``."""
    n = len(todo)
    if n <= 2:
        return np.asarray(todo)
    bits = (n - 1).bit_length()
    i = np.arange(1 << bits, dtype=np.int64)
    rev = np.zeros_like(i)
    for b in range(bits):
        rev |= ((i >> b) & 1) << (bits - 1 - b)
    return np.asarray(todo)[rev[rev < n]]


class CostMeter:
    """Running mean of the seconds per point (thread-safe: the executor may draw the next
    chunk from another thread than the one that records the results)."""

    def __init__(self, seconds: float = 0.0, points: int = 0) -> None:
        self._lock = threading.Lock()
        self.seconds, self.points = float(seconds), int(points)

    @classmethod
    def from_times(cls, times: np.ndarray) -> CostMeter:
        """A meter seeded with stored times (non-finite entries: points without one)."""
        times = np.asarray(times, float)
        times = times[np.isfinite(times)]
        return cls(float(times.sum()), int(times.size))

    def add(self, seconds: float) -> None:
        if math.isfinite(seconds):
            with self._lock:
                self.seconds += seconds
                self.points += 1

    @property
    def per_point(self) -> float | None:
        """Mean seconds per point, or None before any point was timed."""
        with self._lock:
            return self.seconds / self.points if self.points else None


def chunk_size(k: int, left: int, workers: int, per_point: float | None, fixed: int) -> int:
    """Points of chunk ``k`` (0-based) when ``left`` points are still to hand out: the ramp
    ``2 ** (k // workers)``, capped by ``fixed`` without a cost, and by the guided size with a
    cost ``per_point`` (seconds). With a cost, no chunk is planned shorter than
    :data:`MIN_TASK_SECONDS` (unless fewer points are left): the ramp is for the first results
    and the first cost, and once the cost is known, chunks of a few cheap points would cost
    the workers a round trip each (a few ms, measured) for little work."""
    ramp = 1 << min(k // max(1, workers), 30)
    if per_point is None or per_point <= 0:
        return max(1, min(ramp, fixed, left))
    target = min(max(left * per_point / (4 * workers), MIN_TASK_SECONDS), MAX_TASK_SECONDS)
    size = max(1, round(target / per_point))
    least = min(math.ceil(MIN_TASK_SECONDS / per_point), size)
    return max(1, min(max(min(ramp, size), least), left))


def plan_chunks(todo: np.ndarray, workers: int, meter: CostMeter | None = None, *,
                fixed: int | None = None) -> Iterator[np.ndarray]:
    """The chunks of ``todo`` (flat grid indices) in :func:`spread_order`, drawn lazily so that
    each is sized (:func:`chunk_size`) with the cost ``meter`` knows when it is drawn; ``fixed``
    (default :func:`fixed_size`) caps them until a cost is known."""
    order = spread_order(todo)
    fixed = fixed or fixed_size(len(todo), workers)
    start = k = 0
    while start < len(order):
        left = len(order) - start
        size = chunk_size(k, left, workers, meter.per_point if meter else None, fixed)
        yield order[start:start + size]
        start += size
        k += 1
