"""Boundary modes of open samples: end, edge and corner modes, static and periodically driven.

Windows
-------
A level of an open sample counts as *in-gap* when it lies within a window around the centre of
a bulk gap, of half-width ``fraction * gap / 2`` (default ``fraction = 0.5``: the window spans
the middle half of the gap, so bulk states pushed slightly into the gap by the boundary are not
counted, while modes bound to the boundary, which sit near the gap centre, are).

* Static: the gap above the lowest ``nocc`` bands is the *indirect* gap
  ``min_k E_nocc(k) - max_k E_{nocc-1}(k)`` (never above the direct gap of
  :func:`sweepcli.physics.spectrum.band_gap`), and the centre is its midpoint (energy 0 for a
  chiral or particle-hole symmetric model).
* Driven (period ``T``, ``U = exp(-i H_F T)``, quasienergies ``eps`` in ``(-pi/T, pi/T]``): the
  gap at 0 is ``2 min_{k,n} |eps_n(k)|`` and the gap at ``pi/T`` is
  ``2 min_{k,n} (pi/T - |eps_n(k)|)``; each window is centred on its gap.

A gap at or below ``gap_tol`` means the window cannot be set: the counts are missing with
:attr:`~sweepcli.physics.point.Reason.GAP_CLOSED`.

Counting
--------
Which in-window states are bound to which corner (end), and whether the count can be trusted,
is decided in :mod:`sweepcli.physics.boundary_counts`: the sample must be large against the
decay length set by the gap, every in-window state must be bound to a corner region of at most
a quarter of a side (the region chosen from the measured decay), and the per-corner credits must
be integers; otherwise the count is missing (``FINITE_SIZE``). :func:`count_boxes` doubles the
box up to ``max_side`` until the count is settled. Corner windows are narrowed to the edge gap
of ribbons of the flake's width (:func:`edge_window`), since corner modes of a second-order
phase live in the edge gap.

Ribbons
-------
The net number of chiral edge modes of a gap is the signed number of times levels localised on
the *low* edge of the ribbon (the edge at cell 0 of the open direction; weight in the low half
of the ribbon > 1/2) cross the gap centre as ``k_par`` goes once around the Brillouin zone,
+1 for ``d eps / d k_par > 0``. Levels at neighbouring ``k`` are matched by the overlap of their
(periodic-gauge, hence continuous) Bloch eigenvectors; the ``k`` grid is doubled until every
crossing is resolved. By bulk-edge correspondence (Hatsugai, PRL 71, 3697 (1993)) this equals
the Chern number of the bands below the gap up to an orientation sign. The edge gap is twice
the smallest distance of any ribbon level from the gap centre over ``k_par`` (equal to the bulk
gap when the edges bind no states in the gap; ~0 when an edge is gapless).

Solvers
-------
``method="auto"`` picks by size (:func:`sweepcli.physics.samples.choose_method`: dense up to
400 orbitals static, 1200 driven, the measured one-core crossovers) after checking memory.
Static samples: dense ``eigh`` (eigenvectors of the window only), or shift-invert Lanczos
(``scipy.sparse.linalg.eigsh`` with ``sigma`` at the gap centre, one LU factorisation and a
fixed start vector), asking for more levels until the farthest one found lies outside the
window. Driven samples: dense ``U`` from :func:`sweepcli.physics.drive.evolve`, or the extremal
eigenvalues of the Hermitian ``A = (U + U^dagger)/2`` (eigenvalue ``cos(eps T)``: near +1 is
quasienergy near 0, near -1 is near ``pi/T``) by Lanczos on a linear operator that applies
``U`` and ``U^dagger`` to vectors through ``evolve``, never forming ``U``. Both driven paths
then diagonalise ``Q^dagger U Q`` on the subspace found (invariant under ``U``, as a union of
eigenspaces of ``A``), which separates ``+eps`` from ``-eps``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
from scipy.optimize import minimize_scalar
from scipy.sparse.linalg import ArpackNoConvergence, LinearOperator, eigsh, splu

from . import boundary_counts as counts
from . import quasienergy as qe
from . import samples
from .drives.base import Drive
from .drives.evolution import Slicing, decide_slicing, evolve
from .lattice import TightBinding
from .point import Reason
from .spectrum import band_edges, band_gap

WINDOW_FRACTION = 0.5
#: Step in k (rad) of the central difference for the curvature of a gap at its minimum.
DECAY_STEP = 1e-2
#: Fixed seed of the Lanczos start vector, so that sparse results are reproducible.
V0_SEED = 20240601
#: Shift of the shift-invert point off the gap centre, in units of the window half-width:
#: chiral-symmetric samples with an odd number of orbitals have an exact zero mode, where the
#: factorisation of ``H - sigma`` would be singular.
SIGMA_OFFSET = 1e-3 * (math.sqrt(5) - 1)
#: Offset of the ribbon k grid, in grid steps: irrational, so that high-symmetry momenta, where
#: branches of opposite edges cross the gap centre together, are never grid points.
K_OFFSET = (math.sqrt(5) - 1) / 2


# ----------------------------------------------------------------------------------------------
# Results
# ----------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Window:
    """Energy window of in-gap levels.

    Attributes
    ----------
    centre : gap centre (energy; ``0`` or ``pi/T`` for a drive).
    halfwidth : ``fraction * gap / 2`` (energy); ``nan`` if the gap is closed.
    gap : bulk gap (energy), ``>= 0``.
    period : drive period ``T`` (time), ``None`` for a static model.
    """

    centre: float
    halfwidth: float
    gap: float
    period: float | None = None

    def closed(self, gap_tol: float) -> bool:
        return not self.gap > gap_tol


@dataclass(frozen=True)
class ModeCount:
    """Boundary modes of a box sample (chain or flake) in one window.

    Attributes
    ----------
    per_corner : (2**d,) int, or ``None`` when missing
        Modes credited to each corner (each end of a chain), numbered as in
        :mod:`sweepcli.physics.boundary_counts`.
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

@dataclass(frozen=True)
class EdgeModes:
    """Edge spectrum of a ribbon at one gap.

    Attributes
    ----------
    chiral : net chiral modes on the low edge (+1 per mode with ``d eps / d k_par > 0``), or
        ``None`` when missing.
    edge_gap : twice the smallest distance of a ribbon level from the gap centre (energy), or
        ``nan``.
    nk : number of ``k_par`` points finally used.
    window : the window used.
    reason : :class:`Reason`.
    """

    chiral: int | None
    edge_gap: float
    nk: int = 0
    window: Window | None = None
    reason: Reason = Reason.OK


# ----------------------------------------------------------------------------------------------
# Bulk windows
# ----------------------------------------------------------------------------------------------

def default_kmesh(dim: int) -> int:
    """Points per direction of the bulk mesh of static windows (refined in continuous k)."""
    return 256 if dim == 1 else 48


def static_window(tb: TightBinding, nocc: int | None = None, fraction: float = WINDOW_FRACTION,
                  kmesh_n: int | None = None, direct_gap: float | None = None) -> Window:
    """Window of in-gap levels of a static model (see module docstring).

    Parameters
    ----------
    tb : the model.
    nocc : bands below the gap (default ``tb.norb // 2``).
    fraction : half-width as a fraction of half the gap, ``0 < fraction <= 1``.
    kmesh_n : bulk mesh points per direction (default :func:`default_kmesh`).
    direct_gap : the refined direct gap if already known (else from
        :func:`~sweepcli.physics.spectrum.band_gap` on the same mesh).

    Returns
    -------
    Window with the indirect gap (>= 0) and its midpoint; the band edges come from
    :func:`~sweepcli.physics.spectrum.band_edges` (the gap search's minima and polish), and the
    gap is never above the refined direct gap.
    """
    nocc = tb.norb // 2 if nocc is None else int(nocc)
    n = default_kmesh(tb.dim) if kmesh_n is None else int(kmesh_n)
    top, bottom = band_edges(tb, nocc, n)
    direct = band_gap(tb, nocc, n).gap if direct_gap is None else float(direct_gap)
    gap = max(0.0, min(bottom - top, direct))
    return Window(0.5 * (top + bottom), fraction * gap / 2 if gap > 0 else float("nan"), gap)


def floquet_windows(drive: Drive, fraction: float = WINDOW_FRACTION, *,
                    gaps: qe.FloquetGaps | None = None, slicing: Slicing | None = None
                    ) -> dict[str, Window]:
    """Windows at quasienergy 0 and ``pi/T`` of a drive, from its bulk quasienergy gaps.

    Parameters
    ----------
    drive : the compiled drive (its period sets ``pi/T``).
    fraction : as :func:`static_window`.
    gaps : the bulk gaps (:func:`sweepcli.physics.floquet.floquet_gaps`, refined in continuous
        k); computed on the default quasienergy-gap mesh at ``slicing`` when omitted.
    slicing : the drive's time slicing (:func:`~sweepcli.physics.drive.decide_slicing`), used
        only when ``gaps`` is omitted.

    Returns
    -------
    ``{"0": Window, "pi": Window}`` centred on 0 and ``pi/T``, gap widths as in the module
    docstring (``gap_0`` and ``gap_pi`` of the bulk).
    """
    if gaps is None:
        mesh = qe.floquet_mesh(drive, qe.GAP_KMESH, drive.dim,
                               slicing if slicing is not None else decide_slicing(drive))
        gaps = qe.floquet_gaps(drive, mesh)
    period = drive.period
    out = {}
    for name, gap, centre in (("0", gaps.gap_0, 0.0), ("pi", gaps.gap_pi, np.pi / period)):
        out[name] = Window(centre, fraction * gap / 2 if gap > 0 else float("nan"), gap, period)
    return out


# ----------------------------------------------------------------------------------------------
# Sample sizes and edge gaps
# ----------------------------------------------------------------------------------------------

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


def _sizes_to_try(shape: Sequence[int], max_side: int | None, xi: float
                  ) -> tuple[list[tuple[int, ...]], tuple[int, ...]]:
    """Boxes large enough for the decay length ``xi``; and the largest allowed box."""
    shape = tuple(int(x) for x in shape)
    largest = max(shape) if max_side is None else max(int(max_side), max(shape))
    need = counts.required_side(xi)
    boxes = []
    for side in box_sizes(min(shape), largest):
        box = tuple(max(side, x) for x in shape)
        if min(box) >= need:
            boxes.append(box)
    return boxes, tuple(max(largest, x) for x in shape)


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
        return np.min(np.abs(_wrap(eps - centre, period)), axis=-1)

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


def edge_window(window: Window, edge_gap: float) -> Window:
    """The corner-mode window: ``window`` narrowed in proportion to the smaller of the bulk and
    edge gaps (same fraction of the gap)."""
    gap = min(window.gap, edge_gap)
    hw = window.halfwidth * gap / window.gap if gap > 0 else float("nan")
    return Window(window.centre, hw, gap, window.period)


def count_boxes(shape: Sequence[int], window: Window, xi: float,
                levels_of: Callable[[tuple[int, ...], str], tuple[np.ndarray, np.ndarray]],
                method_of: Callable[[tuple[int, ...]], str],
                cells_of: Callable[[tuple[int, ...]], np.ndarray], *,
                max_side: int | None = None, chiral: np.ndarray | None = None,
                gap_tol: float = 1e-6) -> ModeCount:
    """Count boundary modes on the smallest box that settles the count (static or driven).

    Boxes are ``shape``, doubled up to ``max_side`` (:func:`box_sizes`); those smaller than
    :func:`~sweepcli.physics.boundary_counts.required_side` of the decay length ``xi`` (cells)
    are skipped, and a box whose count is ``FINITE_SIZE`` is followed
    by the next. ``levels_of(box, method)`` returns the in-window levels and vectors.
    """
    if window.closed(gap_tol):
        return ModeCount(None, None, window=window, reason=Reason.GAP_CLOSED)
    boxes, largest = _sizes_to_try(shape, max_side, xi)
    result = ModeCount(None, None, window=window, reason=Reason.FINITE_SIZE, shape=largest)
    for box in boxes:
        method = method_of(box)
        try:
            levels, vectors = levels_of(box, method)
        except ArpackNoConvergence:
            return ModeCount(None, None, method=method, window=window,
                             reason=Reason.NOT_CONVERGED, shape=box)
        c = counts.count(levels, vectors, cells_of(box), box, window.halfwidth, chiral=chiral)
        result = ModeCount(c.per_corner, c.total, levels, c.kinds, method, window, c.reason,
                           c.states, c.weight, c.region, box, vectors)
        if c.reason != Reason.FINITE_SIZE:
            break
    return result

# ----------------------------------------------------------------------------------------------
# Static samples
# ----------------------------------------------------------------------------------------------

def _v0(n: int) -> np.ndarray:
    rng = np.random.default_rng(V0_SEED)
    return rng.standard_normal(n) + 1j * rng.standard_normal(n)


def _ritz(h: sp.spmatrix, vectors: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Orthonormal eigenpairs on the span of ``vectors`` (Rayleigh-Ritz).

    Shift-invert Lanczos returns the vectors of an exactly degenerate pair as eigenvectors that
    are not orthogonal to each other (measured: overlaps up to 0.16 on a 12 x 12 flake of
    bhz_corner); densities and projectors need orthonormal columns.
    """
    if vectors.shape[1] == 0:
        return np.zeros(0), vectors
    q, _ = np.linalg.qr(vectors)
    small = q.conj().T @ (h @ q)
    e, z = np.linalg.eigh(0.5 * (small + small.conj().T))
    return e, q @ z


def static_levels(h: sp.spmatrix, window: Window, method: str) -> tuple[np.ndarray, np.ndarray]:
    """Levels of a Hermitian sample matrix inside ``window``, relative to its centre.

    Parameters
    ----------
    h : (N, N) sparse Hermitian.
    window : the window.
    method : ``"dense"`` (``eigh`` of the full matrix, eigenvectors computed for the window
        only) or ``"sparse"`` (shift-invert Lanczos near the centre, doubling the number of
        levels asked for until the farthest found lies outside the window).

    Returns
    -------
    levels : (m,) float, ascending; vectors : (N, m) complex.
    """
    n = h.shape[0]
    c, hw = window.centre, window.halfwidth
    if method == "sparse":
        sigma = c + SIGMA_OFFSET * hw
        lu = splu((h - sigma * sp.identity(n, format="csc")).tocsc())
        opinv = LinearOperator((n, n), matvec=lu.solve, dtype=complex)  # factored once
        nev = 16
        while True:
            nev = min(nev, n - 2)
            e, v = eigsh(h, k=nev, sigma=sigma, which="LM", v0=_v0(n), OPinv=opinv)
            inside = np.abs(e - c) <= hw
            if not inside.all() or nev >= n - 2:
                break
            nev *= 2
        e, v = _ritz(h, v[:, inside])
    else:
        # Only the in-window eigenvectors are computed (MRRR), 3-4x faster than all of them.
        e, v = sla.eigh(h.toarray(), subset_by_value=(c - hw, c + hw), driver="evr")
    e = e - c
    order = np.argsort(e)
    return e[order], v[:, order]


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


# ----------------------------------------------------------------------------------------------
# Driven samples
# ----------------------------------------------------------------------------------------------

def _wrap(x: np.ndarray, period: float) -> np.ndarray:
    """Quasienergy differences reduced to ``(-pi/T, pi/T]`` (:func:`qe.wrap_quasienergy`)."""
    return qe.wrap_quasienergy(x, period)


def floquet_levels(steps: Sequence[tuple[float, sp.spmatrix]], window: Window, method: str
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Quasienergies of a driven sample inside ``window`` (centre 0 or ``pi/T``), relative to it.

    Parameters
    ----------
    steps : ``(duration, H)`` pairs in time order, ``H`` an ``(N, N)`` sparse sample matrix;
        ``U = exp(-i H_last t_last) ... exp(-i H_1 t_1)``.
    window : from :func:`floquet_windows`.
    method : ``"dense"`` (``U`` formed by :func:`~sweepcli.physics.drive.evolve`, all of
        ``A = (U + U^dagger)/2`` diagonalised) or ``"sparse"`` (Lanczos for the extremal
        eigenvalues of ``A`` with ``U`` and ``U^dagger`` applied to vectors).

    Returns
    -------
    levels : (m,) quasienergies minus the centre, in ``[-pi/T, pi/T)``, ascending.
    vectors : (N, m) orthonormal eigenvectors of ``U``.
    """
    period = window.period
    n = steps[0][1].shape[0]
    at_pi = window.centre != 0.0
    # |eps - centre| <= hw  <=>  +-cos(eps T) >= cos(hw T)
    threshold = math.cos(min(window.halfwidth * period, math.pi))
    sign = -1.0 if at_pi else 1.0
    back = [(t, -h) for t, h in reversed(steps)]

    if method == "sparse":
        def apply_a(x: np.ndarray) -> np.ndarray:
            x = np.asarray(x, dtype=complex)
            return 0.5 * (evolve(steps, x) + evolve(back, x))

        op = LinearOperator((n, n), matvec=apply_a, matmat=apply_a, dtype=complex)
        # Few levels at a time: every level asked for beyond the window must converge too, and
        # those sit in the clustered part of the spectrum of A (measured: 6 levels cost half
        # the applications of U that 16 do on a 16 x 16 flake).
        nev = 6
        while True:
            nev = min(nev, n - 2)
            a, q = eigsh(op, k=nev, which="SA" if at_pi else "LA", v0=_v0(n))
            inside = sign * a >= threshold
            if not inside.all() or nev >= n - 2:
                break
            nev *= 2
        q = q[:, inside]

        def apply_u(x: np.ndarray) -> np.ndarray:
            return evolve(steps, x)
    else:
        u = evolve([(t, h.toarray()) for t, h in steps])
        bounds = (-np.inf, -threshold) if at_pi else (threshold, np.inf)
        _, q = sla.eigh(0.5 * (u + u.conj().T), subset_by_value=bounds, driver="evr")
        apply_u = u.__matmul__
    if q.shape[1] == 0:
        return np.zeros(0), q
    q, _ = np.linalg.qr(q)
    small = q.conj().T @ apply_u(q)
    # The subspace is invariant under U (it is a union of eigenspaces of A, which commutes with
    # U); its compression is unitary and normal, so its Schur form is diagonal.
    t, z = sla.schur(small, output="complex")
    eps = -np.angle(np.diag(t)) / period
    rel = _wrap(eps - window.centre, period)
    vecs = q @ z
    keep = np.abs(rel) <= window.halfwidth
    rel, vecs = rel[keep], vecs[:, keep]
    order = np.argsort(rel)
    return rel[order], vecs[:, order]


def sample_steps(factors: Sequence[tuple[float, TightBinding]], shape: Sequence[int]
                 ) -> list[tuple[float, sp.csr_matrix]]:
    """``(duration, sparse open-box Hamiltonian)`` for each step of a drive."""
    return [(float(t), samples.open_hamiltonian(f, shape)) for t, f in factors]


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


# ----------------------------------------------------------------------------------------------
# Ribbons
# ----------------------------------------------------------------------------------------------

def ribbon_kgrid(nk: int) -> np.ndarray:
    """``k_par`` grid ``2 pi (j + K_OFFSET) / nk``, ``j = 0 .. nk-1`` (reduced momentum)."""
    return 2 * np.pi * (np.arange(nk) + K_OFFSET) / nk


def _low_half(width: int, norb: int) -> np.ndarray:
    mask = np.zeros(width * norb, dtype=bool)
    mask[: (width // 2) * norb] = True
    return mask


def signed_crossings(rel: np.ndarray, vecs: np.ndarray, low: np.ndarray, halfwidth: float
                     ) -> int | None:
    """Net crossings of the gap centre by low-edge levels over one period of ``k_par``.

    Parameters
    ----------
    rel : (nk, M) levels relative to the gap centre at ``k_j`` (wrapped for quasienergies).
    vecs : (nk, M, M) eigenvectors (columns) in the periodic gauge, so that ``k_nk = k_0``.
    low : (M,) bool, orbitals of the low half of the ribbon.
    halfwidth : window half-width; only levels inside it are followed.

    Returns
    -------
    int (upward minus downward crossings), or ``None`` when the grid is too coarse to follow
    every level near the centre from ``k_j`` to ``k_{j+1}``.
    """
    wlow = np.einsum("kia,kia->ka", vecs.conj(), vecs * low[None, :, None]).real
    nxt = np.roll(vecs, -1, axis=0)
    overlap = np.abs(np.einsum("kia,kib->kab", vecs.conj(), nxt)) ** 2
    partner = np.argmax(overlap, axis=2)
    best = np.take_along_axis(overlap, partner[..., None], axis=2)[..., 0]
    rel_next = np.take_along_axis(np.roll(rel, -1, axis=0), partner, axis=1)
    w_next = np.take_along_axis(np.roll(wlow, -1, axis=0), partner, axis=1)
    cand = (np.abs(rel) < halfwidth) & (wlow > 0.5)
    up = cand & (rel < 0) & (rel_next >= 0)
    down = cand & (rel >= 0) & (rel_next < 0)
    cross = up | down
    lost = cand & (np.abs(rel) < halfwidth / 2) & ((best < 0.5) | (w_next < 0.5)
                                                  | (np.abs(rel_next) >= halfwidth))
    if np.any(lost) or np.any(cross & (np.abs(rel_next) >= halfwidth)):
        return None
    return int(up.sum() - down.sum())


def _edge_modes(spectrum: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]],
                levels_at: Callable[[float], np.ndarray], low: np.ndarray, window: Window,
                nk: int, nk_max: int) -> EdgeModes:
    """Shared ribbon logic; ``spectrum(k) -> (rel (nk, M), vecs (nk, M, M))``."""
    while True:
        k = ribbon_kgrid(nk)
        rel, vecs = spectrum(k)
        count = signed_crossings(rel, vecs, low, window.halfwidth)
        if count is not None or 2 * nk > nk_max:
            break
        nk *= 2
    dist = np.min(np.abs(rel), axis=1)
    j = int(np.argmin(dist))
    step = 2 * np.pi / nk
    res = minimize_scalar(lambda x: float(np.min(np.abs(levels_at(x)))),
                          bounds=(k[j] - step, k[j] + step), method="bounded",
                          options={"xatol": 1e-10})
    edge_gap = 2 * min(float(dist[j]), float(res.fun))
    reason = Reason.OK if count is not None else Reason.NOT_CONVERGED
    return EdgeModes(count, edge_gap, nk, window, reason)


def ribbon_modes(tb: TightBinding, width: int, window: Window, *, open_axis: int = 1,
                 nk: int = 128, nk_max: int = 2048, gap_tol: float = 1e-6) -> EdgeModes:
    """Chiral edge modes and edge gap of a static ribbon at the gap of ``window``.

    Parameters
    ----------
    tb : 2D model; width : ribbon width ``W`` in cells; open_axis : the cut lattice direction.
    window : from :func:`static_window`.
    nk : initial number of ``k_par`` points (doubled up to ``nk_max`` until crossings resolve).
    gap_tol : bulk gaps at or below this give a missing result (``GAP_CLOSED``).
    """
    if window.closed(gap_tol):
        return EdgeModes(None, float("nan"), 0, window, Reason.GAP_CLOSED)
    rb = samples.ribbon(tb, width, open_axis)

    def spectrum(k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        e, v = np.linalg.eigh(rb.bloch(k[:, None]))
        return e - window.centre, v

    def levels_at(x: float) -> np.ndarray:
        return np.linalg.eigvalsh(rb.bloch(np.array([x]))) - window.centre

    return _edge_modes(spectrum, levels_at, _low_half(width, tb.norb), window, nk, nk_max)


def floquet_ribbon_modes(factors: Sequence[tuple[float, TightBinding]], width: int,
                         windows: dict[str, Window], *, open_axis: int = 1, nk: int = 128,
                         nk_max: int = 1024, gap_tol: float = 1e-6) -> dict[str, EdgeModes]:
    """Chiral edge modes and edge gaps of a driven ribbon at quasienergy 0 and ``pi/T``.

    ``U(k_par)`` of the ribbon is the time-ordered product of the steps' ribbon Bloch
    Hamiltonians (:func:`~sweepcli.physics.drive.evolve`, batched over ``k_par``), diagonalised
    by :func:`sweepcli.physics.floquet.unitary_eig`, whose eigenvectors stay orthonormal inside
    degenerate clusters (the overlaps that follow levels from one ``k_par`` to the next need
    that). The period is that of the windows (from :func:`floquet_windows`). Returns
    ``{"0": EdgeModes, "pi": EdgeModes}``; conventions as :func:`ribbon_modes`.
    """
    period = next(iter(windows.values())).period
    ribbons = [(float(t), samples.ribbon(f, width, open_axis)) for t, f in factors]
    low = _low_half(width, factors[0][1].norb)
    cache: dict[int, tuple[np.ndarray, np.ndarray]] = {}

    def operator(k: np.ndarray) -> np.ndarray:
        return evolve([(t, r.bloch(k[:, None])) for t, r in ribbons])

    def eig(k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if k.size not in cache:
            phases, v = qe.unitary_eig(operator(k))
            cache[k.size] = (-phases / period, v)
        return cache[k.size]

    out = {}
    for name, window in windows.items():
        if window.closed(gap_tol):
            out[name] = EdgeModes(None, float("nan"), 0, window, Reason.GAP_CLOSED)
            continue

        def spectrum(k: np.ndarray, c: float = window.centre) -> tuple[np.ndarray, np.ndarray]:
            eps, v = eig(k)
            return qe.wrap_quasienergy(eps - c, period), v

        def levels_at(x: float, c: float = window.centre) -> np.ndarray:
            eps = qe.quasienergy_values(operator(np.array([x])), period)
            return qe.wrap_quasienergy(eps - c, period)

        out[name] = _edge_modes(spectrum, levels_at, low, window, nk, nk_max)
    return out
