"""Cost of a job for ``sweepcli check`` and ``sweepcli batch``: an estimate from what each
measurement computes, calibrated on this machine by timing its kernels on small meshes at one
grid point, or the measured time of one whole grid point.

The estimate
------------
Every measurement of a grid point evaluates a kernel (``H(k)`` or, driven, ``U(k)`` built from
all steps or time slices, diagonalised, plus the invariant's own algebra) on one or more
k-meshes, plus a fixed part (minimiser polishing, set-up). Its time on an ``N^d`` mesh is
``a + b N^d``; :func:`estimate` measures ``a`` and ``b`` by running the kernel on two small
meshes at a few grid points (so the drive's steps or converged slices, the matrix size and
the machine's speed are all in ``b``), then adds up the meshes the measurement walks with its
configured options (static bands and 1D walks are cheap enough to be timed on the configured
meshes themselves):

* ``gap``, ``quasienergy_gaps``: one mesh of ``kmesh^d`` (polishing is in ``a``);
* ``chern``, ``spin_chern``, ``floquet_chern``: the proven adaptive mesh
  (:func:`~sweepcli.physics.certify.certified_chern`) run as configured at the probe, since
  its work depends on the local gaps and slopes;
* ``winding``, ``chiral_windings``, ``line_winding`` (1D or a line): the proven bisected loop
  (:func:`~sweepcli.physics.certify.certified_loop`) run as configured at the probe;
* ``rudner_winding``: its first two levels at or above ``kmesh``, each probed with its own
  number of time nodes (one level settles it when it matches the proven Chern number, which
  ``floquet_chern`` computes);
* open samples (``end_modes``, ``edge_modes``, ``corner_modes``): evaluated as configured at
  each probed point, averaged, until the probes so far took ``SAMPLE_PROBE_SECONDS`` (the cost
  depends on how far a count doubles its sample, which varies across the grid); peak memory is
  that of the largest sample a count may double to.

A ``[confirm]`` job (:mod:`sweepcli.run.confirm`) runs its boundary measurements only on the
cells selected from the bulk map, which is not known before the run: the estimate is the bulk
measurements on every point plus the boundary ones on a range of cells, from a lower bound
(stride and one region) through a planned figure to every cell (:func:`selected_cells`).

The probes are a few grid points (:func:`estimate`); points close to a transition walk further
meshes and levels (a Rudner winding with a gap of 0.02 takes about five times longer), so the
estimate is for a typical point; ``batch`` also times one grid point by default.

Measured times
--------------
Every results file stores each point's compute time (``point_seconds``). When the job's output
file already exists and was written by the same job (same sha256), :func:`measured_cost` reads
those times: the mean over the computed points, transitions and all, is a better figure than
any estimate, and ``batch`` sizes the wall time with it.
"""

from __future__ import annotations

import math
import signal
import statistics
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from ..jobfile import Job

#: Mesh sizes (points per direction) of the two probes that fit ``a + b N^2`` for 2D drives.
PROBE_MESH = (6, 12)
#: Per-worker memory beside the arrays of the largest mesh (interpreter, numpy, scipy).
BASE_MEMORY = 200 * 2**20
#: Open-sample probes stop once they have taken this long (seconds): ``check`` stays quick.
#: A probe still running then is interrupted, and its time counts as a lower bound.
SAMPLE_PROBE_SECONDS = 3.0
#: Further k-mesh probes follow the first three while these took less than this (seconds), up
#: to ``KMESH_PROBES`` points in all.
KMESH_PROBE_SECONDS = 0.5
KMESH_PROBES = 16


class _ProbeStopped(Exception):
    """A probe ran past its time budget."""


@contextmanager
def _time_limit(seconds: float) -> Iterator[None]:
    """Interrupt the block after ``seconds`` (SIGALRM; a no-op off the main thread or where the
    platform has none). Long compiled calls finish before the interruption is seen."""
    main = threading.current_thread() is threading.main_thread()
    if not hasattr(signal, "setitimer") or not main:
        yield
        return

    def stop(signum, frame):
        raise _ProbeStopped

    previous = signal.signal(signal.SIGALRM, stop)
    signal.setitimer(signal.ITIMER_REAL, max(seconds, 1e-3))
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


#: A ``[confirm]`` estimate plans for this many phase boundaries crossing the grid.
PLANNED_BOUNDARIES = 3


@dataclass
class Cost:
    """Seconds per grid point (every measurement), grid points and peak memory per worker.

    For a ``[confirm]`` job, ``boundary_seconds`` is the part of ``seconds_per_point`` that the
    confirmed (boundary) measurements take at a point, and ``cells`` the selected cells as
    ``(at least, planned, at most)`` (:func:`selected_cells`).
    """

    seconds_per_point: float
    points: int
    memory_bytes: int
    boundary_seconds: float = 0.0
    cells: tuple[int, int, int] | None = None
    #: Open-sample measurements whose probe was stopped at the time budget: their seconds (and
    #: so the totals) are lower bounds.
    stopped: tuple[str, ...] = ()
    probe_budget: float = SAMPLE_PROBE_SECONDS

    @property
    def bulk_seconds(self) -> float:
        return self.seconds_per_point - self.boundary_seconds

    def core_seconds_for(self, cells: int) -> float:
        """Bulk on every point plus boundary on ``cells`` cells (a ``[confirm]`` job)."""
        return self.bulk_seconds * self.points + self.boundary_seconds * cells

    @property
    def core_seconds(self) -> float:
        if self.cells is None:
            return self.seconds_per_point * self.points
        return self.core_seconds_for(self.cells[1])

    def format(self) -> str:
        memory = (f"peak memory per worker about {self.memory_bytes / 2**20:.0f} MiB (from the "
                  "meshes and probes of three grid points; points near transitions take longer)")
        if self.stopped:
            memory += (f"; the probe of {', '.join(self.stopped)} was stopped after "
                       f"{self.probe_budget:g} s, so the times are lower bounds "
                       f"(--probe-seconds for more)")
        if self.cells is None:
            return (f"about {self.seconds_per_point:.2g} s per point, "
                    f"{self.core_seconds / 3600:.2g} core-hours in all; {memory}")
        low, planned, high = self.cells
        hours = [self.core_seconds_for(n) / 3600 for n in self.cells]
        return (f"about {self.bulk_seconds:.2g} s per point for the bulk measurements on all "
                f"{self.points} points, plus {self.boundary_seconds:.2g} s per selected cell for "
                f"the boundary measurements; selected cells: at least {low}, about {planned} if "
                f"{PLANNED_BOUNDARIES} phase boundaries cross the grid, at most {high} (every "
                f"cell); {hours[0]:.2g} to {hours[2]:.2g} core-hours (about {hours[1]:.2g}); "
                f"{memory}")


def selected_cells(job: Job) -> tuple[int, int, int]:
    """``(at least, planned, at most)`` cells a ``[confirm]`` selection may hold, before the bulk
    map is known.

    At least: the ``stride`` cells, or ``per_region`` cells of one region, whichever is more.
    Planned: the stride cells, ``per_region`` cells in each of ``PLANNED_BOUNDARIES + 1``
    regions and, with ``across``, two cells on each grid line that a phase boundary crosses,
    for ``PLANNED_BOUNDARIES`` boundaries across the grid (a boundary across the shortest axis
    crosses ``points / shortest`` lines). At most: every point.
    """
    c, size = job.confirm, job.size
    strided = math.prod(math.ceil(n / c.stride) for n in job.shape) if c.stride else 0
    low = min(size, max(strided, c.per_region))
    lines = size // max(min((n for n in job.shape if n > 1), default=1), 1)
    planned = strided + c.per_region * (PLANNED_BOUNDARIES + 1)
    if c.across:
        planned += 2 * lines * PLANNED_BOUNDARIES
    return low, min(size, max(low, planned)), size


def _seconds(f: Callable[[], object]) -> float:
    """Wall time of ``f()``; the median of three when it is short (timer and load noise)."""
    def once() -> float:
        t0 = time.perf_counter()
        f()
        return time.perf_counter() - t0

    first = once()
    return first if first >= 0.05 else statistics.median([first, once(), once()])


def _at_meshes(kernel: Callable[[int], object], sizes) -> float:
    """Time the kernel on each of its configured meshes (cheap kernels: static bands, 1D)."""
    kernel(sizes[0])  # warm-up: first calls pay for imports and caches
    return sum(_seconds(lambda n=n: kernel(n)) for n in sizes)


def _scaled(kernel: Callable[[int], object], dim: int, sizes) -> float:
    """Fit ``t(N) = a + b N^dim`` on the two probe meshes and add it up over ``sizes``."""
    n1, n2 = PROBE_MESH
    kernel(n1)  # warm-up
    t1, t2 = _seconds(lambda: kernel(n1)), _seconds(lambda: kernel(n2))
    b = max(t2 - t1, 0.0) / (n2 ** dim - n1 ** dim)
    a = max(t1 - b * n1 ** dim, 0.0)
    return sum(a + b * n ** dim for n in sizes)


def _measurement_seconds(job: Job, index: int, point, name: str, opts: dict, memo: dict
                         ) -> float:
    """Estimated seconds of measurement ``name`` at a typical point (module docstring)."""
    from ..physics import floquet_chern as fc
    from ..physics import quasienergy as qe
    from ..physics.measurements import MEASUREMENTS
    from ..physics.spectrum import band_gap

    tb, drive, dim = point.tb, point.drive, job.dim
    kmesh = opts.get("kmesh")
    if name == "gap":
        return _at_meshes(lambda n: band_gap(tb, point.nocc, n), [kmesh])
    if name == "quasienergy_gaps":
        def gaps(n: int) -> object:
            mesh = qe.floquet_mesh(drive, n, dim)
            memo["slices"] = mesh.slices
            memo["gaps"] = qe.floquet_gaps(drive, mesh)
        return _scaled(gaps, dim, [kmesh]) if dim == 2 else _at_meshes(gaps, [kmesh])
    if name == "floquet_chern":
        # The proven adaptive mesh: its work depends on the local gaps and slopes at the point,
        # so it is timed as configured (on the probe's gaps).
        g = memo.get("gaps") or qe.floquet_gaps(drive, qe.floquet_mesh(drive, PROBE_MESH[1],
                                                                         dim))
        memo["gaps"] = g
        return _seconds(lambda: fc.floquet_chern(drive, g, gap_tol=point.gap_tol,
                                                 kmesh_n=opts["kmesh"],
                                                 max_kmesh=opts["max_kmesh"],
                                                 flux_tol=opts["flux_tol"]))
    if name == "rudner_winding":
        slices = None
        if not drive.exact:
            slices = memo.get("slices") or qe.floquet_mesh(drive, PROBE_MESH[0], dim).slices
        levels = [lv for lv in fc.RUDNER_LEVELS if kmesh <= lv[0] <= opts["max_kmesh"]][:2]
        return sum(_scaled(lambda n, q=q: fc.rudner_integral(drive, n, q, slices=slices), dim,
                           [n_level]) for n_level, q in levels)
    func = MEASUREMENTS[name].func
    if kmesh is not None and "max_kmesh" in opts:
        # A proven adaptive mesh (chern, spin_chern) or loop (a chain, or a line of the
        # Brillouin zone), as configured: its work depends on the local gaps and slopes. The
        # gap it needs is computed by the first call and kept by the point.
        return _seconds(lambda: func(point, **opts))
    # Open samples and anything without a k-mesh: one evaluation as configured, on a fresh
    # copy of the point so that nothing it memoises (windows, drive factors) is reused.
    fresh = job.point(index)
    t0 = time.perf_counter()
    func(fresh, **opts)
    return time.perf_counter() - t0


def estimate(job: Job, probe_seconds: float = SAMPLE_PROBE_SECONDS) -> Cost:
    """Seconds per grid point and peak memory per worker, from probes of a few grid points.

    At the grid points 1/6, 1/2 and 5/6 of the way through the grid, runs each k-mesh
    measurement's kernel on its meshes or on two small meshes, with one BLAS thread, scales to
    the configured meshes as the module docstring describes; while those probes took less than
    ``KMESH_PROBE_SECONDS`` in all, further points follow in van der Corput order (up to
    ``KMESH_PROBES``), and the probes are averaged: a round grid often puts its 1/6, 1/2 and
    5/6 points on transitions, where an invariant stops at once. Open-sample measurements are
    run as configured at five points spread over the grid, until the probes so far took
    ``probe_seconds`` (their cost depends on how far a count doubles its sample); a probe still
    running then is stopped and counted as taking the budget, a lower bound (``Cost.stopped``).
    """
    from threadpoolctl import threadpool_limits

    from ..jobfile.checks import SAMPLE_SHAPES
    from ..physics import samples
    from .chunking import spread_order

    on_mesh = [(n, dict(o)) for n, o in job.measurements if "kmesh" in o]
    on_samples = [(n, dict(o)) for n, o in job.measurements if "kmesh" not in o]
    first = [job.size // 6, job.size // 2, 5 * job.size // 6]
    # Fractions of the grid in van der Corput order, 0, 1/2, 1/4, 3/4, 1/8, ... (64ths).
    more = [int(i) * job.size // 64 for i in spread_order(np.arange(64))]
    kmesh_probes = list(dict.fromkeys(first + more))
    largest = max([math.ceil(1.5 * o["kmesh"]) ** job.dim for _, o in on_mesh if o.get("kmesh")],
                  default=0)
    sample_peak = 0.0
    sample_seconds: dict[str, list[float]] = {}
    stopped: list[str] = []
    mesh_seconds: list[float] = []
    with threadpool_limits(limits=1, user_api="blas"):
        for index in kmesh_probes if on_mesh else ():
            if len(mesh_seconds) >= len(set(first)) and (
                    sum(mesh_seconds) > KMESH_PROBE_SECONDS or
                    len(mesh_seconds) >= KMESH_PROBES):
                break
            point, memo, seconds = job.point(index), {}, 0.0
            for name, opts in on_mesh:
                try:
                    seconds += _measurement_seconds(job, index, point, name, opts, memo)
                except Exception:  # noqa: BLE001 - the run records such a point as failed
                    pass
            mesh_seconds.append(seconds)
        sample_probes = sorted({(2 * i + 1) * job.size // 10 for i in range(5)})
        for index in sample_probes if on_samples else ():
            point, memo = job.point(index), {}
            for name, opts in on_samples:
                taken = sample_seconds.get(name)
                if taken and sum(taken) > probe_seconds:
                    continue  # an expensive open sample: the probes so far stand for all
                budget = max(probe_seconds - sum(taken or ()), 0.0)
                try:
                    with _time_limit(budget):
                        seconds = _measurement_seconds(job, index, point, name, opts, memo)
                except _ProbeStopped:
                    seconds = budget
                    stopped.append(name)
                except Exception:  # noqa: BLE001 - the run records such a point as failed
                    seconds = 0.0
                sample_seconds.setdefault(name, []).append(seconds)
                if name in SAMPLE_SHAPES and index == sample_probes[0]:
                    size_key, max_key, dims = SAMPLE_SHAPES[name]
                    # Counts may double the sample up to max_key: the peak is that sample's.
                    shape = (max(opts[size_key], opts[max_key]),) * dims
                    tb = point.drive.factors()[0][1] if point.drive is not None else point.tb
                    driven = point.drive is not None
                    method = samples.choose_method(tb, shape, opts.get("method", "auto"),
                                                   driven=driven)
                    sample_peak = max(sample_peak, samples.memory_estimate(tb, shape, method,
                                                                           driven=driven))
    per_point = sum(mesh_seconds) / len(mesh_seconds) if mesh_seconds else 0.0
    per_point += sum(sum(t) / len(t) for t in sample_seconds.values())
    # Eigenvectors, Floquet operators and their products on the largest mesh, complex128.
    peak = max(16 * largest * job.norb ** 2 * 8, sample_peak)
    stops = dict(stopped=tuple(dict.fromkeys(stopped)), probe_budget=probe_seconds)
    if job.confirm is None:
        return Cost(per_point, job.size, int(peak + BASE_MEMORY), **stops)
    # Open samples are timed on their own above; a confirmed one without a k-mesh is too.
    boundary = sum(sum(t) / len(t) for n, t in sample_seconds.items()
                   if n in job.confirm.measurements)
    return Cost(per_point, job.size, int(peak + BASE_MEMORY), boundary, selected_cells(job),
                **stops)


@dataclass
class MeasuredCost:
    """Compute times stored in a previous results file of the job (``point_seconds``)."""

    path: str
    points: int  # points with a stored time
    total: float  # seconds, summed
    median: float
    slowest: float

    @property
    def mean(self) -> float:
        return self.total / self.points

    def format(self, grid_points: int) -> str:
        return (f"{self.mean:.3g} s per point on average over the {self.points} points of "
                f"{self.path} (median {self.median:.3g} s, slowest {self.slowest:.3g} s); about "
                f"{self.mean * grid_points / 3600:.2g} core-hours for the grid")


def measured_cost(job: Job, path: str | None = None) -> MeasuredCost | None:
    """The stored compute times of ``path`` (default the job's output file), or ``None`` when
    it does not exist, cannot be read, was written by another job (another sha256) or holds no
    times (a file written before they were stored)."""
    from pathlib import Path

    from ..errors import SweepError
    from ..schema import POINT_SECONDS
    from ..store import Results

    path = str(path if path is not None else job.output)
    if not Path(path).is_file():
        return None
    try:
        results = Results.read(path)
    except SweepError:
        return None
    if results.attrs.get("job_sha256") != job.sha256 or POINT_SECONDS not in results.variables:
        return None
    times = results.data[POINT_SECONDS].reshape(-1)
    times = times[np.isfinite(times)]
    if not times.size:
        return None
    return MeasuredCost(path, int(times.size), float(times.sum()), float(np.median(times)),
                        float(times.max()))


def time_one_point(job: Job) -> float:
    """Seconds to evaluate the middle grid point once (in this process, one BLAS thread)."""
    from threadpoolctl import threadpool_limits

    from .worker import evaluate_point

    with threadpool_limits(limits=1, user_api="blas"):
        return _seconds(lambda: evaluate_point(job, job.size // 2))
