"""Cost of a job for ``sweepcli check`` and ``sweepcli batch``: a rough estimate from sizes
alone (nothing is run), or the measured time of one grid point when asked for."""

from __future__ import annotations

from dataclasses import dataclass

from ..jobfile import Job

# Seconds per k-point per orbital cubed for a batched dense eigendecomposition on one core
# (measured on the development machine for n = 2..8; order of magnitude only).
SECONDS_PER_KPOINT_N3 = 2e-8
DEFAULT_KMESH = {1: 256, 2: 48}


@dataclass
class Cost:
    seconds_per_point: float
    points: int
    memory_bytes: int

    @property
    def core_seconds(self) -> float:
        return self.seconds_per_point * self.points

    def format(self) -> str:
        return (f"about {self.seconds_per_point:.2g} s per point, {self.core_seconds / 3600:.2g} "
                f"core-hours in all; peak memory per worker about "
                f"{self.memory_bytes / 2**20:.0f} MiB (rough)")


def estimate(job: Job) -> Cost:
    """Per-point time from the number of k-points each measurement diagonalises."""
    per_point = 0.0
    peak = 0
    for name, options in job.measurements:
        opts = dict(options)
        n = opts.get("kmesh") or DEFAULT_KMESH.get(job.dim, 48)
        kpts = n ** job.dim
        # Convergence checks evaluate about two finer meshes as well.
        per_point += 3.0 * kpts * job.norb ** 3 * SECONDS_PER_KPOINT_N3 * (1 + 2.25)
        peak = max(peak, 16 * kpts * job.norb ** 2 * 4)
    return Cost(per_point, job.size, peak + 200 * 2**20)


def time_one_point(job: Job) -> float:
    """Seconds to evaluate the middle grid point once (in this process, one BLAS thread)."""
    import time

    from threadpoolctl import threadpool_limits

    from .worker import evaluate_point

    with threadpool_limits(limits=1, user_api="blas"):
        t0 = time.perf_counter()
        evaluate_point(job, job.size // 2)
        return time.perf_counter() - t0
