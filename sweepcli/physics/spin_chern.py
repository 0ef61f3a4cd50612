"""Spin Chern number of the occupied bands by Prodan's projected-spin method.

Prodan, PRB 80, 125327 (2009): the occupied projector ``P``, the spin ``S``; the eigenvectors
of ``P S P`` inside the occupied space split by the sign of their eigenvalue into "up" and
"down" bundles, ``C_s = (C_up - C_down)/2``. Each sector's Chern number is the FHS sum on the
proven adaptive mesh of :func:`sweepcli.physics.certify.certified_chern` (same sign as
:mod:`sweepcli.physics.chern`), with the cell bound :func:`sector_lambda`.

Proven (the argument of :mod:`sweepcli.physics.certify` applied to ``X = P S P``, whose spectral
projector on ``(0, inf)`` is the up sector and on ``(-inf, 0)`` the down sector, the unoccupied
space being its kernel): in a cell of side ``h`` the occupied gap is at least ``D_H = min_c
(delta_c - 2 eps_c)`` and ``||dH/dk_u|| <= G_H = max_c g_c + L2 r`` (``eps_c = g_c r + L2 r^2 /
2``, ``r = h / sqrt 2``, ``g_c`` the slope of ``H`` at corner ``c``, ``L2`` the
second-derivative bound of the hoppings), so ``||dP/dk_u|| <= G_H / D_H``. With ``Q = 1 - P``
and ``dP`` off-diagonal (``P dP P = Q dP Q = 0``), ``dX = dP S P + P S dP`` has the blocks ``Q
dX P = Q dP P S P`` and ``P dX P = P dP Q S P + P S Q dP P``, ``Q dX Q = 0``, so ``||dX|| <=
||dP|| (||S|| + 2 s)`` with ``s`` a bound on the spin mixing ``||Q S P||`` over the cell: its
largest corner value plus ``2 ||S|| r G_H / D_H`` (``||Q S P - Q_c S P_c|| <= 2 ||S|| ||P -
P_c||``). With the plain ``||dX|| <= 2 ||S|| ||dP||``, ``||dX/dk_u|| <= G_X = min(||S|| + 2 s, 2
||S||) G_H / D_H`` over the whole cell (``||S|| G_H / D_H`` where ``S`` commutes with ``H``);
the sector's separation (its smallest ``|eig|`` of ``V^+ S V`` at a corner: the distance of the
sector's eigenvalues of ``X`` from 0 and from the other sector) is then at least ``D_X = min_c
sep_c - 2 G_X r``, and ``lambda = h G_X / D_X`` bounds the turn of the sector projector over the
cell exactly as the occupied projector's in :func:`~sweepcli.physics.certify.cell_lambda`.
Assumed: the eigendecompositions at the mesh points are exact to rounding. Where the bound
cannot be met within the budget the value is missing (``NOT_CONVERGED``); a projected-spin
spectrum that comes within ``spin_gap_tol`` of 0 at a mesh point, or whose sign count changes,
gives ``SECTOR_GAP_CLOSED``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..schema import Reason
from .certify import certified_chern, hermitian_norm, hopping_bounds
from .chern import START_CAP, WORK, bands_and_slope, chern_number
from .invariant_base import (
    CHERN_KMESH,
    CHERN_MAX_KMESH,
    FLUX_TOL,
    GROWTH,
    gap_rule_kmesh,
    occupied_gap,
)
from .lattice import TightBinding


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
        (dimensionless, 0..||S||; nan if no mesh was built); for a conserved spin, the smallest
        ``|eig(S)|``.
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


#: Largest commutator ``||[S, T]||`` (relative to ``||S|| ||T||``) of a conserved spin.
CONSERVED_TOL = 1e-12


def _conserved_sectors(tb: TightBinding, spin: np.ndarray
                       ) -> tuple[TightBinding, TightBinding, float] | None:
    """The model restricted to the positive and negative eigenspaces of ``spin``, and the
    smallest ``|eig(spin)|``, when ``spin`` commutes with the onsite block and every hopping and
    has no zero eigenvalue; else ``None``. The restricted models keep the lattice; their
    orbital positions are set to 0, which changes no Chern number (a gauge)."""
    scale = float(np.linalg.norm(spin, 2))
    for t in (tb.onsite, *tb.hoppings.values()):
        if np.linalg.norm(spin @ t - t @ spin, 2) > CONSERVED_TOL * scale * max(
                float(np.linalg.norm(t, 2)), 1.0):
            return None
    s, w = np.linalg.eigh(spin)
    if np.any(np.abs(s) <= CONSERVED_TOL * scale):
        return None

    def restrict(cols: np.ndarray) -> TightBinding:
        wc = w[:, cols]
        wh = np.conj(wc.T)
        return TightBinding(tb.lattice_vectors, np.zeros((wc.shape[1], tb.dim)),
                            wh @ tb.onsite @ wc, {r: wh @ t @ wc for r, t in tb.hoppings.items()})
    return restrict(s > 0), restrict(s < 0), float(np.min(np.abs(s)))


def _conserved_spin_chern(tb: TightBinding, nocc: int,
                          conserved: tuple[TightBinding, TightBinding, float], *, gap: float,
                          spin_gap_tol: float, kmesh_n: int, max_kmesh: int, flux_tol: float
                          ) -> SpinChernResult:
    """:func:`spin_chern_number` for a spin that commutes with H (its docstring). Each
    restricted model's spectrum is part of H's at every k, so its direct gap at the filling is
    at least H's and the number of its occupied bands is the same at every k (counted at k =
    0 against the middle of H's gap there)."""
    up, down, spin_gap = conserved
    if spin_gap < spin_gap_tol:
        return SpinChernResult(math.nan, None, None, None, spin_gap, None, math.nan,
                               Reason.SECTOR_GAP_CLOSED)
    e = np.linalg.eigvalsh(tb.bloch(np.zeros(2)))
    middle = (e[nocc - 1] + e[nocc]) / 2
    values, n_used, flux = [], None, 0.0
    for part in (up, down):
        m = int(np.sum(np.linalg.eigvalsh(part.bloch(np.zeros(2))) < middle))
        if m in (0, part.norb):
            values.append(0)
            continue
        r = chern_number(part, m, gap=gap, kmesh_n=kmesh_n, max_kmesh=max_kmesh,
                         flux_tol=flux_tol)
        n_used = max(n_used or 0, r.kmesh or 0)
        flux = max(flux, r.max_step)
        if r.value is None:
            return SpinChernResult(math.nan, None, None, None, spin_gap, n_used, flux,
                                   Reason.NOT_CONVERGED)
        values.append(r.value)
    return _proven(*values, spin_gap, n_used, flux)


def _proven(c_up: int, c_down: int, spin_gap: float, kmesh: int | None, flux: float
            ) -> SpinChernResult:
    """The result of two proven sector Chern numbers."""
    cs = (c_up - c_down) / 2
    z2 = int(cs) % 2 if cs == int(cs) else None
    return SpinChernResult(cs, c_up, c_down, z2, spin_gap, kmesh, flux, Reason.OK)


def _spin_mixing(vectors: np.ndarray, spin: np.ndarray) -> np.ndarray:
    """``||Q S P||`` for the occupied columns ``V`` ``(..., n, m)``: the square root of the
    largest eigenvalue of ``(S V)^+ (S V) - (V^+ S V)^2 = (Q S V)^+ (Q S V)``."""
    sv = spin @ vectors
    a = np.conj(np.swapaxes(sv, -1, -2)) @ sv
    b = np.conj(np.swapaxes(vectors, -1, -2)) @ sv
    return np.sqrt(np.maximum(hermitian_norm(a - b @ b), 0.0))


class _SectorGapClosed(Exception):
    """Raised inside the mesh refinement when the projected-spin spectrum is not gapped at 0."""


def sector_lambda(sep: np.ndarray, slope: np.ndarray, h: float, lip2: float,
                  spin_norm: float) -> np.ndarray:
    """Cell bound ``lambda`` of a projected-spin sector (module docstring).

    ``sep``: ``(..., 3, 4)`` the sector's separation, the occupied gap and the spin mixing
    ``||Q S P||`` at the corners; ``slope``: ``(..., 4)`` the bound on ``||dH/dk_u||`` there;
    ``lip2``: the bound on ``||d^2 H / dk_u dk_w||``; ``spin_norm``: ``||S||``. ``inf`` where a
    separation bound is not positive.
    """
    r = h / math.sqrt(2)
    d_h = np.min(sep[..., 1, :] - 2 * (slope * r + 0.5 * lip2 * r * r), axis=-1)
    g_h = np.max(slope, axis=-1) + lip2 * r
    with np.errstate(divide="ignore", invalid="ignore"):
        turn = np.where(d_h > 0, g_h / np.where(d_h > 0, d_h, 1.0), np.inf)
        mixing = np.max(sep[..., 2, :], axis=-1) + 2 * spin_norm * r * turn
        g_x = np.minimum(spin_norm + 2 * mixing, 2 * spin_norm) * turn
        d_x = np.min(sep[..., 0, :], axis=-1) - 2 * g_x * r
        ok = (d_h > 0) & (d_x > 0)
        return np.where(ok, h * g_x / np.where(ok, d_x, 1.0), np.inf)


def spin_chern_number(tb: TightBinding, nocc: int, spin: np.ndarray, *, gap: float | None = None,
                      gap_tol: float = 1e-6, spin_gap_tol: float = 1e-3,
                      kmesh_n: int = CHERN_KMESH, max_kmesh: int = CHERN_MAX_KMESH,
                      flux_tol: float = FLUX_TOL) -> SpinChernResult:
    """Spin Chern number of the occupied bands by Prodan's projected-spin method, each sector's
    Chern number proven on an adaptive mesh (module docstring).

    Parameters
    ----------
    tb : 2D model.
    nocc : number of occupied bands.
    spin : (n, n) Hermitian cell operator (e.g. ``tau_0 sigma_z``); need not commute with H.
        Where it commutes with every term of H (and has no zero eigenvalue), ``P S P`` keeps
        the eigenvalues of ``S`` and the sectors are the occupied bands of H within the
        positive and negative eigenspaces of ``S``: their Chern numbers are those of the two
        restricted models (:func:`_conserved_sectors`), proven by
        :func:`~sweepcli.physics.chern.chern_number`, which costs far less than the sector
        bound.
    gap, gap_tol, kmesh_n, max_kmesh, flux_tol : as in :func:`chern_number` (the base mesh
        from the gap rule, the work limit ``WORK * max_kmesh**2`` points per sector).
    spin_gap_tol : the spin gap ``min |eig(P S P)|`` (dimensionless) below which the two
        sectors are not separated: :attr:`Reason.SECTOR_GAP_CLOSED`. A change of the number of
        positive eigenvalues across the mesh is treated the same way.

    Returns
    -------
    SpinChernResult
        ``kmesh`` the larger base mesh of the two sectors, ``spin_gap`` the smallest
        ``|eig(P S P)|`` at the points evaluated.
    """
    if tb.dim != 2:
        raise ValueError("the spin Chern number needs a 2D model")
    spin = np.asarray(spin, dtype=complex)
    gap = occupied_gap(tb, nocc, gap)
    if not gap >= gap_tol:
        return SpinChernResult(math.nan, None, None, None, math.nan, None, math.nan,
                               Reason.GAP_CLOSED)
    conserved = _conserved_sectors(tb, spin)
    if conserved is not None:
        return _conserved_spin_chern(tb, nocc, conserved, gap=gap, spin_gap_tol=spin_gap_tol,
                                     kmesh_n=kmesh_n, max_kmesh=max_kmesh, flux_tol=flux_tol)
    lip2 = hopping_bounds(tb.hoppings)[1]
    spin_norm = float(np.linalg.norm(spin, 2))
    spin_gap = [math.inf]
    nup_first: list[int] = []
    # Both sectors start from the same meshes and mostly refine the same cells: each set of
    # points is diagonalised once, for both.
    seen: dict[bytes, tuple[np.ndarray, ...]] = {}

    def evaluate(k: np.ndarray) -> tuple[np.ndarray, ...]:
        key = k.tobytes() + str(k.shape).encode()
        if key not in seen:
            e, v, slope = bands_and_slope(tb, k)
            up, down, eigs = prodan_sectors(v[..., :nocc], spin)
            nup = np.sum(eigs > 0, axis=-1)
            nup_first[:] = nup_first or [int(nup.flat[0])]
            spin_gap[0] = min(spin_gap[0], float(np.min(np.abs(eigs))))
            if spin_gap[0] < spin_gap_tol or np.any(nup != nup_first[0]):
                raise _SectorGapClosed
            ndown = nocc - nup_first[0]
            gap = e[..., nocc] - e[..., nocc - 1]
            mixing = _spin_mixing(v[..., :nocc], spin)
            sep = [np.stack([np.min(np.abs(w), axis=-1, initial=np.inf), gap, mixing], axis=-1)
                   for w in (eigs[..., ndown:], eigs[..., :ndown])]
            seen[key] = (up, down, sep[0], sep[1], slope)
        return seen[key]

    def sector(which: int):
        def data(k: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
            up, down, sep_up, sep_down, slope = evaluate(k)
            return (up, sep_up, slope) if which == 0 else (down, sep_down, slope)
        return data

    n0 = min(max(kmesh_n, min(gap_rule_kmesh(gap), START_CAP)), max_kmesh)
    values, flux, n_used = [], 0.0, 0
    try:
        for which in (0, 1):
            data = sector(which)
            m = data(np.zeros((1, 2)))[0].shape[-1]
            if m == 0:
                values.append(0)
                continue
            c, f, _, n = certified_chern(
                data, n0, m, 0.0, flux_tol=flux_tol, budget=WORK * max_kmesh * max_kmesh,
                max_n=max_kmesh, growth=GROWTH,
                bound=lambda sep, slope, h: sector_lambda(sep, slope, h, lip2, spin_norm))
            n_used = max(n_used, n)
            flux = max(flux, f)
            if c is None:
                return SpinChernResult(math.nan, None, None, None, spin_gap[0], n_used, flux,
                                       Reason.NOT_CONVERGED)
            values.append(c)
    except _SectorGapClosed:
        return SpinChernResult(math.nan, None, None, None, spin_gap[0], None, math.nan,
                               Reason.SECTOR_GAP_CLOSED)
    return _proven(*values, spin_gap[0], n_used, flux)
