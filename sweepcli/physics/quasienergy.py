"""Floquet spectra: eigenphases of unitaries, quasienergies, and the gaps at 0 and pi/T.

Conventions
-----------
* ``U = T exp(-i int_0^T H dt)`` (:mod:`sweepcli.physics.drives`); quasienergies ``eps`` in
  ``(-pi/T, pi/T]`` with ``U v = exp(-i eps T) v``, sorted ascending.
* The *0 gap* and the *pi gap* are the quasienergy windows around ``eps = 0`` and
  ``eps = pi/T``. ``gap_0 = 2 min_{k, j} |eps_j(k)|`` and
  ``gap_pi = 2 min_{k, j} (pi/T - |eps_j(k)|)`` (energy units): the width of the window centred
  on 0 (on pi/T) that no band enters. It is the distance between the neighbouring
  quasienergies straddling 0 (pi/T) when the spectrum is symmetric about it (chiral or
  particle-hole symmetric drives) and vanishes exactly where ``U(k)`` has the eigenvalue +1
  (-1), which is where the invariants of that gap may change. (A per-k straddling distance would
  stay finite while a single band touches the gap centre.)
* Momenta are reduced (``k_i = k . a_i``); reported locations are wrapped to ``[-pi, pi)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .drives.base import Drive
from .drives.evolution import FactorStack, Slicing, floquet_evolution
from .lattice import kmesh
from .spectrum import polish_minima, velocity_bound, wrap_k

#: Default mesh of the quasienergy-gap search (points per direction; minima are refined).
GAP_KMESH = 32


def dagger(x: np.ndarray) -> np.ndarray:
    """Conjugate transpose of the last two axes of a batch ``(..., n, m)``."""
    return np.conj(np.swapaxes(x, -1, -2))


def unitary_eig(u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Eigenphases and orthonormal eigenvectors of a batch of unitaries, stably.

    ``numpy.linalg.eig`` returns non-orthogonal vectors inside (nearly) degenerate eigenvalue
    clusters. Instead, for each matrix the phase in the middle of the largest gap of its
    eigenphases is rotated to -1, and the Cayley transform ``i (1 - W)(1 + W)^-1`` of the
    rotated ``W`` (Hermitian, eigenvalues ``tan(beta/2)``, a monotonic map of the phases so
    distinct phases stay distinct) is diagonalised with ``numpy.linalg.eigh``. Phases are then
    read off as Rayleigh quotients ``v^+ U v``.

    Parameters
    ----------
    u : (..., n, n) unitary

    Returns
    -------
    phases : (..., n) ``angle`` of the eigenvalues in ``(-pi, pi]``, ascending.
    vectors : (..., n, n) orthonormal columns in the same order.
    """
    u = np.asarray(u, dtype=complex)
    n = u.shape[-1]
    ph = np.sort(np.angle(np.linalg.eigvals(u)), axis=-1)
    gaps = np.diff(np.concatenate([ph, ph[..., :1] + 2 * np.pi], axis=-1), axis=-1)
    j = np.argmax(gaps, axis=-1)
    mid = np.take_along_axis(ph, j[..., None], -1)[..., 0] + \
        np.take_along_axis(gaps, j[..., None], -1)[..., 0] / 2
    w = np.exp(1j * (np.pi - mid))[..., None, None] * u
    eye = np.eye(n)
    h = 1j * np.linalg.solve(eye + w, eye - w)
    h = (h + dagger(h)) / 2
    _, v = np.linalg.eigh(h)
    lam = np.einsum("...ji,...jk,...ki->...i", np.conj(v), u, v)
    phases = np.angle(lam)
    phases = np.where(phases <= -np.pi, phases + 2 * np.pi, phases)
    order = np.argsort(phases, axis=-1)
    phases = np.take_along_axis(phases, order, -1)
    v = np.take_along_axis(v, order[..., None, :], -1)
    return phases, v


def wrap_quasienergy(eps: np.ndarray, period: float) -> np.ndarray:
    """Quasienergies (or differences of them) reduced to ``(-pi/T, pi/T]``: ``-pi/T`` -> ``pi/T``.

    The one wrap of the project: bulk spectra, open samples and ribbons all use it.
    """
    half = np.pi / period
    return half - (half - np.asarray(eps, dtype=float)) % (2 * half)


def quasienergies(u: np.ndarray, period: float) -> tuple[np.ndarray, np.ndarray]:
    """Quasienergies ``(..., n)`` in ``(-pi/T, pi/T]``, ascending; eigenvectors ``(..., n, n)``.

    ``U v = exp(-i eps T) v``; vectors from :func:`unitary_eig` (orthonormal in degenerate
    clusters).
    """
    phases, v = unitary_eig(u)
    eps = wrap_quasienergy(-phases / period, period)
    order = np.argsort(eps, axis=-1)
    return np.take_along_axis(eps, order, -1), np.take_along_axis(v, order[..., None, :], -1)


def quasienergy_values(u: np.ndarray, period: float) -> np.ndarray:
    """Quasienergies only, ascending (``numpy.linalg.eigvals``; unitary spectra are stable)."""
    eps = -np.angle(np.linalg.eigvals(np.asarray(u, dtype=complex))) / period
    return np.sort(wrap_quasienergy(eps, period), axis=-1)


def gap_distances(eps: np.ndarray, period: float) -> tuple[np.ndarray, np.ndarray]:
    """Per-k distances ``min_j |eps_j|`` and ``min_j (pi/T - |eps_j|)`` (half the local gaps)."""
    a = np.abs(eps)
    return np.min(a, axis=-1), np.min(np.pi / period - a, axis=-1)


@dataclass(frozen=True)
class FloquetMesh:
    """Floquet operator diagonalised on a uniform periodic mesh.

    Attributes
    ----------
    k : (N, ..., N, d) reduced momenta (:func:`sweepcli.physics.lattice.kmesh`).
    eps : (N, ..., N, n) quasienergies, ascending, energy units.
    vectors : (N, ..., N, n, n) orthonormal eigenvectors (columns).
    u : (N, ..., N, n, n) the Floquet operator.
    error, slices, converged : of the time integration
        (:class:`~sweepcli.physics.drives.evolution.Evolution`).
    """

    k: np.ndarray
    eps: np.ndarray
    vectors: np.ndarray
    u: np.ndarray
    error: float
    slices: int
    converged: bool


def floquet_mesh(drive: Drive, n: int, dim: int, slicing: Slicing | None = None) -> FloquetMesh:
    """Diagonalise ``U(k)`` on an ``n^dim`` mesh.

    ``slicing``: the drive's time slicing if already decided
    (:func:`~sweepcli.physics.drives.evolution.decide_slicing`); otherwise it is converged on
    this mesh.
    """
    k = kmesh(n, dim)
    ev = floquet_evolution(drive, k, slicing=slicing)
    eps, v = quasienergies(ev.u, drive.period)
    return FloquetMesh(k, eps, v, ev.u, ev.error, ev.slices, ev.converged)


@dataclass(frozen=True)
class FloquetGaps:
    """Quasienergy gaps at 0 and pi/T.

    Attributes
    ----------
    gap_0, gap_pi : float
        Energy units, see the module docstring; refined in continuous k.
    k_0, k_pi : (d,) reduced momenta of the minima, wrapped to ``[-pi, pi)``.
    grid_gap_0, grid_gap_pi : the same minima on the mesh only.
    converged : whether the time integration converged (harmonic drives).
    slices : time slices per period of that integration (1 for step and kick drives).
    """

    gap_0: float
    k_0: np.ndarray
    gap_pi: float
    k_pi: np.ndarray
    grid_gap_0: float
    grid_gap_pi: float
    converged: bool
    slices: int = 1


def distance_bound(drive: Drive, slices: int) -> float:
    """Lipschitz constant (energy per radian of reduced momentum) of every quasienergy band.

    ``dU/dk = -i int U(T, t) dH(t)/dk U(t, 0) dt`` has norm at most ``int ||dH/dk|| dt``, and an
    eigenphase of a unitary moves no faster than the operator, so
    ``|d eps / dk| <= (1/T) sum_f d_f v_f`` over the factors ``(d_f, H_f)`` with ``v_f`` from
    :func:`~sweepcli.physics.spectrum.velocity_bound` (a kick counts with duration 1). The
    distances ``min_j |eps_j|`` and ``min_j (pi/T - |eps_j|)`` have the same constant.
    """
    return sum(d * velocity_bound(tb.hoppings) for d, tb in drive.factors(slices=slices)
               ) / drive.period


def floquet_gaps(drive: Drive, mesh: FloquetMesh, *, refine: bool = True) -> FloquetGaps:
    """Gaps at quasienergy 0 and pi/T from a mesh, each minimum refined off the grid.

    The local minima of ``min_j |eps_j|`` (resp. ``pi/T - |eps_j|``) on the mesh that could
    hide a lower value are polished in continuous k
    (:func:`~sweepcli.physics.spectrum.polish_minima` on the squared distance, with the
    Lipschitz constant of :func:`distance_bound`); ``U(k)`` off the mesh comes from the stacked
    factors at the mesh's slicing. The closings are where ``U(k)`` has eigenvalue +1 (resp. -1),
    where both distances are cone-shaped.
    """
    T = drive.period
    d0, dpi = gap_distances(mesh.eps, T)
    dim = mesh.k.shape[-1]
    kflat = mesh.k.reshape(-1, dim)
    stack = FactorStack(drive.factors(slices=mesh.slices)) if refine else None
    lipschitz = distance_bound(drive, mesh.slices) if refine else 0.0

    out = []
    for which, dist in ((0, d0), (1, dpi)):
        grid_i = int(np.argmin(dist))
        grid = float(dist.ravel()[grid_i])
        if refine:
            def f(k: np.ndarray, which: int = which) -> np.ndarray:
                return gap_distances(quasienergy_values(stack.operator(k), T), T)[which]
            best, kbest = polish_minima(f, dist, mesh.k, lipschitz, square=True)
        else:
            best, kbest = grid, kflat[grid_i]
        out.append((2 * max(best, 0.0), wrap_k(kbest), 2 * grid))
    (g0, k0, gg0), (gpi, kpi, ggpi) = out
    return FloquetGaps(g0, k0, gpi, kpi, gg0, ggpi, mesh.converged, mesh.slices)
