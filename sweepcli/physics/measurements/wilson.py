"""Measurements from Wilson loops: the polarisation and Wannier bands of a band group, and the
quadrupole moment from nested Wilson loops (:mod:`sweepcli.physics.wilson`).

Both run in static and driven jobs. The band group is ``band_group = "lower"`` (static: the
``filling`` lowest bands; driven: the Floquet bands with quasienergy in ``(-pi/T, 0)``) or
``"upper"`` (the other bands; the Floquet bands in ``(0, pi/T)``). A static group is bounded by
the gap above the filled bands, a Floquet group by both quasienergy gaps: where that bulk gap is
at or below ``gap_tol`` (:func:`~.driven.bulk_closed`) the values are missing with
``GAP_CLOSED``.
"""

from __future__ import annotations

import math
from typing import Any

from ...schema import Quantity, Reason
from .. import wilson as wl
from ..point import Point
from ..registry import Param
from . import MEASUREMENTS
from .driven import bulk_closed, point_gaps, point_slicing

_BBH = "Benalcazar, Bernevig and Hughes, Science 357, 61 (2017); PRB 96, 245115 (2017)"

_GROUP = Param("band_group", kind="choice", default="lower", choices=("lower", "upper"),
               doc="the band group: lower = the filled bands (static) or the Floquet bands in "
                   "(-pi/T, 0) (driven); upper = the other bands, the Floquet bands in (0, pi/T)",
               sweepable=False)


def point_group(point: Point, band_group: str) -> wl.Group:
    """The band group of the point (module docstring), memoised."""
    upper = band_group == "upper"
    if point.drive is None:
        return point.memo(("wilson_group", band_group),
                          lambda: wl.static_group(point.tb, point.nocc, upper))
    return point.memo(("wilson_group", band_group),
                      lambda: wl.floquet_group(point.drive, point_slicing(point), upper))


def group_reason(point: Point) -> Reason:
    """``GAP_CLOSED`` where a gap bounding the group is closed in the bulk, ``NOT_CONVERGED``
    where a smooth drive's time slicing did not converge, else ``OK``."""
    if point.drive is not None and not point_gaps(point).converged:
        return Reason.NOT_CONVERGED
    return Reason.GAP_CLOSED if bulk_closed(point) else Reason.OK


def _polarisation_quantities(dim: int, driven: bool = False) -> tuple[Quantity, ...]:
    qs = [Quantity("polarisation", "float64", "1",
                   "polarisation of the band group along the loop: sum of its Wannier centres "
                   "mod 1, in units of the lattice vector along the loop"
                   + (", averaged over the transverse momentum (missing where the Wannier "
                      "centres flow)" if dim == 2 else "")),
          Quantity("wannier_gap", "float64", "1",
                   "smallest distance between two Wannier bands (on the circle [0, 1); 1 for a "
                   "single band)")]
    if dim == 2:
        qs.append(Quantity("wannier_flow", "int32", "1",
                           "winding of the summed Wannier centres over the transverse momentum "
                           "(-C for loops along k1, +C along k2)"))
    qs.append(Quantity("polarisation_kmesh", "int32", "1", "points of the loop mesh used"))
    if dim == 2:
        qs.append(Quantity("polarisation_kperp_mesh", "int32", "1",
                           "transverse momenta of the Wannier bands"))
    return tuple(qs)


@MEASUREMENTS.register(
    "polarisation",
    description="Wannier centres of a band group from Wilson loops: polarisation, Wannier gap "
                "and Wannier flow",
    source=_BBH + "; flow and Chern number: Yu, Qi, Bernevig, Fang and Dai, PRB 84, 075119 "
                  "(2011)",
    params=(_GROUP,
            Param("axis", kind="choice", default=0, choices=(0, 1),
                  doc="the loop runs along k_(axis+1) (0 or 1; 0 in 1D); the Wannier centres "
                      "are along a_(axis+1)", sweepable=False),
            Param("k_perp", default=None, low=0.0, high=1.0, open_high=True, units="1",
                  doc="transverse momentum (fraction of the reciprocal vector, 2D) at which "
                      "the polarisation is taken; averaged over it when omitted",
                  sweepable=False),
            Param("kmesh", kind="int", default=32, low=4,
                  doc="first loop mesh (points); doubled until the centres settle",
                  sweepable=False),
            Param("max_kmesh", kind="int", default=2048, low=4, doc="largest loop mesh",
                  sweepable=False),
            Param("kperp_mesh", kind="int", default=16, low=4,
                  doc="first transverse mesh (2D); doubled until the flow is resolved",
                  sweepable=False),
            Param("max_kperp_mesh", kind="int", default=256, low=4,
                  doc="largest transverse mesh", sweepable=False),
            Param("tol", default=1e-4, low=0.0, high=0.1, open_low=True,
                  doc="largest accepted change of a Wannier centre (fraction of the cell) when "
                      "the mesh is doubled", sweepable=False)),
    quantities=_polarisation_quantities, dims=(1, 2), driven=None, operators=(),
)
def polarisation(point: Point, *, band_group: str = "lower", axis: int = 0,
                 k_perp: float | None = None, kmesh: int = 32, max_kmesh: int = 2048,
                 kperp_mesh: int = 16, max_kperp_mesh: int = 256, tol: float = 1e-4
                 ) -> dict[str, Any]:
    """Polarisation, Wannier gap and flow of the band group along ``axis``.

    The polarisation averaged over the transverse momentum is missing (nan, the reason still
    ``OK``) where the Wannier flow is nonzero: the summed centres then wind once per unit of
    flow, and no average is defined; ``k_perp`` gives the polarisation at one transverse
    momentum instead, defined in either case.
    """
    dim = point.drive.dim if point.drive is not None else point.tb.dim
    if axis >= dim:
        raise ValueError(f"axis must be 0 for a {dim}D model; got {axis}")
    out: dict[str, Any] = {q.name: (None if q.dtype == "int32" else math.nan)
                           for q in _polarisation_quantities(dim)}
    reason = group_reason(point)
    if reason != Reason.OK:
        return out | {"reason": reason}
    group = point_group(point, band_group)
    r = wl.wannier_bands(group, dim, axis, kmesh_n=kmesh, max_kmesh=max_kmesh,
                         kperp_mesh=kperp_mesh, max_kperp_mesh=max_kperp_mesh, tol=tol,
                         gap_tol=point.gap_tol)
    out["polarisation_kmesh"] = r.kmesh
    if dim == 2:
        out["polarisation_kperp_mesh"] = r.kperp_mesh
    if r.reason != Reason.OK:
        return out | {"reason": r.reason}
    pol = r.mean
    if k_perp is not None and dim == 2:
        pol, lm = wl.polarisation_at(group, dim, axis, 2 * math.pi * k_perp,
                                     kmesh_n=max(kmesh, r.kmesh // 2), max_kmesh=max_kmesh,
                                     tol=tol)
        if not lm.converged:
            return out | {"reason": Reason.NOT_CONVERGED}
        if not lm.separation > point.gap_tol:
            return out | {"reason": Reason.GAP_CLOSED}
    out["polarisation"] = pol
    out["wannier_gap"] = r.wannier_gap
    if dim == 2:
        out["wannier_flow"] = r.flow
    return out | {"reason": Reason.OK}


_QUADRUPOLE_QUANTITIES = (
    Quantity("quadrupole", "float64", "1",
             "quadrupole moment q_xy = 2 p_x p_y mod 1 of the band group (0 or 1/2)"),
    Quantity("quadrupole_px", "float64", "1",
             "Wannier-sector polarisation p_x of the sector nu_y in (0, 1/2) (nested loops "
             "along k1), mod 1"),
    Quantity("quadrupole_py", "float64", "1",
             "Wannier-sector polarisation p_y of the sector nu_x in (0, 1/2) (nested loops "
             "along k2), mod 1"),
    Quantity("quadrupole_residue", "float64", "1",
             "largest distance of p_x, p_y from the nearest multiple of 1/2"),
    Quantity("quadrupole_wannier_gap", "float64", "1",
             "twice the smallest distance of a Wannier centre (loops along k1 and k2) from the "
             "sector cuts 0 and 1/2"),
    Quantity("quadrupole_kmesh", "int32", "1", "k-mesh points per direction used last"),
)


@MEASUREMENTS.register(
    "quadrupole",
    description="quadrupole moment q_xy of a band group from nested Wilson loops (0 or 1/2)",
    source=_BBH,
    params=(_GROUP,
            Param("kmesh", kind="int", default=16, low=4,
                  doc="first k-mesh (points per direction); doubled until p_x, p_y settle",
                  sweepable=False),
            Param("max_kmesh", kind="int", default=128, low=4,
                  doc="largest k-mesh (points per direction)", sweepable=False),
            Param("tol", default=1e-3, low=0.0, high=0.1, open_low=True,
                  doc="largest accepted change of p_x, p_y when the mesh is doubled",
                  sweepable=False),
            Param("wannier_gap_tol", default=1e-3, low=0.0, high=1.0, open_low=True,
                  doc="smallest accepted Wannier-sector gap", sweepable=False),
            Param("quant_tol", default=0.02, low=0.0, high=0.25, open_low=True,
                  doc="largest accepted distance of p_x, p_y from 0 or 1/2", sweepable=False)),
    quantities=_QUADRUPOLE_QUANTITIES, dims=(2,), driven=None, operators=(),
)
def quadrupole(point: Point, *, band_group: str = "lower", kmesh: int = 16,
               max_kmesh: int = 128, tol: float = 1e-3, wannier_gap_tol: float = 1e-3,
               quant_tol: float = 0.02) -> dict[str, Any]:
    """``q_xy`` stored only where both Wannier sectors are gapped (``wannier_gap_tol``) and both
    sector polarisations lie within ``quant_tol`` of 0 or 1/2 (reflection symmetry quantises
    them); otherwise missing with ``SECTOR_GAP_CLOSED`` or ``NOT_QUANTISED``. ``p_x``, ``p_y``,
    the residue and the sector gap are kept wherever they were computed."""
    out: dict[str, Any] = {q.name: (None if q.dtype == "int32" else math.nan)
                           for q in _QUADRUPOLE_QUANTITIES}
    reason = group_reason(point)
    if reason != Reason.OK:
        return out | {"reason": reason}
    r = wl.quadrupole(point_group(point, band_group), kmesh_n=kmesh, max_kmesh=max_kmesh,
                      tol=tol, gap_tol=point.gap_tol, wannier_gap_tol=wannier_gap_tol,
                      quant_tol=quant_tol)
    return {"quadrupole": r.q, "quadrupole_px": r.p_x, "quadrupole_py": r.p_y,
            "quadrupole_residue": r.residue, "quadrupole_wannier_gap": r.sector_gap,
            "quadrupole_kmesh": r.kmesh, "reason": r.reason}
