"""Winding numbers of chiral-symmetric 1D chains, with a convergence policy on the k-mesh.

Sign convention: with the chiral operator ``G`` (Hermitian, ``G^2 = 1``) and ``P_+-`` its
eigenspaces, ``h(k) = P_- H(k) P_+`` (the block from the +1 sector into the -1 sector) and
``nu = (1/2 pi i) oint dk d/dk log det h(k)``. For SSH with ``G = sigma_z`` and basis (A, B),
``h = H_BA = v + w e^{ik}`` and ``nu = +1`` for ``|v| < |w|`` (Asboth, Oroszlany and Palyi
2016, ch. 1).

The kernel :func:`det_winding` takes a batched loop of blocks, so it serves any chiral family
(Floquet frames included); :func:`winding_number` builds the loop from a :class:`TightBinding`
and bisects its steps until a bound proves that none can hide a turn of ``det h``
(:mod:`sweepcli.physics.certify`).
"""

from __future__ import annotations

import math

import numpy as np

from ..schema import Reason
from .certify import (
    THETA_MAX,
    certified_loop,
    hermitian_norm,
    hopping_bounds,
    interval_theta,
    smallest_singular,
)
from .invariant_base import (
    PHASE_TOL,
    WINDING_KMESH,
    WINDING_MAX_KMESH,
    InvariantResult,
    occupied_gap,
    stacked_det,
)
from .lattice import TightBinding


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

    The loop starts with ``kmesh_n`` uniform points; every step whose bound on the change of
    ``arg det h`` (:func:`~sweepcli.physics.certify.interval_theta`, from ``sigma_min(h)`` and
    ``||dH/dk||`` at its ends and the second-derivative bound of the hoppings) is not below
    :data:`~sweepcli.physics.certify.THETA_MAX`, or whose phase step is at or above
    ``phase_tol``, is bisected, up to ``max_kmesh`` points in all; then the value is proven
    (what is proven and assumed: :mod:`sweepcli.physics.certify`), else missing with
    ``NOT_CONVERGED``.

    Parameters
    ----------
    tb : 1D model whose ``H(k)`` anticommutes with ``chiral``.
    chiral : (n, n) chiral operator, Hermitian, ``chiral^2 = 1``, traceless.
    gap : gap at zero energy (between bands ``n/2 - 1`` and ``n/2``); computed if ``None``.
    gap_tol : gaps below this count as closed.
    kmesh_n, max_kmesh : first and largest number of loop points.
    phase_tol : largest accepted phase step (rad).

    Returns
    -------
    InvariantResult
        ``value`` the winding of ``det h(k)``, ``h = P_- H P_+`` (module docstring: SSH gives
        +1 for ``|v| < |w|``); ``kmesh`` the number of loop points, ``max_step`` the largest
        phase step.
    """
    if tb.dim != 1:
        raise ValueError("the winding number needs a 1D model")
    chiral = np.asarray(chiral, dtype=complex)
    gap = occupied_gap(tb, tb.norb // 2, gap)
    if not gap >= gap_tol:
        return InvariantResult(None, None, math.nan, Reason.GAP_CLOSED)
    lip2 = hopping_bounds(tb.hoppings)[1]
    rank = tb.norb // 2
    checked = []

    def measure(s: np.ndarray):
        k = s[:, None]
        h = tb.bloch(k)
        if not checked:
            violation = np.max(np.abs(chiral @ h + h @ chiral))
            if violation > 1e-8 * max(1.0, float(np.max(np.abs(h)))):
                raise ValueError(f"H(k) does not anticommute with the chiral operator "
                                 f"(|{{G, H}}| up to {violation:.3g})")
            checked.append(True)
        q = chiral_blocks(h, chiral)
        d = stacked_det(q)
        steps = np.abs(np.angle(np.roll(d, -1) * np.conj(d)))
        slope = hermitian_norm(tb.bloch_derivative(k, 0))
        theta = interval_theta(smallest_singular(q), slope, np.diff(np.append(s, 2 * np.pi)),
                               lip2, rank)
        return (d, steps), (theta >= THETA_MAX) | (steps >= phase_tol)

    (d, steps), s, proven = certified_loop(measure, kmesh_n, max_kmesh)
    step = float(np.max(steps))
    if not proven:
        return InvariantResult(None, s.size, step, Reason.NOT_CONVERGED)
    w = int(round(float(np.sum(np.angle(np.roll(d, -1) * np.conj(d)))) / (2 * np.pi)))
    return InvariantResult(w, s.size, step, Reason.OK)
