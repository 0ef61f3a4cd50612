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

Classification
--------------
Cells of a box sample (chain or flake) within ``corner_size = r`` cells of a face in direction
``i`` (``c_i < r`` or ``c_i >= L_i - r``) are *near* that face. A cell near faces in all ``d``
directions is in a *corner region* (an end region for a chain; ``r x r`` cells at each corner of
a flake), one near some but not all is in an *edge* region, the rest is *bulk*. Corners are
numbered ``sum_i b_i 2^i`` with ``b_i = 1`` at the high end of direction ``i``: for a chain
0 = left (cell 0), 1 = right; for a flake 0 = (low a_1, low a_2), 1 = (high, low), 2 = (low,
high), 3 = (high, high). Every side must have at least ``4 r`` cells, so that an edge state
spread evenly along an edge puts at most ``2 r / L <= 1/2`` of its weight into corner regions
(and a bulk state of a chain at most 1/2 into its end regions).

In-gap levels are grouped into near-degenerate clusters (consecutive levels closer than
``DEGENERACY * half-width``, 0.1). For a cluster with orthonormal basis ``Q`` (``m`` states)
and projector ``P = Q Q^dagger``, the cluster is a corner (end) cluster if
``tr(P Pi_corners) / m > CORNER_WEIGHT`` (0.6), an edge cluster if
``tr(P (Pi_corners + Pi_edges)) / m > CORNER_WEIGHT``, bulk otherwise (``Pi_X`` projects on
the orbitals of region X). With ``P_c`` the projector on all corner clusters (``M`` states)
and ``w_c = tr(P_c Pi_c)`` the weight in corner ``c``, corner ``c`` is credited
``round(M w_c / sum_c' w_c')`` modes: the rounded trace of the projector restricted to that
corner, normalised by the mean corner weight so that the tails of a mode outside its ``r x r``
region do not make it count less than one. All of these are traces of projectors on whole
clusters, hence independent of the basis chosen inside a degenerate subspace; pooling the
clusters keeps a pair of modes split by tunnelling between corners (at ``+-delta``) together
even when ``2 delta`` exceeds the degeneracy tolerance.

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

from . import floquet as fl
from . import samples
from .drive import Drive, Slicing, decide_slicing, evolve
from .lattice import TightBinding
from .point import Reason
from .spectrum import band_edges, band_gap

WINDOW_FRACTION = 0.5
CORNER_SIZE = 3
CORNER_WEIGHT = 0.6
DEGENERACY = 0.1
#: Each side of a box sample must be at least this many corner sizes.
MIN_SIDE = 4
#: Fixed seed of the Lanczos start vector, so that sparse results are reproducible.
V0_SEED = 20240601
#: Shift of the shift-invert point off the gap centre, in units of the window half-width:
#: chiral-symmetric samples with an odd number of orbitals have an exact zero mode, where the
#: factorisation of ``H - sigma`` would be singular.
SIGMA_OFFSET = 1e-3 * (math.sqrt(5) - 1)
#: Offset of the ribbon k grid, in grid steps: irrational, so that high-symmetry momenta, where
#: branches of opposite edges cross the gap centre together, are never grid points.
K_OFFSET = (math.sqrt(5) - 1) / 2
KIND_NAMES = ("bulk", "edge", "corner")


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
        Modes credited to each corner (each end of a chain), numbered as in the module docstring.
    total : ``per_corner.sum()``, or ``None``.
    levels : (m,) float
        In-window levels relative to the window centre (energy), ascending.
    kinds : (m,) int
        Class of each level's cluster: 0 bulk, 1 edge, 2 corner (end).
    method : ``"dense"`` or ``"sparse"`` (``""`` if nothing was computed).
    window : the window used.
    reason : :class:`Reason`.
    """

    per_corner: np.ndarray | None
    total: int | None
    levels: np.ndarray = field(default_factory=lambda: np.zeros(0))
    kinds: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    method: str = ""
    window: Window | None = None
    reason: Reason = Reason.OK


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
                    gaps: fl.FloquetGaps | None = None, slicing: Slicing | None = None
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
        mesh = fl.floquet_mesh(drive, fl.GAP_KMESH, drive.dim,
                               slicing if slicing is not None else decide_slicing(drive))
        gaps = fl.floquet_gaps(drive, mesh)
    period = drive.period
    out = {}
    for name, gap, centre in (("0", gaps.gap_0, 0.0), ("pi", gaps.gap_pi, np.pi / period)):
        out[name] = Window(centre, fraction * gap / 2 if gap > 0 else float("nan"), gap, period)
    return out


# ----------------------------------------------------------------------------------------------
# Regions and classification
# ----------------------------------------------------------------------------------------------

def check_region_size(shape: Sequence[int], corner_size: int) -> None:
    """Raise ``ValueError`` unless every side has at least ``MIN_SIDE * corner_size`` cells."""
    shape = tuple(int(x) for x in shape)
    r = int(corner_size)
    if r < 1:
        raise ValueError(f"corner_size must be at least 1 cell; got {r}")
    if min(shape) < MIN_SIDE * r:
        raise ValueError(
            f"sample of {' x '.join(map(str, shape))} cells is too small for corner regions of "
            f"{r} cells: each side needs at least {MIN_SIDE * r} cells ({MIN_SIDE} x corner_size), "
            f"so that an edge or bulk state cannot put more than half its weight into them")


def regions(cells: np.ndarray, shape: Sequence[int], corner_size: int = CORNER_SIZE
            ) -> tuple[np.ndarray, np.ndarray]:
    """Region of every orbital of a box sample.

    Parameters
    ----------
    cells : (N, d) int, from :func:`sweepcli.physics.samples.sample_sites`.
    shape : (d,) box size in cells.
    corner_size : ``r``, cells counted from each face (module docstring).

    Returns
    -------
    kind : (N,) int -- 0 bulk, 1 edge, 2 corner (end).
    corner : (N,) int -- corner number ``sum_i b_i 2^i`` in a corner region, else -1.

    Raises
    ------
    ValueError (:func:`check_region_size`) if the sample is too small for the regions.
    """
    check_region_size(shape, corner_size)
    shape = tuple(int(x) for x in shape)
    r = int(corner_size)
    cells = np.asarray(cells)
    high = cells >= np.asarray(shape) - r
    near = (cells < r) | high
    nnear = near.sum(axis=1)
    d = len(shape)
    kind = np.where(nnear == d, 2, np.where(nnear > 0, 1, 0))
    corner = np.where(nnear == d, (high * (2 ** np.arange(d))).sum(axis=1), -1)
    return kind, corner


def classify(levels: np.ndarray, vectors: np.ndarray, kind: np.ndarray, corner: np.ndarray,
             ncorner: int, halfwidth: float) -> tuple[np.ndarray, np.ndarray]:
    """Credit in-window levels to corners (module docstring).

    Parameters
    ----------
    levels : (m,) in-window levels relative to the window centre.
    vectors : (N, m) their eigenvectors (columns; orthonormalised here within each cluster).
    kind, corner : from :func:`regions`.
    ncorner : number of corners, ``2**d``.
    halfwidth : window half-width (sets the degeneracy tolerance).

    Returns
    -------
    per_corner : (ncorner,) int
    kinds : (m,) int, class of each level's cluster, in the order of ``levels``.
    """
    order = np.argsort(levels, kind="stable")
    kinds = np.zeros(levels.size, dtype=int)
    if levels.size == 0:
        return np.zeros(ncorner, dtype=int), kinds
    breaks = np.flatnonzero(np.diff(levels[order]) > DEGENERACY * halfwidth) + 1
    in_corner = kind == 2
    near_face = kind >= 1
    weight = np.zeros(ncorner)  # tr(P_corner Pi_c), P_corner = all corner clusters
    states = 0
    for members in np.split(order, breaks):
        q, _ = np.linalg.qr(vectors[:, members])
        w = np.sum(np.abs(q) ** 2, axis=1)  # diagonal of the cluster projector
        m = members.size
        if w[in_corner].sum() / m > CORNER_WEIGHT:
            kinds[members] = 2
            weight += np.bincount(corner[in_corner], weights=w[in_corner], minlength=ncorner)
            states += m
        elif w[near_face].sum() / m > CORNER_WEIGHT:
            kinds[members] = 1
    if states == 0:
        return np.zeros(ncorner, dtype=int), kinds
    return np.rint(states * weight / weight.sum()).astype(int), kinds


# ----------------------------------------------------------------------------------------------
# Static samples
# ----------------------------------------------------------------------------------------------

def _v0(n: int) -> np.ndarray:
    rng = np.random.default_rng(V0_SEED)
    return rng.standard_normal(n) + 1j * rng.standard_normal(n)


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
        e, v = e[inside], v[:, inside]
    else:
        # Only the in-window eigenvectors are computed (MRRR), 3-4x faster than all of them.
        e, v = sla.eigh(h.toarray(), subset_by_value=(c - hw, c + hw), driver="evr")
    e = e - c
    order = np.argsort(e)
    return e[order], v[:, order]


def box_modes(tb: TightBinding, shape: Sequence[int], window: Window, *,
              corner_size: int = CORNER_SIZE, method: str = "auto",
              memory_limit: float | None = None, gap_tol: float = 1e-6) -> ModeCount:
    """End (chain) or corner (flake) modes of a static open box sample in ``window``.

    Parameters
    ----------
    tb : the model; shape : box size in cells, one entry per lattice direction.
    window : from :func:`static_window`.
    corner_size, method, memory_limit : see module docstring and
        :func:`sweepcli.physics.samples.choose_method`.
    gap_tol : a bulk gap at or below this leaves the result missing (``GAP_CLOSED``).

    Raises
    ------
    ValueError for a sample too small for the corner regions or too large for memory, before
    any matrix is built.
    """
    shape = tuple(int(x) for x in shape)
    check_region_size(shape, corner_size)
    method = samples.choose_method(tb, shape, method, limit=memory_limit)
    kind, corner = regions(samples.sample_sites(tb, shape)[0], shape, corner_size)
    if window.closed(gap_tol):
        return ModeCount(None, None, method=method, window=window, reason=Reason.GAP_CLOSED)
    h = samples.open_hamiltonian(tb, shape)
    try:
        levels, vectors = static_levels(h, window, method)
    except ArpackNoConvergence:
        return ModeCount(None, None, method=method, window=window, reason=Reason.NOT_CONVERGED)
    per_corner, kinds = classify(levels, vectors, kind, corner, 2 ** len(shape), window.halfwidth)
    return ModeCount(per_corner, int(per_corner.sum()), levels, kinds, method, window)


# ----------------------------------------------------------------------------------------------
# Driven samples
# ----------------------------------------------------------------------------------------------

def _wrap(x: np.ndarray, period: float) -> np.ndarray:
    """Quasienergy differences reduced to ``(-pi/T, pi/T]`` (:func:`fl.wrap_quasienergy`)."""
    return fl.wrap_quasienergy(x, period)


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
                      windows: dict[str, Window], *, corner_size: int = CORNER_SIZE,
                      method: str = "auto", memory_limit: float | None = None,
                      gap_tol: float = 1e-6) -> dict[str, ModeCount]:
    """End or corner modes of a driven open box sample at quasienergy 0 and ``pi/T``.

    Parameters as :func:`box_modes`; ``factors`` are ``(duration, TightBinding)`` steps in time
    order and ``windows`` come from :func:`floquet_windows`. Returns ``{"0": ..., "pi": ...}``.
    """
    tb0 = factors[0][1]
    shape = tuple(int(x) for x in shape)
    check_region_size(shape, corner_size)
    method = samples.choose_method(tb0, shape, method, driven=True, limit=memory_limit)
    kind, corner = regions(samples.sample_sites(tb0, shape)[0], shape, corner_size)
    steps = None
    out = {}
    for name, window in windows.items():
        if window.closed(gap_tol):
            out[name] = ModeCount(None, None, method=method, window=window,
                                  reason=Reason.GAP_CLOSED)
            continue
        steps = sample_steps(factors, shape) if steps is None else steps
        try:
            levels, vectors = floquet_levels(steps, window, method)
        except ArpackNoConvergence:
            out[name] = ModeCount(None, None, method=method, window=window,
                                  reason=Reason.NOT_CONVERGED)
            continue
        per_corner, kinds = classify(levels, vectors, kind, corner, 2 ** len(shape),
                                     window.halfwidth)
        out[name] = ModeCount(per_corner, int(per_corner.sum()), levels, kinds, method, window)
    return out


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
            phases, v = fl.unitary_eig(operator(k))
            cache[k.size] = (-phases / period, v)
        return cache[k.size]

    out = {}
    for name, window in windows.items():
        if window.closed(gap_tol):
            out[name] = EdgeModes(None, float("nan"), 0, window, Reason.GAP_CLOSED)
            continue

        def spectrum(k: np.ndarray, c: float = window.centre) -> tuple[np.ndarray, np.ndarray]:
            eps, v = eig(k)
            return fl.wrap_quasienergy(eps - c, period), v

        def levels_at(x: float, c: float = window.centre) -> np.ndarray:
            eps = fl.quasienergy_values(operator(np.array([x])), period)
            return fl.wrap_quasienergy(eps - c, period)

        out[name] = _edge_modes(spectrum, levels_at, low, window, nk, nk_max)
    return out
