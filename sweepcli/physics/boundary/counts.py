"""Which in-window states of an open box sample are bound to which corner, and whether to trust it.

A boundary-mode count is a number papers rest on, so it is either right or missing with a reason.
"Right" means: a larger sample of the same model gives the same count. This module decides that
from the physics of the sample, not from a fixed region size.

Localisation
------------
A state bound to a boundary decays into the bulk as ``exp(-d / xi)`` (amplitude), so its weight
beyond a distance ``r`` from the boundary falls like ``exp(-2 r / xi)``. The decay length is set
by the gap that confines the mode and by the dispersion at the gap edge: for a massive Dirac
branch ``sqrt(d_0^2 + v^2 q^2)`` it is ``v / d_0``, which the curvature of the branch at its
minimum gives as ``sqrt(d'' / d_0)`` (:func:`sweepcli.physics.boundary.gap_and_decay`). The gap
is the bulk gap for the ends of a chain, and for the corners of a flake the smallest gap of
ribbons as wide as the flake (edge and projected bulk states; a corner mode of a second-order
phase decays along the edges with the edge gap).

Counting rule
-------------
1. *Sample large enough*: a bound state must fit into a corner region of at most ``L / 4``
   cells with at most ``TAIL_TOL`` of its weight outside, i.e. ``exp(-2 (L/4) / xi) <=
   TAIL_TOL``, ``L >= 2 xi ln(1 / TAIL_TOL)``. A smaller sample cannot tell a bound state
   from a bulk one, nor be sure that no mode was pushed out of the window by hybridisation
   across the sample: the count is missing (``FINITE_SIZE``) without diagonalising.
2. *Every in-window state is bound*: the in-window levels are grouped into near-degenerate
   clusters; for each cluster (projector ``P``, ``m`` states) the weight outside the corner
   regions of radius ``r`` is ``t(r) = 1 - tr(P Pi_corners(r)) / m``. The region radius used is
   the smallest ``r <= L / 4`` at which every cluster has ``t(r) <= TAIL_TOL`` (chosen from the
   measured decay, not fixed). If there is none, some in-window state is not bound to a corner
   of this sample (an edge or bulk state, or a mode longer than the sample allows): missing
   (``FINITE_SIZE``). The smallest ``1 - t(r)`` over the clusters is reported as the weight of
   the least bound counted state.
3. *Integer credit per corner*: with ``P`` now the projector on all ``M`` in-window states,
   corner ``c`` holds ``f_c = M tr(P Pi_c) / tr(P Pi_corners)`` states. Each ``f_c`` must lie
   within ``INTEGER_TOL`` of an integer (three states spread over four corners give 3/4 each:
   missing, ``FINITE_SIZE``); the credits then add up to ``M``.
4. *Chiral chains*: when the sample has a chiral operator ``Gamma`` (cell-local,
   ``Gamma H Gamma = -H``, or ``Gamma U Gamma = U^dagger`` in a symmetric time frame) the count at
   each end is the chiral charge ``|tr(Gamma P Pi_end)|``: a pair of bound states at ``+-E`` (or
   ``+-eps``) inside the window has opposite charges and is not a zero (or pi) mode. The
   charges must be near integers too.

All traces are of projectors on whole clusters, so nothing depends on the basis chosen inside
a degenerate subspace. The thresholds ``TAIL_TOL = 0.05`` and ``INTEGER_TOL = 0.15`` are common
practice with no published source; the rules above make them conditions on localisation
rather than on region sizes.

Geometry
--------
Corners of a box of ``L_1 x ... x L_d`` cells are numbered ``sum_i b_i 2^i`` with ``b_i = 1`` at
the high end of direction ``i`` (chain: 0 = left, 1 = right; flake: 0 = (low a_1, low a_2), 1 =
(high, low), 2 = (low, high), 3 = (high, high)). A cell belongs to the half-box of its nearest
corner; its corner distance is the Chebyshev distance ``max_i min(c_i, L_i - 1 - c_i)`` and its
face distance ``min_i min(c_i, L_i - 1 - c_i)``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ...schema import Reason

TAIL_TOL = 0.05
INTEGER_TOL = 0.15
#: Clusters: consecutive in-window levels closer than this fraction of the window half-width.
DEGENERACY = 0.1
#: Smallest side of a box sample in cells.
MIN_SIDE = 8
KIND_NAMES = ("bulk", "edge", "corner")


@dataclass(frozen=True)
class Count:
    """Boundary modes of one box sample in one window.

    Attributes
    ----------
    per_corner : (2**d,) int, or ``None`` when missing.
    total : sum of ``per_corner``, or ``None``.
    states : number of in-window states (levels).
    weight : smallest weight inside the corner regions among the counted clusters (``nan`` when
        nothing was counted).
    region : corner-region radius used, cells (0 when nothing was counted).
    kinds : (m,) int per level, 0 bulk, 1 edge (bound to a face), 2 corner (end).
    reason : :class:`Reason`.
    """

    per_corner: np.ndarray | None
    total: int | None
    states: int
    weight: float
    region: int
    kinds: np.ndarray
    reason: Reason


def required_side(xi: float) -> float:
    """Smallest side (cells) whose ``L/4`` corner regions hold all but ``TAIL_TOL`` of a mode."""
    return 2.0 * xi * math.log(1.0 / TAIL_TOL)


def _half_index(cells: np.ndarray, shape: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Corner number, corner distance and face distance of every orbital (module docstring)."""
    to_low = cells
    to_high = shape - 1 - cells
    high = to_high < to_low
    dist = np.minimum(to_low, to_high)
    corner = (high * (2 ** np.arange(cells.shape[1]))).sum(axis=1)
    return corner, dist.max(axis=1), dist.min(axis=1)


def corner_regions(cells: np.ndarray, shape: Sequence[int], radius: int) -> np.ndarray:
    """Corner number of every orbital within corner distance ``< radius``, else -1."""
    corner, cdist, _ = _half_index(np.asarray(cells), np.asarray([int(x) for x in shape]))
    return np.where(cdist < radius, corner, -1)


def _clusters(levels: np.ndarray, halfwidth: float) -> list[np.ndarray]:
    order = np.argsort(levels, kind="stable")
    breaks = np.flatnonzero(np.diff(levels[order]) > DEGENERACY * halfwidth) + 1
    return np.split(order, breaks)


def _orbital_weights(vectors: np.ndarray, members: np.ndarray) -> np.ndarray:
    """Diagonal of the projector on a cluster (orthonormalised, so basis independent)."""
    q, _ = np.linalg.qr(vectors[:, members])
    return np.sum(np.abs(q) ** 2, axis=1)


def count(levels: np.ndarray, vectors: np.ndarray, cells: np.ndarray, shape: Sequence[int],
          halfwidth: float, *, chiral: np.ndarray | None = None) -> Count:
    """Apply the counting rule (module docstring, steps 2-4) to the in-window states of a box.

    Parameters
    ----------
    levels : (m,) in-window levels relative to the window centre (energy).
    vectors : (N, m) their eigenvectors (columns).
    cells : (N, d) int, the cell of every sample orbital
        (:func:`sweepcli.physics.samples.sample_sites`).
    shape : (d,) box size in cells.
    halfwidth : window half-width (sets the degeneracy tolerance of clusters).
    chiral : (n, n) cell-local chiral operator, or ``None``; used for chains only (step 4).

    Returns
    -------
    Count
    """
    shape_a = np.asarray([int(x) for x in shape])
    d = shape_a.size
    ncorner = 2 ** d
    m = levels.size
    kinds = np.zeros(m, dtype=int)
    if m == 0:
        return Count(np.zeros(ncorner, int), 0, 0, float("nan"), 0, kinds, Reason.OK)
    corner, cdist, fdist = _half_index(np.asarray(cells), shape_a)
    rmax = max(1, int(shape_a.min()) // 4)
    groups = _clusters(levels, halfwidth)
    weights = [_orbital_weights(vectors, g) for g in groups]
    # inside[j, r-1]: fraction of cluster j within corner distance < r, for r = 1 .. rmax
    radii = np.arange(1, rmax + 1)
    inside = np.array([[w[cdist < r].sum() / g.size for r in radii]
                       for w, g in zip(weights, groups)])
    on_face = np.array([w[fdist < rmax].sum() / g.size for w, g in zip(weights, groups)])
    bound = inside >= 1.0 - TAIL_TOL
    for j, g in enumerate(groups):
        kinds[g] = 2 if bound[j, -1] else (1 if on_face[j] >= 1.0 - TAIL_TOL else 0)
    ok_radius = np.flatnonzero(bound.all(axis=0))
    if ok_radius.size == 0:
        return Count(None, None, m, float(inside[:, -1].min()), rmax, kinds, Reason.FINITE_SIZE)
    r = int(radii[ok_radius[0]])
    weight = float(inside[:, ok_radius[0]].min())
    region = cdist < r
    if chiral is not None and d == 1:
        q, _ = np.linalg.qr(vectors)
        n = chiral.shape[0]
        gq = np.einsum("ab,cbm->cam", chiral, q.reshape(-1, n, m)).reshape(q.shape)
        # tr(Gamma P Pi_c) = sum over the orbitals i of corner c of (Gamma P)_ii, P = q q^dagger
        diag = np.einsum("ia,ia->i", gq, q.conj()).real
        charge = np.array([diag[region & (corner == c)].sum() for c in range(ncorner)])
        credit = np.abs(charge)
    else:
        w = np.sum(np.abs(np.linalg.qr(vectors)[0]) ** 2, axis=1)
        per = np.bincount(corner[region], weights=w[region], minlength=ncorner)
        credit = m * per / per.sum()
    rounded = np.rint(credit)
    if np.any(np.abs(credit - rounded) > INTEGER_TOL):
        return Count(None, None, m, weight, r, kinds, Reason.FINITE_SIZE)
    per_corner = rounded.astype(int)
    if (chiral is None or d != 1) and per_corner.sum() != m:
        return Count(None, None, m, weight, r, kinds, Reason.FINITE_SIZE)
    return Count(per_corner, int(per_corner.sum()), m, weight, r, kinds, Reason.OK)
