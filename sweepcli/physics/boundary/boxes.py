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
from scipy.optimize import minimize_scalar
from scipy.sparse.linalg import ArpackNoConvergence

from ...schema import Reason
from .. import quasienergy as qe
from .. import samples
from ..drives.evolution import evolve
from ..lattice import TightBinding
from . import counts
from .ribbons import ribbon_kgrid
from .solvers import floquet_levels, sample_steps, static_levels
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


def static_boundary_gap(tb: TightBinding, centre: float, width: int | None = None,
                        nk: int = 64) -> tuple[float, float]:
    """Gap around ``centre`` that confines boundary modes, and their decay length (cells).

    1D model: the bulk levels against ``k``. 2D model: ribbons of ``width`` cells cut along
    ``a_1`` and along ``a_2``, their levels against ``k_par`` (edge and projected bulk states;
    a corner mode of a second-order phase lives in the edge gap). A ribbon gap that halves or
    more when the ribbon is twice as wide is the tunnelling of a gapless edge across the
    ribbon, not a gap: it is returned as 0. Returns the smallest gap and the longest decay
    length over the geometries (:func:`gap_and_decay`).
    """
    def dist(h: TightBinding, k: np.ndarray) -> np.ndarray:
        return np.min(np.abs(np.linalg.eigvalsh(h.bloch(k[:, None])) - centre), axis=-1)

    return _settled([[gap_and_decay(lambda k, h=h: dist(h, k), nk) for h in pair]
                     for pair in _geometries(tb, width)])


def floquet_boundary_gap(factors: Sequence[tuple[float, TightBinding]], period: float,
                         centre: float, width: int | None = None,
                         nk: int = 64) -> tuple[float, float]:
    """:func:`static_boundary_gap` of a drive, around quasienergy ``centre`` (0 or ``pi/T``)."""
    def dist(parts: list, k: np.ndarray) -> np.ndarray:
        u = evolve([(t, h.bloch(k[:, None])) for t, h in parts])
        eps = -np.angle(np.linalg.eigvals(u)) / period
        return np.min(np.abs(qe.wrap_quasienergy(eps - centre, period)), axis=-1)

    per_step = [_geometries(f, width) for _, f in factors]
    found = []
    for j in range(len(per_step[0])):
        found.append([gap_and_decay(lambda k, j=j, w=w: dist(
            [(t, g[j][w]) for (t, _), g in zip(factors, per_step)], k), nk)
            for w in range(len(per_step[0][j]))])
    return _settled(found)


def _geometries(tb: TightBinding, width: int | None) -> list[list[TightBinding]]:
    """The bulk chain (1D), or for each cut direction ribbons of ``width`` and ``2 width``."""
    if tb.dim == 1:
        return [[tb]]
    return [[samples.ribbon(tb, int(w), axis) for w in (width, 2 * width)] for axis in (0, 1)]


def _settled(found: list[list[tuple[float, float]]]) -> tuple[float, float]:
    gaps, xis = [], []
    for pair in found:
        gap, xi = pair[0]
        if len(pair) > 1 and pair[1][0] < gap / 2:
            gap, xi = 0.0, math.inf
        gaps.append(gap)
        xis.append(xi)
    return min(gaps), max(xis)


def gap_and_decay(dist: Callable[[np.ndarray], np.ndarray], nk: int) -> tuple[float, float]:
    """Gap ``2 min_k d(k)`` of a 1D spectrum and the decay length of a state at its centre.

    ``d(k)`` (batched over ``k``) is the distance of the nearest level from the gap centre.
    Near its minimum ``d_0`` at ``k_0`` a massive Dirac branch ``sqrt(d_0^2 + v^2 q^2)`` has
    ``d'' = v^2 / d_0`` and an in-gap state decays as ``exp(-x d_0 / v)``, so
    ``xi = sqrt(d'' / d_0)`` (cells); a parabolic band edge gives ``sqrt(d'' / (2 d_0))``, so
    this is the longer of the two. ``d''`` by central differences at the polished minimum.
    Returns ``(gap, xi)``; ``xi`` is ``inf`` for a closed gap.
    """
    k = ribbon_kgrid(nk)
    d = dist(k)
    j = int(np.argmin(d))
    step = 2 * np.pi / nk
    res = minimize_scalar(lambda x: float(dist(np.array([x]))[0]),
                          bounds=(k[j] - step, k[j] + step), method="bounded",
                          options={"xatol": 1e-10})
    k0, d0 = (float(res.x), float(res.fun)) if res.fun < d[j] else (float(k[j]), float(d[j]))
    if not d0 > 0:
        return 0.0, math.inf
    h = DECAY_STEP
    dm, dc, dp = dist(np.array([k0 - h, k0, k0 + h]))
    curvature = max((dm - 2 * dc + dp) / h**2, 0.0)
    return 2 * d0, math.sqrt(curvature / d0)


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
    result = ModeCount(None, None, window=window, reason=Reason.FINITE_SIZE)
    for box in boxes:
        method = method_of(box)
        try:
            levels, vectors = levels_of(box, method)
        except ArpackNoConvergence:
            return ModeCount(None, None, method=method, window=window,
                             reason=Reason.NOT_CONVERGED, shape=box)
        pin = counts.pin_bound(window.gap, xi, min(box))
        c = counts.count(levels, vectors, cells_of(box), box, window.halfwidth, pin=pin,
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
        xi = {g: floquet_boundary_gap(factors, w.period, w.centre, int(shape[0]))[1]
              if not w.closed(gap_tol) else math.inf for g, w in windows.items()}
    steps: dict[tuple[int, ...], list] = {}

    def levels_of(window: Window) -> Callable:
        def solve(box: tuple[int, ...], m: str) -> tuple[np.ndarray, np.ndarray]:
            if box not in steps:
                steps[box] = sample_steps(factors, box)
            return floquet_levels(steps[box], window, m)
        return solve

    return {name: count_boxes(
        shape, window, xi[name], levels_of(window),
        lambda box: samples.choose_method(tb0, box, method, driven=True, limit=memory_limit),
        lambda box: samples.sample_sites(tb0, box)[0],
        max_side=max_side, chiral=chiral, gap_tol=gap_tol) for name, window in windows.items()}
