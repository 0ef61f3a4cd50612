"""Measurements of static Bloch bands: bulk gap, Chern number, 1D winding, spin Chern number.

Each function takes a :class:`~sweepcli.physics.point.Point` and its declared options and
returns one value per declared quantity plus ``"reason"``. The bulk gap is memoised in
``point.cache`` under ``("band_gap", nocc, kmesh, refine)``; the invariants ask for it with the
default gap settings, so a job that measures ``gap`` with its defaults and an invariant computes
the spectrum once.
"""

from __future__ import annotations

import math
from typing import Any

from ...schema import Quantity, Reason
from ..chern import chern_number
from ..chiral_winding import winding_number
from ..invariant_base import (
    CHERN_KMESH,
    CHERN_MAX_KMESH,
    FLUX_TOL,
    GAP_KMESH,
    PHASE_TOL,
    WINDING_KMESH,
    WINDING_MAX_KMESH,
)
from ..point import Point
from ..registry import Param
from ..spectrum import GapResult, band_gap
from ..spin_chern import spin_chern_number
from . import MEASUREMENTS

#: Default uniform mesh of the gap search (points per direction); the refinement in continuous
#: k makes a fine mesh unnecessary in any dimension.
GAP_KMESH = GAP_KMESH

_FHS = "Fukui, Hatsugai and Suzuki, J. Phys. Soc. Jpn. 74, 1674 (2005)"


def point_gap(point: Point, nocc: int | None = None, kmesh: int = GAP_KMESH,
              refine: bool = True) -> GapResult:
    """The direct gap above ``nocc`` bands (default: the point's filling), memoised."""
    nocc = point.nocc if nocc is None else nocc
    key = ("band_gap", nocc, kmesh, bool(refine))
    return point.memo(key, lambda: band_gap(point.tb, nocc, kmesh, refine=refine))


def _gap_quantities(dim: int, driven: bool = False) -> tuple[Quantity, ...]:
    qs = [Quantity("gap", "float64", "energy", "smallest direct gap above the occupied bands")]
    for i in range(1, dim + 1):
        qs.append(Quantity(f"gap_k{i}", "float64", "1",
                           f"k{i} of the smallest gap, in units of the reciprocal vector b{i} "
                           f"(k{i} / 2 pi, in [-0.5, 0.5))"))
    return tuple(qs)


_KMESH_DOC = "points per reciprocal direction of the first k-mesh"
_MAX_KMESH_DOC = "largest k-mesh (points per direction) the convergence policy may use"


@MEASUREMENTS.register(
    "gap",
    description="smallest direct bulk gap above the occupied bands and where it occurs",
    source="uniform k-mesh, then every local minimum that a Lipschitz bound on the bands leaves "
           "able to hide a lower gap refined with scipy.optimize (BFGS on the squared gap)",
    params=(Param("kmesh", kind="int", default=GAP_KMESH, low=4, doc=_KMESH_DOC,
                  sweepable=False),
            Param("refine", kind="bool", default=True, doc="refine minima in continuous k",
                  sweepable=False)),
    quantities=_gap_quantities, dims=(1, 2), driven=False, operators=(),
)
def gap(point: Point, *, kmesh: int = GAP_KMESH, refine: bool = True) -> dict[str, Any]:
    """Bulk gap (energy units) and its location ``k_i / 2 pi`` in ``[-0.5, 0.5)``."""
    r = point_gap(point, kmesh=kmesh, refine=refine)
    out: dict[str, Any] = {"gap": r.gap}
    for i, ki in enumerate(r.k, start=1):
        out[f"gap_k{i}"] = float(ki / (2 * math.pi))
    out["reason"] = Reason.OK
    return out


_CHERN_PARAMS = (
    Param("kmesh", kind="int", default=CHERN_KMESH, low=4, doc=_KMESH_DOC + "; the gap "
          "rule ceil(3.2/sqrt(gap/2)) may raise it", sweepable=False),
    Param("max_kmesh", kind="int", default=CHERN_MAX_KMESH, low=4, doc=_MAX_KMESH_DOC,
          sweepable=False),
    Param("flux_tol", default=FLUX_TOL, low=0.0, high=math.pi, open_low=True,
          open_high=True, units="rad", doc="largest accepted Berry flux through one plaquette",
          sweepable=False),
)


@MEASUREMENTS.register(
    "chern",
    description="Chern number of the occupied bands (link variables, mesh raised until "
                "converged)",
    source=_FHS,
    params=_CHERN_PARAMS,
    quantities=(Quantity("chern", "int32", "1", "Chern number of the occupied bands"),
                Quantity("chern_kmesh", "int32", "1", "k-mesh points per direction used"),
                Quantity("chern_max_flux", "float64", "rad",
                         "largest Berry flux of one cell of that mesh (after local "
                         "subdivision)")),
    dims=(2,), driven=False, operators=(),
)
def chern(point: Point, *, kmesh: int = CHERN_KMESH, max_kmesh: int = CHERN_MAX_KMESH,
          flux_tol: float = FLUX_TOL) -> dict[str, Any]:
    """Chern number, sign as in :mod:`sweepcli.physics.chern` (QWZ: +1 for -2 < m < 0)."""
    g = point_gap(point).gap
    r = chern_number(point.tb, point.nocc, gap=g, gap_tol=point.gap_tol, kmesh_n=kmesh,
                         max_kmesh=max_kmesh, flux_tol=flux_tol)
    return {"chern": r.value, "chern_kmesh": r.kmesh, "chern_max_flux": r.max_step,
            "reason": r.reason}


@MEASUREMENTS.register(
    "winding",
    description="winding number of a chiral-symmetric chain (gap at zero energy)",
    source="Asboth, Oroszlany and Palyi, A Short Course on Topological Insulators (Springer "
           "2016), ch. 1 and 3",
    params=(Param("kmesh", kind="int", default=WINDING_KMESH, low=4, doc=_KMESH_DOC,
                  sweepable=False),
            Param("max_kmesh", kind="int", default=WINDING_MAX_KMESH, low=4,
                  doc=_MAX_KMESH_DOC, sweepable=False),
            Param("phase_tol", default=PHASE_TOL, low=0.0, high=math.pi, open_low=True,
                  open_high=True, units="rad",
                  doc="largest accepted phase step of det h(k) between neighbouring k points",
                  sweepable=False)),
    quantities=(Quantity("winding", "int32", "1", "winding number of det h(k), h = P- H P+"),
                Quantity("winding_kmesh", "int32", "1", "k-mesh points used")),
    dims=(1,), driven=False, operators=("chiral",),
)
def winding(point: Point, *, kmesh: int = WINDING_KMESH,
            max_kmesh: int = WINDING_MAX_KMESH, phase_tol: float = PHASE_TOL
            ) -> dict[str, Any]:
    """1D chiral winding number (SSH: +1 for |v| < |w|); needs half filling."""
    tb = point.tb
    if "chiral" not in tb.operators:
        raise ValueError("this model (at these parameters) has no chiral operator")
    if point.nocc != tb.norb // 2:
        raise ValueError(f"the chiral winding describes the gap at zero energy: filling must "
                         f"be {tb.norb // 2}, got {point.nocc}")
    g = point_gap(point).gap
    r = winding_number(tb, tb.operators["chiral"], gap=g, gap_tol=point.gap_tol,
                           kmesh_n=kmesh, max_kmesh=max_kmesh, phase_tol=phase_tol)
    return {"winding": r.value, "winding_kmesh": r.kmesh, "reason": r.reason}


@MEASUREMENTS.register(
    "spin_chern",
    description="spin Chern number and Z2 index from the projected spin P S P",
    source="Prodan, PRB 80, 125327 (2009); link variables of " + _FHS,
    params=_CHERN_PARAMS + (
        Param("spin_gap_tol", default=1e-3, low=0.0, high=1.0, open_low=True,
              doc="smallest accepted |eigenvalue| of P S P", sweepable=False),),
    quantities=(Quantity("spin_chern", "float64", "1",
                         "spin Chern number (C_up - C_down)/2 of the occupied bands"),
                Quantity("z2", "int32", "1", "spin Chern number mod 2"),
                Quantity("spin_gap", "float64", "1",
                         "smallest |eigenvalue| of the projected spin P S P on the k-mesh")),
    dims=(2,), driven=False, operators=("spin",),
)
def spin_chern(point: Point, *, kmesh: int = CHERN_KMESH,
               max_kmesh: int = CHERN_MAX_KMESH, flux_tol: float = FLUX_TOL,
               spin_gap_tol: float = 1e-3) -> dict[str, Any]:
    """Spin Chern number (BHZ: +1 for 0 < M/B < 4, -1 for 4 < M/B < 8) and Z2."""
    tb = point.tb
    if "spin" not in tb.operators:
        raise ValueError("this model has no spin operator")
    g = point_gap(point).gap
    r = spin_chern_number(tb, point.nocc, tb.operators["spin"], gap=g,
                              gap_tol=point.gap_tol, spin_gap_tol=spin_gap_tol, kmesh_n=kmesh,
                              max_kmesh=max_kmesh, flux_tol=flux_tol)
    return {"spin_chern": r.spin_chern, "z2": r.z2, "spin_gap": r.spin_gap, "reason": r.reason}
