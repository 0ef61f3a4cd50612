"""Spin Chern number of the occupied bands by Prodan's projected-spin method.

Prodan, PRB 80, 125327 (2009): the occupied projector ``P``, the spin ``S``; the eigenvectors
of ``P S P`` inside the occupied space split by the sign of their eigenvalue into "up" and
"down" bundles, ``C_s = (C_up - C_down)/2``. Each sector's Chern number is the subdivided
Fukui-Hatsugai-Suzuki sum of :mod:`sweepcli.physics.chern` (same sign), under the same
convergence policy as :func:`~sweepcli.physics.chern.chern_number`: both sector numbers must
pass the flux bound and agree between two successive meshes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..schema import Reason
from .chern import fhs_chern_subdivided
from .invariant_base import (
    CHERN_KMESH,
    CHERN_MAX_KMESH,
    FLUX_TOL,
    GROWTH,
    gap_rule_kmesh,
    occupied_gap,
    walk_meshes,
)
from .lattice import TightBinding, kmesh


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


class _SectorGapClosed(Exception):
    """Raised inside a mesh walk when the projected-spin spectrum is not gapped at zero."""


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
    gap = occupied_gap(tb, nocc, gap)
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
        value, n, step, reason = walk_meshes(measure, max(kmesh_n, gap_rule_kmesh(gap)), max_kmesh,
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
