"""Measurements of open samples: end modes of chains, chiral edge modes of ribbons, corner modes.

Static jobs build the samples from ``point.tb``; driven jobs from the steps of
``point.drive.factors()`` (``(duration, TightBinding)`` in time order), evolved with
:func:`sweepcli.physics.drives.evolution.evolve`. Conventions, windows and the classification
criterion are in :mod:`sweepcli.physics.boundary` and :mod:`sweepcli.physics.boundary.counts`.

Layout of the stored variables (``g`` is ``0``, plus ``pi`` for driven jobs):

* ``end_modes``: ``end_modes_g`` (both ends), ``end_modes_g_left`` (the end at cell 0),
  ``end_modes_g_right``; ``end_modes_g_states``, ``end_modes_g_weight``,
  ``end_modes_g_cells`` (what a reader needs to trust the count: in-window states, least
  bound weight among those counted, chain length used); and ``end_modes_method``;
* ``edge_modes``: ``chiral_edge_modes_g`` (net chiral modes on the low edge of the ribbon, +1
  per mode moving towards +k_par) and ``edge_gap_g``;
* ``corner_modes``: ``corner_modes_g`` (all corners) and one variable per corner,
  ``corner_modes_g_00``, ``_10``, ``_01``, ``_11``, the two digits saying whether the corner
  is at the low (0) or high (1) end of lattice directions a_1 and a_2;
  ``corner_modes_g_states``, ``_weight``, ``_size`` as for chains, ``corner_modes_g_edge_gap``
  (the gap that sets the window); and ``corner_modes_method``.

``*_method`` is 0 for dense diagonalisation, 1 for Lanczos. The quantities of a driven job are
``quantities(dim, driven=True)``. Each measurement has one reason per gap (reason groups
``"0"``, ``"pi"``; stored as ``end_modes_0_reason``, ``end_modes_pi_reason``, ...): a closed gap
at 0 leaves the ``_0`` variables missing with ``gap_closed`` in the ``_0`` reason while the
``_pi`` ones may still be filled with reason ``ok``. ``*_method`` belongs to no gap (one solver
code for the samples of both gaps); its reasons are both gaps' reasons.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

import numpy as np

from ...schema import Quantity, Reason
from .. import boundary as bd
from .. import samples
from ..lattice import TightBinding
from ..point import Point
from ..registry import Param
from . import MEASUREMENTS
from .driven import point_gaps, point_slicing
from .static import point_gap

METHOD_CODE = {"dense": 0, "sparse": 1}
_GAPS = {False: ("0",), True: ("0", "pi")}
_AT = {"0": "at zero (quasi)energy", "pi": "at quasienergy pi/T"}
_CORNERS = ("00", "10", "01", "11")

_WINDOW = Param("window", default=bd.WINDOW_FRACTION, low=0.0, high=1.0, open_low=True,
                doc="half-width of the in-gap window as a fraction of half the bulk gap",
                sweepable=False)
_METHOD = Param("method", kind="choice", default="auto", choices=("auto", "dense", "sparse"),
                doc="dense diagonalisation, Lanczos, or chosen by sample size",
                sweepable=False)


def point_windows(point: Point, fraction: float) -> dict[str, bd.Window]:
    """Windows of the point's gaps, memoised (``{"0": ...}`` static, ``{"0", "pi"}`` driven)."""
    if point.drive is None:
        # The direct gap is the one the gap and invariant measurements memoise.
        return point.memo(("boundary.window", point.nocc, fraction),
                          lambda: {"0": bd.static_window(point.tb, point.nocc, fraction,
                                                         direct_gap=point_gap(point).gap)})
    # The bulk quasienergy gaps the driven measurements memoise (one Floquet spectral layer).
    return point.memo(("boundary.floquet_windows", fraction),
                      lambda: bd.floquet_windows(point.drive, fraction, gaps=point_gaps(point)))


def point_factors(point: Point) -> list | None:
    """The drive's steps over one period, or ``None`` if a smooth drive's slicing failed.

    The slicing is the point's (:func:`~sweepcli.physics.measurements.driven.point_slicing`,
    decided once and shared with the bulk measurements); step and kick drives return their own
    factors.
    """
    def compute() -> list | None:
        slicing = point_slicing(point)
        return list(point.drive.factors(slices=slicing.slices)) if slicing.converged else None

    return point.memo(("boundary.factors",), compute)


def gap_groups(dim: int, driven: bool = False) -> tuple[str, ...]:
    """Reason groups of the boundary measurements: the gaps, ``("0",)`` or ``("0", "pi")``."""
    return _GAPS[driven]


def _unsliced(name: str, point: Point) -> dict[str, Any] | None:
    """All-missing result (``NOT_CONVERGED``) when a drive's time slicing did not converge."""
    if point.drive is None or point_factors(point) is not None:
        return None
    out: dict[str, Any] = {q.name: (None if q.dtype.startswith("int") else float("nan"))
                           for q in MEASUREMENTS[name].extra["quantities"](point.drive.dim, True)}
    out["reason"] = {g: Reason.NOT_CONVERGED for g in _GAPS[True]}
    return out


def _reasons(results: dict[str, Any]) -> dict[str, Reason]:
    """One reason per gap: ``{"0": ..., "pi": ...}``."""
    return {g: Reason(r.reason) for g, r in results.items()}


def _trust_quantities(prefix: str, g: str, size: str, size_doc: str) -> list[Quantity]:
    """What a reader needs to trust a count: in-window states, least bound weight, sample used."""
    return [Quantity(f"{prefix}_{g}_states", "int32", "1",
                     f"in-window states of the sample {_AT[g]}", g),
            Quantity(f"{prefix}_{g}_weight", "float64", "1",
                     f"smallest weight inside the boundary regions among the counted states "
                     f"{_AT[g]}", g),
            Quantity(f"{prefix}_{g}_{size}", "int32", "1", f"{size_doc} {_AT[g]}", g)]


def _end_quantities(dim: int, driven: bool = False) -> tuple[Quantity, ...]:
    qs = []
    for g in _GAPS[driven]:
        qs += [Quantity(f"end_modes_{g}", "int32", "1", f"end modes of an open chain {_AT[g]}",
                        g),
               Quantity(f"end_modes_{g}_left", "int32", "1", f"end modes {_AT[g]} at cell 0", g),
               Quantity(f"end_modes_{g}_right", "int32", "1",
                        f"end modes {_AT[g]} at the last cell", g),
               *_trust_quantities("end_modes", g, "cells", "chain length used, cells")]
    qs.append(Quantity("end_modes_method", "int32", "1", "solver: 0 dense, 1 Lanczos"))
    return tuple(qs)


@MEASUREMENTS.register(
    "end_modes",
    description="modes bound to the ends of an open chain, counted per end",
    source="Su, Schrieffer and Heeger, PRL 42, 1698 (1979); Kitaev, Physics-Uspekhi 44, 131 "
           "(2001); Asboth and Obuse, PRB 88, 121406 (2013) for drives",
    params=(Param("cells", kind="int", default=40, low=4, doc="chain length in cells",
                  sweepable=False),
            Param("max_cells", kind="int", default=160, low=8,
                  doc="longest chain the length may be doubled to until the count is settled",
                  sweepable=False),
            _WINDOW,
            _METHOD),
    quantities=_end_quantities, reason_groups=gap_groups, dims=(1,), driven=None,
    operators=(),
)
def end_modes(point: Point, *, cells: int = 40, max_cells: int = 160,
              window: float = bd.WINDOW_FRACTION, method: str = "auto") -> dict[str, Any]:
    """End modes of an open chain: total and per end, at 0 (and pi/T if driven).

    With a chiral operator (the model's ``"chiral"``; for a drive in its chiral-symmetric
    frame, when it has one) each end is credited its chiral charge, so bound pairs at +-E are
    not zero modes.
    """
    missing = _unsliced("end_modes", point)
    if missing is not None:
        return missing
    results = box_counts(point, "end_modes", dict(cells=cells, max_cells=max_cells,
                                                  window=window, method=method))
    out: dict[str, Any] = {}
    for g, r in results.items():
        pc = r.per_corner
        out[f"end_modes_{g}"] = r.total
        out[f"end_modes_{g}_left"] = None if pc is None else int(pc[0])
        out[f"end_modes_{g}_right"] = None if pc is None else int(pc[1])
        out.update(_trust("end_modes", g, "cells", r))
    out["end_modes_method"] = _method_code(results)
    out["reason"] = _reasons(results)
    return out


def _trust(prefix: str, g: str, size: str, r: bd.ModeCount) -> dict[str, Any]:
    return {f"{prefix}_{g}_states": r.states, f"{prefix}_{g}_weight": r.weight,
            f"{prefix}_{g}_{size}": int(r.shape[0]) if r.shape else None}


def _method_code(results: dict[str, bd.ModeCount]) -> int | None:
    methods = [r.method for r in results.values() if r.method]
    return METHOD_CODE[methods[-1]] if methods else None


def _anticommutes(g: np.ndarray, tb: TightBinding, atol: float = 1e-10) -> bool:
    """Whether the cell operator ``g`` is a chiral symmetry of ``tb``: ``g h g^+ = -h`` for the
    onsite block and every hopping, so ``Gamma H Gamma = -H`` on any open box."""
    return all(np.allclose(g @ h @ g.conj().T, -h, atol=atol)
               for h in (tb.onsite, *tb.hoppings.values()))


def _chiral_frame(point: Point) -> tuple[list | None, Any]:
    """Factors in a chiral-symmetric frame and the chiral operator, or ``(None, None)``.

    Static models: the model's own ``"chiral"`` operator, when it anticommutes with every block
    of the model. Drives: the frame starting at the first chiral-symmetric time the drive finds
    (``symmetric_times``; Asboth and Obuse, PRB 88, 121406 (2013)), where
    ``Gamma U Gamma = U^dagger``; drives without one are counted by pinning alone.
    """
    if point.drive is None:
        chiral = point.tb.operators.get("chiral")
        return None, chiral if chiral is not None and _anticommutes(chiral, point.tb) else None
    chiral = point_factors(point)[0][1].operators.get("chiral")
    if chiral is None:
        return None, None
    try:
        t1, _ = point.drive.symmetric_times(chiral)
    except ValueError:
        return None, None
    return point.drive.factors(start=t1, slices=point_slicing(point).slices), chiral


def box_counts(point: Point, measurement: str, options: dict[str, Any]
               ) -> dict[str, bd.ModeCount]:
    """The counts of ``end_modes`` or ``corner_modes`` at a point, with their eigenvectors.

    ``options`` are the measurement's (``cells, max_cells`` or ``size, max_size``, ``window``,
    ``method``). Returns ``{"0": ModeCount}`` static, ``{"0", "pi"}`` driven. Used by the
    measurements and by pictures of one point, so both show the same count.
    """
    corners = measurement == "corner_modes"
    if corners:
        shape, max_side = (options["size"],) * 2, options["max_size"]
    else:
        shape, max_side = (options["cells"],), options["max_cells"]
    results = _box(point, shape, max_side, options["window"], options["method"], corners=corners)
    if corners:
        bulk = point_windows(point, options["window"])
        for g, r in results.items():
            if r.reason == Reason.GAP_CLOSED and not bulk[g].closed(point.gap_tol):
                results[g] = replace(r, reason=Reason.EDGE_GAP_CLOSED)
    return results


def _box(point: Point, shape: tuple[int, ...], max_side: int, fraction: float, method: str, *,
         corners: bool = False) -> dict[str, bd.ModeCount]:
    # Sizes are checked before the bulk window is computed, so a bad sample fails at once.
    bd.check_sample_side(shape)
    driven = point.drive is not None
    factors = point_factors(point) if driven else None
    tb0 = factors[0][1] if driven else point.tb
    samples.choose_method(tb0, shape, method, driven=driven)
    wins = dict(point_windows(point, fraction))  # a copy: the memoised bulk windows stay
    xi = {g: math.inf for g in wins}
    open_gaps = [g for g, w in wins.items() if not w.closed(point.gap_tol)]
    if driven and open_gaps:
        # One evolution and one eigenvalue problem per ribbon momentum serve both gaps.
        found = bd.floquet_boundary_gaps(factors, point.drive.period,
                                         [wins[g].centre for g in open_gaps], shape[0])
    else:
        found = [bd.static_boundary_gap(point.tb, wins[g].centre, shape[0]) for g in open_gaps]
    for g, (gap, x) in zip(open_gaps, found):
        xi[g] = x
        if corners:
            wins[g] = bd.edge_window(wins[g], gap)
    frame, chiral = _chiral_frame(point)
    factors = frame or factors
    w0 = wins["0"]
    if not driven and not abs(w0.centre) <= 1e-9 * (1.0 + w0.gap):
        # Chiral charges count zero modes; a window off zero energy (another filling) holds
        # none, so its states are counted by pinning.
        chiral = None
    kw = dict(max_side=max_side, chiral=chiral, method=method, gap_tol=point.gap_tol)
    if not driven:
        return {"0": bd.box_modes(tb0, shape, wins["0"], xi=xi["0"], **kw)}
    return bd.floquet_box_modes(factors, shape, wins, xi=xi, **kw)


def _edge_quantities(dim: int, driven: bool = False) -> tuple[Quantity, ...]:
    qs = []
    for g in _GAPS[driven]:
        qs += [Quantity(f"chiral_edge_modes_{g}", "int32", "1",
                        f"net chiral modes {_AT[g]} on the low edge of a ribbon (+1 towards "
                        f"+k_par)", g),
               Quantity(f"edge_gap_{g}", "float64", "energy",
                        f"gap of the ribbon spectrum {_AT[g]}, minimised over k_par", g)]
    return tuple(qs)


@MEASUREMENTS.register(
    "edge_modes",
    description="chiral edge modes and edge gap of a ribbon (open across, periodic along)",
    source="Hatsugai, PRL 71, 3697 (1993) (bulk-edge correspondence); Rudner, Lindner, Berg "
           "and Levin, PRX 3, 031005 (2013) for drives",
    params=(Param("width", kind="int", default=24, low=4, doc="ribbon width in cells",
                  sweepable=False),
            _WINDOW,
            Param("open_axis", kind="choice", default=1, choices=(0, 1),
                  doc="lattice direction cut open (0: a_1, 1: a_2); the other stays periodic",
                  sweepable=False),
            Param("nk", kind="int", default=128, low=8,
                  doc="first number of k_par points (doubled until crossings resolve)",
                  sweepable=False)),
    quantities=_edge_quantities, reason_groups=gap_groups, dims=(2,), driven=None,
    operators=(),
)
def edge_modes(point: Point, *, width: int = 24, window: float = bd.WINDOW_FRACTION,
               open_axis: int = 1, nk: int = 128) -> dict[str, Any]:
    """Net chiral edge modes on the low edge and the edge gap, per gap."""
    missing = _unsliced("edge_modes", point)
    if missing is not None:
        return missing
    wins = point_windows(point, window)
    if point.drive is None:
        results = {"0": bd.ribbon_modes(point.tb, width, wins["0"], open_axis=open_axis, nk=nk,
                                        gap_tol=point.gap_tol)}
    else:
        results = bd.floquet_ribbon_modes(point_factors(point), width, wins, open_axis=open_axis,
                                          nk=nk, gap_tol=point.gap_tol)
    out: dict[str, Any] = {}
    for g, r in results.items():
        out[f"chiral_edge_modes_{g}"] = r.chiral
        out[f"edge_gap_{g}"] = r.edge_gap
    out["reason"] = _reasons(results)
    return out


def _corner_quantities(dim: int, driven: bool = False) -> tuple[Quantity, ...]:
    qs = []
    for g in _GAPS[driven]:
        qs.append(Quantity(f"corner_modes_{g}", "int32", "1",
                           f"corner modes of a square flake {_AT[g]}, all corners", g))
        for c in _CORNERS:
            qs.append(Quantity(f"corner_modes_{g}_{c}", "int32", "1",
                               f"corner modes {_AT[g]} at the corner ({c[0]}, {c[1]}) "
                               f"(0 low, 1 high end of a_1, a_2)", g))
        qs += _trust_quantities("corner_modes", g, "size", "flake side used, cells")
        qs.append(Quantity(f"corner_modes_{g}_edge_gap", "float64", "energy",
                           f"gap confining the corner modes {_AT[g]}: the smaller of the bulk "
                           f"gap and the edge gaps of ribbons as wide as the flake", g))
    qs.append(Quantity("corner_modes_method", "int32", "1", "solver: 0 dense, 1 Lanczos"))
    return tuple(qs)


@MEASUREMENTS.register(
    "corner_modes",
    description="modes bound to the corners of a square flake, counted per corner",
    source="Benalcazar, Bernevig and Hughes, Science 357, 61 (2017); Schindler et al., Science "
           "Advances 4, eaat0346 (2018)",
    params=(Param("size", kind="int", default=16, low=4, doc="flake side L in cells (L x L)",
                  sweepable=False),
            Param("max_size", kind="int", default=48, low=8,
                  doc="largest flake side the size may be doubled to until the count is settled",
                  sweepable=False),
            _WINDOW,
            _METHOD),
    quantities=_corner_quantities, reason_groups=gap_groups, dims=(2,), driven=None,
    operators=(),
)
def corner_modes(point: Point, *, size: int = 16, max_size: int = 48,
                 window: float = bd.WINDOW_FRACTION, method: str = "auto") -> dict[str, Any]:
    """Corner modes of a square flake: total and per corner, at 0 (and pi/T).

    The window is narrowed to the edge gap (ribbons of the flake's width, cut along both
    lattice directions); a gapless edge leaves the counts missing (``EDGE_GAP_CLOSED``).
    """
    missing = _unsliced("corner_modes", point)
    if missing is not None:
        return missing
    results = box_counts(point, "corner_modes", dict(size=size, max_size=max_size,
                                                     window=window, method=method))
    out: dict[str, Any] = {}
    for g, r in results.items():
        out[f"corner_modes_{g}"] = r.total
        for i, c in enumerate(_CORNERS):
            out[f"corner_modes_{g}_{c}"] = None if r.per_corner is None else int(r.per_corner[i])
        out.update(_trust("corner_modes", g, "size", r))
        out[f"corner_modes_{g}_edge_gap"] = float("nan") if r.window is None else r.window.gap
    out["corner_modes_method"] = _method_code(results)
    out["reason"] = _reasons(results)
    return out


_SHAPES = (*samples.POLYGONS, "custom")


def point_polygon(tb: TightBinding, shape: str, vertices: Any, coordinates: str
                  ) -> samples.Polygon:
    """The polygon of ``[measure.polygon_modes]`` on the lattice of ``tb`` (``ValueError`` for
    a bad one, a custom shape without vertices or vertices with a built-in shape)."""
    if shape == "custom":
        if vertices is None:
            raise ValueError("shape = \"custom\" needs vertices")
        return samples.Polygon(tb, vertices, coordinates)
    if vertices is not None:
        raise ValueError(f"vertices are given, so shape must be \"custom\", not {shape!r}")
    verts, coords = samples.POLYGONS[shape]
    return samples.Polygon(tb, verts, coords)


def _polygon_quantities(dim: int, driven: bool = False) -> tuple[Quantity, ...]:
    qs = []
    for g in _GAPS[driven]:
        qs += [Quantity(f"polygon_modes_{g}", "int32", "1",
                        f"corner modes of a polygonal flake {_AT[g]}, all corners", g),
               Quantity(f"polygon_modes_{g}_min", "int32", "1",
                        f"fewest corner modes {_AT[g]} on one corner of the polygon", g),
               Quantity(f"polygon_modes_{g}_max", "int32", "1",
                        f"most corner modes {_AT[g]} on one corner of the polygon", g),
               *_trust_quantities("polygon_modes", g, "size", "polygon size used"),
               Quantity(f"polygon_modes_{g}_edge_gap", "float64", "energy",
                        f"gap confining the corner modes {_AT[g]}: the smaller of the bulk gap "
                        f"and the edge gaps of ribbons along the polygon's sides", g)]
    qs.append(Quantity("polygon_modes_method", "int32", "1", "solver: 0 dense, 1 Lanczos"))
    return tuple(qs)


@MEASUREMENTS.register(
    "polygon_modes",
    description="modes bound to the corners of a polygonal flake (triangle, hexagon, ...), "
                "counted per vertex",
    source="Benalcazar, Bernevig and Hughes, Science 357, 61 (2017); Ezawa, PRL 120, 026801 "
           "(2018) (breathing kagome triangles)",
    params=(Param("shape", kind="choice", default="triangle", choices=_SHAPES,
                  doc="built-in polygon, or \"custom\" with vertices", sweepable=False),
            Param("vertices", kind="points", default=None,
                  doc="vertices [[x, y], ...] of a convex polygon of size 1 whose sides run "
                      "along lattice vectors (shape = \"custom\")", sweepable=False),
            Param("coordinates", kind="choice", default="reduced",
                  choices=("reduced", "cartesian"),
                  doc="vertices in multiples of the lattice vectors or in Cartesian "
                      "coordinates", sweepable=False),
            Param("size", kind="int", default=12, low=4,
                  doc="scale of the polygon (cells along a side of a built-in polygon)",
                  sweepable=False),
            Param("max_size", kind="int", default=48, low=8,
                  doc="largest size the polygon may be doubled to until the count is settled",
                  sweepable=False),
            Param("energy", default=None,
                  doc="energy of the modes (static jobs): the window is centred on it, inside "
                      "a bulk gap; default the centre of the gap at the filling",
                  units="energy", sweepable=False),
            _WINDOW,
            _METHOD),
    quantities=_polygon_quantities, reason_groups=gap_groups, dims=(2,), driven=None,
    operators=(),
)
def polygon_modes(point: Point, *, shape: str = "triangle", vertices: Any = None,
                  coordinates: str = "reduced", size: int = 12, max_size: int = 48,
                  energy: float | None = None, window: float = bd.WINDOW_FRACTION,
                  method: str = "auto") -> dict[str, Any]:
    """Corner modes of a polygonal flake: total and the fewest and most on one vertex.

    Counted as ``corner_modes`` (:mod:`sweepcli.physics.boundary.polygons`): chiral charges
    per corner region when the model (or the drive's frame) has a chiral operator, otherwise
    pinning at the window centre, which ``energy`` sets for a static job (modes pinned off the
    gap centre, such as the zero-energy corner modes of the breathing kagome lattice).
    """
    missing = _unsliced("polygon_modes", point)
    if missing is not None:
        return missing
    results = polygon_counts(point, dict(shape=shape, vertices=vertices,
                                         coordinates=coordinates, size=size,
                                         max_size=max_size, energy=energy, window=window,
                                         method=method))
    out: dict[str, Any] = {}
    for g, r in results.items():
        pc = r.per_corner
        out[f"polygon_modes_{g}"] = r.total
        out[f"polygon_modes_{g}_min"] = None if pc is None else int(pc.min())
        out[f"polygon_modes_{g}_max"] = None if pc is None else int(pc.max())
        out.update(_trust("polygon_modes", g, "size", r))
        out[f"polygon_modes_{g}_edge_gap"] = float("nan") if r.window is None else r.window.gap
    out["polygon_modes_method"] = _method_code(results)
    out["reason"] = _reasons(results)
    return out


def polygon_counts(point: Point, options: dict[str, Any]) -> dict[str, bd.ModeCount]:
    """The counts of ``polygon_modes`` at a point (``per_corner`` in vertex order), with their
    eigenvectors: ``{"0": ModeCount}`` static, ``{"0", "pi"}`` driven."""
    driven = point.drive is not None
    factors = point_factors(point) if driven else None
    tb0 = factors[0][1] if driven else point.tb
    poly = point_polygon(tb0, options["shape"], options["vertices"], options["coordinates"])
    size, fraction = int(options["size"]), options["window"]
    bd.check_polygon_side(poly, size)
    if options["energy"] is not None and not driven:
        wins = {"0": point.memo(("boundary.energy_window", options["energy"], fraction),
                                lambda: bd.energy_window(point.tb, options["energy"], fraction))}
    else:
        wins = dict(point_windows(point, fraction))
    bulk = dict(wins)
    xi = {g: math.inf for g in wins}
    open_gaps = [g for g, w in wins.items() if not w.closed(point.gap_tol)]
    cuts = samples.polygon_cuts(poly, size)
    if driven and open_gaps:
        found = bd.floquet_boundary_gaps(factors, point.drive.period,
                                         [wins[g].centre for g in open_gaps], size, cuts=cuts)
    else:
        found = [bd.static_boundary_gap(point.tb, wins[g].centre, size, cuts=cuts)
                 for g in open_gaps]
    for g, (gap, x) in zip(open_gaps, found):
        xi[g] = x
        wins[g] = bd.edge_window(wins[g], gap)
    frame, chiral = _chiral_frame(point)
    factors = frame or factors
    w0 = wins["0"]
    if not driven and not abs(w0.centre) <= 1e-9 * (1.0 + w0.gap):
        chiral = None  # chiral charges count zero modes only
    kw = dict(max_size=options["max_size"], chiral=chiral, method=options["method"],
              gap_tol=point.gap_tol)
    if driven:
        results = bd.floquet_polygon_modes(factors, poly, size, wins, xi=xi, **kw)
    else:
        results = {"0": bd.polygon_modes(tb0, poly, size, wins["0"], xi=xi["0"], **kw)}
    for g, r in results.items():
        if r.reason == Reason.GAP_CLOSED and not bulk[g].closed(point.gap_tol):
            results[g] = replace(r, reason=Reason.EDGE_GAP_CLOSED)
    return results
