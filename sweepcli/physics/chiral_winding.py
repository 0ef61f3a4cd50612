"""Winding numbers of chiral-symmetric 1D chains, with a convergence policy on the k-mesh.

Sign convention: with the chiral operator ``G`` (Hermitian, ``G^2 = 1``) and ``P_+-`` its
eigenspaces, ``h(k) = P_- H(k) P_+`` (the block from the +1 sector into the -1 sector) and
``nu = (1/2 pi i) oint dk d/dk log det h(k)``. For SSH with ``G = sigma_z`` and basis (A, B),
``h = H_BA = v + w e^{ik}`` and ``nu = +1`` for ``|v| < |w|`` (Asboth, Oroszlany and Palyi
2016, ch. 1).

The kernel :func:`det_winding` takes a batched loop of blocks, so it serves any chiral family
(Floquet frames included); :func:`winding_number` builds the loop from a :class:`TightBinding`
and doubles the mesh until the largest phase step of ``det h`` is below ``phase_tol`` and two
successive meshes agree (:func:`~sweepcli.physics.invariant_base.walk_meshes`).
"""

from __future__ import annotations

import math

import numpy as np

from ..schema import Reason
from .invariant_base import (
    PHASE_TOL,
    WINDING_KMESH,
    WINDING_MAX_KMESH,
    InvariantResult,
    occupied_gap,
    stacked_det,
    walk_meshes,
)
from .lattice import TightBinding, kmesh


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
    d = stacked_det(blocks)
    if np.any(np.abs(d) <= 1e-14 * np.max(np.abs(d))):
        return 0, float(np.pi)
    steps = np.angle(np.roll(d, -1) * np.conj(d))
    return int(round(steps.sum() / (2 * np.pi))), float(np.max(np.abs(steps)))


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
    gap = occupied_gap(tb, tb.norb // 2, gap)
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

    value, n, step, reason = walk_meshes(measure, kmesh_n, max_kmesh, 2.0, phase_tol)
    return InvariantResult(None if value is None else value[0], n, step, reason)
