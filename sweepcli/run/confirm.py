"""A ``[confirm]`` run: bulk measurements on every point, boundary ones on selected cells.

Pass 1 evaluates the bulk measurements (all but ``[confirm] measurements``) on every grid point;
:func:`select_cells` then chooses cells from the stored bulk map; pass 2 evaluates the boundary
measurements on the chosen cells. A cell not chosen stores its boundary measurements as missing
with ``Reason.NOT_REQUESTED``.

Bookkeeping (results-schema.md): ``<measurement>_reason`` is ``NOT_COMPUTED`` until that
measurement is stored at a point, so a point whose bulk reasons are all set has its bulk done,
and one whose boundary reasons are set has them computed (a reason of its own) or not requested;
``done`` is 1 only when every measurement of the point is stored or not requested. A resumed
run with a larger selection turns ``NOT_REQUESTED`` back into ``NOT_COMPUTED`` where a cell is
now chosen and computes it; what was computed is kept.

Shards: the selection needs the whole bulk map, so every shard evaluates the bulk measurements
on every point (bulk is cheap against open samples), and the boundary measurements and
completion only on its own points (``i % N == I - 1``). A shard file stores the bulk values of
the other points too, with ``done`` = 0 there, so merging takes every point from its owner and
gives the file of one run.
"""

from __future__ import annotations

import time

import numpy as np

from ..jobfile import Job
from ..physics.measurements import reason_names
from ..physics.measurements.consistency import evaluate
from ..schema import POINT_SECONDS, Reason
from ..store import FILL_INT, Results

NOT_COMPUTED = np.uint8(Reason.NOT_COMPUTED)
NOT_REQUESTED = np.uint8(Reason.NOT_REQUESTED)


# ---------------------------------------------------------------- the selection
def _neighbours(shape: tuple[int, ...]) -> list[tuple[np.ndarray, np.ndarray]]:
    """Flat index pairs ``(a, b)`` of the cells next to each other along each axis."""
    flat = np.arange(int(np.prod(shape))).reshape(shape)
    pairs = []
    for axis in range(len(shape)):
        if shape[axis] > 1:
            lo = np.take(flat, range(shape[axis] - 1), axis).ravel()
            hi = np.take(flat, range(1, shape[axis]), axis).ravel()
            pairs.append((lo, hi))
    return pairs


def _components(labels: np.ndarray, known: np.ndarray, pairs) -> np.ndarray:
    """Connected regions of equal ``labels`` among ``known`` cells (flat arrays): the smallest
    flat index of each cell's region, -1 for unknown cells."""
    comp = np.arange(len(labels))
    u = np.concatenate([a for a, _ in pairs]) if pairs else np.zeros(0, int)
    v = np.concatenate([b for _, b in pairs]) if pairs else np.zeros(0, int)
    same = known[u] & known[v] & (labels[u] == labels[v])
    u, v = u[same], v[same]
    while True:
        cu, cv = comp[u], comp[v]
        low = np.minimum(cu, cv)
        new = comp.copy()
        np.minimum.at(new, cu, low)
        np.minimum.at(new, cv, low)
        while True:  # pointer jumping to the roots
            nxt = new[new]
            if np.array_equal(nxt, new):
                break
            new = nxt
        if np.array_equal(new, comp):
            break
        comp = new
    return np.where(known, comp, -1)


def _boundary_distance(comp: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
    """City-block distance (in grid steps) from each cell of a region to the nearest cell outside
    it, the grid's edge counting as outside: 1 on the region's rim; 0 for unknown cells."""
    grid = comp.reshape(shape)
    dist = np.full(shape, np.iinfo(np.int64).max // 2, dtype=np.int64)
    rim = np.zeros(shape, bool)
    for axis in range(len(shape)):
        if shape[axis] < 2:
            continue  # an axis of one value has no neighbours, and no edge to be near
        for step in (1, -1):
            other = np.roll(grid, step, axis)
            edge = np.zeros(shape, bool)
            idx = [slice(None)] * len(shape)
            idx[axis] = 0 if step == 1 else -1
            edge[tuple(idx)] = True
            rim |= edge | (other != grid)
    dist[rim] = 1
    while True:
        new = dist.copy()
        for axis in range(len(shape)):
            if shape[axis] < 2:
                continue
            for step in (1, -1):
                other = np.roll(dist, step, axis)
                same = np.roll(grid, step, axis) == grid
                idx = [slice(None)] * len(shape)
                idx[axis] = 0 if step == 1 else -1
                same[tuple(idx)] = False  # no wrapping around
                new = np.where(same, np.minimum(new, other + 1), new)
        if np.array_equal(new, dist):
            break
        dist = new
    return np.where(grid >= 0, dist, 0).ravel()


def _spread(cells: np.ndarray, coords: np.ndarray, rim: np.ndarray, n: int) -> list[int]:
    """``n`` cells of one region: first the one farthest from the region's boundary, then each
    time the one whose distance to the boundary and to the cells already chosen is largest
    (city-block); ties go to the smallest flat index (``cells`` ascending)."""
    score = rim.astype(np.int64)
    chosen = []
    for _ in range(min(n, len(cells))):
        j = int(np.argmax(score))
        chosen.append(int(cells[j]))
        score = np.minimum(score, np.abs(coords - coords[j]).sum(axis=1))
    return chosen


def select_cells(invariants: list[np.ndarray], known: np.ndarray, *, per_region: int = 1,
                 stride: int | None = None, bracket: bool = True) -> np.ndarray:
    """Boolean grid of the cells chosen for the boundary measurements.

    Parameters
    ----------
    invariants : grid-shaped arrays of the ``across`` invariants (equal values compared
        exactly); a cell belongs to the region of the tuple of its values.
    known : grid mask where every invariant is known (a missing value is no value of a region).
    per_region : cells chosen in each connected region (neighbours along a grid axis with equal
        invariants): spread out and far from the region's boundary (:func:`_spread`).
    stride : also every ``stride``-th cell along each axis (index divisible by ``stride``).
    bracket : choose both cells of every pair of neighbours along a grid axis whose invariants
        differ, and the known cell of every pair of which one is missing (a missing invariant
        marks a closed gap or an unsettled point: the closest known cells bracket it).
    """
    shape = known.shape
    size = known.size
    known_f = known.ravel()
    if invariants:
        stacked = np.stack([np.where(known, np.asarray(v, float), 0.0).ravel()
                            for v in invariants], axis=1)
        labels = np.unique(stacked, axis=0, return_inverse=True)[1].ravel()
    else:
        labels = np.zeros(size, np.int64)
    pairs = _neighbours(shape)
    chosen = np.zeros(size, bool)
    if bracket:
        for a, b in pairs:
            ka, kb = known_f[a], known_f[b]
            change = ka & kb & (labels[a] != labels[b])
            chosen[a[change | (ka & ~kb)]] = True
            chosen[b[change | (kb & ~ka)]] = True
    if per_region > 0:
        comp = _components(labels, known_f, pairs)
        rim = _boundary_distance(comp, shape)
        coords = np.stack(np.unravel_index(np.arange(size), shape), axis=1)
        cells = np.flatnonzero(comp >= 0)
        order = cells[np.argsort(comp[cells], kind="stable")]
        splits = np.flatnonzero(np.diff(comp[order])) + 1
        for region in np.split(order, splits):
            if len(region):
                chosen[_spread(region, coords[region], rim[region], per_region)] = True
    if stride is not None:
        grids = np.meshgrid(*[np.arange(n) % stride == 0 for n in shape], indexing="ij")
        chosen |= np.logical_and.reduce([g.ravel() for g in grids])
    return chosen.reshape(shape)


def chosen_cells(job: Job, results: Results) -> np.ndarray:
    """Flat boolean mask of the cells ``job.confirm`` chooses from the stored bulk map."""
    c = job.confirm
    known = np.ones(results.shape, bool)
    invariants = []
    for name in c.across:
        data = results.data[name]
        ok = (data != FILL_INT) if data.dtype.kind == "i" else np.isfinite(data)
        if data.dtype.kind == "f":
            data = np.round(data, 6)  # a half-integer spin Chern number, say: exact to 1e-6
        known &= ok
        invariants.append(data)
    return select_cells(invariants, known, per_region=c.per_region, stride=c.stride,
                        bracket=bool(c.across)).ravel()


# ---------------------------------------------------------------- the run
def point_values(job: Job, results: Results, index: int) -> dict:
    """The stored values of flat point ``index`` that the consistency rules read (None where
    missing)."""
    multi = np.unravel_index(index, results.shape)
    out: dict = {}
    for rule in job.consistency_rules():
        for name in rule.reads:
            v = results.data[name][multi]
            if results.variables[name].dtype == "int32":
                out[name] = None if v == FILL_INT else int(v)
            else:
                out[name] = float(v)
    return out


def reason_arrays(job: Job, results: Results, measurement: str) -> list[np.ndarray]:
    """Flat views of the reason variables of ``measurement`` (one, or one per gap)."""
    names = reason_names(measurement, job.dim, job.drive.kind != "static").values()
    return [results.data[n].reshape(-1) for n in names]


class Recorder:
    """Stores the partial records of a ``[confirm]`` run and completes a point (consistency
    flags, ``done``) once none of its measurements is still ``NOT_COMPUTED``."""

    def __init__(self, job: Job, results: Results) -> None:
        self.job, self.results = job, results
        self.reasons = [r for m, _ in job.measurements for r in reason_arrays(job, results, m)]
        self.rules = job.consistency_rules()

    def complete(self, index: int) -> bool:
        return all(r[index] != NOT_COMPUTED for r in self.reasons)

    def __call__(self, index: int, values: dict, failure: str) -> None:
        if POINT_SECONDS in values and POINT_SECONDS in self.results.variables:
            # a point computed in two passes: its time is the sum of both
            before = self.results.data[POINT_SECONDS].reshape(-1)[index]
            if np.isfinite(before):
                values = {**values, POINT_SECONDS: float(before) + values[POINT_SECONDS]}
        self.results.record(index, values, failure, complete=False)
        if self.complete(index):
            if self.rules:
                self.results.record(index, evaluate(self.rules, point_values(
                    self.job, self.results, index)), complete=False)
            self.results.done.reshape(-1)[index] = 1


def pending_groups(job: Job, results: Results, names, cells: np.ndarray
                   ) -> list[tuple[np.ndarray, tuple]]:
    """The cells (of ``cells``) where some of ``names`` is ``NOT_COMPUTED``, grouped by which:
    ``[(flat indices, measurement names), ...]``."""
    if not len(names):
        return []
    flags = np.stack([np.logical_or.reduce([r[cells] == NOT_COMPUTED
                                            for r in reason_arrays(job, results, m)])
                      for m in names], axis=1)
    groups = []
    for key in np.unique(flags, axis=0):
        if key.any():
            rows = np.all(flags == key, axis=1)
            groups.append((cells[rows], tuple(m for m, k in zip(names, key) if k)))
    return groups


def run_confirmed(job: Job, results: Results, *, share: np.ndarray | None = None,
                  evaluate_groups, start: float | None = None):
    """Pass 1 (bulk, every point), the selection, pass 2 (boundary, chosen cells of ``share``).

    ``evaluate_groups(groups, store, total, already, label)`` runs the groups
    (:func:`sweepcli.run.runner.evaluate_groups`) and returns whether it was interrupted.
    Returns ``(interrupted, chosen mask or None, own mask)``.
    """
    start = time.monotonic() if start is None else start
    size = results.size
    own = np.zeros(size, bool)
    own[np.arange(size) if share is None else share] = True
    boundary = job.confirm.measurements
    bulk = [m for m, _ in job.measurements if m not in boundary]
    done = results.done.reshape(-1)
    for m in bulk:  # a measurement no longer confirmed runs everywhere again
        for r in reason_arrays(job, results, m):
            reopen = r == NOT_REQUESTED
            r[reopen] = NOT_COMPUTED
            done[reopen] = 0
    store = Recorder(job, results)
    everything = np.arange(size)
    groups = pending_groups(job, results, bulk, everything)
    todo = sum(len(g) for g, _ in groups)
    if evaluate_groups(groups, store, size, size - todo, "pass 1 of 2, bulk"):
        return True, None, own
    chosen = chosen_cells(job, results)
    for m in boundary:
        for r in reason_arrays(job, results, m):
            r[chosen & own & (r == NOT_REQUESTED)] = NOT_COMPUTED
            r[~chosen & own & (r == NOT_COMPUTED)] = NOT_REQUESTED
    complete = np.logical_and.reduce([r != NOT_COMPUTED for r in store.reasons])
    done[own] = complete[own]
    groups = pending_groups(job, results, list(boundary), np.flatnonzero(own & chosen))
    todo = sum(len(g) for g, _ in groups)
    total = int((own & chosen).sum())
    interrupted = evaluate_groups(groups, store, total, total - todo, "pass 2 of 2, boundary")
    return interrupted, chosen, own


def reopen_not_requested(results: Results, share: np.ndarray | None = None) -> int:
    """For a job without ``[confirm]`` resuming a file written with it: every cell is chosen, so
    points with a ``NOT_REQUESTED`` measurement are evaluated again (all their measurements;
    the others give the same values). Returns the number of points reopened."""
    mask = np.zeros(results.size, bool)
    for name, var in results.variables.items():
        if var.is_reason:
            mask |= results.data[name].reshape(-1) == NOT_REQUESTED
    if share is not None:
        keep = np.zeros(results.size, bool)
        keep[share] = True
        mask &= keep
    if mask.any():
        for name, var in results.variables.items():
            if var.is_reason:
                r = results.data[name].reshape(-1)
                r[mask & (r == NOT_REQUESTED)] = NOT_COMPUTED
        results.done.reshape(-1)[mask] = 0
    return int(mask.sum())
