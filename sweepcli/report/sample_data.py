"""The data behind ``sweepcli sample``: one grid point's open sample, solved again; no drawing.

For one grid point of a results file the job is rebuilt from the file's provenance
(``job_text``), the point's model (and drive) is built exactly as the run built it, and the
open sample the count came from is solved again with the physics core's own functions: the
measurement's own :func:`~sweepcli.physics.measurements.boundary.box_counts` (chains, flakes)
or :func:`~sweepcli.physics.boundary.ribbon_modes` (ribbons), and
:mod:`sweepcli.physics.inspect` for what a picture needs beyond the count (whole spectra,
densities, ribbon bands with their low-edge weight). :mod:`sweepcli.report.sample_plot` draws
the result:

* a polygon (``polygon_modes``): the same, with the in-gap density on every site of the
  polygonal flake, its outline, vertices and corner regions;
* a chain or flake: the spectrum (energy, or quasienergy for a drive) against state index with
  the in-gap window(s) and the states counted as end/corner modes, and the density
  ``sum |psi|^2`` of the in-gap states of the chosen gap summed per cell, on the sample;
* a ribbon: the bands (quasienergy bands) against the momentum along the edge, each state with
  its weight on the low edge.

The windows and the drive's time slicing are those of the boundary measurements
(:mod:`sweepcli.physics.measurements.boundary`), so with the job's own sample options the
counts found are the counts stored in the file. Quasienergies are in ``(-pi/T, pi/T]``
(:func:`sweepcli.physics.quasienergy.wrap_quasienergy`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from ..errors import ResultsError, SweepError, suggest
from ..jobfile import job_from_results
from ..schema import Reason
from ..store import FILL_INT, Results
from .map_data import axis_index

#: Sample kind -> (boundary measurement whose options it takes, option holding its size).
KINDS = {"flake": ("corner_modes", "size"), "polygon": ("polygon_modes", "size"),
         "chain": ("end_modes", "cells"), "ribbon": ("edge_modes", "width")}
KIND_DIM = {"flake": 2, "polygon": 2, "chain": 1, "ribbon": 2}
#: Largest samples (orbitals) whose whole spectrum is drawn (dense; ~2 s on one core); beyond,
#: only the levels inside the windows are drawn.
FULL_SPECTRUM_MAX = 2500
FULL_SPECTRUM_MAX_DRIVEN = 1600
#: Momenta of a drawn ribbon band structure.
RIBBON_NK = 241
GAPS = ("0", "pi")
_CORNERS = ("00", "10", "01", "11")


@dataclass(frozen=True)
class SampleDrawing:
    """One grid point's open sample, solved: what :func:`~sweepcli.report.sample_plot.draw_sample`
    draws.

    Attributes
    ----------
    kind : ``"flake"``, ``"polygon"``, ``"chain"`` or ``"ribbon"``; shape : cells (``(L, L)``,
        ``(L,)``, ``(W,)`` across a ribbon, ``(size,)`` of a polygon); gap : the chosen gap,
        ``"0"`` or ``"pi"``.
    index : grid index (one entry per axis) of the point; params : its swept values.
    options : the sample options used (size, max size, window, method, ...).
    levels : chain/flake: ``(n,)`` levels drawn, ascending (energy; quasienergy in
        ``[-pi/T, pi/T]``), the whole spectrum when ``full_spectrum``; ribbon: ``(nk, M)``.
    window_indices : indices into ``levels`` (flat indices for a ribbon) of the states inside
        the chosen gap's window.
    mode_indices : those of them counted as end/corner modes (ribbon: those on the low edge,
        low-half weight > 1/2).
    counts : gap -> counts found: ``{"total", "00", "10", "01", "11"}`` (flake), ``{"total",
        "left", "right"}`` (chain), ``{"total", "v0", "v1", ...}`` (polygon, per vertex),
        ``{"chiral"}`` (ribbon); ``None`` where missing.
    stored : the same counts as stored in the file at this point, when the job measured this
        sample with these options (else empty; a polygon's are ``{"total", "min", "max"}``).
    stored_reasons : gap -> the reason stored in the file for that gap's count (read through
        the count's ``ancillary_variables`` link, e.g. ``corner_modes_pi_reason``), beside
        ``stored``.
    density : chain/flake: ``shape`` array, ``sum |psi|^2`` of the chosen gap's in-window
        states per cell (sums to their number); polygon: ``(m,)`` the same per site (orbitals
        at one position summed); ``None`` for a ribbon.
    corner_weight : chain/flake: ``(2**d,)`` density inside each corner (end) region; polygon:
        ``(n,)`` inside each vertex's corner region.
    positions : polygon: ``(m, 2)`` Cartesian positions of its sites.
    vertices : polygon: ``(n, 2)`` Cartesian vertices (counter-clockwise) at the size drawn.
    corner_outlines : polygon: ``(n, 4, 2)`` the parallelogram at each vertex within
        ``region`` rows of cells of both sides that meet there (the corner regions, which the
        nearest-vertex partition cuts further on a small polygon).
    reasons : gap -> reason name of missing counts (``"ok"`` otherwise).
    full_spectrum : whether ``levels`` is the whole spectrum.
    region : chain/flake: radius in cells of the end (corner) regions the count settled on.
    """

    kind: str
    shape: tuple[int, ...]
    gap: str
    index: tuple[int, ...]
    params: dict[str, float]
    options: dict[str, Any]
    levels: np.ndarray
    window_indices: np.ndarray
    mode_indices: np.ndarray
    counts: dict[str, dict[str, int | None]]
    stored: dict[str, dict[str, int | None]] = field(default_factory=dict)
    stored_reasons: dict[str, str] = field(default_factory=dict)
    density: np.ndarray | None = None
    corner_weight: np.ndarray | None = None
    reasons: dict[str, str] = field(default_factory=dict)
    full_spectrum: bool = True
    region: int = 0
    positions: np.ndarray | None = None
    vertices: np.ndarray | None = None
    corner_outlines: np.ndarray | None = None
    chosen: str = ""  # why this sample kind, when it was not asked for
    defaulted: tuple[str, ...] = ()  # axes of more than one value that --at did not name

    def describe(self) -> str:
        """One line: the sample at the value of every swept parameter (those ``--at`` did not
        name marked as taken at their first value) and the counts of the chosen gap."""
        where = ", ".join(f"{k}={v:g}" for k, v in self.params.items())
        if self.defaulted:
            where += (f" ({', '.join(self.defaulted)}: first value, not given by --at)"
                      if len(self.defaulted) > 1 else
                      f" ({self.defaulted[0]}: first value, not given by --at)")
        return (f"{sample_name(self.kind, self.shape)} at {where}: "
                f"{count_text(self.kind, self.counts[self.gap], self.reasons[self.gap])}")


# ----------------------------------------------------------------------------------------------
# From the file to a point
# ----------------------------------------------------------------------------------------------

def nearest_index(results: Results, at: dict[str, float]) -> tuple[int, ...]:
    """Grid index nearest to ``at`` on every axis (a value off an axis is refused, see
    :func:`~sweepcli.report.map_data.axis_index`); axes not named take their first value."""
    names = [a.name for a in results.axes]
    for name in at:
        if name not in names:
            raise ResultsError(f"--at names {name!r}, which is not a swept parameter (swept: "
                               f"{', '.join(names)}).{suggest(name, names)}")
    return tuple(axis_index(a, at[a.name]) if a.name in at else 0 for a in results.axes)


#: Measurements whose bulk invariant counts chiral edge modes (a ribbon shows them) or corner
#: modes (a flake shows them), for choosing a sample when the job measures no boundary modes.
EDGE_INVARIANTS = ("chern", "spin_chern", "floquet_chern", "rudner_winding")
CORNER_INVARIANTS = ("line_winding",)


def default_kind(job) -> tuple[str, str]:
    """The sample to draw for ``job`` when none is asked for, and why (one phrase).

    The job's boundary measurement: ``corner_modes`` -> flake, ``polygon_modes`` -> polygon,
    ``edge_modes`` -> ribbon, ``end_modes`` -> chain (in that order). Without one, what its
    invariants predict: a chain in 1D, a flake for symmetry-resolved line windings (corner
    modes), else a ribbon (chiral edge modes of Chern, spin Chern, Floquet Chern numbers and
    the Rudner winding, and the edge states of any other 2D job).
    """
    measured = [m for m, _ in job.measurements]
    for k in ("flake", "polygon", "ribbon", "chain"):
        if KINDS[k][0] in measured:
            return k, f"the job measures {KINDS[k][0]}"
    if job.dim == 1:
        return "chain", "a 1D model"
    corner = [m for m in measured if m in CORNER_INVARIANTS]
    if corner:
        return "flake", f"the job measures {corner[0]}, which counts corner modes"
    edge = [m for m in measured if m in EDGE_INVARIANTS]
    if edge:
        return "ribbon", f"the job measures {edge[0]}, which counts chiral edge modes"
    return "ribbon", "a 2D job without boundary measurements"


def sample_options(job, kind: str | None, size: int | None) -> tuple[str, dict[str, Any], bool]:
    """The sample to draw: ``(kind, options, as_measured)``.

    Kind defaults to :func:`default_kind`; the options to the job's measurement of that sample
    kind, else the registered defaults; ``size`` replaces the sample's size option.
    ``as_measured`` is true when the options are those the job measured (so the file holds
    their counts).
    """
    from ..physics.measurements import MEASUREMENTS

    measured = dict(job.measurements)
    if kind is None:
        kind = default_kind(job)[0]
    if kind not in KINDS:
        raise SweepError(f"--kind must be one of {', '.join(KINDS)}; got {kind!r}."
                         f"{suggest(kind, KINDS)}")
    if KIND_DIM[kind] != job.dim:
        fits = [k for k, d in KIND_DIM.items() if d == job.dim]
        raise SweepError(f"--kind {kind} needs a {KIND_DIM[kind]}D model; {job.model!r} is "
                         f"{job.dim}D (use --kind {' or '.join(fits)}).")
    name, size_key = KINDS[kind]
    options = {p.name: p.default for p in MEASUREMENTS[name].params}
    as_measured = name in measured
    options.update(dict(measured.get(name, ())))
    if size is not None:
        as_measured = as_measured and options[size_key] == size
        options[size_key] = int(size)
    return kind, options, as_measured


def _stored(results: Results, kind: str, index: tuple[int, ...], driven: bool
            ) -> dict[str, dict[str, int | None]]:
    out = {}
    for g in GAPS[: 2 if driven else 1]:
        if kind == "flake":
            names = {"total": f"corner_modes_{g}"} | {c: f"corner_modes_{g}_{c}" for c in _CORNERS}
        elif kind == "polygon":
            names = {"total": f"polygon_modes_{g}", "min": f"polygon_modes_{g}_min",
                     "max": f"polygon_modes_{g}_max"}
        elif kind == "chain":
            names = {"total": f"end_modes_{g}", "left": f"end_modes_{g}_left",
                     "right": f"end_modes_{g}_right"}
        else:
            names = {"chiral": f"chiral_edge_modes_{g}"}
        if not all(v in results.data for v in names.values()):
            return {}
        values = {}
        for key, var in names.items():
            v = results.data[var][index]
            values[key] = None if (v == FILL_INT or not results.done[index]) else int(v)
        out[g] = values
    return out


def _stored_reasons(results: Results, kind: str, index: tuple[int, ...], driven: bool
                    ) -> dict[str, str]:
    """Gap -> name of the stored reason of that gap's count at ``index`` (through the count's
    reason link; ``<measurement>_reason`` in files written before per-gap reasons)."""
    out = {}
    for g in GAPS[: 2 if driven else 1]:
        var = {"flake": f"corner_modes_{g}", "chain": f"end_modes_{g}",
               "polygon": f"polygon_modes_{g}"}.get(
            kind, f"chiral_edge_modes_{g}")
        if var not in results.variables or not results.done[index]:
            continue
        codes = results.reason_codes(var)
        if codes is not None:
            out[g] = Reason(int(codes[index])).name.lower()
    return out


# ----------------------------------------------------------------------------------------------
# Solving the sample
# ----------------------------------------------------------------------------------------------

def _match(full: np.ndarray, targets: np.ndarray, period: float | None) -> np.ndarray:
    """Index into ``full`` of each target level, nearest first and each index used once
    (distances modulo ``2 pi / T`` for quasienergies)."""
    used = np.zeros(full.size, bool)
    out = np.zeros(targets.size, int)
    for i, t in enumerate(targets):
        d = np.abs(full - t)
        if period is not None:
            d = np.minimum(d, 2 * np.pi / period - d)
        d[used] = np.inf
        out[i] = int(np.argmin(d))
        used[out[i]] = True
    return out


def _box(point, kind: str, options: dict[str, Any], gap: str, factors, windows) -> dict:
    from ..physics import inspect as ins
    from ..physics import quasienergy as qe
    from ..physics import samples
    from ..physics.boundary import counts as boundary_counts
    from ..physics.measurements import boundary as mb

    driven = factors is not None
    tb = factors[0][1] if driven else point.tb
    try:
        states = mb.box_counts(point, KINDS[kind][0], options)
    except ValueError as exc:
        raise SweepError(f"cannot build the {kind}: {exc}.") from None
    chosen = states[gap]
    shape = chosen.shape
    region = chosen.region
    period = windows["0"].period
    n = math.prod(shape) * tb.norb
    absolute = {g: (s.levels + s.window.centre if not driven else
                    qe.wrap_quasienergy(s.levels + s.window.centre, period))
                for g, s in states.items() if s.shape == shape}
    full = n <= (FULL_SPECTRUM_MAX_DRIVEN if driven else FULL_SPECTRUM_MAX)
    if full:
        levels = (ins.floquet_box_spectrum(factors, shape, period) if driven
                  else ins.box_spectrum(tb, shape))
    else:
        levels = np.sort(np.concatenate(list(absolute.values())))
    at = {g: _match(levels, absolute[g], period) for g in absolute}
    kinds = {g: states[g].kinds for g in absolute}
    relative = {g: states[g].levels for g in absolute}
    vectors = chosen.vectors if chosen.vectors is not None else np.zeros((n, 0), complex)
    density = ins.cell_density(vectors, tb.norb)
    cells = samples.sample_sites(tb, shape)[0][:: tb.norb]
    corner = boundary_counts.corner_regions(cells, shape, region)
    corner_weight = np.bincount(corner[corner >= 0], weights=density[corner >= 0],
                                minlength=2 ** len(shape))
    counts = {}
    for g, s in states.items():
        pc = s.per_corner
        if kind == "flake":
            counts[g] = {"total": s.total} | {c: None if pc is None else int(pc[i])
                                              for i, c in enumerate(_CORNERS)}
        else:
            counts[g] = {"total": s.total, "left": None if pc is None else int(pc[0]),
                         "right": None if pc is None else int(pc[1])}
    return dict(shape=shape, levels=levels, window_at=at, kinds=kinds, relative=relative,
                counts=counts,
                density=density.reshape(shape), corner_weight=corner_weight,
                reasons={g: s.reason.name.lower() for g, s in states.items()},
                full=full, tb=tb, region=region)


def _polygon(point, options: dict[str, Any], gap: str, factors, windows) -> dict:
    """A polygon's sample solved again by the measurement's own
    :func:`~sweepcli.physics.measurements.boundary.polygon_counts`, with the pieces a picture
    needs (the keys of :func:`_box`, and ``positions``, ``vertices``, ``corner_outlines``)."""
    from ..physics import boundary as bd
    from ..physics import quasienergy as qe
    from ..physics import samples
    from ..physics.drives.evolution import evolve
    from ..physics.measurements import boundary as mb

    driven = factors is not None
    tb = factors[0][1] if driven else point.tb
    try:
        poly = mb.point_polygon(tb, options["shape"], options["vertices"],
                                options["coordinates"])
        states = mb.polygon_counts(point, options)
    except ValueError as exc:
        raise SweepError(f"cannot build the polygon: {exc}.") from None
    chosen = states[gap]
    shape = chosen.shape or (int(options["size"]),)
    size = int(shape[0])
    region = chosen.region
    period = windows["0"].period
    _, _, pos = samples.polygon_sites(tb, poly, size)
    n = pos.shape[0]
    absolute = {g: (s.levels + s.window.centre if not driven else
                    qe.wrap_quasienergy(s.levels + s.window.centre, period))
                for g, s in states.items() if s.shape == shape}
    full = n <= (FULL_SPECTRUM_MAX_DRIVEN if driven else FULL_SPECTRUM_MAX)
    if full and driven:
        u = evolve([(float(t), samples.polygon_hamiltonian(f, poly, size).toarray())
                    for t, f in factors])
        levels = qe.quasienergy_values(u, period)
    elif full:
        levels = np.linalg.eigvalsh(samples.polygon_hamiltonian(tb, poly, size).toarray())
    else:
        levels = np.sort(np.concatenate(list(absolute.values()) or [np.zeros(0)]))
    vectors = chosen.vectors
    if vectors is None or vectors.shape[0] != n:
        vectors = np.zeros((n, 0), complex)
    weight = np.sum(np.abs(vectors) ** 2, axis=1)
    regions = bd.polygon_regions(poly, pos, size)
    inside = regions.cdist < region
    corner_weight = np.bincount(regions.corner[inside], weights=weight[inside],
                                minlength=poly.n)
    # Orbitals at one position (several per site) are one site of the picture.
    sites, which = np.unique(np.round(pos, 9), axis=0, return_inverse=True)
    density = np.bincount(which.ravel(), weights=weight, minlength=len(sites))
    counts = {}
    for g, s in states.items():
        pc = s.per_corner
        counts[g] = {"total": s.total} | {f"v{j}": None if pc is None else int(pc[j])
                                          for j in range(poly.n)}
    return dict(shape=shape, levels=levels,
                window_at={g: _match(levels, absolute[g], period) for g in absolute},
                kinds={g: states[g].kinds for g in absolute},
                relative={g: states[g].levels for g in absolute}, counts=counts,
                density=density, corner_weight=corner_weight,
                reasons={g: s.reason.name.lower() for g, s in states.items()},
                full=full, tb=tb, region=region, positions=sites,
                count_windows={g: s.window for g, s in states.items() if s.window is not None},
                vertices=size * poly.vertices,
                corner_outlines=_corner_outlines(poly, size, region))


def _corner_outlines(poly, size: int, region: int) -> np.ndarray:
    """``(n, 4, 2)``: at each vertex the parallelogram of the points within ``region`` rows of
    both sides meeting there (rows of the sides' spacing)."""
    v = size * poly.vertices
    spacing = poly.row_spacing()
    out = np.zeros((poly.n, 4, 2))
    for j in range(poly.n):
        ahead = v[(j + 1) % poly.n] - v[j]
        back = v[j - 1] - v[j]
        ahead, back = ahead / np.linalg.norm(ahead), back / np.linalg.norm(back)
        sine = abs(ahead[0] * back[1] - ahead[1] * back[0])
        p1 = v[j] + ahead * region * spacing[j - 1] / sine  # side j - 1 ends at vertex j
        p3 = v[j] + back * region * spacing[j] / sine
        out[j] = [v[j], p1, p1 + p3 - v[j], p3]
    return out


def _ribbon(point, options: dict[str, Any], gap: str, factors, windows) -> dict:
    from ..physics import boundary as bd
    from ..physics import inspect as ins

    width, axis, nk = options["width"], options["open_axis"], options["nk"]
    k = np.linspace(-np.pi, np.pi, RIBBON_NK)
    try:
        if factors is not None:
            found = bd.floquet_ribbon_modes(factors, width, windows, open_axis=axis, nk=nk,
                                            gap_tol=point.gap_tol)
            bands = ins.floquet_ribbon_bands(factors, width, k, windows["0"].period, axis)
        else:
            found = {"0": bd.ribbon_modes(point.tb, width, windows["0"], open_axis=axis, nk=nk,
                                          gap_tol=point.gap_tol)}
            bands = ins.ribbon_bands(point.tb, width, k, axis)
    except ValueError as exc:
        raise SweepError(f"cannot build the ribbon: {exc}.") from None
    return dict(shape=(width,), bands=bands,
                counts={g: {"chiral": r.chiral} for g, r in found.items()},
                reasons={g: r.reason.name.lower() for g, r in found.items()})


def inspect_point(results: Results, *, at: dict[str, float] | None = None,
                  kind: str | None = None, size: int | None = None, gap: str = "0",
                  label: str = "the results file") -> tuple[dict, SampleDrawing]:
    """Rebuild the point nearest to ``at`` and solve its sample; no drawing.

    Returns
    -------
    raw : dict
        The pieces :func:`~sweepcli.report.sample_plot.draw_sample` needs beyond the summary:
        always ``job``, ``point``, ``windows`` (gap -> :class:`~sweepcli.physics.boundary.Window`),
        ``driven``, ``shape``, ``counts``, ``reasons``; a chain or flake also ``levels``,
        ``window_at`` (gap -> indices into ``levels`` of the in-window states, in the order of
        the count's levels), ``kinds`` and ``relative`` (gap -> the count's level classes and
        levels relative to the window centre, same order), ``density``, ``corner_weight``,
        ``full``, ``tb``, ``region``; a ribbon ``bands``
        (:class:`~sweepcli.physics.inspect.RibbonBands`).
    drawing : SampleDrawing
        The summary.
    """
    from ..physics import quasienergy as qe
    from ..physics.measurements import boundary as mb

    job = job_from_results(results, label)
    if gap not in GAPS:
        raise SweepError(f"--gap must be 0 or pi; got {gap!r}.")
    driven = job.drive.kind != "static"
    if gap == "pi" and not driven:
        raise SweepError("--gap pi needs a driven job (a quasienergy gap at pi/T); this job is "
                         "static.")
    chosen = f"{default_kind(job)[0]}: {default_kind(job)[1]}" if kind is None else ""
    kind, options, as_measured = sample_options(job, kind, size)
    index = nearest_index(results, at or {})
    flat = int(np.ravel_multi_index(index, job.shape)) if job.axes else 0
    point = job.point(flat)
    # The measurement's own windows and drive slicing, so the counts are those of the run.
    factors = mb.point_factors(point) if driven else None
    if driven and factors is None:
        raise ResultsError(f"{label}: the drive's time slicing does not converge at this point, "
                           "so its sample cannot be solved (the stored counts are missing, "
                           "reason not_converged).")
    windows = mb.point_windows(point, options["window"])
    params = {a.name: float(a.values[i]) for a, i in zip(job.axes, index)}
    if kind == "ribbon":
        raw = _ribbon(point, options, gap, factors, windows)
        bands = raw["bands"]
        w = windows[gap]
        rel = bands.levels - w.centre
        if driven:
            rel = qe.wrap_quasienergy(rel, w.period)
        inside = (np.abs(rel) <= w.halfwidth if np.isfinite(w.halfwidth)
                  else np.zeros(rel.shape, bool))
        win = np.flatnonzero(inside)
        modes = np.flatnonzero(inside & (bands.low_weight > 0.5))
        drawing = SampleDrawing(kind, raw["shape"], gap, index, params, options, bands.levels,
                                win, modes, raw["counts"], reasons=raw["reasons"])
    else:
        raw = (_polygon(point, options, gap, factors, windows) if kind == "polygon"
               else _box(point, kind, options, gap, factors, windows))
        # A polygon's window may be centred on its ``energy``, not on the gap at the filling.
        windows = {**windows, **raw.get("count_windows", {})}
        at_gap = raw["window_at"].get(gap, np.zeros(0, int))
        modes = at_gap[raw["kinds"][gap] == 2] if gap in raw["kinds"] else at_gap
        drawing = SampleDrawing(kind, raw["shape"], gap, index, params, options, raw["levels"],
                                np.sort(at_gap), np.sort(modes),
                                raw["counts"], density=raw["density"],
                                corner_weight=raw["corner_weight"], reasons=raw["reasons"],
                                full_spectrum=raw["full"], region=raw["region"],
                                positions=raw.get("positions"), vertices=raw.get("vertices"),
                                corner_outlines=raw.get("corner_outlines"))
    drawing = replace(drawing, chosen=chosen, defaulted=tuple(
        a.name for a in job.axes if a.name not in (at or {}) and len(a.values) > 1))
    if as_measured:
        drawing = replace(drawing, stored=_stored(results, kind, index, driven),
                          stored_reasons=_stored_reasons(results, kind, index, driven))
    raw.update(job=job, point=point, windows=windows, driven=driven)
    return raw, drawing


# ----------------------------------------------------------------------------------------------
# Words
# ----------------------------------------------------------------------------------------------

def sample_name(kind: str, shape: tuple[int, ...]) -> str:
    """``"flake of 16 x 16 cells"``, ``"ribbon 12 cells wide"``, ``"polygon of size 12"``, ...:
    the sample in words."""
    if kind == "polygon":
        return f"polygon of size {shape[0]}"
    if kind == "ribbon":
        return f"ribbon {shape[0]} cells wide"
    return f"{kind} of {' x '.join(map(str, shape))} cells"


def count_text(kind: str, counts: dict, reason: str) -> str:
    """The counts of one gap in words (``reason`` where they are missing)."""
    if kind == "ribbon":
        c = counts["chiral"]
        return (f"{c} chiral edge mode(s) on the low edge" if c is not None
                else f"missing ({reason.replace('_', ' ')})")
    if counts["total"] is None:
        return f"missing ({reason.replace('_', ' ')})"
    noun = "end" if kind == "chain" else "corner"
    parts = ", ".join(f"{k} {v}" for k, v in counts.items() if k != "total")
    return f"{counts['total']} {noun} mode(s) ({parts})"
