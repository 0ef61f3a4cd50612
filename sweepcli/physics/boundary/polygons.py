"""Corner modes of polygonal open samples (triangles, hexagons, rhombi, squares, given polygons).

A polygonal sample (:class:`sweepcli.physics.samples.Polygon`) is counted by the rule of
:mod:`sweepcli.physics.boundary.counts` with its own :class:`~.counts.Regions`:

* corner regions: every orbital belongs to its nearest vertex (a Voronoi partition of the
  polygon; on a square it is the half-box partition of a box sample), so corner ``j`` is
  vertex ``j`` in counter-clockwise order;
* distances in rows of cells: an orbital's distance from side ``j`` is the number of whole
  lattice rows parallel to that side between it and the side (``floor`` of the distance over
  the row spacing, with the boundary tie-break of the sample), its corner distance the larger
  of its distances from the two sides that meet at its vertex, its face distance the smallest
  over all sides (the Chebyshev and face distances of a box on a square lattice);
* side: the shortest side in cells; corner regions reach a quarter of it, the pin bound and
  the size a count needs come from it.

The gap that confines the corner modes and their decay length come from ribbons periodic along
each side's lattice vector, terminated on one edge as the side is
(:func:`sweepcli.physics.samples.cut_ribbon`; the other edge is the anti-parallel side's, or,
without one, its levels are left out), as wide as the polygon's size (the ribbons of the first
size serve all sizes); the size is doubled up to ``max_size`` until the count settles
(:func:`polygon_sizes`).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

import numpy as np

from ...schema import Reason
from .. import samples
from ..lattice import TightBinding
from ..samples import POLYGON_SHIFT, Polygon
from . import counts
from .boxes import ModeCount, box_sizes, settle_count, static_boundary_gap
from .solvers import FloquetSample, static_levels
from .windows import Window


def polygon_regions(poly: Polygon, positions: np.ndarray, size: float) -> counts.Regions:
    """The :class:`~.counts.Regions` of the orbitals at Cartesian ``positions`` of the polygon
    scaled by ``size`` (module docstring)."""
    q = np.asarray(positions, float) + POLYGON_SHIFT
    verts = size * poly.vertices
    corner = np.argmin(np.linalg.norm(q[:, None, :] - verts[None], axis=2), axis=1)
    d = np.einsum("mjk,jk->mj", q[:, None, :] - verts[None], poly.inward_normals())
    rows = np.floor(d / poly.row_spacing()[None]).astype(int)
    before = np.roll(rows, 1, axis=1)  # distance from side j - 1, which ends at vertex j
    idx = np.arange(q.shape[0])
    cdist = np.maximum(rows[idx, corner], before[idx, corner])
    return counts.Regions(corner, cdist, rows.min(axis=1), poly.n, poly.side_cells(size))


#: Decay lengths below this (cells) are not trusted: they come from a flat band nearest the
#: gap centre (zero curvature, so :func:`~.boxes.gap_and_decay` gives ~0), which says nothing
#: about how fast a bound state decays; the count is then missing (``FINITE_SIZE``) rather
#: than decided with a pin bound at rounding level.
MIN_DECAY = 1e-2


def trusted_decay(xi: float) -> float:
    """``xi``, or ``inf`` when it is below :data:`MIN_DECAY` (a flat band's)."""
    return math.inf if xi < MIN_DECAY else xi


def check_polygon_side(poly: Polygon, size: int) -> None:
    """Raise ``ValueError`` unless the shortest side has at least ``MIN_SIDE`` cells."""
    if poly.side_cells(size) < counts.MIN_SIDE:
        raise ValueError(f"a polygon of size {size} has a side of {poly.side_cells(size)} cells; "
                         f"each side needs at least {counts.MIN_SIDE} cells, so that corner "
                         f"regions of up to a quarter of a side can hold a bound mode")


def polygon_sizes(poly: Polygon, size: int, max_size: int | None, xi: float,
                  charged: bool) -> list[tuple[int]]:
    """Sizes ``size`` doubled up to ``max_size`` whose shortest side is long for the decay
    length ``xi`` (:func:`~.counts.required_side`), as 1-tuples."""
    largest = int(size) if max_size is None else max(int(max_size), int(size))
    need = counts.required_side(xi, charged=charged)
    return [(s,) for s in box_sizes(int(size), largest) if poly.side_cells(s) >= need]


def _covering(tb: TightBinding, poly: Polygon, size: int) -> tuple[int, int]:
    return samples.polygon_cells(poly, size)[1]


def polygon_modes(tb: TightBinding, poly: Polygon, size: int, window: Window, *,
                  xi: float | None = None, max_size: int | None = None,
                  chiral: np.ndarray | None = None, method: str = "auto",
                  memory_limit: float | None = None, gap_tol: float = 1e-6) -> ModeCount:
    """Corner modes of a static polygonal sample in ``window``, one count per vertex.

    Parameters as :func:`~.boxes.box_modes`, with the polygon and its first ``size``; ``xi``
    defaults to the longest decay length of ribbons along the sides, as wide as ``size``. The
    memory check and the solver choice use the covering box (an upper bound). The result's
    ``shape`` is ``(size,)`` of the sample finally diagonalised, ``per_corner`` is in vertex
    order.
    """
    check_polygon_side(poly, size)
    samples.choose_method(tb, _covering(tb, poly, size), method, limit=memory_limit)
    if window.closed(gap_tol):
        return ModeCount(None, None, window=window, reason=Reason.GAP_CLOSED)
    if xi is None:
        xi = static_boundary_gap(tb, window.centre, int(size),
                                 cuts=samples.polygon_cuts(poly, size))[1]
    xi = trusted_decay(xi)
    sizes = polygon_sizes(poly, size, max_size, xi, chiral is not None)
    return settle_count(
        sizes, window, xi,
        lambda s, m: static_levels(samples.polygon_hamiltonian(tb, poly, s[0]), window, m),
        lambda s: _method(tb, poly, s[0], method, memory_limit, False),
        lambda s: _regions(tb, poly, s[0]), chiral=chiral)


def floquet_polygon_modes(factors: Sequence[tuple[float, TightBinding]], poly: Polygon,
                          size: int, windows: dict[str, Window], *, xi: dict[str, float],
                          max_size: int | None = None, chiral: np.ndarray | None = None,
                          method: str = "auto", memory_limit: float | None = None,
                          gap_tol: float = 1e-6) -> dict[str, ModeCount]:
    """:func:`polygon_modes` of a drive at quasienergy 0 and ``pi/T`` (``xi`` per gap, from
    :func:`~.boxes.floquet_boundary_gaps` with the polygon's ``cuts``)."""
    tb0 = factors[0][1]
    check_polygon_side(poly, size)
    samples.choose_method(tb0, _covering(tb0, poly, size), method, driven=True,
                          limit=memory_limit)
    xi = {name: trusted_decay(x) for name, x in xi.items()}
    wanted = {name: polygon_sizes(poly, size, max_size, xi[name], chiral is not None)
              for name, w in windows.items() if not w.closed(gap_tol)}
    solvers: dict[tuple[int], FloquetSample] = {}

    def levels_of(window: Window) -> Callable:
        def solve(s: tuple[int], m: str) -> tuple[np.ndarray, np.ndarray]:
            if s not in solvers:
                steps = [(float(t), samples.polygon_hamiltonian(f, poly, s[0]))
                         for t, f in factors]
                solvers[s] = FloquetSample(steps, windows=[
                    windows[name] for name, sizes in wanted.items() if s in sizes])
            return solvers[s].levels(window, m)
        return solve

    out = {}
    for name, window in windows.items():
        if window.closed(gap_tol):
            out[name] = ModeCount(None, None, window=window, reason=Reason.GAP_CLOSED)
            continue
        out[name] = settle_count(
            wanted[name], window, xi[name], levels_of(window),
            lambda s: _method(tb0, poly, s[0], method, memory_limit, True),
            lambda s: _regions(tb0, poly, s[0]), chiral=chiral)
    return out


def _method(tb: TightBinding, poly: Polygon, size: int, method: str,
            memory_limit: float | None, driven: bool) -> str:
    if method != "auto":
        return samples.choose_method(tb, _covering(tb, poly, size), method, driven=driven,
                                     limit=memory_limit)
    # "auto" decides by the orbitals of the polygon itself, not its covering box.
    n = samples.polygon_sites(tb, poly, size)[0].size
    dense_max = samples.DENSE_MAX_DRIVEN if driven else samples.DENSE_MAX
    if n <= dense_max:
        return "dense"
    return samples.choose_method(tb, _covering(tb, poly, size), "auto", driven=driven,
                                 limit=memory_limit, dense_max=0)


def _regions(tb: TightBinding, poly: Polygon, size: int) -> counts.Regions:
    _, _, pos = samples.polygon_sites(tb, poly, size)
    return polygon_regions(poly, pos, size)


__all__ = ["check_polygon_side", "floquet_polygon_modes", "polygon_modes", "polygon_regions",
           "polygon_sizes"]
