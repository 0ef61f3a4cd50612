"""End and corner modes of open box samples (chains and flakes), static and driven.

Which in-window states are bound to which corner (end), and whether the count can be trusted,
is decided in :mod:`sweepcli.physics.boundary.counts`: the sample must be large against the
decay length set by the gap that confines the modes (:func:`static_boundary_gap`,
:func:`floquet_boundary_gap`), every in-window state must be bound to a corner region of at
most a quarter of a side (the region chosen from the measured decay), and the per-corner
credits must be integers; otherwise the count is missing (``FINITE_SIZE``). :func:`count_boxes`
doubles the box up to ``max_side`` until the count is settled. The in-window levels come from
:mod:`sweepcli.physics.boundary.solvers`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as sla
from scipy.sparse.linalg import ArpackNoConvergence

from ...schema import Reason
from .. import quasienergy as qe
from .. import samples
from ..drives.evolution import evolve
from ..lattice import TightBinding
from . import counts
from .ribbons import ribbon_kgrid
from .solvers import FloquetSample, sample_steps, static_levels
from .windows import Window

#: Step in k (rad) of the central difference for the curvature of a gap at its minimum.
DECAY_STEP = 1e-2


@dataclass(frozen=True)
class ModeCount:
    """Boundary modes of a box sample (chain or flake) in one window.

    Attributes
    ----------
    per_corner : (2**d,) int, or ``None`` when missing
        Modes credited to each corner (each end of a chain), numbered as in
        :mod:`sweepcli.physics.boundary.counts`.
    total : ``per_corner.sum()``, or ``None``.
    levels : (m,) float
        In-window levels relative to the window centre (energy), ascending.
    kinds : (m,) int
        Class of each level's cluster: 0 bulk, 1 edge, 2 corner (end).
    method : ``"dense"`` or ``"sparse"`` (``""`` if nothing was computed).
    window : the window used.
    reason : :class:`Reason`.
    states : number of in-window states of the sample used (``None`` if none was diagonalised).
    weight : smallest weight inside the corner regions among the counted clusters (``nan`` if
        nothing was counted).
    region : corner-region radius finally used, cells.
    shape : the box actually diagonalised (the last one tried), cells.
    vectors : (N, m) orthonormal eigenvectors of the in-window levels of that box (for
        pictures; ``None`` when nothing was diagonalised).
    """

    per_corner: np.ndarray | None
    total: int | None
    levels: np.ndarray = field(default_factory=lambda: np.zeros(0))
    kinds: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    method: str = ""
    window: Window | None = None
    reason: Reason = Reason.OK
    states: int | None = None
    weight: float = float("nan")
    region: int = 0
    shape: tuple[int, ...] = ()
    vectors: np.ndarray | None = None


def check_sample_side(shape: Sequence[int]) -> None:
    """Raise ``ValueError`` unless every side has at least ``MIN_SIDE`` cells."""
    shape = tuple(int(x) for x in shape)
    if min(shape) < counts.MIN_SIDE:
        raise ValueError(f"sample of {' x '.join(map(str, shape))} cells is too small: each side "
                         f"needs at least {counts.MIN_SIDE} cells, so that corner regions of "
                         f"up to a quarter of a side can hold a bound mode")


def box_sizes(side: int, max_side: int) -> list[int]:
    """Sides tried for a box: ``side``, doubled while below ``max_side``, then ``max_side``."""
    out = [int(side)]
    while out[-1] < max_side:
        out.append(min(2 * out[-1], int(max_side)))
    return out


def _sizes_to_try(shape: Sequence[int], max_side: int | None, xi: float, charged: bool
                  ) -> list[tuple[int, ...]]:
    """Boxes from ``shape`` doubled up to ``max_side`` that are large for the decay length."""
    shape = tuple(int(x) for x in shape)
    largest = max(shape) if max_side is None else max(int(max_side), max(shape))
    need = counts.required_side(xi, charged=charged)
    boxes = []
    for side in box_sizes(min(shape), largest):
        box = tuple(max(side, x) for x in shape)
        if min(box) >= need:
            boxes.append(box)
    return boxes


#: Quasienergy distances ``d`` with ``d T`` below this are recomputed from the eigenvalues of
#: ``U`` itself: from ``(U + U^dagger)/2`` they are ``arccos(lambda) / T``, whose relative
#: rounding error ``~1e-15 / (d T)^2`` stays below ``1e-11`` above it.
ARCCOS_GUARD = 1e-2
#: Evaluations spent on proving that the twice-wider ribbon's gap cannot halve (else its
#: minimum is polished as by :func:`gap_and_decay`).
CERTIFY_EVALS = 12
#: The twice-wider ribbon is first evaluated where the narrower one's distances, times this
#: margin, would prove it not halved (:func:`_halved_all`).
SPARSE_GUIDE = 0.97
#: Evaluations :func:`_halved_all` may spend inside single grid steps before it evaluates the
#: whole grid instead.
SPARSE_OFFGRID = 32
#: Relative room left for the rounding of distances when a bound clears a threshold.
SPARSE_ROUNDING = 1e-8


def static_boundary_gap(tb: TightBinding, centre: float, width: int | None = None,
                        nk: int = 64, cuts: Sequence[samples.SideCut] | None = None
                        ) -> tuple[float, float]:
    """Gap around ``centre`` that confines boundary modes, and their decay length (cells).

    1D model: the bulk levels against ``k``. 2D model: ribbons of ``width`` cells cut along
    ``a_1`` and along ``a_2``, their levels against ``k_par`` (edge and projected bulk states;
    a corner mode of a second-order phase lives in the edge gap). A ribbon gap that halves or
    more when the ribbon is twice as wide is the tunnelling of a gapless edge across the
    ribbon, not a gap: it is returned as 0. Returns the smallest gap and the longest decay
    length over the geometries (:func:`gap_and_decay`). ``cuts`` replaces the two cuts by the
    ribbons of the sides of a polygonal sample (:func:`sweepcli.physics.samples.cut_ribbon`);
    the levels of a ribbon's far edge that is no polygon edge are left out.
    """
    def dists_of(h: TightBinding, far: np.ndarray | None) -> Callable[[np.ndarray], np.ndarray]:
        def dists(k: np.ndarray) -> np.ndarray:
            if far is None:
                e = _banded_eigvalsh(h.bloch(k[:, None]))
            else:
                e, v = np.linalg.eigh(h.bloch(k[:, None]))
                e = np.where(_far_weight(v, far) > 0.5, np.inf, e)
            return np.min(np.abs(e - centre), axis=-1)[None]
        return dists

    found = []
    for j, geometry in enumerate(_geometries(tb, width, cuts)):
        lip = _ribbon_slope([(1.0, tb)], [(1.0, geometry[-1][0])], None if cuts else 1 - j)
        found.append(_geometry_gaps([dists_of(h, far) for h, far in geometry], 1, nk, lip)[0])
    return _settled_all([found])[0]


def _banded_eigvalsh(h: np.ndarray) -> np.ndarray:
    """``numpy.linalg.eigvalsh`` of a batch ``(nk, n, n)`` of Hermitian matrices, by the banded
    solver (LAPACK ``hbevd``: ``O(n^2 b)`` instead of ``O(n^3)``) when they are banded.

    A ribbon's cells across are ordered along the open direction, so its Bloch matrix has
    half-bandwidth ``b`` of about ``norb`` times the hopping range: 2.4x faster at ``n = 256``.
    """
    n = h.shape[-1]
    rows, cols = np.nonzero(np.any(h != 0, axis=0))
    bw = int(np.max(np.abs(rows - cols), initial=0))
    if h.ndim != 3 or 4 * (bw + 1) > n:
        return np.linalg.eigvalsh(h)
    band = np.zeros((h.shape[0], bw + 1, n), dtype=h.dtype)
    for d in range(bw + 1):  # upper band storage: band[bw - d, j] = h[j - d, j]
        band[:, bw - d, d:] = np.diagonal(h, d, axis1=-2, axis2=-1)
    return np.array([sla.eigvals_banded(b, lower=False, check_finite=False) for b in band])


def floquet_boundary_gap(factors: Sequence[tuple[float, TightBinding]], period: float,
                         centre: float, width: int | None = None,
                         nk: int = 64, cuts: Sequence[samples.SideCut] | None = None
                         ) -> tuple[float, float]:
    """:func:`static_boundary_gap` of a drive, around quasienergy ``centre`` (0 or ``pi/T``)."""
    return floquet_boundary_gaps(factors, period, [centre], width, nk, cuts)[0]


def floquet_boundary_gaps(factors: Sequence[tuple[float, TightBinding]], period: float,
                          centres: Sequence[float], width: int | None = None,
                          nk: int = 64, cuts: Sequence[samples.SideCut] | None = None
                          ) -> list[tuple[float, float]]:
    """:func:`floquet_boundary_gap` at several centres, sharing the ribbon evolutions.

    ``U(k_par)`` of each ribbon is evolved once per momentum for all centres; the distance of
    the nearest level from a centre ``c`` is ``arccos(lambda_max) / T`` with ``lambda_max`` the
    largest eigenvalue of the Hermitian part of ``exp(i c T) U`` (one Hermitian eigenvalue
    problem serves both 0 and ``pi/T``), and is recomputed from the eigenvalues of ``U`` where
    it is below ``ARCCOS_GUARD / T``. Returns ``[(gap, xi), ...]`` in the order of ``centres``.
    """
    centres = [float(c) for c in centres]
    per_step = [_geometries(f, width, cuts) for _, f in factors]
    found = []
    for j in range(len(per_step[0])):
        geometry = [[(float(t), g[j][w][0]) for (t, _), g in zip(factors, per_step)]
                    for w in range(len(per_step[0][j]))]
        fars = [per_step[0][j][w][1] for w in range(len(per_step[0][j]))]
        lip = _ribbon_slope(factors, geometry[-1], None if cuts else 1 - j) / period
        found.append(_geometry_gaps([_floquet_dists(parts, period, centres, far)
                                     for parts, far in zip(geometry, fars)],
                                    len(centres), nk, lip))
    return _settled_all(list(zip(*found)))


def _far_weight(v: np.ndarray, far: np.ndarray) -> np.ndarray:
    """``(..., m)`` weight of each eigenvector (columns of ``v``) on the orbitals ``far``."""
    return np.sum(np.abs(v[..., far, :]) ** 2, axis=-2)


def _floquet_dists(parts: list[tuple[float, TightBinding]], period: float,
                   centres: list[float], far: np.ndarray | None = None
                   ) -> Callable[[np.ndarray], np.ndarray]:
    """``k -> (len(centres), nk)`` distances of the nearest quasienergy from each centre
    (leaving out the levels with most weight on ``far``, when given)."""
    signs = []
    for c in centres:
        turn = c * period / np.pi
        signs.append(1.0 if turn == 0 else (-1.0 if abs(turn - 1) <= 1e-12 else None))

    def exact(u: np.ndarray, c: float) -> np.ndarray:
        eps = -np.angle(np.linalg.eigvals(u)) / period
        return np.min(np.abs(qe.wrap_quasienergy(eps - c, period)), axis=-1)

    def dists(k: np.ndarray) -> np.ndarray:
        if far is not None:
            phases, v = qe.unitary_eig(evolve([(t, h.bloch(k[:, None])) for t, h in parts]))
            eps = np.where(_far_weight(v, far) > 0.5, np.nan, -phases / period)
            return np.array([np.nanmin(np.abs(qe.wrap_quasienergy(eps - c, period)), axis=-1,
                                       initial=np.inf) for c in centres])
        u = _similar_floquet(parts, k)
        out = np.empty((len(centres), k.size))
        herm = None
        for i, (c, sign) in enumerate(zip(centres, signs)):
            if sign is None:
                out[i] = exact(u, c)
                continue
            if herm is None:
                herm = np.linalg.eigvalsh(0.5 * (u + np.conj(np.swapaxes(u, -1, -2))))
            top = herm[:, -1] if sign > 0 else -herm[:, 0]
            d = np.arccos(np.clip(top, -1.0, 1.0)) / period
            close = d * period < ARCCOS_GUARD
            if np.any(close):
                d[close] = exact(u[close], c)
            out[i] = d
        return out

    return dists


def _similar_floquet(parts: list[tuple[float, TightBinding]], k: np.ndarray) -> np.ndarray:
    """``(nk, n, n)`` unitaries with the eigenvalues of the ribbon's ``U(k)`` (not ``U`` itself).

    With ``H_j = V_j D_j V_j^dagger``, ``V_1^dagger U V_1 = M_1 e^{-i D_n t_n} M_n ...
    M_2 e^{-i D_1 t_1}`` with ``M_j = V_j^dagger V_{j-1}`` (``M_1 = V_1^dagger V_n``): one
    product per step instead of forming each exponential and multiplying them.
    """
    vs, phases = [], []
    for t, h in parts:
        w, v = np.linalg.eigh(h.bloch(k[:, None]))
        vs.append(v)
        phases.append(np.exp(-1j * t * w))
    if len(parts) == 1:
        y = np.zeros(vs[0].shape, dtype=complex)
        idx = np.arange(y.shape[-1])
        y[..., idx, idx] = phases[0]
        return y
    first = np.conj(np.swapaxes(vs[1], -1, -2)) @ vs[0]  # M_2
    y = phases[1][..., :, None] * first * phases[0][..., None, :]
    for j in range(2, len(parts)):
        y = phases[j][..., :, None] * ((np.conj(np.swapaxes(vs[j], -1, -2)) @ vs[j - 1]) @ y)
    last = (np.conj(np.swapaxes(first, -1, -2)) if len(parts) == 2
            else np.conj(np.swapaxes(vs[0], -1, -2)) @ vs[-1])  # M_1
    return last @ y


def _slope_bound(parts: Sequence[tuple[float, TightBinding]]) -> float:
    """Bound on ``|d level / d k_par|`` of a ribbon: ``sum_j t_j sum_R 2 |R| ||T_R||_2``.

    A level of ``H(k)`` moves no faster than ``||dH/dk||``, and an eigenphase of a product of
    exponentials no faster than ``sum_j t_j ||dH_j/dk||`` (divide by ``T`` for quasienergy).
    """
    total = 0.0
    for t, tb in parts:
        total += abs(t) * sum(2 * abs(r[0]) * float(np.linalg.norm(m, 2))
                              for r, m in tb.hoppings.items())
    return total * (1 + 1e-6)


def _ribbon_slope(bulk: Sequence[tuple[float, TightBinding]],
                  ribbon: Sequence[tuple[float, TightBinding]], par: int | None) -> float:
    """Bound on ``|d level / d k_par|`` of the ribbons ``ribbon`` (steps of a drive, or one
    ``(1, H)``): :func:`_slope_bound`, or, for ribbons of the 2D ``bulk`` periodic along
    lattice direction ``par`` (``None``: not such ribbons), the lower ``sum_j t_j`` times
    :func:`_strip_slope` of each bulk step."""
    crude = _slope_bound(ribbon)
    if par is None or bulk[0][1].dim != 2:
        return crude
    return min(crude, sum(abs(t) * _strip_slope(tb, par) for t, tb in bulk))


def _strip_slope(tb: TightBinding, par: int, n: int = 128) -> float:
    """Bound on ``||dH/dk_par||`` of every ribbon of ``tb`` periodic along ``a_par``, any width.

    Such a ribbon's ``H(k_par)`` is a compression (the block of the open cells kept) of the
    infinite strip's, a direct integral over ``k_open`` of the bulk ``H(k)``; a compression
    has no larger norm, so ``||dH_ribbon/dk_par|| <= max_k ||d_par H(k)||``. That maximum is
    taken on an ``n x n`` mesh plus the change of ``d_par H`` to the nearest mesh point (at most
    ``pi / n`` away in each reduced direction): ``2 sum_R |R_par| (|R_1| + |R_2|) ||T_R|| pi/n``.
    Up to twice as tight as :func:`_slope_bound`, whose terms add norms of terms whose maxima
    over ``k`` need not meet (a Dirac term ``sin k`` and a mass term ``cos k``).
    """
    q = 2 * np.pi * np.arange(n) / n
    mesh = np.stack(np.meshgrid(q, q, indexing="ij"), axis=-1).reshape(-1, 2)
    deriv = np.zeros((mesh.shape[0], tb.norb, tb.norb), dtype=complex)
    slack = 0.0
    for r, t in tb.hoppings.items():
        if r[par] == 0:
            continue
        phase = np.exp(1j * (mesh @ np.asarray(r, dtype=float)))[:, None, None]
        term = 1j * r[par] * t * phase
        deriv += term + np.conj(np.swapaxes(term, -1, -2))
        slack += 2 * abs(r[par]) * (abs(r[0]) + abs(r[1])) * float(np.linalg.norm(t, 2)) * np.pi / n
    peak = float(np.max(np.abs(np.linalg.eigvalsh(deriv)))) if deriv.size else 0.0
    return (peak + slack) * (1 + 1e-6)


def _geometry_gaps(dists: list[Callable[[np.ndarray], np.ndarray]], ncentre: int, nk: int,
                   lip: float) -> list[tuple[tuple[float, float], bool]]:
    """``[((gap, xi), halved), ...]`` per centre for one geometry (a chain, or ribbons of width
    ``W`` and ``2 W``): what :func:`gap_and_decay` gives for the first, and whether the second's
    gap is below half of it (:func:`_halved_all`: the second is evaluated only at the momenta
    that decide, ``lip`` bounding its slope)."""
    k = ribbon_kgrid(nk)
    grid = dists[0](k)
    out = []
    for i in range(ncentre):
        out.append([_gap_and_decay(lambda x, i=i: dists[0](x)[i], k, grid[i]), False])
    if len(dists) > 1 and any(gap > 0 for (gap, _), _ in out):
        thresholds = [gap / 4 if gap > 0 else None for (gap, _), _ in out]
        for i, halved in enumerate(_halved_all(dists[1], k, thresholds, lip, grid)):
            out[i][1] = halved
    return [tuple(x) for x in out]


def _halved_all(dist: Callable[[np.ndarray], np.ndarray], k: np.ndarray,
                thresholds: Sequence[float | None], lip: float, guide: np.ndarray) -> list[bool]:
    """Per centre, :func:`_halved` of ``dist`` (``k -> (ncentre, nk)``) on the grid ``k``, with
    ``dist`` evaluated at as few grid points as provably decide it (``False`` where the
    threshold is ``None``).

    :func:`_halved` only ever looks at values of ``dist``: the grid minimum, then points near
    it. So one grid value below a centre's threshold decides ``True`` (the grid minimum is no
    larger), and values that prove ``dist >= threshold`` on the whole circle, through the
    slope bound ``lip`` (a level moves no faster; a segment ``[a, b]`` is cleared when
    ``(d_a + d_b - lip (b - a)) / 2`` is at or above the threshold), decide ``False``: every
    value :func:`_halved` could look at is then at or above it. The first points are the
    fewest grid points that would clear the circle were ``dist`` the ``guide`` (the narrower
    ribbon's grid distances, which the wider one's follow away from tunnelling, with a margin
    of ``SPARSE_GUIDE``); a segment not cleared is bisected at a grid point, inside one grid
    step at points off the grid (at most ``SPARSE_OFFGRID``, counting those the segments
    still open need at least). A case left open (an off-grid value below a threshold, or that
    budget spent) evaluates the rest of the grid and runs
    :func:`_halved` on it.
    """
    nk = k.size
    step = 2 * np.pi / nk
    thr = np.array([np.nan if t is None else float(t) for t in thresholds])
    halved = [False] * len(thr)
    active = [i for i in range(len(thr)) if not np.isnan(thr[i])]
    clear = thr * (1 + SPARSE_ROUNDING)  # values are cleared with room for their rounding
    values: dict[float, np.ndarray] = {}  # position in grid steps from k[0] -> (ncentre,)

    def evaluate(pos: list[float]) -> None:
        grid = [p for p in pos if float(p).is_integer()]
        off = [p for p in pos if not float(p).is_integer()]
        x = np.concatenate([k[np.array(grid, dtype=int)], k[0] + step * np.array(off)])
        for p, v in zip(grid + off, np.asarray(dist(x)).T):
            values[float(p)] = v

    def cleared(a: float, da: np.ndarray, b: float, db: np.ndarray,
                idx: list[int]) -> bool:
        return bool(np.all((da[idx] + db[idx] - lip * step * (b - a)) / 2 >= clear[idx]))

    # First points: greedy cover of the circle under the guide.
    g = guide * SPARSE_GUIDE
    seed, a = [0.0], 0
    while a < nk:
        b = a + 1
        while b + 1 <= nk and cleared(a, g[:, a % nk], b + 1, g[:, (b + 1) % nk], active):
            b += 1
        if b < nk:
            seed.append(float(b))
        a = b
    evaluate(seed)
    offgrid = 0
    while True:
        for i in list(active):
            if any(v[i] < thr[i] for p, v in values.items() if p.is_integer()):
                halved[i] = True
                active.remove(i)
        if not active:
            return halved
        if any(v[i] < thr[i] for p, v in values.items() if not p.is_integer()
               for i in active):
            break  # _halved might miss that dip, or not: only the full grid tells
        pos = sorted(values)
        new, needed = [], 0.0
        for a, b in zip(pos, pos[1:] + [pos[0] + nk]):
            da, db = values[a], values[b % nk]
            if cleared(a, da, b, db, active):
                continue
            if a.is_integer() and b - a >= 2:
                new.append(float(int(a + b) // 2 % nk))
            else:
                new.append((a + b) / 2 % nk)
                offgrid += 1
                # further points this segment needs, were its values no lower inside
                room = np.min(da[active] + db[active] - 2 * clear[active])
                needed += max(0.0, lip * step * (b - a) / room - 1) if room > 0 else math.inf
        if not new:
            return halved
        if offgrid + needed > SPARSE_OFFGRID:
            break
        evaluate(new)
    missing = [float(j) for j in range(nk) if float(j) not in values]
    if missing:
        evaluate(missing)
    grid = np.stack([values[float(j)] for j in range(nk)], axis=1)
    for i in active:
        halved[i] = bool(_halved(lambda x, i=i: dist(x)[i], k, grid[i], thr[i], lip))
    return halved


def _halved(dist: Callable[[np.ndarray], np.ndarray], k: np.ndarray, d: np.ndarray,
            threshold: float, lip: float) -> bool:
    """Whether :func:`gap_and_decay` of ``dist`` would give a gap below ``4 threshold``.

    That is ``d_0 < threshold`` with ``d_0`` the grid minimum or, when lower, the bounded
    minimum around it. When ``d`` (slope at most ``lip``) provably stays above ``threshold``
    on the polishing interval, the minimisation is skipped; otherwise it is run as there.
    """
    nk = k.size
    j = int(np.argmin(d))
    if d[j] < threshold:
        return True
    step = 2 * np.pi / nk
    # d is periodic in k_par: the grid neighbours bound the polishing interval.
    pts = [(k[j] - step, float(d[(j - 1) % nk])), (float(k[j]), float(d[j])),
           (k[j] + step, float(d[(j + 1) % nk]))]
    for _ in range(CERTIFY_EVALS):
        bad = [i for i in range(len(pts) - 1)
               if (pts[i][1] + pts[i + 1][1] - lip * (pts[i + 1][0] - pts[i][0])) / 2
               < threshold]
        if not bad:
            return False
        i = bad[0]
        x = 0.5 * (pts[i][0] + pts[i + 1][0])
        pts.insert(i + 1, (x, float(dist(np.array([x]))[0])))
    gap, _ = _gap_and_decay(dist, k, d, curvature=False)
    return gap < 2 * threshold


def _geometries(tb: TightBinding, width: int | None,
                cuts: Sequence[samples.SideCut] | None = None
                ) -> list[list[tuple[TightBinding, np.ndarray | None]]]:
    """The bulk chain (1D), or for each cut direction ribbons of ``width`` and ``2 width``
    (cut along ``a_1`` and ``a_2``, or along each polygon side of ``cuts``), each with the
    orbitals of a far edge whose levels are left out (``None``: none are)."""
    if tb.dim == 1:
        return [[(tb, None)]]
    if cuts is not None:
        return [[samples.cut_ribbon(tb, c, int(w)) for w in (width, 2 * width)] for c in cuts]
    return [[(samples.ribbon(tb, int(w), axis), None) for w in (width, 2 * width)]
            for axis in (0, 1)]


def _settled_all(found: list[list[tuple[tuple[float, float], bool]]]
                 ) -> list[tuple[float, float]]:
    """Per centre: the smallest gap and longest decay length over the geometries, a halved
    gap counting as closed."""
    out = []
    for per_geometry in found:
        gaps, xis = [], []
        for (gap, xi), halved in per_geometry:
            if halved:
                gap, xi = 0.0, math.inf
            gaps.append(gap)
            xis.append(xi)
        out.append((min(gaps), max(xis)))
    return out


def gap_and_decay(dist: Callable[[np.ndarray], np.ndarray], nk: int) -> tuple[float, float]:
    """Gap ``2 min_k d(k)`` of a 1D spectrum and the decay length of a state at its centre.

    ``d(k)`` (batched over ``k``) is the distance of the nearest level from the gap centre.
    Near its minimum ``d_0`` at ``k_0`` a massive Dirac branch ``sqrt(d_0^2 + v^2 q^2)`` has
    ``d'' = v^2 / d_0`` and an in-gap state decays as ``exp(-x d_0 / v)``, so
    ``xi = sqrt(d'' / d_0)`` (cells); a parabolic band edge gives ``sqrt(d'' / (2 d_0))``, so
    this is the longer of the two. Every local minimum of ``d`` is such a channel, and a bound
    state decays as slowly as its slowest channel: a minimum a little above the gap with a
    steep branch can decay far more slowly than the global one (measured on a driven corner
    model: 3.4 cells at the global minimum, 23 at another one 10 % higher), so ``xi`` is the
    largest ``sqrt(d'' / d_0)`` over the local minima of the grid, ``d''`` by central
    differences (at the polished global minimum, and at the grid point of the others).
    Returns ``(gap, xi)``; ``xi`` is ``inf`` for a closed gap.
    """
    k = ribbon_kgrid(nk)
    return _gap_and_decay(dist, k, dist(k))


def _gap_and_decay(dist: Callable[[np.ndarray], np.ndarray], k: np.ndarray, d: np.ndarray,
                   curvature: bool = True) -> tuple[float, float]:
    """:func:`gap_and_decay` with the grid values ``d = dist(k)`` already known."""
    from scipy.optimize import minimize_scalar  # here: scipy.optimize takes ~0.3 s to import

    j = int(np.argmin(d))
    step = 2 * np.pi / k.size
    res = minimize_scalar(lambda x: float(dist(np.array([x]))[0]),
                          bounds=(k[j] - step, k[j] + step), method="bounded",
                          options={"xatol": 1e-10})
    k0, d0 = (float(res.x), float(res.fun)) if res.fun < d[j] else (float(k[j]), float(d[j]))
    if not d0 > 0:
        return 0.0, math.inf
    if not curvature:
        return 2 * d0, math.nan
    h = DECAY_STEP
    others = np.flatnonzero((d <= np.roll(d, 1)) & (d <= np.roll(d, -1)))
    others = others[(others != j) & (d[others] > 0)]
    centres = np.concatenate([[k0], k[others]])
    at = dist(np.concatenate([centres - h, centres, centres + h])).reshape(3, -1)
    curv = np.maximum((at[0] - 2 * at[1] + at[2]) / h**2, 0.0)
    floor = np.concatenate([[d0], d[others]])
    return 2 * d0, float(np.sqrt(curv / floor).max())


def count_boxes(shape: Sequence[int], window: Window, xi: float,
                levels_of: Callable[[tuple[int, ...], str], tuple[np.ndarray, np.ndarray]],
                method_of: Callable[[tuple[int, ...]], str],
                cells_of: Callable[[tuple[int, ...]], np.ndarray], *,
                max_side: int | None = None, chiral: np.ndarray | None = None,
                gap_tol: float = 1e-6) -> ModeCount:
    """Count boundary modes on the smallest box that settles the count (static or driven).

    Boxes are ``shape``, doubled up to ``max_side`` (:func:`box_sizes`); those smaller than
    :func:`~sweepcli.physics.boundary.counts.required_side` of the decay length ``xi`` (cells)
    are skipped, and a box whose count is ``FINITE_SIZE`` is followed by the next.
    ``levels_of(box, method)`` returns the in-window levels and vectors; each box is counted
    by :func:`~sweepcli.physics.boundary.counts.count` with the pin bound of its side (or the
    chiral charges with ``chiral``). When no box is large enough, the result is missing with
    an empty ``shape`` (nothing was diagonalised).
    """
    if window.closed(gap_tol):
        return ModeCount(None, None, window=window, reason=Reason.GAP_CLOSED)
    boxes = _sizes_to_try(shape, max_side, xi, chiral is not None)
    return settle_count(boxes, window, xi, levels_of, method_of,
                        lambda box: counts.box_regions(cells_of(box), box), chiral=chiral)


def settle_count(samples_: Sequence[tuple[int, ...]], window: Window, xi: float,
                 levels_of: Callable[[tuple[int, ...], str], tuple[np.ndarray, np.ndarray]],
                 method_of: Callable[[tuple[int, ...]], str],
                 regions_of: Callable[[tuple[int, ...]], counts.Regions], *,
                 chiral: np.ndarray | None = None) -> ModeCount:
    """Count on each sample in turn (named by its size tuple) until one is not
    ``FINITE_SIZE``; the shared loop of :func:`count_boxes` and polygonal samples."""
    result = ModeCount(None, None, window=window, reason=Reason.FINITE_SIZE)
    for box in samples_:
        method = method_of(box)
        try:
            levels, vectors = levels_of(box, method)
        except ArpackNoConvergence:
            return ModeCount(None, None, method=method, window=window,
                             reason=Reason.NOT_CONVERGED, shape=box)
        regions = regions_of(box)
        pin = counts.pin_bound(window.gap, xi, regions.side)
        c = counts.count_regions(levels, vectors, regions, window.halfwidth, pin=pin,
                                 chiral=chiral)
        result = ModeCount(c.per_corner, c.total, levels, c.kinds, method, window, c.reason,
                           c.states, c.weight, c.region, box, vectors)
        if c.reason != Reason.FINITE_SIZE:
            break
    return result


def box_modes(tb: TightBinding, shape: Sequence[int], window: Window, *,
              xi: float | None = None,
              max_side: int | None = None, chiral: np.ndarray | None = None,
              method: str = "auto", memory_limit: float | None = None,
              gap_tol: float = 1e-6) -> ModeCount:
    """End (chain) or corner (flake) modes of a static open box sample in ``window``.

    Parameters
    ----------
    tb : the model; shape : first box size in cells, one entry per lattice direction.
    window : from :func:`static_window` (narrowed by :func:`edge_window` for corners).
    xi : decay length of a bound state in cells (default from :func:`static_boundary_gap` with
        ribbons as wide as the box).
    max_side : largest side the box may be doubled to (default: no doubling).
    chiral : cell-local chiral operator; chains are then counted by chiral charge.
    method, memory_limit : see :func:`sweepcli.physics.samples.choose_method`.
    gap_tol : a bulk gap at or below this leaves the result missing (``GAP_CLOSED``).

    Raises
    ------
    ValueError for a sample too small or too large for memory, before any matrix is built.
    """
    check_sample_side(shape)
    samples.choose_method(tb, shape, method, limit=memory_limit)  # fails before any work
    if xi is None and not window.closed(gap_tol):
        xi = static_boundary_gap(tb, window.centre, int(shape[0]))[1]
    return count_boxes(
        shape, window, xi,
        lambda box, m: static_levels(samples.open_hamiltonian(tb, box), window, m),
        lambda box: samples.choose_method(tb, box, method, limit=memory_limit),
        lambda box: samples.sample_sites(tb, box)[0],
        max_side=max_side, chiral=chiral, gap_tol=gap_tol)


def floquet_box_modes(factors: Sequence[tuple[float, TightBinding]], shape: Sequence[int],
                      windows: dict[str, Window], *, xi: dict[str, float] | None = None,
                      max_side: int | None = None, chiral: np.ndarray | None = None,
                      method: str = "auto", memory_limit: float | None = None,
                      gap_tol: float = 1e-6) -> dict[str, ModeCount]:
    """End or corner modes of a driven open box sample at quasienergy 0 and ``pi/T``.

    Parameters as :func:`box_modes`; ``factors`` are ``(duration, TightBinding)`` steps in time
    order (starting at a chiral-symmetric time when ``chiral`` is given), ``windows`` come from
    :func:`floquet_windows`, ``xi`` (per gap) from :func:`floquet_boundary_gap`. Returns
    ``{"0": ..., "pi": ...}``.
    """
    tb0 = factors[0][1]
    check_sample_side(shape)
    samples.choose_method(tb0, shape, method, driven=True, limit=memory_limit)
    if xi is None:
        xi = {g: math.inf for g in windows}
        open_gaps = [g for g, w in windows.items() if not w.closed(gap_tol)]
        if open_gaps:
            period = windows[open_gaps[0]].period
            found = floquet_boundary_gaps(factors, period, [windows[g].centre for g in open_gaps],
                                          int(shape[0]))
            xi.update({g: x for g, (_, x) in zip(open_gaps, found)})
    solvers: dict[tuple[int, ...], FloquetSample] = {}
    bounds = [samples.spectral_bounds(f) for _, f in factors]  # every box of every step
    # The windows each box will be solved at (those of the gaps whose count may reach it):
    # the sparse path solves them in one block iteration.
    wanted = {name: _sizes_to_try(shape, max_side, xi[name], chiral is not None)
              for name, w in windows.items() if not w.closed(gap_tol)}

    def levels_of(window: Window) -> Callable:
        def solve(box: tuple[int, ...], m: str) -> tuple[np.ndarray, np.ndarray]:
            if box not in solvers:
                solvers[box] = FloquetSample(sample_steps(factors, box), windows=[
                    windows[name] for name, sizes in wanted.items() if box in sizes],
                    bounds=bounds)
            return solvers[box].levels(window, m)
        return solve

    return {name: count_boxes(
        shape, window, xi[name], levels_of(window),
        lambda box: samples.choose_method(tb0, box, method, driven=True, limit=memory_limit),
        lambda box: samples.sample_sites(tb0, box)[0],
        max_side=max_side, chiral=chiral, gap_tol=gap_tol) for name, window in windows.items()}
