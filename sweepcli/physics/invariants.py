"""Topological invariants of gapped Bloch bands, with a convergence policy on the k-mesh.

Pure functions. The kernels (:func:`fhs_chern`, :func:`det_winding`) take batched eigenvector
or matrix arrays, so they serve any unitary or Hermitian family (Floquet eigenvectors
included); the drivers (:func:`chern_number`, :func:`winding_number`,
:func:`spin_chern_number`) build those arrays from a :class:`TightBinding` and refine the mesh
until the answer is trustworthy, or say that it is not.

Sign conventions
----------------
* Chern number: ``C = (1/2 pi) int dk_1 dk_2 Omega_12`` with the Berry curvature
  ``Omega_12 = i (<d_1 u|d_2 u> - <d_2 u|d_1 u>)`` (connection ``A = i <u|d u>``) in reduced
  momenta, which for a right-handed lattice is the Cartesian orientation. For the lower band of
  ``H = d(k).sigma`` this is ``C = (1/4 pi) int d_hat . (d_1 d_hat x d_2 d_hat)``, the degree of
  ``d_hat``. On the mesh (Fukui, Hatsugai and Suzuki, J. Phys. Soc. Jpn. 74, 1674 (2005)) the
  link variable is ``U_mu(k) = det(V(k)^+ V(k + e_mu)) / |.|``, the plaquette phase
  ``F = arg(U_1(k) U_2(k + e_1) / (U_1(k + e_2) U_2(k)))`` in ``(-pi, pi]``, and
  ``C = -(1/2 pi) sum F`` (the phase of a closed overlap loop is minus the enclosed Berry
  flux).
* 1D winding: with the chiral operator ``G`` (Hermitian, ``G^2 = 1``) and ``P_+-`` its
  eigenspaces, ``h(k) = P_- H(k) P_+`` (the block from the +1 sector into the -1 sector) and
  ``nu = (1/2 pi i) oint dk d/dk log det h(k)``. For SSH with ``G = sigma_z`` and basis (A, B),
  ``h = H_BA = v + w e^{ik}`` and ``nu = +1`` for ``|v| < |w|`` (Asboth, Oroszlany and Palyi
  2016, ch. 1).
* Spin Chern number (Prodan, PRB 80, 125327 (2009)): the occupied projector ``P``, the spin
  ``S``; the eigenvectors of ``P S P`` inside the occupied space split by the sign of their
  eigenvalue into "up" and "down" bundles, ``C_s = (C_up - C_down)/2``.

Convergence policy (Chern and spin Chern)
-----------------------------------------
The FHS sum is an integer on any mesh; on one too coarse for the gap it is usually a wrong 0.
The first mesh has ``max(kmesh, ceil(3.2 / sqrt(gap / 2)))`` points per direction (a rule that
was found sufficient in this project, common practice, no published source). On each mesh,
plaquettes whose flux is at or above ``flux_tol`` are subdivided locally (below); the answer is
accepted when every elementary plaquette of two successive meshes (each ~1.5x the previous) is
below ``flux_tol`` and both give the same integer. Meshes are raised up to ``max_kmesh``;
otherwise the result is missing with :attr:`Reason.NOT_CONVERGED`. A gap below ``gap_tol``
gives :attr:`Reason.GAP_CLOSED` without any mesh being built.

Why plaquettes are subdivided, and why that is as safe as a finer uniform mesh: near a
transition a massive Dirac cone (mass ``m``, velocity ``v``) carries a Berry flux ``pi`` inside
a disc of radius ~``m / v``. The gap rule asks for ``N ~ gap^-1/2``, which puts the whole
disc inside one plaquette (or shares it among the plaquettes at one vertex): that plaquette's
phase is ``pi (1 - O(m / (v dk)))``, above any useful bound, and a uniform mesh resolves it only
for ``N ~ v / m ~ 1/gap`` (about 400-600 points for the Haldane demo's gaps ~0.01, beyond
``max_kmesh``). The loop around a plaquette equals the product of the loops around its
``s x s`` sub-plaquettes (every inner link is traversed once in each direction, and
``U(k -> k') U(k' -> k) = 1`` after normalisation) times four thin cells, one per edge, between
the direct link and the path of sub-links along that edge (the neighbouring plaquette still
uses the direct link). The phases of these cells therefore add up to the plaquette's phase
modulo ``2 pi``, and substituting them keeps the total an integer: it is the FHS sum of a
conforming non-uniform mesh in which every link bounds exactly two cells. Where each of these
cells is below ``flux_tol`` this resolves the flux that a single phase in ``(-pi, pi]`` cannot;
the acceptance evidence (every elementary cell below the bound, two meshes agree) is
unchanged, only the mesh is finer where the curvature is concentrated. Subdivision is by
:data:`SUBDIVIDE` per level for at most :data:`SUBDIVIDE_LEVELS` levels, and only when at most
:data:`MAX_HOT` plaquettes are above the bound (more means the whole mesh is too coarse, so the
next mesh is taken).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np

from ..schema import Reason
from .lattice import TightBinding, kmesh
from .spectrum import band_gap

#: Largest accepted plaquette Berry flux (rad). A flux near pi means the curvature of one
#: plaquette is not resolved and the plaquette's phase may have wrapped.
FLUX_TOL = 1.0
#: Subdivision per direction of a plaquette above the flux bound, per level, and the number of
#: levels (up to 4**4 = 256 times finer locally).
SUBDIVIDE = 4
SUBDIVIDE_LEVELS = 4
#: Most plaquettes of one mesh that are subdivided; a mesh with more is too coarse as a whole.
MAX_HOT = 32
#: Largest accepted phase step of det h(k) between neighbouring k points of a 1D mesh (rad).
PHASE_TOL = 1.0
#: Mesh growth factor between the two meshes that must agree (2D).
GROWTH = 1.5
#: Default uniform mesh of the gap search that sets the first mesh.
GAP_KMESH = 64
#: Default first meshes.
CHERN_KMESH = 24
WINDING_KMESH = 64
#: Default largest meshes.
CHERN_MAX_KMESH = 256
WINDING_MAX_KMESH = 8192


@dataclass(frozen=True)
class InvariantResult:
    """An integer invariant with its evidence.

    Attributes
    ----------
    value : the invariant, ``None`` when ill-defined (``reason`` says why).
    kmesh : points per direction of the finest mesh used (``None`` if none was built).
    max_step : largest plaquette flux (2D) or phase step (1D) on that mesh, rad (nan if none).
    reason : :class:`Reason`.
    """

    value: int | None
    kmesh: int | None
    max_step: float
    reason: Reason


@dataclass(frozen=True)
class SpinChernResult:
    """Spin Chern number ``(C_up - C_down)/2`` (a half-integer when ``C_up + C_down`` is odd).

    Attributes
    ----------
    spin_chern : float or nan.
    c_up, c_down : the two sector Chern numbers, or ``None``.
    z2 : ``spin_chern mod 2`` when ``spin_chern`` is an integer, else ``None``; meaningful as
        the Kane-Mele index only with time-reversal symmetry (``c_up + c_down = 0``).
    spin_gap : ``min_k min |eig(P S P)|`` over the occupied space on the finest mesh
        (dimensionless, 0..1; nan if no mesh was built).
    kmesh, max_flux, reason : as in :class:`InvariantResult`.
    """

    spin_chern: float
    c_up: int | None
    c_down: int | None
    z2: int | None
    spin_gap: float
    kmesh: int | None
    max_flux: float
    reason: Reason


# --------------------------------------------------------------------------------------------
# Kernels on batched arrays


def _unit(z: np.ndarray) -> np.ndarray:
    """``z / |z|``, with 0 mapped to 0 (whose phase then reads as 0; see :func:`fhs_chern`)."""
    a = np.abs(z)
    return np.divide(z, a, out=np.zeros_like(z), where=a > 0)


def _det(a: np.ndarray) -> np.ndarray:
    """Determinants of a stack ``(..., m, m)``; closed forms for m <= 2 (much faster on stacks)."""
    m = a.shape[-1]
    if m == 1:
        return a[..., 0, 0]
    if m == 2:
        return a[..., 0, 0] * a[..., 1, 1] - a[..., 0, 1] * a[..., 1, 0]
    return np.linalg.det(a)


def grid_plaquette_phases(vectors: np.ndarray) -> np.ndarray:
    """Plaquette phases of the Fukui-Hatsugai-Suzuki lattice field strength on an open grid.

    Parameters
    ----------
    vectors : (..., A, B, n, m) complex
        ``m`` orthonormal column vectors spanning the subspace at each point of an ``A x B``
        grid of momenta (any gauge; the grid does not wrap around).

    Returns
    -------
    (..., A - 1, B - 1) float
        ``F = arg[U_1(k) U_2(k + e_1) conj(U_1(k + e_2)) conj(U_2(k))]`` in ``(-pi, pi]``,
        ``U_mu = det(V(k)^+ V(k + e_mu)) / |.|``. ``-F`` is the Berry flux through the plaquette
        at lowest order. A vanishing overlap determinant (a subspace that rotates by 90 degrees
        between neighbours) is reported as a flux of ``pi`` so that it can never pass a
        convergence threshold.
    """
    v = np.asarray(vectors)
    vh = np.conj(np.swapaxes(v, -1, -2))
    u1 = _det(vh[..., :-1, :, :, :] @ v[..., 1:, :, :, :])  # links along the first axis
    u2 = _det(vh[..., :, :-1, :, :] @ v[..., :, 1:, :, :])  # links along the second axis
    s1, s2 = np.abs(u1) < 1e-12, np.abs(u2) < 1e-12
    singular = s1[..., :, :-1] | s1[..., :, 1:] | s2[..., :-1, :] | s2[..., 1:, :]
    u1, u2 = _unit(u1), _unit(u2)
    loop = u1[..., :, :-1] * u2[..., 1:, :] * np.conj(u1[..., :, 1:]) * np.conj(u2[..., :-1, :])
    return np.where(singular, np.pi, np.angle(loop))


def fhs_plaquette_phases(vectors: np.ndarray) -> np.ndarray:
    """Plaquette phases of the Fukui-Hatsugai-Suzuki lattice field strength on a periodic mesh.

    Parameters
    ----------
    vectors : (N1, N2, n, m) complex
        At each point ``k = 2 pi (j1/N1, j2/N2)`` of a periodic mesh, ``m`` orthonormal column
        vectors spanning the subspace (any gauge; the mesh wraps around in both directions).

    Returns
    -------
    (N1, N2) float
        The phases of :func:`grid_plaquette_phases`, plaquette ``(j1, j2)`` having its lower
        corner at mesh point ``(j1, j2)``.
    """
    v = np.asarray(vectors)
    v = np.concatenate([v, v[:1]], axis=0)
    return grid_plaquette_phases(np.concatenate([v, v[:, :1]], axis=1))


def fhs_chern(vectors: np.ndarray) -> tuple[int, float]:
    """Chern number of a subspace sampled on a periodic 2D mesh (Fukui, Hatsugai, Suzuki 2005).

    Parameters
    ----------
    vectors : (N1, N2, n, m) complex
        Orthonormal columns spanning the (multi-band) subspace at each mesh point; see
        :func:`fhs_plaquette_phases`.

    Returns
    -------
    chern : int
        ``-(1/2 pi) sum_plaquettes F``, the convention of the module docstring (the lower band
        of ``d.sigma`` gets the degree of ``d_hat``). Exactly an integer up to rounding.
    max_flux : float
        ``max |F|`` over the plaquettes (rad); the mesh resolves the curvature only if this is
        well below pi.
    """
    f = fhs_plaquette_phases(vectors)
    total = -f.sum() / (2 * np.pi)
    return int(round(total)), float(np.max(np.abs(f)))


def fhs_edge_phases(vectors: np.ndarray) -> np.ndarray:
    """Phase between the direct link and the path of links along a subdivided mesh edge.

    Parameters
    ----------
    vectors : (..., s + 1, n, m) complex
        Orthonormal columns at the points ``p_0 .. p_s`` along an edge, in order.

    Returns
    -------
    (...,) float
        ``arg[U(p_0 -> p_s) prod_l conj(U(p_l -> p_{l+1}))]`` in ``(-pi, pi]``: the loop of the
        thin cell between the coarse edge and its subdivision, a plaquette phase in the sense of
        :func:`grid_plaquette_phases` (``pi`` if a link vanishes).
    """
    v = np.asarray(vectors)
    vh = np.conj(np.swapaxes(v, -1, -2))
    fine = _det(vh[..., :-1, :, :] @ v[..., 1:, :, :])
    direct = _det(vh[..., 0, :, :] @ v[..., -1, :, :])
    singular = (np.abs(direct) < 1e-12) | np.any(np.abs(fine) < 1e-12, axis=-1)
    loop = _unit(direct) * np.prod(np.conj(_unit(fine)), axis=-1)
    return np.where(singular, np.pi, np.angle(loop))


def subdivided_plaquette_phases(vectors: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A plaquette's phase split into its sub-plaquettes and the cells along its edges.

    Parameters
    ----------
    vectors : (..., s + 1, s + 1, n, m) complex
        The subspace on the ``(s + 1) x (s + 1)`` grid that subdivides the plaquette (first
        axis along ``e_1``, second along ``e_2``).

    Returns
    -------
    sub : (..., s, s) float
        :func:`grid_plaquette_phases` of the sub-plaquettes.
    edges : (..., 4) float
        :func:`fhs_edge_phases` of the edges in the plaquette's orientation (along ``e_1`` at
        the bottom, ``e_2`` on the right, then back along the top and the left), signed so
        that ``sum(sub) + sum(edges)`` equals the plaquette's own phase modulo ``2 pi``: the
        coarse loop is the product of the sub-plaquette loops (every inner link is traversed
        once each way and cancels) times the four edge cells.
    """
    v = np.asarray(vectors)
    edges = np.stack([fhs_edge_phases(v[..., :, 0, :, :]), fhs_edge_phases(v[..., -1, :, :, :]),
                      -fhs_edge_phases(v[..., :, -1, :, :]), -fhs_edge_phases(v[..., 0, :, :, :])],
                     axis=-1)
    return grid_plaquette_phases(v), edges


def fhs_chern_subdivided(subspace: Callable[[np.ndarray], np.ndarray], n: int,
                         flux_tol: float, vectors: np.ndarray | None = None
                         ) -> tuple[int, float]:
    """Chern number on an ``n x n`` mesh whose plaquettes above ``flux_tol`` are subdivided.

    Parameters
    ----------
    subspace : callable
        ``subspace(k)`` for reduced momenta ``k`` of shape ``(..., 2)`` returns orthonormal
        columns ``(..., n_orb, m)`` spanning the subspace there.
    n : points per direction of the periodic base mesh ``2 pi j / n``.
    flux_tol : plaquettes with ``|F| >= flux_tol`` (rad) are divided into
        :data:`SUBDIVIDE` x :data:`SUBDIVIDE` sub-plaquettes, recursively up to
        :data:`SUBDIVIDE_LEVELS` levels, if the base mesh has at most :data:`MAX_HOT` of them.
    vectors : (n, n, n_orb, m), optional
        ``subspace`` on the base mesh, if already computed.

    Returns
    -------
    chern : int
        ``-(1/2 pi)`` times the sum of the phases of all elementary cells (sign of
        :func:`fhs_chern`); a subdivided plaquette contributes its sub-plaquettes and edge cells
        (:func:`subdivided_plaquette_phases`), which add up to its own phase modulo ``2 pi``.
    max_flux : float
        Largest ``|F|`` over the elementary cells (rad); at or above ``flux_tol`` when a
        plaquette could not be resolved.
    """
    v = subspace(kmesh(n, 2)) if vectors is None else vectors
    f = fhs_plaquette_phases(v)
    hot = np.abs(f) >= flux_tol
    if not hot.any() or hot.sum() > MAX_HOT:
        return int(round(-f.sum() / (2 * np.pi))), float(np.max(np.abs(f)))
    total = float(f[~hot].sum())
    max_flux = float(np.max(np.abs(f[~hot]), initial=0.0))
    corners = 2 * np.pi * np.argwhere(hot) / n  # (P, 2) lower corners of the hot plaquettes
    h = 2 * np.pi / n
    for _ in range(SUBDIVIDE_LEVELS):
        t = h * np.arange(SUBDIVIDE + 1) / SUBDIVIDE
        pts = corners[:, None, None, :] + np.stack(np.meshgrid(t, t, indexing="ij"), axis=-1)
        sub, edges = subdivided_plaquette_phases(subspace(pts))  # (P, s, s), (P, 4)
        hot = np.abs(sub) >= flux_tol
        total += float(sub[~hot].sum() + edges.sum())
        max_flux = max(max_flux, float(np.max(np.abs(sub[~hot]), initial=0.0)),
                       float(np.max(np.abs(edges))))
        corners, h = pts[:, :-1, :-1][hot], h / SUBDIVIDE
        if not hot.any():
            return int(round(-total / (2 * np.pi))), max_flux
    # Unresolved at the finest level: the uniform answer, with a flux that fails the bound.
    return int(round(-f.sum() / (2 * np.pi))), max(max_flux, float(np.max(np.abs(sub))))


def chiral_eigenbasis(chiral: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Orthonormal eigenbases of the -1 and +1 eigenspaces of a chiral operator.

    Parameters
    ----------
    chiral : (n, n) Hermitian with eigenvalues +-1, as many of each.

    Returns
    -------
    minus, plus : (n, n/2) complex
        Columns spanning the -1 and the +1 eigenspace (from :func:`numpy.linalg.eigh`; another
        choice changes the determinant of a block ``minus^+ X plus`` by a k-independent phase).

    Raises
    ------
    ValueError
        If ``chiral`` does not square to the identity or its eigenvalues are not balanced.
    """
    g = np.asarray(chiral, dtype=complex)
    w, u = np.linalg.eigh(g)
    if not np.allclose(np.abs(w), 1.0, atol=1e-10):
        raise ValueError("the chiral operator must square to the identity")
    nminus = int(np.sum(w < 0))
    if 2 * nminus != g.shape[0]:
        raise ValueError("the chiral operator needs as many +1 as -1 eigenvalues for a gap at 0")
    return u[:, :nminus], u[:, nminus:]


def chiral_blocks(h: np.ndarray, chiral: np.ndarray) -> np.ndarray:
    """Off-diagonal block ``h = P_- H P_+`` of chiral-symmetric matrices.

    Parameters
    ----------
    h : (..., n, n) Hermitian, anticommuting with ``chiral``.
    chiral : (n, n) Hermitian with eigenvalues +-1, as many of each.

    Returns
    -------
    (..., n/2, n/2) complex
        Rows in the -1 eigenbasis of ``chiral``, columns in the +1 eigenbasis
        (:func:`chiral_eigenbasis`).
    """
    um, up = chiral_eigenbasis(chiral)
    return np.conj(um.T) @ h @ up


def det_winding(blocks: np.ndarray) -> tuple[int, float]:
    """Winding number of ``det`` of a loop of square matrices sampled at ``k = 2 pi j / N``.

    Parameters
    ----------
    blocks : (N, r, r) complex, the loop ``h(k_j)``; the point after the last is the first.

    Returns
    -------
    winding : int
        ``(1/2 pi) sum_j arg(det h(k_{j+1}) / det h(k_j))``, counterclockwise positive.
    max_step : float
        Largest ``|arg|`` increment (rad); ``pi`` if a determinant vanishes. The sum is the
        continuum winding only if each step is well below pi.
    """
    d = _det(blocks)
    if np.any(np.abs(d) <= 1e-14 * np.max(np.abs(d))):
        return 0, float(np.pi)
    steps = np.angle(np.roll(d, -1) * np.conj(d))
    return int(round(steps.sum() / (2 * np.pi))), float(np.max(np.abs(steps)))


def prodan_sectors(vectors: np.ndarray, spin: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Split an occupied subspace by the sign of the projected spin ``P S P``.

    Parameters
    ----------
    vectors : (..., n, m) orthonormal occupied columns.
    spin : (n, n) Hermitian.

    Returns
    -------
    up : (..., n, m_up), down : (..., n, m - m_up)
        Orthonormal columns spanning the positive and negative eigenspaces of ``P S P`` in the
        occupied space; ``m_up`` is the number of positive eigenvalues at the first point.
    eigs : (..., m) the eigenvalues of ``V^+ S V``, ascending. The split is valid only if
        their signs are the same at every point (check ``eigs``).
    """
    vh = np.conj(np.swapaxes(vectors, -1, -2))
    w, x = np.linalg.eigh(vh @ spin @ vectors)
    ndown = int(np.sum(w.reshape(-1, w.shape[-1])[0] < 0))
    rotated = vectors @ x
    return rotated[..., ndown:], rotated[..., :ndown], w


# --------------------------------------------------------------------------------------------
# Drivers with the convergence policy


class _SectorGapClosed(Exception):
    """Raised inside a mesh walk when the projected-spin spectrum is not gapped at zero."""


def gap_rule_kmesh(gap: float) -> int:
    """Mesh ``ceil(3.2 / sqrt(gap / 2))`` (points per direction) found sufficient here for a gap."""
    return int(math.ceil(3.2 / math.sqrt(gap / 2.0)))


def mesh_sequence(start: int, max_kmesh: int, growth: float) -> Iterator[int]:
    """``start, ~growth*start, ...`` strictly increasing, ending with ``max_kmesh`` at most."""
    n = start
    while n <= max_kmesh:
        yield n
        if n == max_kmesh:
            return
        n = min(max(int(math.ceil(growth * n)), n + 1), max_kmesh)


def _gap_of(tb: TightBinding, nocc: int, gap: float | None) -> float:
    if not 0 < nocc < tb.norb:
        raise ValueError(f"an invariant of {nocc} occupied bands needs 0 < nocc < {tb.norb}")
    return band_gap(tb, nocc, GAP_KMESH).gap if gap is None else gap


def chern_number(tb: TightBinding, nocc: int, *, gap: float | None = None, gap_tol: float = 1e-6,
                 kmesh_n: int = CHERN_KMESH, max_kmesh: int = CHERN_MAX_KMESH,
                 flux_tol: float = FLUX_TOL) -> InvariantResult:
    """Chern number of the ``nocc`` lowest bands of a 2D model, with the convergence policy.

    Parameters
    ----------
    tb : 2D model.
    nocc : number of occupied bands (``0 < nocc < norb``).
    gap : direct gap above the occupied bands (energy units); computed with
        :func:`~sweepcli.physics.spectrum.band_gap` when ``None``.
    gap_tol : gaps below this count as closed.
    kmesh_n : smallest first mesh; the gap rule may raise it.
    max_kmesh : largest mesh per direction.
    flux_tol : largest accepted plaquette flux (rad).

    Returns
    -------
    InvariantResult
        ``value`` the Chern number (module-docstring sign), ``max_step`` the largest plaquette
        flux on the finest mesh used.
    """
    if tb.dim != 2:
        raise ValueError("the Chern number needs a 2D model")
    gap = _gap_of(tb, nocc, gap)
    if not gap >= gap_tol:
        return InvariantResult(None, None, math.nan, Reason.GAP_CLOSED)

    def occupied(k: np.ndarray) -> np.ndarray:
        return np.linalg.eigh(tb.bloch(k))[1][..., :nocc]

    def measure(n: int) -> tuple[tuple[int, ...], float]:
        c, f = fhs_chern_subdivided(occupied, n, flux_tol)
        return (c,), f

    value, n, step, reason = _converge(measure, max(kmesh_n, gap_rule_kmesh(gap)), max_kmesh,
                                       GROWTH, flux_tol)
    return InvariantResult(None if value is None else value[0], n, step, reason)


def _converge(measure, start: int, max_kmesh: int, growth: float, tol: float):
    """Walk up the meshes until two successive ones are below ``tol`` and agree.

    ``measure(n) -> (values tuple, max_step)``. Returns ``(values or None, last n or None,
    last max_step, reason)``.
    """
    prev = None
    last_n, last_step = None, math.nan
    for n in mesh_sequence(start, max_kmesh, growth):
        values, step = measure(n)
        last_n, last_step = n, step
        ok = step < tol
        if ok and prev is not None and prev == values:
            return values, n, step, Reason.OK
        prev = values if ok else None
    return None, last_n, last_step, Reason.NOT_CONVERGED


def winding_number(tb: TightBinding, chiral: np.ndarray, *, gap: float | None = None,
                   gap_tol: float = 1e-6, kmesh_n: int = WINDING_KMESH,
                   max_kmesh: int = WINDING_MAX_KMESH, phase_tol: float = PHASE_TOL
                   ) -> InvariantResult:
    """Winding number of a chiral-symmetric 1D chain (gap at zero energy, half filling).

    Parameters
    ----------
    tb : 1D model whose ``H(k)`` anticommutes with ``chiral``.
    chiral : (n, n) chiral operator, Hermitian, ``chiral^2 = 1``, traceless.
    gap : gap at zero energy (between bands ``n/2 - 1`` and ``n/2``); computed if ``None``.
    gap_tol : gaps below this count as closed.
    kmesh_n : first mesh; doubled while the largest phase step of ``det h`` is above
        ``phase_tol`` or the last two meshes disagree, up to ``max_kmesh``.
    phase_tol : largest accepted phase step (rad).

    Returns
    -------
    InvariantResult
        ``value`` the winding of ``det h(k)``, ``h = P_- H P_+`` (module docstring: SSH gives
        +1 for ``|v| < |w|``); ``max_step`` the largest phase step on the finest mesh.
    """
    if tb.dim != 1:
        raise ValueError("the winding number needs a 1D model")
    chiral = np.asarray(chiral, dtype=complex)
    gap = _gap_of(tb, tb.norb // 2, gap)
    if not gap >= gap_tol:
        return InvariantResult(None, None, math.nan, Reason.GAP_CLOSED)

    def measure(n: int) -> tuple[tuple[int, ...], float]:
        h = tb.bloch(kmesh(n, 1))
        if n == kmesh_n:
            violation = np.max(np.abs(chiral @ h + h @ chiral))
            if violation > 1e-8 * max(1.0, float(np.max(np.abs(h)))):
                raise ValueError(f"H(k) does not anticommute with the chiral operator "
                                 f"(|{{G, H}}| up to {violation:.3g})")
        w, step = det_winding(chiral_blocks(h, chiral))
        return (w,), step

    value, n, step, reason = _converge(measure, kmesh_n, max_kmesh, 2.0, phase_tol)
    return InvariantResult(None if value is None else value[0], n, step, reason)


def spin_chern_number(tb: TightBinding, nocc: int, spin: np.ndarray, *, gap: float | None = None,
                      gap_tol: float = 1e-6, spin_gap_tol: float = 1e-3,
                      kmesh_n: int = CHERN_KMESH, max_kmesh: int = CHERN_MAX_KMESH,
                      flux_tol: float = FLUX_TOL) -> SpinChernResult:
    """Spin Chern number of the occupied bands by Prodan's projected-spin method.

    Parameters
    ----------
    tb : 2D model.
    nocc : number of occupied bands.
    spin : (n, n) Hermitian cell operator (e.g. ``tau_0 sigma_z``); need not commute with H.
    gap, gap_tol, kmesh_n, max_kmesh, flux_tol : as in :func:`chern_number`; both sector
        Chern numbers must pass the flux bound and agree between two successive meshes.
    spin_gap_tol : the spin gap ``min |eig(P S P)|`` (dimensionless) below which the two
        sectors are not separated: :attr:`Reason.SECTOR_GAP_CLOSED`. A change of the number of
        positive eigenvalues across the mesh is treated the same way.

    Returns
    -------
    SpinChernResult
    """
    if tb.dim != 2:
        raise ValueError("the spin Chern number needs a 2D model")
    spin = np.asarray(spin, dtype=complex)
    gap = _gap_of(tb, nocc, gap)
    if not gap >= gap_tol:
        return SpinChernResult(math.nan, None, None, None, math.nan, None, math.nan,
                               Reason.GAP_CLOSED)
    spin_gap = [math.nan]
    nup_first: list[int] = []

    def sectors(k: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        v = np.linalg.eigh(tb.bloch(k))[1][..., :nocc]
        up, down, eigs = prodan_sectors(v, spin)
        nup = np.sum(eigs > 0, axis=-1)
        nup_first[:] = nup_first or [int(nup.flat[0])]
        if np.min(np.abs(eigs)) < spin_gap_tol or np.any(nup != nup_first[0]):
            spin_gap[0] = float(np.min(np.abs(eigs)))
            raise _SectorGapClosed
        return up, down, eigs

    def measure(n: int) -> tuple[tuple[int, ...], float]:
        *base, eigs = sectors(kmesh(n, 2))
        spin_gap[0] = float(np.min(np.abs(eigs)))
        values, flux = [], 0.0
        for i, v in enumerate(base):
            c, f = (fhs_chern_subdivided(lambda k, i=i: sectors(k)[i], n, flux_tol, vectors=v)
                    if v.shape[-1] else (0, 0.0))
            values.append(c)
            flux = max(flux, f)
        return tuple(values), flux

    try:
        value, n, step, reason = _converge(measure, max(kmesh_n, gap_rule_kmesh(gap)), max_kmesh,
                                           GROWTH, flux_tol)
    except _SectorGapClosed:
        return SpinChernResult(math.nan, None, None, None, spin_gap[0], None, math.nan,
                               Reason.SECTOR_GAP_CLOSED)
    if value is None:
        return SpinChernResult(math.nan, None, None, None, spin_gap[0], n, step, reason)
    c_up, c_dn = value
    cs = (c_up - c_dn) / 2
    z2 = int(cs) % 2 if cs == int(cs) else None
    return SpinChernResult(cs, c_up, c_dn, z2, spin_gap[0], n, step, Reason.OK)
