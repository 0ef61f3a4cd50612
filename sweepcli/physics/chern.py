"""Chern numbers of gapped Bloch bands (Fukui-Hatsugai-Suzuki), with a convergence policy on
the k-mesh.

Pure functions. The kernels (:func:`fhs_chern`, :func:`fhs_plaquette_phases`) take batched
eigenvector arrays, so they serve any unitary or Hermitian family (Floquet eigenvectors and
the projected-spin sectors of :mod:`sweepcli.physics.spin_chern` included);
:func:`chern_number` builds those arrays from a :class:`TightBinding` and refines the mesh
until the answer is trustworthy, or says that it is not.

Sign convention
---------------
``C = (1/2 pi) int dk_1 dk_2 Omega_12`` with the Berry curvature
``Omega_12 = i (<d_1 u|d_2 u> - <d_2 u|d_1 u>)`` (connection ``A = i <u|d u>``) in reduced
momenta, which for a right-handed lattice is the Cartesian orientation. For the lower band of
``H = d(k).sigma`` this is ``C = (1/4 pi) int d_hat . (d_1 d_hat x d_2 d_hat)``, the degree of
``d_hat``. On the mesh (Fukui, Hatsugai and Suzuki, J. Phys. Soc. Jpn. 74, 1674 (2005)) the
link variable is ``U_mu(k) = det(V(k)^+ V(k + e_mu)) / |.|``, the plaquette phase
``F = arg(U_1(k) U_2(k + e_1) / (U_1(k + e_2) U_2(k)))`` in ``(-pi, pi]``, and
``C = -(1/2 pi) sum F`` (the phase of a closed overlap loop is minus the enclosed Berry
flux).

Mesh policy (Chern and spin Chern)
----------------------------------
The FHS sum is an integer on any mesh; on one too coarse for the gap it is usually a wrong 0,
and no agreement between meshes shows which. :func:`chern_number` therefore stores an integer
only when a bound proves it (:func:`~sweepcli.physics.certify.certified_chern`: a base mesh set
by the gap rule, every plaquette that the cell bound from the local gap and ``||dH/dk||`` does
not prove subdivided, within a work limit of ``WORK * max_kmesh**2`` points; otherwise the
value is missing with :attr:`Reason.NOT_CONVERGED`). A gap below ``gap_tol`` gives
:attr:`Reason.GAP_CLOSED` without any mesh being built.

Why subdividing a plaquette keeps the sum an integer: the loop around a plaquette equals the
product of the loops around its sub-plaquettes (every inner link is traversed once in each
direction, and ``U(k -> k') U(k' -> k) = 1`` after normalisation) times four thin cells, one
per edge, between the direct link and the path of sub-links along that edge (the neighbouring
plaquette still uses the direct link). The phases of these cells add up to the plaquette's
phase modulo ``2 pi`` (:func:`subdivided_plaquette_phases`): the total is the FHS sum of a
conforming non-uniform mesh in which every link bounds exactly two cells.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from ..schema import Reason
from .certify import certified_chern, hermitian_norm, hopping_bounds
from .invariant_base import (
    CHERN_KMESH,
    CHERN_MAX_KMESH,
    FLUX_TOL,
    GROWTH,
    InvariantResult,
    gap_rule_kmesh,
    occupied_gap,
    stacked_det,
)
from .lattice import TightBinding

#: Work limit of the proven mesh, in uniform meshes of ``max_kmesh`` points per direction.
WORK = 2
#: Largest base mesh the gap rule may ask for (the bound subdivides where needed).
START_CAP = 48


def _unit(z: np.ndarray) -> np.ndarray:
    """``z / |z|``, with 0 mapped to 0 (whose phase then reads as 0; see :func:`fhs_chern`)."""
    a = np.abs(z)
    return np.divide(z, a, out=np.zeros_like(z), where=a > 0)


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
    u1 = stacked_det(vh[..., :-1, :, :, :] @ v[..., 1:, :, :, :])  # links along the first axis
    u2 = stacked_det(vh[..., :, :-1, :, :] @ v[..., :, 1:, :, :])  # links along the second axis
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
    fine = stacked_det(vh[..., :-1, :, :] @ v[..., 1:, :, :])
    direct = stacked_det(vh[..., 0, :, :] @ v[..., -1, :, :])
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


def static_subspace(tb: TightBinding, nocc: int
                    ) -> Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """``data(k)`` of :func:`~sweepcli.physics.certify.certified_chern` for the ``nocc`` lowest
    bands: their eigenvectors, the direct gap above them, and the slope
    ``sqrt(||dH/dk_1||^2 + ||dH/dk_2||^2)`` (a bound on ``||dH/dk_u||`` for every unit ``u``)."""
    def data(k: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        e, v, slope = bands_and_slope(tb, k)
        return v[..., :nocc], e[..., nocc] - e[..., nocc - 1], slope
    return data


def bands_and_slope(tb: TightBinding, k: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Eigenvalues and eigenvectors of the 2D ``H(k)`` at the points ``k``, and the slope
    ``sqrt(||dH/dk_1||^2 + ||dH/dk_2||^2)`` there (a bound on ``||dH/dk_u||`` for every unit
    ``u``), from one evaluation of the phases."""
    disp, mats = tb._stacked()
    phase = np.exp(1j * (np.asarray(k, float) @ disp.T))
    t = np.tensordot(phase, mats, axes=([-1], [0]))
    e, v = np.linalg.eigh(tb.onsite + t + np.conj(np.swapaxes(t, -1, -2)))
    slope2 = 0.0
    for i in range(2):
        d = np.tensordot(1j * disp[:, i] * phase, mats, axes=([-1], [0]))
        slope2 = slope2 + hermitian_norm(d + np.conj(np.swapaxes(d, -1, -2))) ** 2
    return e, v, np.sqrt(slope2)


def chern_number(tb: TightBinding, nocc: int, *, gap: float | None = None, gap_tol: float = 1e-6,
                 kmesh_n: int = CHERN_KMESH, max_kmesh: int = CHERN_MAX_KMESH,
                 flux_tol: float = FLUX_TOL) -> InvariantResult:
    """Chern number of the ``nocc`` lowest bands of a 2D model, proven on an adaptive mesh.

    The base mesh has ``max(kmesh_n, min(ceil(3.2 / sqrt(gap / 2)), START_CAP))`` points per
    direction (at most ``max_kmesh``; raised by 1.5 while more than a quarter of its plaquettes
    fail); every plaquette whose bound
    (:func:`~sweepcli.physics.certify.cell_lambda`, from the gap and ``||dH/dk||`` at its
    corners and the second-derivative bound of the hoppings) does not prove it, or whose
    phase is at or above ``flux_tol``, is subdivided until all are proven
    (:func:`~sweepcli.physics.certify.certified_chern`: what is proven and what is assumed).
    When that would evaluate more than ``WORK * max_kmesh**2`` points in all (about the work of
    the former walk of uniform meshes up to ``max_kmesh``), the value is missing with
    ``NOT_CONVERGED``.

    Parameters
    ----------
    tb : 2D model.
    nocc : number of occupied bands (``0 < nocc < norb``).
    gap : direct gap above the occupied bands (energy units); computed with
        :func:`~sweepcli.physics.spectrum.band_gap` when ``None``.
    gap_tol : gaps below this count as closed.
    kmesh_n : smallest base mesh; the gap rule may raise it.
    max_kmesh : the work limit is ``WORK * max_kmesh**2`` points.
    flux_tol : largest accepted plaquette phase (rad).

    Returns
    -------
    InvariantResult
        ``value`` the Chern number (module-docstring sign), ``kmesh`` the base mesh,
        ``max_step`` the largest phase of an elementary cell.
    """
    if tb.dim != 2:
        raise ValueError("the Chern number needs a 2D model")
    gap = occupied_gap(tb, nocc, gap)
    if not gap >= gap_tol:
        return InvariantResult(None, None, math.nan, Reason.GAP_CLOSED)
    # The gap rule's mesh, capped: below a small gap the adaptive cells are far cheaper.
    n = min(max(kmesh_n, min(gap_rule_kmesh(gap), START_CAP)), max_kmesh)
    lip2 = hopping_bounds(tb.hoppings)[1]
    c, flux, _, n = certified_chern(static_subspace(tb, nocc), n, nocc, lip2, flux_tol=flux_tol,
                                    budget=WORK * max_kmesh * max_kmesh, max_n=max_kmesh,
                                    growth=GROWTH)
    return InvariantResult(c, n, flux, Reason.OK if c is not None else Reason.NOT_CONVERGED)
