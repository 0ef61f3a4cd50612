"""Which in-window states of an open box sample are boundary modes, and whether to trust the count.

A boundary-mode count is a number papers rest on, so it is either right or missing with a reason.
"Right" means: only modes pinned at the gap centre (0, or pi/T for a drive) or protected by a
symmetry are counted, and a larger sample of the same model gives the same count. This module
decides that from the physics of the sample, not from a fixed weight threshold.

Localisation and pinning
------------------------
A state bound to a boundary decays into the bulk as ``exp(-d / xi)`` (amplitude). The decay
length is set by the gap that confines the mode and by the dispersion at the gap edge: for a
massive Dirac branch ``sqrt(d_0^2 + v^2 q^2)`` it is ``v / d_0``, which the curvature of the
branch at its minimum gives as ``sqrt(d'' / d_0)``
(:func:`sweepcli.physics.boundary.gap_and_decay`).
The gap is the bulk gap for the ends of a chain, and for the corners of a flake the smallest gap
of ribbons as wide as the flake (a corner mode of a second-order phase decays along the edges
with the edge gap).

Two such modes a distance ``L`` apart overlap by ``exp(-L / xi)``, so a mode that topology puts
at the gap centre sits there on a sample of side ``L`` up to a splitting of order
``(gap / 2) exp(-L / xi)``: it is *pinned*, its distance from the centre exponentially small in
the sample size. A state bound to a corner at a finite distance from the centre that does not
shrink with ``L`` (a bound pair at ``+-eps`` that the boundary pulls into the window) is not a
mode. :func:`pin_bound` is the largest distance accepted as pinned, ``(gap / 2) exp(-L / (2
xi))``: the square root of the expected splitting, a margin of ``exp(L / (2 xi)) >= 20`` against
an underestimated ``xi`` on any sample allowed by rule 1.

Counting rule
-------------
1. *Sample large enough* (:func:`required_side`): a smaller sample cannot tell a bound state
   from a bulk one, and hybridisation across it may push modes out of the window, so the count
   is missing (``FINITE_SIZE``) without diagonalising. Counted by pinning (step 3) the side must
   be ``L >= 2 xi ln(1 / TAIL_TOL)``; counted by charge (step 2) ``L >= xi ln(2 / INTEGER_TOL)``
   is enough, since the charges themselves are integers only when the modes fit their
   quadrants.
2. *Symmetry charge* (a chiral operator ``Gamma``, cell-local, with ``Gamma H Gamma = -H``, or
   ``Gamma U Gamma = U^dagger`` in a chiral-symmetric time frame of a drive): zero modes (and
   pi modes) are protected, and corner ``c`` holds ``|Q_c|`` of them, its chiral charge
   ``Q_c = tr(Gamma P Pi_c)`` with ``P`` the projector on all in-window states and ``Pi_c`` the
   half-box (quadrant) of the corner. A bound pair at ``+-eps`` has charge 0 wherever it sits,
   so it is no reason to drop the count; modes of opposite chirality at one corner are not
   protected and cancel. Every ``Q_c`` must lie within ``INTEGER_TOL`` of an integer (a charge
   spread over two quadrants, a mode longer than the sample, is not): else ``FINITE_SIZE``.
3. *Pinning* (no symmetry): the in-window levels within :func:`pin_bound` of the centre are the
   modes. They must be isolated (no level between the bound and ``ISOLATION`` times it: else the
   sample cannot tell, ``FINITE_SIZE``); every other in-window cluster must be bound to a corner
   (at least ``1 - TAIL_TOL`` of its weight within ``L / 4`` cells of the corners): it is then a
   bound state off the centre, not a mode. A cluster neither pinned nor bound (an edge or bulk
   state in the window) leaves the count missing (``FINITE_SIZE``). Corner ``c`` is credited
   ``f_c = tr(P_pin Pi_c)``, the weight of the pinned projector in its quadrant; every ``f_c``
   must lie within ``INTEGER_TOL`` of an integer (three states spread over four corners give
   3/4 each: missing), and the credits add up to the number of pinned states.

All traces are of projectors on whole clusters, so nothing depends on the basis chosen inside
a degenerate subspace. ``TAIL_TOL = 0.05``, ``INTEGER_TOL = 0.15`` and ``ISOLATION = 10`` are
common practice with no published source.

Geometry
--------
The rule sees a sample through its :class:`Regions`: the corner region of every orbital, its
corner distance and its face distance (in rows of cells), and the shortest side. Corners of a
box of ``L_1 x ... x L_d`` cells are numbered ``sum_i b_i 2^i`` with ``b_i = 1`` at the high end
of direction ``i`` (chain: 0 = left, 1 = right; flake: 0 = (low a_1, low a_2), 1 = (high, low),
2 = (low, high), 3 = (high, high)). A cell belongs to the half-box (quadrant) of its
nearest corner; its corner distance is the Chebyshev distance ``max_i min(c_i, L_i - 1 - c_i)``
and its face distance ``min_i min(c_i, L_i - 1 - c_i)`` (:func:`box_regions`). A polygonal
sample (:func:`sweepcli.physics.boundary.polygons.polygon_regions`) numbers its corners by its
vertices and gives each orbital to its nearest vertex (a Voronoi partition, which is the
half-box partition on a square); its distances count the rows of cells between an orbital and
the sides of the polygon.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ...schema import Reason

TAIL_TOL = 0.05
INTEGER_TOL = 0.15
ISOLATION = 10.0
#: Relative rounding of a diagonalised level: the smallest pin bound, in units of the gap.
PIN_FLOOR = 1e-9
#: Clusters: consecutive in-window levels closer than this fraction of the window half-width.
DEGENERACY = 0.1
#: Smallest side of a box sample in cells.
MIN_SIDE = 8
KIND_NAMES = ("bulk", "edge", "corner", "bound")
BULK, EDGE, MODE, BOUND = range(4)


@dataclass(frozen=True)
class Count:
    """Boundary modes of one box sample in one window.

    Attributes
    ----------
    per_corner : (2**d,) int, or ``None`` when missing.
    total : sum of ``per_corner``, or ``None``.
    states : number of in-window states (levels).
    weight : smallest weight within ``region`` cells of the corners among the counted clusters
        (``nan`` when nothing was counted); reported, not a threshold.
    region : the smallest corner-region radius (cells, at most ``L / 4``) holding all but
        ``TAIL_TOL`` of every counted cluster, or ``L / 4`` when none does (0 when nothing was
        counted).
    kinds : (m,) int per level: 0 bulk, 1 edge (bound to a face), 2 counted mode (pinned or
        carrying chiral charge), 3 bound to a corner off the centre (not a mode).
    reason : :class:`Reason`.
    """

    per_corner: np.ndarray | None
    total: int | None
    states: int
    weight: float
    region: int
    kinds: np.ndarray
    reason: Reason


def required_side(xi: float, *, charged: bool = False) -> float:
    """Smallest side (cells) of a sample that can settle a count (rule 1, module docstring).

    Counted by pinning: ``2 xi ln(1 / TAIL_TOL)``, so that ``L / 4`` corner regions hold all but
    ``TAIL_TOL`` of a bound state and the pin bound stays below ``gap / 40``. Counted by chiral
    charge (``charged``): ``xi ln(2 / INTEGER_TOL)``, so that the tail of a mode beyond its
    quadrant, ``exp(-L / xi)``, is at most half the integer tolerance of a charge, and the
    splitting of two hybridised modes, ``(gap / 2) exp(-L / xi)``, stays far inside the window.
    """
    if charged:
        return xi * math.log(2.0 / INTEGER_TOL)
    return 2.0 * xi * math.log(1.0 / TAIL_TOL)


def pin_bound(gap: float, xi: float, side: int) -> float:
    """Largest distance from the gap centre (energy) of a mode pinned there on a side ``side``.

    ``(gap / 2) exp(-side / (2 xi))`` (module docstring), and never below ``PIN_FLOOR * gap``,
    the rounding of a diagonalisation.
    """
    decay = math.exp(-side / (2.0 * xi)) if xi > 0 else 0.0
    return 0.5 * gap * max(decay, PIN_FLOOR)


@dataclass(frozen=True)
class Regions:
    """How the counting rule sees a sample's orbitals.

    Attributes
    ----------
    corner : (N,) int, the corner region of every orbital (``0 .. ncorner - 1``).
    cdist : (N,) int, its corner distance (rows of cells from the sides meeting at its corner).
    fdist : (N,) int, its face distance (rows of cells from the nearest side).
    ncorner : number of corners.
    side : shortest side in cells (corner regions reach up to a quarter of it).
    """

    corner: np.ndarray
    cdist: np.ndarray
    fdist: np.ndarray
    ncorner: int
    side: int


def box_regions(cells: np.ndarray, shape: Sequence[int]) -> Regions:
    """The :class:`Regions` of a box of ``shape`` cells (module docstring, Geometry)."""
    shape_a = np.asarray([int(x) for x in shape])
    corner, cdist, fdist = _half_index(np.asarray(cells), shape_a)
    return Regions(corner, cdist, fdist, 2 ** shape_a.size, int(shape_a.min()))


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


def _projector_diagonal(vectors: np.ndarray, members: np.ndarray,
                        chiral: np.ndarray | None = None) -> np.ndarray:
    """Diagonal of ``P`` (or of ``Gamma P``) for the projector ``P`` on some columns.

    The columns are orthonormalised first, so the result does not depend on the basis chosen
    inside a degenerate subspace. ``Gamma`` is cell-local, ``(n, n)``.
    """
    q, _ = np.linalg.qr(vectors[:, members])
    if chiral is None:
        return np.sum(np.abs(q) ** 2, axis=1)
    n, m = chiral.shape[0], q.shape[1]
    gq = np.einsum("ab,cbm->cam", chiral, q.reshape(-1, n, m)).reshape(q.shape)
    return np.einsum("ia,ia->i", gq, q.conj()).real


def _integers(credit: np.ndarray) -> np.ndarray | None:
    rounded = np.rint(credit)
    return None if np.any(np.abs(credit - rounded) > INTEGER_TOL) else rounded.astype(int)


def count(levels: np.ndarray, vectors: np.ndarray, cells: np.ndarray, shape: Sequence[int],
          halfwidth: float, *, pin: float, chiral: np.ndarray | None = None) -> Count:
    """Apply the counting rule (module docstring, steps 2-3) to the in-window states of a box.

    Parameters
    ----------
    levels : (m,) in-window levels relative to the window centre (energy).
    vectors : (N, m) their eigenvectors (columns).
    cells : (N, d) int, the cell of every sample orbital
        (:func:`sweepcli.physics.samples.sample_sites`).
    shape : (d,) box size in cells.
    halfwidth : window half-width (sets the degeneracy tolerance of clusters).
    pin : :func:`pin_bound` of this sample (energy); used without ``chiral``.
    chiral : (n, n) cell-local chiral operator of the sample (or of its chiral-symmetric time
        frame), or ``None``; with it every corner is credited its chiral charge (step 2).

    Returns
    -------
    Count
    """
    return count_regions(levels, vectors, box_regions(cells, shape), halfwidth, pin=pin,
                         chiral=chiral)


def count_regions(levels: np.ndarray, vectors: np.ndarray, regions: Regions, halfwidth: float,
                  *, pin: float, chiral: np.ndarray | None = None) -> Count:
    """:func:`count` on a sample of any shape, seen through its :class:`Regions`."""
    ncorner = regions.ncorner
    m = levels.size
    kinds = np.full(m, BULK, dtype=int)
    if m == 0:
        return Count(np.zeros(ncorner, int), 0, 0, float("nan"), 0, kinds, Reason.OK)
    corner, cdist, fdist = regions.corner, regions.cdist, regions.fdist
    rmax = max(1, int(regions.side) // 4)
    groups = _clusters(levels, halfwidth)
    weights = [_projector_diagonal(vectors, g) for g in groups]
    # inside[j, r - 1]: fraction of cluster j within corner distance < r, for r = 1 .. rmax
    inside = np.array([[w[cdist < r].sum() / g.size for r in range(1, rmax + 1)]
                       for w, g in zip(weights, groups)])
    on_face = np.array([w[fdist < rmax].sum() / g.size for w, g in zip(weights, groups)])
    bound = inside[:, -1] >= 1.0 - TAIL_TOL
    for j, g in enumerate(groups):
        kinds[g] = BOUND if bound[j] else (EDGE if on_face[j] >= 1.0 - TAIL_TOL else BULK)

    def missing() -> Count:
        return Count(None, None, m, float(inside[:, -1].min()), rmax, kinds, Reason.FINITE_SIZE)

    if chiral is not None:
        charges = np.array([np.bincount(corner, weights=_projector_diagonal(vectors, g, chiral),
                                        minlength=ncorner) for g in groups])
        counted = np.abs(charges).max(axis=1) > INTEGER_TOL
        per_corner = _integers(charges.sum(axis=0))
        if per_corner is None:
            return missing()
        per_corner = np.abs(per_corner)
    else:
        dist = np.array([np.abs(levels[g]).max() for g in groups])
        counted = dist <= pin
        ambiguous = (dist > pin) & (dist <= ISOLATION * pin)
        if np.any(ambiguous) or np.any(~counted & ~bound):
            return missing()
        pinned = [g for g, c in zip(groups, counted) if c]
        members = np.concatenate(pinned) if pinned else np.zeros(0, int)
        credit = np.zeros(ncorner)
        if members.size:
            credit = np.bincount(corner, weights=_projector_diagonal(vectors, members),
                                 minlength=ncorner)
        per_corner = _integers(credit)
        if per_corner is None or per_corner.sum() != members.size:
            return missing()
    for g, c in zip(groups, counted):
        if c:
            kinds[g] = MODE
    if not counted.any():
        return Count(per_corner, int(per_corner.sum()), m, float("nan"), 0, kinds, Reason.OK)
    held = np.flatnonzero((inside[counted] >= 1.0 - TAIL_TOL).all(axis=0))
    r = int(held[0]) + 1 if held.size else rmax
    return Count(per_corner, int(per_corner.sum()), m, float(inside[counted, r - 1].min()), r,
                 kinds, Reason.OK)
