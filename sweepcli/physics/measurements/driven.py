"""Measurements of periodically driven lattices: quasienergy gaps and Floquet invariants.

``point.drive`` holds the compiled drive (:mod:`sweepcli.physics.drives`), ``point.tb`` the
static model (its cell operators, e.g. ``"chiral"``, are used by the chiral invariants). The
time slicing of a smooth drive is decided once per point (:func:`point_slicing`, memoised under
``("drive_slicing",)``) and used by every evolution of every measurement, open samples
included. The Floquet operator on a mesh is memoised in ``point.cache`` under
``("floquet_mesh", n)`` and the gaps under ``("floquet_gaps", n, refine)``; the invariants and
the boundary windows use the gaps at the default settings, so a job measuring
``quasienergy_gaps`` with its defaults and an invariant diagonalises ``U(k)`` on that mesh once.

Momentum locations are stored as ``k_i / 2 pi`` in ``[-0.5, 0.5)``, as for static gaps.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ...schema import Quantity, Reason
from .. import chiral_frames as cf
from .. import floquet_chern as fc
from .. import line_symmetry as ls
from .. import quasienergy as qe
from ..drives.base import NoSymmetricTime
from ..drives.evolution import Slicing, decide_slicing
from ..invariant_base import CHERN_KMESH, CHERN_MAX_KMESH, FLUX_TOL, PHASE_TOL, WINDING_KMESH
from ..lattice import pauli
from ..point import Point
from ..registry import Param
from . import MEASUREMENTS
from .static import point_gap

#: Default mesh of the quasienergy-gap search (points per direction; minima are refined).
GAP_KMESH = qe.GAP_KMESH
#: Largest number of symmetry sectors ``line_winding`` stores.
MAX_SECTORS = 4

_RUDNER = "Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013)"
_CHIRAL = ("Asboth and Obuse, PRB 88, 121406 (2013); Asboth, Tarasinski and Delplace, PRB 90, "
           "125143 (2014)")
_KMESH_DOC = "points per reciprocal direction of the first k-mesh"


def _dim(point: Point) -> int:
    return point.drive.dim


def point_slicing(point: Point) -> Slicing:
    """The drive's time slicing (:func:`~sweepcli.physics.drives.evolution.decide_slicing`),
    memoised."""
    return point.memo(("drive_slicing",), lambda: decide_slicing(point.drive))


def point_mesh(point: Point, n: int) -> qe.FloquetMesh:
    """``U(k)`` diagonalised on an ``n^d`` mesh at the point's slicing, memoised."""
    return point.memo(("floquet_mesh", n),
                      lambda: qe.floquet_mesh(point.drive, n, _dim(point), point_slicing(point)))


def point_gaps(point: Point, kmesh: int = GAP_KMESH, refine: bool = True) -> qe.FloquetGaps:
    """Quasienergy gaps at 0 and pi/T, memoised."""
    return point.memo(("floquet_gaps", kmesh, bool(refine)),
                      lambda: qe.floquet_gaps(point.drive, point_mesh(point, kmesh),
                                              refine=refine))


def _need_drive(point: Point) -> None:
    if point.drive is None:
        raise ValueError("this measurement needs a periodic drive; the job has none")


def gap_groups(dim: int, driven: bool = False) -> tuple[str, ...]:
    """Reason groups of the invariants of the two gaps: ``("0", "pi")``, static ``("0",)``."""
    return ("0", "pi") if driven else ("0",)


def bulk_closed(point: Point) -> frozenset[str]:
    """The gaps (``"0"``, ``"pi"``) whose bulk gap is at or below ``point.gap_tol``.

    Driven: the refined quasienergy gaps of the whole Brillouin zone (:func:`point_gaps`; none
    when the time integration did not converge, which the invariants report themselves);
    static: the direct gap above the filled bands (:func:`~.static.point_gap`), the gap
    ``"0"``. An invariant of a closed gap is missing with ``GAP_CLOSED`` even where the loop
    it is computed on (a line of a 2D zone, the points of a 1D mesh) stays gapped.
    """
    def compute() -> frozenset[str]:
        if point.drive is None:
            return frozenset({"0"}) if not point_gap(point).gap > point.gap_tol else frozenset()
        g = point_gaps(point)
        if not g.converged:
            return frozenset()
        return frozenset(name for name, width in (("0", g.gap_0), ("pi", g.gap_pi))
                         if not width > point.gap_tol)

    return point.memo(("bulk_closed",), compute)


def _gap_quantities(dim: int, driven: bool = False) -> tuple[Quantity, ...]:
    qs = [Quantity("gap_0", "float64", "energy",
                   "quasienergy gap at 0: width of the window around 0 that no band enters"),
          Quantity("gap_pi", "float64", "energy",
                   "quasienergy gap at pi/T: width of the window around pi/T that no band "
                   "enters")]
    for g in ("0", "pi"):
        for i in range(1, dim + 1):
            qs.append(Quantity(f"gap_{g}_k{i}", "float64", "1",
                               f"k{i} of the smallest gap at {g}, in units of b{i} "
                               f"(k{i} / 2 pi, in [-0.5, 0.5))"))
    return tuple(qs)


@MEASUREMENTS.register(
    "quasienergy_gaps",
    description="quasienergy gaps at 0 and pi/T of the Floquet operator and where they close",
    source="uniform k-mesh; every local minimum that a Lipschitz bound leaves able to hide a "
           "lower gap refined in continuous k with scipy.optimize; closings are where U(k) has "
           "eigenvalue +1 or -1",
    params=(Param("kmesh", kind="int", default=GAP_KMESH, low=4, doc=_KMESH_DOC,
                  sweepable=False),
            Param("refine", kind="bool", default=True, doc="refine minima in continuous k",
                  sweepable=False)),
    quantities=_gap_quantities, dims=(1, 2), driven=True, operators=(),
)
def quasienergy_gaps(point: Point, *, kmesh: int = GAP_KMESH, refine: bool = True
                     ) -> dict[str, Any]:
    """``gap_0 = 2 min |eps|``, ``gap_pi = 2 min (pi/T - |eps|)`` (energy) and their k.

    Missing (nan) with ``NOT_CONVERGED`` when a harmonic drive's time slicing did not reach
    its tolerance.
    """
    _need_drive(point)
    g = point_gaps(point, kmesh, refine)
    ok = g.converged
    out: dict[str, Any] = {"gap_0": g.gap_0 if ok else math.nan,
                           "gap_pi": g.gap_pi if ok else math.nan}
    for name, k in (("0", g.k_0), ("pi", g.k_pi)):
        for i, ki in enumerate(k, start=1):
            out[f"gap_{name}_k{i}"] = float(ki / (2 * math.pi)) if ok else math.nan
    out["reason"] = Reason.OK if ok else Reason.NOT_CONVERGED
    return out


def point_floquet_chern(point: Point, kmesh: int = CHERN_KMESH,
                        max_kmesh: int = CHERN_MAX_KMESH, flux_tol: float = FLUX_TOL
                        ) -> fc.FloquetChern:
    """The proven Floquet Chern numbers (:func:`~sweepcli.physics.floquet_chern.floquet_chern`),
    memoised: ``rudner_winding`` checks its windings' difference against them."""
    return point.memo(("floquet_chern", kmesh, max_kmesh, flux_tol),
                      lambda: fc.floquet_chern(point.drive, point_gaps(point),
                                               gap_tol=point.gap_tol, kmesh_n=kmesh,
                                               max_kmesh=max_kmesh, flux_tol=flux_tol,
                                               slicing=point_slicing(point)))


@MEASUREMENTS.register(
    "floquet_chern",
    description="Chern numbers of the Floquet bands grouped between the 0 and pi gaps",
    source="Fukui, Hatsugai and Suzuki, J. Phys. Soc. Jpn. 74, 1674 (2005), on Floquet "
           "eigenvectors; band grouping as in " + _RUDNER,
    params=(Param("kmesh", kind="int", default=CHERN_KMESH, low=4,
                  doc=_KMESH_DOC + "; the gap rule ceil(3.2/sqrt(gap/2)) may raise it",
                  sweepable=False),
            Param("max_kmesh", kind="int", default=CHERN_MAX_KMESH, low=4,
                  doc="largest k-mesh (points per direction)", sweepable=False),
            Param("flux_tol", default=FLUX_TOL, low=0.0, high=math.pi, open_low=True,
                  open_high=True, units="rad",
                  doc="largest accepted Berry flux through one plaquette", sweepable=False)),
    quantities=(Quantity("floquet_chern_upper", "int32", "1",
                         "Chern number of the Floquet bands with quasienergy in (0, pi/T)"),
                Quantity("floquet_chern_lower", "int32", "1",
                         "Chern number of the Floquet bands with quasienergy in (-pi/T, 0)"),
                Quantity("floquet_chern_kmesh", "int32", "1", "k-mesh points per direction"),
                Quantity("floquet_chern_max_flux", "float64", "rad",
                         "largest plaquette Berry flux on that mesh")),
    dims=(2,), driven=True, operators=(),
)
def floquet_chern(point: Point, *, kmesh: int = CHERN_KMESH,
                  max_kmesh: int = CHERN_MAX_KMESH, flux_tol: float = FLUX_TOL
                  ) -> dict[str, Any]:
    """Chern numbers of the band groups above and below quasienergy 0.

    Fixed layout whatever the number of bands: ``floquet_chern_upper`` is the group with
    ``eps`` in ``(0, pi/T)`` (for two bands: the band above quasienergy 0),
    ``floquet_chern_lower`` the group in ``(-pi/T, 0)``; an empty group has Chern number 0.
    Both gaps must be open. Sign as :func:`sweepcli.physics.chern.fhs_chern` (in the
    high-frequency limit the groups are the static bands above and below zero energy).
    """
    _need_drive(point)
    g = point_gaps(point)
    r = point_floquet_chern(point, kmesh, max_kmesh, flux_tol)
    if not g.converged:
        r = fc.FloquetChern(None, None, None, math.nan, Reason.NOT_CONVERGED)
    return {"floquet_chern_upper": r.upper, "floquet_chern_lower": r.lower,
            "floquet_chern_kmesh": r.kmesh, "floquet_chern_max_flux": r.max_flux,
            "reason": r.reason}


@MEASUREMENTS.register(
    "rudner_winding",
    description="winding numbers W_0, W_pi of the periodised evolution (chiral edge modes in "
                "the 0 and pi gaps, anomalous phases included)",
    source=_RUDNER,
    params=(Param("kmesh", kind="int", default=16, low=4, doc=_KMESH_DOC, sweepable=False),
            Param("max_kmesh", kind="int", default=128, low=4,
                  doc="largest k-mesh (points per direction)", sweepable=False),
            Param("residue_tol", default=fc.RESIDUE_TOL, low=0.0, high=0.5, open_low=True,
                  open_high=True,
                  doc="largest accepted distance of the raw integral from an integer",
                  sweepable=False)),
    quantities=(Quantity("w_0", "int32", "1", "winding number of the gap at quasienergy 0",
                         "0"),
                Quantity("w_pi", "int32", "1", "winding number of the gap at quasienergy pi/T",
                         "pi"),
                Quantity("w_residue", "float64", "1",
                         "largest distance of the raw winding integrals from integers"),
                Quantity("w_kmesh", "int32", "1", "k-mesh points per direction used last")),
    reason_groups=gap_groups, dims=(2,), driven=True, operators=(),
)
def rudner_winding(point: Point, *, kmesh: int = 16, max_kmesh: int = 128,
                   residue_tol: float = fc.RESIDUE_TOL) -> dict[str, Any]:
    """``W_0``, ``W_pi``; sign such that ``C(band) = W(gap above) - W(gap below)``.

    A winding is missing when its gap is closed (``GAP_CLOSED`` in that gap's reason; the other
    one is still given) or when the integral does not settle within ``residue_tol``
    (``NOT_CONVERGED``); with both gaps open, also when ``w_pi - w_0`` does not equal the
    proven ``floquet_chern_upper`` (default options) or that could not be proven.
    """
    _need_drive(point)
    g = point_gaps(point)
    both = g.converged and g.gap_0 >= point.gap_tol and g.gap_pi >= point.gap_tol
    r = fc.rudner_winding(point.drive, g, gap_tol=point.gap_tol, kmesh_n=kmesh,
                          max_kmesh=max_kmesh, residue_tol=residue_tol,
                          chern=point_floquet_chern(point) if both else None)
    out = {"w_0": r.w_0, "w_pi": r.w_pi, "w_residue": r.residue, "w_kmesh": r.kmesh,
           "reason": {"0": r.reason_0, "pi": r.reason_pi}}
    return _close_gaps(out, bulk_closed(point), {"0": ("w_0",), "pi": ("w_pi",)})


def _close_gaps(out: dict[str, Any], closed: frozenset[str], names: dict[str, tuple[str, ...]]
                ) -> dict[str, Any]:
    """``out`` with the invariants ``names[g]`` of every closed gap ``g`` missing (``None``)
    and that gap's reason ``GAP_CLOSED``; the other gap's values are left as they are."""
    for g in closed:
        for n in names.get(g, ()):
            out[n] = None
        out["reason"][g] = Reason.GAP_CLOSED
    return out


def frame_times_of(point: Point, times: list[float] | None) -> tuple[float, float] | None:
    """The two symmetric starting times (absolute) of the point's drive: the job's ``times``
    (fractions of the period), or those the drive finds; ``None`` when the drive has none
    (:class:`~sweepcli.physics.drives.base.NoSymmetricTime`: no chiral-symmetric frame, so its
    chiral invariants are undefined, ``Reason.NO_CHIRAL_FRAME``). A protocol that cannot
    search raises ``ValueError`` (give ``times`` then)."""
    given = _times(times, point.drive.period)
    if given is not None:
        return cf.frame_times(point.drive, _chiral_op(point), given)
    try:
        return point.drive.symmetric_times(_chiral_op(point))
    except NoSymmetricTime:
        return None


def _chiral_op(point: Point) -> np.ndarray:
    ops = point.tb.operators
    if "chiral" not in ops:
        raise ValueError("this model (at these parameters) has no chiral operator")
    return ops["chiral"]


#: Tolerance of "t2 = t1 + 1/2 modulo 1" for frame times given as fractions of the period.
TIMES_TOL = 1e-9
#: What the ``times`` option accepts (the job-file check quotes it).
TIMES_EXPECTED = ("one or two starting times as fractions of the period in [0, 1), the second "
                  "the time-symmetric partner of the first (t2 = t1 + 0.5 modulo 1)")


def frame_times_valid(times: Any) -> bool:
    """Whether ``times`` are the starting times of the two symmetric frames.

    The reflection ``t -> 2 t* - t`` of a time-symmetric drive has two fixed points on the
    circle of one period, ``t*`` and ``t* + T/2`` (Asboth and Obuse, PRB 88, 121406 (2013)),
    and the invariants need one frame at each. Any other pair (one frame twice, say) gives
    ``nu'`` unrelated to ``nu`` and silently wrong ``nu_0``, ``nu_pi``.

    Parameters
    ----------
    times : sequence of 1 or 2 floats, fractions of the period in ``[0, 1)``; one value stands
        for itself and its partner ``t1 + 1/2`` (mod 1).
    """
    t = [float(x) for x in times]
    if not 1 <= len(t) <= 2 or not all(0 <= x < 1 for x in t):
        return False
    return len(t) == 1 or abs((t[1] - t[0]) % 1.0 - 0.5) <= TIMES_TOL


def _times(times: Any, period: float) -> list[float] | None:
    """Fractions of the period (the job-file convention, as for step spans and kick times) to
    the absolute times of :func:`sweepcli.physics.chiral_frames.frame_times`."""
    if times is None:
        return None
    if not frame_times_valid(times):
        raise ValueError(f"times must be {TIMES_EXPECTED}; got {list(times)}")
    return [float(x) * period for x in times]


@MEASUREMENTS.register(
    "chiral_windings",
    description="invariants nu_0, nu_pi of the 0 and pi gaps of a chiral-symmetric driven chain",
    source=_CHIRAL,
    params=(Param("times", kind="vector", default=None,
                  doc="the two time-symmetric starting times t1, t2 = t1 + 1/2 (mod 1) as "
                      "fractions of the period (or t1 alone); found automatically when "
                      "omitted", units="1", sweepable=False),
            Param("kmesh", kind="int", default=WINDING_KMESH, low=4, doc=_KMESH_DOC,
                  sweepable=False),
            Param("max_kmesh", kind="int", default=4096, low=4,
                  doc="largest k-mesh", sweepable=False),
            Param("phase_tol", default=PHASE_TOL, low=0.0, high=math.pi, open_low=True,
                  open_high=True, units="rad",
                  doc="largest accepted phase step of a determinant between neighbouring k",
                  sweepable=False)),
    quantities=(Quantity("nu_0", "int32", "1", "chiral invariant of the gap at quasienergy 0",
                         "0"),
                Quantity("nu_pi", "int32", "1",
                         "chiral invariant of the gap at quasienergy pi/T", "pi"),
                Quantity("nu_kmesh", "int32", "1", "k-mesh points used last")),
    reason_groups=gap_groups, dims=(1,), driven=True, operators=("chiral",),
)
def chiral_windings(point: Point, *, times: list[float] | None = None,
                    kmesh: int = WINDING_KMESH, max_kmesh: int = 4096,
                    phase_tol: float = PHASE_TOL) -> dict[str, Any]:
    """``nu_0 = (nu + nu')/2``, ``nu_pi = (nu - nu')/2`` from the two symmetric frames.

    ``nu`` belongs to the first symmetric time ``t1`` (the earliest mirror point of the drive,
    :meth:`~sweepcli.physics.drives.base.Drive.symmetric_times`); the
    number of 0 (pi) modes at each end of an open chain is ``|nu_0|`` (``|nu_pi|``).

    One reason per gap: ``GAP_CLOSED`` for a gap closed in the bulk (:func:`bulk_closed`, the
    refined quasienergy gaps, so a closing between mesh points counts), ``NO_CHIRAL_FRAME``
    in both when the drive has no chiral-symmetric time (a step sequence without a mirror
    point).
    """
    _need_drive(point)
    frame = frame_times_of(point, times)
    if frame is None:
        return {"nu_0": None, "nu_pi": None, "nu_kmesh": None,
                "reason": {"0": Reason.NO_CHIRAL_FRAME, "pi": Reason.NO_CHIRAL_FRAME}}
    closed = bulk_closed(point)
    if closed >= {"0", "pi"}:
        return {"nu_0": None, "nu_pi": None, "nu_kmesh": None,
                "reason": {"0": Reason.GAP_CLOSED, "pi": Reason.GAP_CLOSED}}
    r = cf.chiral_windings(point.drive, _chiral_op(point), times=list(frame),
                           gap_tol=point.gap_tol, kmesh_n=kmesh, max_kmesh=max_kmesh,
                           phase_tol=phase_tol, slicing=point_slicing(point),
                           closed_gaps=closed)
    out = {"nu_0": r.nu_0, "nu_pi": r.nu_pi, "nu_kmesh": r.kmesh,
           "reason": {g: r.gap_reason(g, point.gap_tol) for g in ("0", "pi")}}
    return _close_gaps(out, closed, {"0": ("nu_0",), "pi": ("nu_pi",)})


def _line_quantities(dim: int, driven: bool = False) -> tuple[Quantity, ...]:
    qs = [Quantity("line_sectors", "int32", "1",
                   "number of eigen-sectors of the symmetry operator (distinct eigenvalues)")]
    for j in range(1, MAX_SECTORS + 1):
        qs += [Quantity(f"line_phase_s{j}", "float64", "rad",
                        f"phase of the symmetry eigenvalue of sector {j} (sectors ordered by "
                        f"this phase in (-pi, pi])"),
               Quantity(f"line_w0_s{j}", "int32", "1",
                        f"winding of sector {j} at quasienergy 0" if driven else
                        f"winding of sector {j} at energy 0", "0")]
        if driven:
            qs.append(Quantity(f"line_wpi_s{j}", "int32", "1",
                               f"winding of sector {j} at quasienergy pi/T", "pi"))
    return tuple(qs)


def _matrix(value: Any, n: int, operators: dict | None = None) -> np.ndarray:
    """A matrix, a Pauli word, or the name of one of the model's cell operators."""
    if isinstance(value, str):
        m = operators[value] if operators and value in operators else pauli(value)
    else:
        m = np.asarray(value, dtype=complex)
    if m.shape != (n, n):
        raise ValueError(f"the operator must be {n}x{n} for this model; got shape {m.shape}")
    return m


@MEASUREMENTS.register(
    "line_winding",
    description="symmetry-resolved windings at 0 and pi along an invariant line of the "
                "Brillouin zone (counts corner or end modes per symmetry sector)",
    source=_CHIRAL + "; sectors of a unitary symmetry that commutes with U(k) on the line",
    params=(Param("operator", kind="matrix",
                  doc="unitary symmetry operator S (matrix or Pauli word) that commutes with "
                      "U(k) on the line", sweepable=False),
            Param("direction", kind="vector",
                  doc="integer direction of the line in reduced coordinates (it closes after "
                      "s = 2 pi)", sweepable=False),
            Param("origin", kind="vector", default=None,
                  doc="origin of the line in reduced momenta (rad); default the zone centre",
                  sweepable=False),
            Param("times", kind="vector", default=None,
                  doc="symmetric starting times t1, t2 = t1 + 1/2 (mod 1) as fractions of the "
                      "period (found automatically when omitted)", units="1",
                  sweepable=False),
            Param("kmesh", kind="int", default=WINDING_KMESH, low=4, doc=_KMESH_DOC,
                  sweepable=False),
            Param("max_kmesh", kind="int", default=4096, low=4, doc="largest k-mesh",
                  sweepable=False)),
    quantities=_line_quantities, reason_groups=gap_groups, dims=(1, 2), driven=None,
    operators=("chiral",),
)
def line_winding(point: Point, *, operator: Any, direction: list[float],
                 origin: list[float] | None = None, times: list[float] | None = None,
                 kmesh: int = WINDING_KMESH, max_kmesh: int = 4096) -> dict[str, Any]:
    """Per-sector ``nu_0``, ``nu_pi`` on the line ``k = origin + s direction``.

    Layout: ``line_sectors`` = number of distinct eigenvalues of ``S`` (at most
    ``MAX_SECTORS`` = 4); slot ``j`` (1-based) holds the sector with the ``j``-th smallest
    eigenvalue phase ``line_phase_s{j}``; unused slots are missing (nan / None). One reason per
    gap, the worst over the sectors (a gapless sector makes its own windings missing); a gap
    closed in the bulk (:func:`bulk_closed`: the 2D quasienergy gap, or the static gap) leaves
    that gap's windings missing with ``GAP_CLOSED`` even where the line stays gapped, and a
    drive without a chiral-symmetric time leaves everything missing with
    ``NO_CHIRAL_FRAME``. Raises ValueError if ``S`` does not commute with ``U(k)`` on the
    line or with the chiral operator.
    """
    driven = point.drive is not None
    groups = gap_groups(0, driven)
    source = point.drive if driven else point.tb  # U(k) or, static, H(k)
    n = source.norb
    s = _matrix(operator, n, point.tb.operators)
    org = np.zeros(source.dim) if origin is None else np.asarray(origin, dtype=float)
    frame = frame_times_of(point, times) if driven else None
    if driven and frame is None:
        out: dict[str, Any] = {q.name: (None if q.dtype == "int32" else math.nan)
                               for q in _line_quantities(source.dim, True)}
        out["reason"] = {g: Reason.NO_CHIRAL_FRAME for g in groups}
        return out
    closed = bulk_closed(point)
    slicing = point_slicing(point) if driven else None
    sectors = ls.line_sector_windings(source, s, _chiral_op(point), origin=org,
                                      direction=direction,
                                      times=list(frame) if driven else None,
                                      gap_tol=point.gap_tol, kmesh_n=kmesh, max_kmesh=max_kmesh,
                                      slicing=slicing, closed_gaps=closed)
    if len(sectors) > MAX_SECTORS:
        raise ValueError(f"the operator has {len(sectors)} distinct eigenvalues; at most "
                         f"{MAX_SECTORS} sectors are stored")
    out = {"line_sectors": len(sectors)}
    worst = {g: Reason.OK for g in groups}
    for j in range(1, MAX_SECTORS + 1):
        if j <= len(sectors):
            sec = sectors[j - 1]
            out[f"line_phase_s{j}"] = float(np.angle(sec.eigenvalue))
            out[f"line_w0_s{j}"] = sec.result.nu_0
            if driven:
                out[f"line_wpi_s{j}"] = sec.result.nu_pi
            for g in groups:
                worst[g] = max(worst[g], sec.result.gap_reason(g, point.gap_tol))
        else:
            out[f"line_phase_s{j}"] = math.nan
            out[f"line_w0_s{j}"] = None
            if driven:
                out[f"line_wpi_s{j}"] = None
    out["reason"] = {g: Reason(r) for g, r in worst.items()}
    slots = range(1, MAX_SECTORS + 1)
    return _close_gaps(out, closed, {"0": tuple(f"line_w0_s{j}" for j in slots),
                                     "pi": tuple(f"line_wpi_s{j}" for j in slots)})
