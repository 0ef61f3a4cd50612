"""Bulk spectra and direct band gaps, with gap minima refined in continuous k.

A minimum of the gap on a uniform k-mesh misses a Dirac point that falls between mesh points
by an amount of order (velocity x mesh spacing). :func:`band_gap` therefore polishes, in
continuous k, every local minimum of the mesh that could hide a lower gap than the best one
found, using a Lipschitz bound on the gap (:func:`velocity_bound`); the same mesh-minima and
polish helpers (:func:`local_minima`, :func:`polish_minima`) serve the band edges of
:func:`band_edges` and the quasienergy gaps of :mod:`sweepcli.physics.quasienergy`.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from .lattice import TightBinding, kmesh


@dataclass(frozen=True)
class GapResult:
    """Smallest direct gap above band ``nocc - 1``.

    Attributes
    ----------
    gap : float
        ``min_k [E_nocc(k) - E_{nocc-1}(k)]`` in the model's energy units (bands sorted
        ascending, counted from 0), >= 0.
    k : (d,) float
        Reduced momentum of the minimum, wrapped to ``[-pi, pi)``.
    """

    gap: float
    k: np.ndarray


def wrap_k(k: np.ndarray) -> np.ndarray:
    """Reduce momenta to ``[-pi, pi)`` componentwise."""
    return (np.asarray(k, dtype=float) + np.pi) % (2 * np.pi) - np.pi


def energies(tb: TightBinding, k: np.ndarray) -> np.ndarray:
    """Band energies, ascending, for reduced momenta ``k`` of shape ``(..., d)``: ``(..., n)``."""
    return np.linalg.eigvalsh(tb.bloch(k))


def occupied_states(tb: TightBinding, k: np.ndarray, nocc: int) -> tuple[np.ndarray, np.ndarray]:
    """Energies ``(..., n)`` and the lowest ``nocc`` eigenvectors ``(..., n, nocc)`` (columns)."""
    e, v = np.linalg.eigh(tb.bloch(k))
    return e, v[..., :nocc]


def _check_nocc(tb: TightBinding, nocc: int) -> None:
    if not 0 < nocc < tb.norb:
        raise ValueError(f"a gap above {nocc} occupied bands needs 0 < nocc < {tb.norb}")


def velocity_bound(hoppings: Mapping[tuple[int, ...], np.ndarray]) -> float:
    """Upper bound on the speed of every band in reduced momentum: ``2 sum_R |R| ||T_R||_2``.

    With ``H(k) = onsite + sum_R [T_R e^{ik.R} + h.c.]`` (one ``R`` of each pair ``R, -R``),
    the derivative along a unit direction ``u`` is ``sum_R i (u.R) [T_R e^{ik.R} - h.c.]``, of
    spectral norm at most ``v = 2 sum_R |R| ||T_R||_2`` (Euclidean ``|R|``). By Weyl's
    inequality ``|E_j(k) - E_j(k')| <= ||H(k) - H(k')|| <= v |k - k'|`` for every band of the
    ascending order, crossings included, so each band is ``v``-Lipschitz and a direct gap
    ``E_j - E_{j-1}`` is ``2 v``-Lipschitz (energy units per radian).
    """
    return 2.0 * sum(float(np.linalg.norm(r)) * float(np.linalg.norm(t, 2))
                     for r, t in hoppings.items())


def local_minima(values: np.ndarray) -> np.ndarray:
    """Flat indices of the local minima of ``values`` on a periodic mesh, lowest first.

    A point is a minimum when it is ``<=`` its ``2 d`` mesh neighbours (ties count, so a
    plateau yields several).
    """
    mask = np.ones(values.shape, bool)
    for axis in range(values.ndim):
        for shift in (1, -1):
            mask &= values <= np.roll(values, shift, axis=axis)
    idx = np.flatnonzero(mask)
    return idx[np.argsort(values.ravel()[idx], kind="stable")]


def _stencil(dim: int, h: float) -> np.ndarray:
    """Offsets ``(P, d)`` of the central-difference gradient and Hessian: 0, +-h e_i,
    +-h e_i +-h e_j (i < j)."""
    eye = h * np.eye(dim)
    rows = [np.zeros(dim)] + [s * e for e in eye for s in (1, -1)]
    for i in range(dim):
        for j in range(i + 1, dim):
            rows += [si * eye[i] + sj * eye[j] for si in (1, -1) for sj in (1, -1)]
    return np.array(rows)


def _newton(phi: Callable[[np.ndarray], np.ndarray], k0: np.ndarray, step: float,
            maxiter: int = 200) -> tuple[np.ndarray, np.ndarray]:
    """Minimise a smooth ``phi`` from every start in ``k0 (c, d)`` at once.

    Saddle-free Newton steps (Hessian eigenvalues replaced by their moduli) from central
    differences, clipped to one mesh ``step`` and halved until ``phi`` decreases; all starts
    share each batched evaluation of ``phi``. A start that would move more than four mesh
    steps has left the basin of its mesh minimum and is returned unmoved.
    """
    c, dim = k0.shape
    h = 1e-5
    offsets = _stencil(dim, h)
    k = k0.copy()
    val = phi(k)
    active = np.isfinite(val)
    for _ in range(maxiter):
        if not active.any():
            break
        idx = np.flatnonzero(active)
        v = phi(k[idx, None, :] + offsets).reshape(idx.size, -1)
        f0 = v[:, 0]
        grad = (v[:, 1:2 * dim + 1:2] - v[:, 2:2 * dim + 1:2]) / (2 * h)
        hess = np.zeros((idx.size, dim, dim))
        for i in range(dim):
            hess[:, i, i] = (v[:, 1 + 2 * i] - 2 * f0 + v[:, 2 + 2 * i]) / h ** 2
        col = 1 + 2 * dim
        for i in range(dim):
            for j in range(i + 1, dim):
                pp, pm, mp, mm = (v[:, col + m] for m in range(4))
                hess[:, i, j] = hess[:, j, i] = (pp - pm - mp + mm) / (4 * h * h)
                col += 4
        w, vec = np.linalg.eigh(hess)
        w = np.maximum(np.abs(w), 1e-12 * np.max(np.abs(w), axis=-1, keepdims=True) + 1e-300)
        p = -np.einsum("cij,cj->ci", vec, np.einsum("cji,cj->ci", vec, grad) / w)
        size = np.max(np.abs(p), axis=-1)
        p *= np.minimum(1.0, step / np.maximum(size, 1e-300))[:, None]
        improved = np.zeros(idx.size, bool)
        before = val[idx].copy()
        for _ in range(20):  # backtracking: a Newton step that needs more halvings is done
            todo = np.flatnonzero(~improved)
            trial = k[idx[todo]] + p[todo]
            ft = phi(trial)
            ok = ft < val[idx[todo]]
            sel = todo[ok]
            k[idx[sel]], val[idx[sel]] = trial[ok], ft[ok]
            improved[sel] = True
            p[todo] /= 2
            if improved.all():
                break
        # Converged: no decrease, a step below 1e-11 rad, or a relative decrease below 1e-12
        # (phi at the noise floor of its eigenvalues).
        small = (np.max(np.abs(p), axis=-1) < 1e-11) | \
            (before - val[idx] <= 1e-12 * np.abs(before))
        active[idx[~improved | small]] = False
    left = np.max(np.abs(k - k0), axis=-1) > 4 * step
    k[left] = k0[left]
    return phi(k), k


def polish_minima(f: Callable[[np.ndarray], np.ndarray], values: np.ndarray, mesh: np.ndarray,
                  lipschitz: float, *, square: bool = False) -> tuple[float, np.ndarray]:
    """Minimum of ``f`` over the Brillouin zone from its values on a uniform mesh.

    Parameters
    ----------
    f : callable, momenta ``(..., d)`` -> values ``(...)``, batched.
    values : (n, ..., n) ``f`` on ``mesh``.
    mesh : (n, ..., n, d) uniform periodic mesh of reduced momenta
        (:func:`sweepcli.physics.lattice.kmesh`).
    lipschitz : ``L`` with ``|f(k) - f(k')| <= L |k - k'|`` (Euclidean, reduced momenta).
    square : minimise ``f^2`` instead (``f >= 0`` cone-shaped at a zero, e.g. a gap at a Dirac
        point, where ``f^2`` is smooth); the result is still ``f``.

    Returns
    -------
    (minimum, k) : the smallest value found and its momentum (not wrapped).

    Which minima are polished
    -------------------------
    Every point of the zone lies within half a mesh diagonal ``r = (pi / n) sqrt(d)`` of a mesh
    point, so if ``f(k*) = f_min`` the mesh point nearest ``k*`` has ``f <= f_min + L r``, and
    the local minimum its basin descends to is lower still. A local mesh minimum above
    ``best + L r`` (``best`` the lowest value found so far, never below ``f_min``) therefore
    cannot be the basin of a lower value, and every minimum at or below ``min(mesh) + L r`` is
    polished (:func:`_newton`, all starts in one batch). In particular no zero of ``f`` (a gap
    closing) is left unpolished, however many basins there are.
    """
    dim = mesh.shape[-1]
    flat_k = mesh.reshape(-1, dim)
    flat_v = values.ravel()
    step = 2 * np.pi / mesh.shape[0]
    reach = lipschitz * step * np.sqrt(dim) / 2
    phi = (lambda k: f(k) ** 2) if square else f
    minima = local_minima(values)
    first = int(minima[0]) if minima.size else int(np.argmin(flat_v))
    best, best_k = float(flat_v[first]), flat_k[first]
    # All candidates are polished together (one batched evaluation per Newton step); the bound
    # uses the lowest mesh value, the best known before polishing.
    chosen = minima[flat_v[minima] <= best + reach]
    if chosen.size:
        vals, ks = _newton(phi, flat_k[chosen], step)
        vals = np.sqrt(np.maximum(vals, 0.0)) if square else vals
        j = int(np.argmin(vals))
        if vals[j] < best:
            best, best_k = float(vals[j]), ks[j]
    return best, best_k


def band_gap(tb: TightBinding, nocc: int, kmesh_n: int, refine: bool = True) -> GapResult:
    """Smallest direct gap between bands ``nocc - 1`` and ``nocc`` over the Brillouin zone.

    Parameters
    ----------
    tb : the model.
    nocc : number of occupied bands, ``0 < nocc < tb.norb``.
    kmesh_n : points per reciprocal direction of the uniform mesh ``2 pi j / kmesh_n``.
    refine : polish mesh minima in continuous k (:func:`polish_minima`, with the Lipschitz
        constant ``2 v`` of :func:`velocity_bound`: every local minimum within
        ``2 v (pi / kmesh_n) sqrt(d)`` of the lowest gap found is polished).

    Returns
    -------
    GapResult
        The gap (energy units; never above the mesh minimum) and its reduced momentum in
        ``[-pi, pi)``. Bands are sorted ascending at each k, so a gap that closes through a
        crossing of bands ``nocc - 1`` and ``nocc`` is found as ~0: Newton steps on the squared
        gap (smooth at a conical closing) leave it at ~1e-10 or below (a quadratic touching
        converges more slowly and may stop higher). Minima that would move by more than four
        mesh spacings are kept at their mesh value.
    """
    _check_nocc(tb, nocc)
    mesh = kmesh(kmesh_n, tb.dim)

    def gap_at(k: np.ndarray) -> np.ndarray:
        e = energies(tb, k)
        return e[..., nocc] - e[..., nocc - 1]

    g = gap_at(mesh)
    if not refine:
        i = int(np.argmin(g))
        return GapResult(max(float(g.ravel()[i]), 0.0), wrap_k(mesh.reshape(-1, tb.dim)[i]))
    best, k = polish_minima(gap_at, g, mesh, 2 * velocity_bound(tb.hoppings), square=True)
    return GapResult(max(best, 0.0), wrap_k(k))


def band_edges(tb: TightBinding, nocc: int, kmesh_n: int) -> tuple[float, float]:
    """Top of band ``nocc - 1`` and bottom of band ``nocc`` (energy), refined in continuous k.

    Both are found by :func:`polish_minima` (the top as the minimum of ``-E_{nocc-1}``) with the
    band Lipschitz constant of :func:`velocity_bound`. Their difference is the indirect gap.
    """
    _check_nocc(tb, nocc)
    mesh = kmesh(kmesh_n, tb.dim)
    e = energies(tb, mesh)
    v = velocity_bound(tb.hoppings)
    top = -polish_minima(lambda k: -energies(tb, k)[..., nocc - 1], -e[..., nocc - 1], mesh,
                         v)[0]
    bottom = polish_minima(lambda k: energies(tb, k)[..., nocc], e[..., nocc], mesh, v)[0]
    return top, bottom
