"""Bulk spectra and direct band gaps, with gap minima refined in continuous k.

A minimum of the gap on a uniform k-mesh misses a Dirac point that falls between mesh points
by an amount of order (velocity x mesh spacing). :func:`band_gap` therefore polishes the lowest
local minima of the mesh with :func:`scipy.optimize.minimize` on the squared gap, which is
smooth at a conical touching (``(E_+ - E_-)^2 = 4 |d|^2`` for a two-band crossing).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize

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


def _local_minima(g: np.ndarray) -> np.ndarray:
    """Flat indices of the periodic-mesh local minima of ``g`` (ties count), lowest first."""
    mask = np.ones(g.shape, bool)
    for axis in range(g.ndim):
        for shift in (1, -1):
            mask &= g <= np.roll(g, shift, axis=axis)
    idx = np.flatnonzero(mask)
    return idx[np.argsort(g.ravel()[idx], kind="stable")]


def _refine(tb: TightBinding, nocc: int, k0: np.ndarray, step: float) -> tuple[float, np.ndarray]:
    """Minimise the squared gap from ``k0``; central differences evaluated in one batch."""
    d = k0.size
    h = 1e-6
    offsets = np.concatenate([np.zeros((1, d)), h * np.eye(d), -h * np.eye(d)])

    def fun(k: np.ndarray) -> tuple[float, np.ndarray]:
        e = energies(tb, k[None, :] + offsets)
        g2 = (e[:, nocc] - e[:, nocc - 1]) ** 2
        return float(g2[0]), (g2[1:d + 1] - g2[d + 1:]) / (2 * h)

    # A gradient bound relative to the starting squared gap keeps the gap to ~1e-9 of its mesh
    # value at a Dirac point and stops early on wide, flat minima where precision is moot.
    g2_start = fun(k0)[0]
    res = minimize(fun, k0, jac=True, method="BFGS",
                   options={"gtol": 1e-9 * g2_start + 1e-15, "maxiter": 100})
    # BFGS may stop early at a kink (a crossing of two conduction or two valence bands); never
    # accept a point that left the basin of this mesh minimum or made things worse.
    if not np.all(np.isfinite(res.x)) or np.max(np.abs(res.x - k0)) > 4 * step:
        return np.inf, k0
    e = energies(tb, res.x)
    return float(e[nocc] - e[nocc - 1]), res.x


def band_gap(tb: TightBinding, nocc: int, kmesh_n: int, refine: bool = True,
             n_minima: int = 4) -> GapResult:
    """Smallest direct gap between bands ``nocc - 1`` and ``nocc`` over the Brillouin zone.

    Parameters
    ----------
    tb : the model.
    nocc : number of occupied bands, ``0 < nocc < tb.norb``.
    kmesh_n : points per reciprocal direction of the uniform mesh ``2 pi j / kmesh_n``.
    refine : polish the ``n_minima`` lowest local minima of the mesh in continuous k.
    n_minima : how many mesh minima to refine.

    Returns
    -------
    GapResult
        The gap (energy units; never above the mesh minimum) and its reduced momentum in
        ``[-pi, pi)``. Bands are sorted ascending at each k, so a gap that closes through a
        crossing of bands ``nocc - 1`` and ``nocc`` is found as ~0: the BFGS stop is set at
        1e-9 of the squared mesh gap, which leaves a conical closing at ~1e-10 or below (a
        quadratic touching converges more slowly and may stop higher). Minima that BFGS would
        move by more than four mesh spacings are kept at their mesh value.
    """
    _check_nocc(tb, nocc)
    mesh = kmesh(kmesh_n, tb.dim)
    e = energies(tb, mesh)
    g = e[..., nocc] - e[..., nocc - 1]
    flat_k = mesh.reshape(-1, tb.dim)
    minima = _local_minima(g)
    best = int(minima[0]) if minima.size else int(np.argmin(g))
    best_gap, best_k = float(g.ravel()[best]), flat_k[best]
    if refine:
        step = 2 * np.pi / kmesh_n
        for i in minima[:n_minima]:
            gap_i, k_i = _refine(tb, nocc, flat_k[i], step)
            if gap_i < best_gap:
                best_gap, best_k = gap_i, k_i
    return GapResult(max(best_gap, 0.0), wrap_k(best_k))
