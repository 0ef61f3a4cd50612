"""Boundary modes of open samples: end, edge and corner modes, static and periodically driven.

The package's public functions are importable from here (``from sweepcli.physics import
boundary as bd; bd.box_modes(...)``); by concern they live in

* :mod:`~sweepcli.physics.boundary.windows`: energy (quasienergy) windows of in-gap levels,
  set from the bulk gaps (:class:`Window`, :func:`static_window`, :func:`floquet_windows`,
  :func:`edge_window`);
* :mod:`~sweepcli.physics.boundary.solvers`: the in-window levels and eigenvectors of one
  sample, dense or Lanczos (:func:`static_levels`, :func:`floquet_levels`);
* :mod:`~sweepcli.physics.boundary.counts`: the counting rule, which in-window states are bound
  to which corner (end) and whether the count can be trusted;
* :mod:`~sweepcli.physics.boundary.boxes`: end and corner modes of chains and flakes, the gaps
  and decay lengths that confine them, and the box doubling (:class:`ModeCount`,
  :func:`box_modes`, :func:`floquet_box_modes`);
* :mod:`~sweepcli.physics.boundary.polygons`: corner modes of polygonal samples, one count per
  vertex (:func:`polygon_modes`, :func:`floquet_polygon_modes`);
* :mod:`~sweepcli.physics.boundary.ribbons`: chiral edge modes and edge gaps of ribbons
  (:class:`EdgeModes`, :func:`ribbon_modes`, :func:`floquet_ribbon_modes`).

Quasienergies are ``eps = -arg(lambda) / T`` in ``(-pi/T, pi/T]``
(:func:`sweepcli.physics.quasienergy.wrap_quasienergy`); levels are given relative to the centre
of their window.
"""

from .boxes import (
    DECAY_STEP,
    ModeCount,
    box_modes,
    box_sizes,
    check_sample_side,
    count_boxes,
    floquet_boundary_gap,
    floquet_boundary_gaps,
    floquet_box_modes,
    gap_and_decay,
    settle_count,
    static_boundary_gap,
)
from .polygons import (
    check_polygon_side,
    floquet_polygon_modes,
    polygon_modes,
    polygon_regions,
    polygon_sizes,
)
from .ribbons import (
    K_OFFSET,
    EdgeModes,
    floquet_ribbon_modes,
    low_edge_mask,
    ribbon_kgrid,
    ribbon_modes,
    signed_crossings,
)
from .solvers import (
    SIGMA_OFFSET,
    V0_SEED,
    FloquetSample,
    floquet_levels,
    sample_steps,
    static_levels,
)
from .windows import (
    WINDOW_FRACTION,
    Window,
    default_kmesh,
    edge_window,
    energy_window,
    floquet_windows,
    static_window,
)

__all__ = [
    "DECAY_STEP", "K_OFFSET", "SIGMA_OFFSET", "V0_SEED", "WINDOW_FRACTION",
    "EdgeModes", "FloquetSample", "ModeCount", "Window",
    "box_modes", "box_sizes", "check_polygon_side", "check_sample_side", "count_boxes",
    "default_kmesh",
    "edge_window", "energy_window", "floquet_boundary_gap", "floquet_boundary_gaps",
    "floquet_box_modes", "floquet_levels", "floquet_polygon_modes", "polygon_modes",
    "polygon_regions", "polygon_sizes", "settle_count",
    "floquet_ribbon_modes", "floquet_windows", "gap_and_decay", "low_edge_mask",
    "ribbon_kgrid", "ribbon_modes", "sample_steps", "signed_crossings", "static_boundary_gap",
    "static_levels", "static_window",
]
