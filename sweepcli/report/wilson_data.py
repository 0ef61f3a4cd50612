"""The data behind ``sweepcli sample --wilson``: one grid point's Wilson-loop spectrum; no
drawing.

For one grid point of a results file the job is rebuilt from the file's provenance, the point's
band group is built as the ``polarisation`` and ``quadrupole`` measurements build it
(:func:`sweepcli.physics.measurements.wilson.point_group`, with the job's ``band_group``), and
its Wilson loops are computed again with :mod:`sweepcli.physics.wilson`: the loop mesh is
converged as the measurement converges it, then the Wannier centres are evaluated on a fine
transverse mesh for the picture (loops along ``k_1`` against ``k_2`` and along ``k_2`` against
``k_1``; in 1D the centres of the one loop). In 2D the nested Wilson loops of the two Wannier
sectors (``nu in (0, 1/2)``) are added against their base momentum.
:mod:`sweepcli.report.wilson_plot` draws the result.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import ResultsError, SweepError
from ..jobfile import job_from_results
from ..schema import Reason
from ..store import FILL_INT, Results
from .sample_data import nearest_index

#: Transverse momenta at which the Wannier bands of the picture are evaluated.
PICTURE_KPERP = 201
#: Stored variables shown beside the picture, when the job measured them.
STORED = ("polarisation", "wannier_gap", "wannier_flow", "quadrupole", "quadrupole_px",
          "quadrupole_py")


@dataclass(frozen=True)
class WilsonDrawing:
    """One grid point's Wilson loops: what :func:`~sweepcli.report.wilson_plot.draw_wilson`
    draws.

    Attributes
    ----------
    index : grid index of the point; params : its swept values; defaulted : axes of more than
        one value that ``--at`` did not name.
    dim : lattice dimension; driven : whether the job has a drive; band_group : ``"lower"`` or
        ``"upper"``; bands : size of the group.
    kperp : axis -> ``(K,)`` transverse momenta (rad) of the drawn Wannier bands (``(1,)`` in 1D).
    nu : axis -> ``(K, m)`` Wannier centres in ``[0, 1)`` of loops along ``k_(axis+1)``.
    kmesh : axis -> loop points used.
    polarisation, flow, wannier_gap : axis -> the values of
        :func:`~sweepcli.physics.wilson.wannier_bands` (polarisation nan where the flow is
        nonzero).
    nested : 2D only: axis of the first loop -> ``(N,)`` sector polarisation per base momentum
        (``{}`` where a sector is not gapped).
    nested_mesh : k-mesh of the nested loops; quadrupole : the measurement's result
        (:class:`~sweepcli.physics.wilson.Quadrupole`) or None in 1D.
    stored : stored value of each of :data:`STORED` the file holds at this point (None where
        missing), with ``stored_reasons`` beside.
    """

    index: tuple[int, ...]
    params: dict[str, float]
    dim: int
    driven: bool
    band_group: str
    bands: int
    kperp: dict[int, np.ndarray]
    nu: dict[int, np.ndarray]
    kmesh: dict[int, int]
    polarisation: dict[int, float]
    flow: dict[int, int | None]
    wannier_gap: dict[int, float]
    nested: dict[int, np.ndarray] = field(default_factory=dict)
    nested_mesh: int | None = None
    quadrupole: Any = None
    stored: dict[str, float | int | None] = field(default_factory=dict)
    stored_reasons: dict[str, str] = field(default_factory=dict)
    defaulted: tuple[str, ...] = ()

    def describe(self) -> str:
        """One line: the point and what its Wilson loops give."""
        where = ", ".join(f"{k}={v:g}" for k, v in self.params.items())
        if self.defaulted:
            where += f" ({', '.join(self.defaulted)}: first value, not given by --at)"
        parts = []
        for axis in sorted(self.nu):
            p = self.polarisation[axis]
            along = f"k{axis + 1}" if self.dim == 2 else "k"
            text = (f"polarisation {p:.4g}" if math.isfinite(p) else
                    f"Wannier flow {self.flow[axis]}")
            parts.append(f"loops along {along}: {text}")
        q = self.quadrupole
        if q is not None:
            parts.append(f"q_xy {q.q:g}" if math.isfinite(q.q) else
                         f"q_xy missing ({q.reason.name.lower().replace('_', ' ')})")
        return (f"Wilson loops of the {self.band_group} band group ({self.bands} bands) at "
                f"{where}: " + "; ".join(parts))


def wilson_options(job) -> tuple[str, dict[str, Any], dict[str, Any]]:
    """``(band_group, polarisation options, quadrupole options)``: the job's measurements of
    them where it has them, else the registered defaults; the band group of ``polarisation``,
    else of ``quadrupole``, else ``"lower"``."""
    from ..physics.measurements import MEASUREMENTS

    measured = dict(job.measurements)
    opts = {}
    for name in ("polarisation", "quadrupole"):
        o = {p.name: p.default for p in MEASUREMENTS[name].params}
        o.update(dict(measured.get(name, ())))
        opts[name] = o
    group = next((dict(measured[n])["band_group"] for n in ("polarisation", "quadrupole")
                  if n in measured), "lower")
    return group, opts["polarisation"], opts["quadrupole"]


def _stored(results: Results, index: tuple[int, ...]) -> tuple[dict, dict]:
    values, reasons = {}, {}
    if not results.done[index]:
        return values, reasons
    for var in STORED:
        if var not in results.data:
            continue
        v = results.data[var][index]
        if np.issubdtype(np.asarray(v).dtype, np.integer):
            values[var] = None if v == FILL_INT else int(v)
        else:
            values[var] = None if not np.isfinite(v) else float(v)
        codes = results.reason_codes(var)
        if codes is not None:
            reasons[var] = Reason(int(codes[index])).name.lower()
    return values, reasons


def wilson_point(results: Results, *, at: dict[str, float] | None = None,
                 label: str = "the results file") -> WilsonDrawing:
    """Rebuild the point nearest to ``at`` and compute its Wilson loops; no drawing.

    Raises
    ------
    SweepError where the band group's gap is closed at the point, its drive's time slicing did
    not converge, or its loops do not converge (the Wannier centres are then not defined).
    """
    from ..physics import wilson as wl
    from ..physics.lattice import kmesh as kgrid
    from ..physics.measurements import wilson as mw

    job = job_from_results(results, label)
    group_name, popts, qopts = wilson_options(job)
    index = nearest_index(results, at or {})
    flat = int(np.ravel_multi_index(index, job.shape)) if job.axes else 0
    point = job.point(flat)
    params = {a.name: float(a.values[i]) for a, i in zip(job.axes, index)}
    where = ", ".join(f"{k}={v:g}" for k, v in params.items()) or "the point"
    reason = mw.group_reason(point)
    if reason != Reason.OK:
        raise ResultsError(f"{label}: at {where} the {group_name} band group has no Wilson loop "
                           f"({reason.name.lower().replace('_', ' ')}: "
                           + ("a gap that bounds it is closed)." if reason == Reason.GAP_CLOSED
                              else "the drive's time slicing did not converge)."))
    try:
        group = mw.point_group(point, group_name)
    except ValueError as exc:
        raise SweepError(f"{label}: at {where}: {exc}.") from None
    dim = job.dim
    kperp, nu, meshes, pol, flow, gaps = {}, {}, {}, {}, {}, {}
    for axis in range(dim):
        r = wl.wannier_bands(group, dim, axis, kmesh_n=popts["kmesh"],
                             max_kmesh=popts["max_kmesh"], kperp_mesh=popts["kperp_mesh"],
                             max_kperp_mesh=popts["max_kperp_mesh"], tol=popts["tol"],
                             gap_tol=point.gap_tol)
        if r.reason != Reason.OK:
            raise ResultsError(f"{label}: at {where} the Wilson loops along k{axis + 1} are not "
                               f"defined ({r.reason.name.lower().replace('_', ' ')}).")
        k = (2 * np.pi * np.arange(PICTURE_KPERP) / (PICTURE_KPERP - 1) if dim == 2
             else np.zeros(1))
        kperp[axis] = k
        nu[axis] = wl.wilson_loops(group, dim, axis, k, r.kmesh).nu
        meshes[axis], pol[axis], flow[axis], gaps[axis] = r.kmesh, r.mean, r.flow, r.wannier_gap
    nested, nested_mesh, quad = {}, None, None
    if dim == 2:
        quad = wl.quadrupole(group, kmesh_n=qopts["kmesh"], max_kmesh=qopts["max_kmesh"],
                             tol=qopts["tol"], gap_tol=point.gap_tol,
                             wannier_gap_tol=qopts["wannier_gap_tol"],
                             quant_tol=qopts["quant_tol"])
        nested_mesh = quad.kmesh or qopts["kmesh"]
        v, _ = group(kgrid(nested_mesh, 2))
        for axis in (0, 1):
            s = wl.nested_polarisation(v, axis)
            if s.size > 0 and s.sector_gap >= qopts["wannier_gap_tol"]:
                nested[axis] = s.per_k
    stored, reasons = _stored(results, index)
    defaulted = tuple(a.name for a in job.axes if a.name not in (at or {}) and len(a.values) > 1)
    return WilsonDrawing(index, params, dim, job.drive.kind != "static", group_name,
                         nu[0].shape[-1], kperp, nu, meshes, pol, flow, gaps, nested,
                         nested_mesh, quad, stored, reasons, defaulted)
