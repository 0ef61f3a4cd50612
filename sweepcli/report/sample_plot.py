"""``sweepcli sample``: the open sample behind one grid point's boundary-mode count, drawn.

For one grid point of a results file the job is rebuilt from the file's provenance
(``job_text``), the point's model (and drive) is built exactly as the run built it, and the
open sample the count came from is solved again with the physics core's own functions
(:mod:`sweepcli.physics.inspect` composes them and keeps the eigenvectors):

* a chain or flake: the spectrum (energy, or quasienergy for a drive) against state index with
  the in-gap window(s) shaded and the states counted as end/corner modes highlighted, and the
  density ``sum |psi|^2`` of the in-gap states of the chosen gap summed per cell, on the sample;
* a ribbon: the bands (quasienergy bands) against the momentum along the edge, each state
  coloured by its weight on the low edge.

The windows and the drive's time slicing are those of the boundary measurements
(:mod:`sweepcli.physics.measurements.boundary`), so with the job's own sample options the
counts drawn are the counts stored in the file.
"""

from __future__ import annotations

import math
import textwrap
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import ResultsError, SweepError, suggest
from ..store import FILL_INT, Results
from ..store.provenance import stored_job
from .maps import FORMATS, axis_index

#: Sample kind -> (boundary measurement whose options it takes, option holding its size).
KINDS = {"flake": ("corner_modes", "size"), "chain": ("end_modes", "cells"),
         "ribbon": ("edge_modes", "width")}
KIND_DIM = {"flake": 2, "chain": 1, "ribbon": 2}
#: Largest samples (orbitals) whose whole spectrum is drawn (dense; ~2 s on one core); beyond,
#: only the levels inside the windows are drawn.
FULL_SPECTRUM_MAX = 2500
FULL_SPECTRUM_MAX_DRIVEN = 1600
#: Momenta of a drawn ribbon band structure.
RIBBON_NK = 241
GAPS = ("0", "pi")
MODE_COLOUR = "crimson"
EDGE_COLOUR = "darkorange"
WINDOW_COLOUR = "tab:blue"
LEVEL_COLOUR = "0.55"
_CORNERS = ("00", "10", "01", "11")


@dataclass(frozen=True)
class SampleDrawing:
    """What :func:`draw_sample` drew.

    Attributes
    ----------
    kind : ``"flake"``, ``"chain"`` or ``"ribbon"``; shape : cells (``(L, L)``, ``(L,)`` or
        ``(W,)`` across a ribbon); gap : the chosen gap, ``"0"`` or ``"pi"``.
    index : grid index (one entry per axis) of the point; params : its swept values.
    options : the sample options used (size, max size, window, method, ...).
    levels : chain/flake: ``(n,)`` levels drawn, ascending (energy; quasienergy in
        ``[-pi/T, pi/T]``), the whole spectrum when ``full_spectrum``; ribbon: ``(nk, M)``.
    window_indices : indices into ``levels`` (flat indices for a ribbon) of the states inside
        the chosen gap's window.
    mode_indices : those of them counted as end/corner modes (ribbon: those on the low edge,
        low-half weight > 1/2).
    counts : gap -> counts found: ``{"total", "00", "10", "01", "11"}`` (flake), ``{"total",
        "left", "right"}`` (chain), ``{"chiral"}`` (ribbon); ``None`` where missing.
    stored : the same counts as stored in the file at this point, when the job measured this
        sample with these options (else empty).
    density : chain/flake: ``shape`` array, ``sum |psi|^2`` of the chosen gap's in-window
        states per cell (sums to their number); ``None`` for a ribbon.
    corner_weight : chain/flake: ``(2**d,)`` density inside each corner (end) region.
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
    density: np.ndarray | None = None
    corner_weight: np.ndarray | None = None
    reasons: dict[str, str] = field(default_factory=dict)
    full_spectrum: bool = True
    region: int = 0
    chosen: str = ""  # why this sample kind, when it was not asked for

    def describe(self) -> str:
        """One line: the sample and the counts of the chosen gap."""
        where = ", ".join(f"{k}={v:g}" for k, v in self.params.items())
        return (f"{_sample_name(self.kind, self.shape)} at {where}: "
                f"{_count_text(self.kind, self.counts[self.gap], self.reasons[self.gap])}")


# ----------------------------------------------------------------------------------------------
# From the file to a point
# ----------------------------------------------------------------------------------------------

def nearest_index(results: Results, at: dict[str, float]) -> tuple[int, ...]:
    """Grid index nearest to ``at`` on every axis (a value off an axis is refused, see
    :func:`~sweepcli.report.maps.axis_index`); axes not named take their first value."""
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

    The job's boundary measurement: ``corner_modes`` -> flake, ``edge_modes`` -> ribbon,
    ``end_modes`` -> chain (in that order). Without one, what its invariants predict: a chain
    in 1D, a flake for symmetry-resolved line windings (corner modes), else a ribbon (chiral
    edge modes of Chern, spin Chern, Floquet Chern numbers and the Rudner winding, and the
    edge states of any other 2D job).
    """
    measured = [m for m, _ in job.measurements]
    for k in ("flake", "ribbon", "chain"):
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
    from ..physics import boundary_counts, samples
    from ..physics import inspect as ins
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
                    (s.levels + s.window.centre + np.pi / period) % (2 * np.pi / period)
                    - np.pi / period) for g, s in states.items() if s.shape == shape}
    full = n <= (FULL_SPECTRUM_MAX_DRIVEN if driven else FULL_SPECTRUM_MAX)
    if full:
        levels = ins.floquet_box_spectrum(factors, shape) if driven else ins.box_spectrum(tb, shape)
    else:
        levels = np.sort(np.concatenate(list(absolute.values())))
    at = {g: _match(levels, absolute[g], period) for g in absolute}
    kinds = {g: states[g].kinds for g in absolute}
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
    return dict(shape=shape, levels=levels, window_at=at, kinds=kinds, counts=counts,
                density=density.reshape(shape), corner_weight=corner_weight,
                reasons={g: s.reason.name.lower() for g, s in states.items()},
                full=full, tb=tb, region=region)


def _ribbon(point, options: dict[str, Any], gap: str, factors, windows) -> dict:
    from ..physics import boundary as bd
    from ..physics import inspect as ins

    width, axis, nk = options["width"], options["open_axis"], options["nk"]
    k = np.linspace(-np.pi, np.pi, RIBBON_NK)
    try:
        if factors is not None:
            found = bd.floquet_ribbon_modes(factors, width, windows, open_axis=axis, nk=nk,
                                            gap_tol=point.gap_tol)
            bands = ins.floquet_ribbon_bands(factors, width, k, axis)
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

    Returns the raw pieces for :func:`draw_sample` and the :class:`SampleDrawing` summary.
    """
    from ..physics.measurements import boundary as mb

    job = stored_job(results, label)
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
            rel = (rel + np.pi / w.period) % (2 * np.pi / w.period) - np.pi / w.period
        inside = (np.abs(rel) <= w.halfwidth if np.isfinite(w.halfwidth)
                  else np.zeros(rel.shape, bool))
        win = np.flatnonzero(inside)
        modes = np.flatnonzero(inside & (bands.low_weight > 0.5))
        drawing = SampleDrawing(kind, raw["shape"], gap, index, params, options, bands.levels,
                                win, modes, raw["counts"], reasons=raw["reasons"])
    else:
        raw = _box(point, kind, options, gap, factors, windows)
        at_gap = raw["window_at"][gap]
        drawing = SampleDrawing(kind, raw["shape"], gap, index, params, options, raw["levels"],
                                np.sort(at_gap), np.sort(at_gap[raw["kinds"][gap] == 2]),
                                raw["counts"], density=raw["density"],
                                corner_weight=raw["corner_weight"], reasons=raw["reasons"],
                                full_spectrum=raw["full"], region=raw["region"])
    drawing = replace(drawing, chosen=chosen)
    if as_measured:
        drawing = replace(drawing, stored=_stored(results, kind, index, driven))
    raw.update(job=job, point=point, windows=windows, driven=driven)
    return raw, drawing


# ----------------------------------------------------------------------------------------------
# Drawing
# ----------------------------------------------------------------------------------------------

def _sample_name(kind: str, shape: tuple[int, ...]) -> str:
    if kind == "ribbon":
        return f"ribbon {shape[0]} cells wide"
    return f"{kind} of {' x '.join(map(str, shape))} cells"


def _count_text(kind: str, counts: dict, reason: str) -> str:
    if kind == "ribbon":
        c = counts["chiral"]
        return (f"{c} chiral edge mode(s) on the low edge" if c is not None
                else f"missing ({reason.replace('_', ' ')})")
    if counts["total"] is None:
        return f"missing ({reason.replace('_', ' ')})"
    noun = "corner" if kind == "flake" else "end"
    parts = ", ".join(f"{k} {v}" for k, v in counts.items() if k != "total")
    return f"{counts['total']} {noun} mode(s) ({parts})"


def _gap_label(g: str) -> str:
    return "0" if g == "0" else "π/T"


def _title(job, drawing: SampleDrawing, options: dict) -> str:
    where = ", ".join(f"{k} = {v:g}" for k, v in drawing.params.items())
    # Parameters a drive step or kick sets are not fixed; they are shown by the drive.
    driven_set = job.drive.varied
    fixed = ", ".join(f"{k} = {v:g}" for k, v in job.fixed if isinstance(v, (int, float))
                      and k not in drawing.params and k not in driven_set)
    lines = [job.title, f"{where}" + (f"   (fixed: {fixed})" if fixed else "")]
    if drawing.kind == "ribbon":
        lines.append(f"{_sample_name(drawing.kind, drawing.shape)}, open along "
                     f"a{options['open_axis'] + 1}")
    else:
        n_reg = drawing.region
        reg = f"{n_reg} x {n_reg}" if drawing.kind == "flake" else f"{n_reg}"
        lines.append(f"{_sample_name(drawing.kind, drawing.shape)}, "
                     f"{'corner' if drawing.kind == 'flake' else 'end'} regions {reg} cells, "
                     f"window {options['window']:g} x half the gap")
    for g, c in drawing.counts.items():
        text = f"at {_gap_label(g)}: {_count_text(drawing.kind, c, drawing.reasons[g])}"
        if g in drawing.stored:
            s = drawing.stored[g]
            key = "chiral" if drawing.kind == "ribbon" else "total"
            text += f"   [file: {s[key] if s[key] is not None else 'missing'}]"
        lines.append(text)
    return "\n".join(textwrap.fill(line, 120) for line in lines)


def _shade_windows(ax, windows: dict, driven: bool, chosen: str, horizontal: bool = True) -> list:
    from matplotlib.patches import Patch

    handles = []
    for g, w in windows.items():
        if not np.isfinite(w.halfwidth):
            continue
        alpha = 0.28 if g == chosen else 0.12
        colour = "gold" if g == "0" else "tab:cyan"
        if driven and g == "pi":
            half = np.pi / w.period
            spans = [(half - w.halfwidth, half), (-half, -half + w.halfwidth)]
        else:
            spans = [(w.centre - w.halfwidth, w.centre + w.halfwidth)]
        for lo, hi in spans:
            ax.axhspan(lo, hi, color=colour, alpha=alpha, lw=0)
        handles.append(Patch(color=colour, alpha=alpha + 0.15,
                             label=f"in-gap window at {_gap_label(g)} (bulk gap {w.gap:.3g})"))
    return handles


def _energy_label(driven: bool) -> str:
    return "quasienergy ε [energy]" if driven else "energy E [energy]"


def _draw_spectrum(ax, raw: dict, d: SampleDrawing) -> None:
    from matplotlib.lines import Line2D

    driven = raw["driven"]
    levels = d.levels
    x = np.arange(levels.size)
    handles = _shade_windows(ax, raw["windows"], driven, d.gap)
    ax.plot(x, levels, ".", ms=2.5, color=LEVEL_COLOUR, zorder=2)
    handles.append(Line2D([], [], ls="", marker=".", color=LEVEL_COLOUR, label="levels"))
    noun = "corner" if d.kind == "flake" else "end"
    shown_kinds = set()
    for g, idx in raw["window_at"].items():
        kinds = raw["kinds"][g]
        for k, colour, ms in ((0, WINDOW_COLOUR, 4), (1, EDGE_COLOUR, 5), (2, MODE_COLOUR, 6)):
            sel = idx[kinds == k]
            if sel.size:
                ax.plot(x[sel], levels[sel], "o", ms=ms, mfc=colour, mec="k", mew=0.4, zorder=3)
                shown_kinds.add(k)
    names = {0: "in window, bulk-like", 1: "in window, on the edges", 2: f"counted as {noun} modes"}
    colours = {0: WINDOW_COLOUR, 1: EDGE_COLOUR, 2: MODE_COLOUR}
    for k in sorted(shown_kinds):
        handles.append(Line2D([], [], ls="", marker="o", mfc=colours[k], mec="k", mew=0.4,
                              label=names[k]))
    if driven:
        half = np.pi / raw["windows"]["0"].period
        for y in (-half, half):
            ax.axhline(y, color="k", lw=0.6, ls=":")
        ax.set_ylim(-1.04 * half, 1.04 * half)
        ax.set_yticks([-half, -half / 2, 0, half / 2, half],
                      ["-π/T", "-π/2T", "0", "π/2T", "π/T"])
        twin = ax.secondary_yaxis("right")
        twin.set_ylabel(_energy_label(True).replace("ε", "ε T/π").replace("[energy]", "") +
                        f"(T = {raw['windows']['0'].period:.4g})")
        twin.set_yticks([-half, 0, half], ["-1", "0", "1"])
    _draw_zoom(ax, raw, d)
    ax.set_xlabel("state index (levels sorted)" if d.full_spectrum else
                  "state index (in-window levels only: the sample is too large for the whole "
                  "spectrum)")
    ax.set_ylabel(_energy_label(driven))
    ax.set_title(f"spectrum of the open {d.kind}", fontsize=9)
    ax.legend(handles=handles, loc="upper left", fontsize=7, framealpha=0.85)


def _draw_zoom(ax, raw: dict, d: SampleDrawing) -> None:
    """Inset: the chosen gap's in-window levels one by one (degenerate ones side by side)."""
    w = raw["windows"][d.gap]
    idx = raw["window_at"][d.gap]
    if not idx.size:
        return
    rel = d.levels[idx] - w.centre
    if w.period is not None:
        rel = (rel + np.pi / w.period) % (2 * np.pi / w.period) - np.pi / w.period
    order = np.argsort(rel, kind="stable")
    kinds = raw["kinds"][d.gap][order]
    colours = np.array([WINDOW_COLOUR, EDGE_COLOUR, MODE_COLOUR])[kinds]
    inset = ax.inset_axes([0.6, 0.07, 0.37, 0.3])
    inset.axhspan(-w.halfwidth, w.halfwidth, color="gold" if d.gap == "0" else "tab:cyan",
                  alpha=0.2, lw=0)
    inset.axhline(0, color="k", lw=0.5, ls=":")
    inset.scatter(np.arange(1, idx.size + 1), rel[order], c=colours, s=22, edgecolors="k",
                  linewidths=0.4, zorder=3)
    inset.set_xlim(0.3, idx.size + 0.7)
    inset.set_ylim(-1.1 * w.halfwidth, 1.1 * w.halfwidth)
    if idx.size <= 12:
        inset.set_xticks(np.arange(1, idx.size + 1))
    inset.tick_params(labelsize=6)
    centre = "E − centre" if w.period is None else ("ε" if d.gap == "0" else "ε − π/T")
    inset.set_xlabel(f"in-window state at {_gap_label(d.gap)}", fontsize=6, labelpad=1)
    inset.set_ylabel(f"{centre} [energy]", fontsize=6, labelpad=1)


def _draw_flake_density(fig, ax, raw: dict, d: SampleDrawing) -> None:
    from matplotlib.collections import PolyCollection
    from matplotlib.patches import Polygon

    tb = raw["tb"]
    a = tb.lattice_vectors
    shape = d.shape
    grid = np.indices(shape).reshape(2, -1).T.astype(float)
    centre = grid + tb.orbital_positions.mean(axis=0)
    square = np.array([[-0.5, -0.5], [0.5, -0.5], [0.5, 0.5], [-0.5, 0.5]])
    polys = (centre[:, None, :] + square[None]) @ a
    dens = d.density.ravel()
    coll = PolyCollection(polys, array=dens, cmap="magma", edgecolors="face", linewidths=0.2)
    coll.set_clim(0.0, float(dens.max()) if dens.max() > 0 else 1.0)
    ax.add_collection(coll)
    r = raw["region"]
    lx, ly = shape
    for i, (bx, by) in enumerate(((0, 0), (1, 0), (0, 1), (1, 1))):
        x0 = 0 if bx == 0 else lx - r
        y0 = 0 if by == 0 else ly - r
        box = (np.array([[x0, y0], [x0 + r, y0], [x0 + r, y0 + r], [x0, y0 + r]], float)
               - 0.5 + tb.orbital_positions.mean(axis=0)) @ a
        ax.add_patch(Polygon(box, closed=True, fill=False, ec="w", lw=1.0, ls="--"))
        label = f"{bx}{by}"
        n = d.counts[d.gap][label]
        txt = f"{label}: {n if n is not None else '-'} mode(s)\nweight {d.corner_weight[i]:.2f}"
        cx, cy = box.mean(axis=0)
        off = np.array([-1 if bx == 0 else 1, -1 if by == 0 else 1]) * 0.9 * r
        ax.annotate(txt, (cx, cy), xytext=(cx + off[0], cy + off[1]), fontsize=7,
                    ha="right" if bx == 0 else "left", va="top" if by == 0 else "bottom",
                    color="k", annotation_clip=False)
    lo, hi = polys.reshape(-1, 2).min(axis=0), polys.reshape(-1, 2).max(axis=0)
    pad = 0.3 * (hi - lo)
    ax.set_xlim(lo[0] - pad[0], hi[0] + pad[0])
    ax.set_ylim(lo[1] - pad[1], hi[1] + pad[1])
    ax.set_aspect("equal")
    ax.set_xlabel("x [lattice constant]")
    ax.set_ylabel("y [lattice constant]")
    m = len(d.window_indices)
    fig.colorbar(coll, ax=ax, shrink=0.85,
                 label=f"Σ |ψ|² per cell of the {m} in-window state(s) at {_gap_label(d.gap)}")
    ax.set_title(f"where the in-gap states at {_gap_label(d.gap)} sit (dashed: corner regions, "
                 f"{r} x {r} cells)", fontsize=9)


def _or_dash(n: int | None) -> str:
    return "-" if n is None else str(n)


def _draw_chain_density(ax, raw: dict, d: SampleDrawing) -> None:
    from matplotlib.patches import Patch

    r = raw["region"]
    n = d.shape[0]
    cells = np.arange(n)
    ax.axvspan(-0.5, r - 0.5, color="tab:green", alpha=0.15, lw=0)
    ax.axvspan(n - r - 0.5, n - 0.5, color="tab:green", alpha=0.15, lw=0)
    ax.bar(cells, d.density, width=0.85, color=MODE_COLOUR)
    m = len(d.window_indices)
    c = d.counts[d.gap]
    handles = [Patch(color=MODE_COLOUR, label=f"Σ |ψ|² of the {m} in-window state(s) at "
                                              f"{_gap_label(d.gap)}"),
               Patch(color="tab:green", alpha=0.3,
                     label=f"end regions ({r} cells): weight {d.corner_weight[0]:.2f} left "
                           f"({_or_dash(c['left'])} mode(s)), "
                           f"{d.corner_weight[1]:.2f} right "
                           f"({_or_dash(c['right'])} mode(s))")]
    ax.set_xlim(-0.5, n - 0.5)
    ax.set_xlabel("cell index along the chain")
    ax.set_ylabel("Σ |ψ|² per cell (summed over the cell's orbitals)")
    ax.set_title(f"where the in-gap states at {_gap_label(d.gap)} sit", fontsize=9)
    ax.legend(handles=handles, loc="upper center", fontsize=7)


def _draw_ribbon(fig, ax, raw: dict, d: SampleDrawing) -> None:
    from matplotlib.lines import Line2D

    bands = raw["bands"]
    driven = raw["driven"]
    handles = _shade_windows(ax, raw["windows"], driven, d.gap)
    kk = np.broadcast_to(bands.k[:, None], bands.levels.shape)
    order = np.argsort(np.abs(bands.low_weight - 0.5).ravel())  # edge states drawn on top
    sc = ax.scatter(kk.ravel()[order], bands.levels.ravel()[order],
                    c=bands.low_weight.ravel()[order], cmap="coolwarm", vmin=0, vmax=1, s=3,
                    lw=0)
    fig.colorbar(sc, ax=ax, label="weight on the low half of the ribbon (1: low edge, "
                                  "0: high edge)")
    handles.append(Line2D([], [], ls="", marker="o", color=MODE_COLOUR,
                          label="state on the low edge (weight > 1/2)"))
    ax.set_xlim(-np.pi, np.pi)
    ax.set_xticks([-np.pi, -np.pi / 2, 0, np.pi / 2, np.pi], ["-π", "-π/2", "0", "π/2", "π"])
    p = 2 - d.options["open_axis"]
    ax.set_xlabel(f"momentum along the edge k∥ = k · a{p} [rad]")
    ax.set_ylabel(_energy_label(driven))
    if driven:
        half = np.pi / bands.period
        ax.set_ylim(-1.02 * half, 1.02 * half)
        ax.set_yticks([-half, -half / 2, 0, half / 2, half],
                      ["-π/T", "-π/2T", "0", "π/2T", "π/T"])
    ax.legend(handles=handles, loc="upper left", fontsize=7, framealpha=0.85)


def draw_sample(results: Results, out: str | Path, *, at: dict[str, float] | None = None,
                kind: str | None = None, size: int | None = None, gap: str = "0",
                label: str = "the results file") -> tuple[Path, SampleDrawing]:
    """Draw the open sample of the grid point of ``results`` nearest to ``at``.

    Parameters
    ----------
    results : a results file written by ``sweepcli run`` (it must hold ``job_text``).
    out : picture file; the format follows the suffix (png, svg, pdf).
    at : swept parameter -> value; the nearest grid value is taken, other axes their first.
    kind : ``"flake"``, ``"chain"`` or ``"ribbon"`` (default from the job's boundary
        measurement, see :func:`sample_options`); size : cells (side, length or width).
    gap : ``"0"`` or ``"pi"`` (driven jobs): the gap whose in-gap states are drawn on the sample.
    label : how error messages name the results file.

    Returns
    -------
    The written path and a :class:`SampleDrawing` of what was drawn.

    Raises
    ------
    SweepError for a bad suffix, option, axis name, a file without a valid stored job, or a
    sample that cannot be built.
    """
    out = Path(out)
    if out.suffix.lower() not in FORMATS:
        raise SweepError(f"{out}: the picture format follows the suffix, which must be one of "
                         f"{', '.join(FORMATS)}; got {out.suffix or 'none'!r}.")
    raw, drawing = inspect_point(results, at=at, kind=kind, size=size, gap=gap, label=label)
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    if drawing.kind == "ribbon":
        fig, ax = plt.subplots(figsize=(8, 6), constrained_layout=True)
        _draw_ribbon(fig, ax, raw, drawing)
    else:
        fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(13, 6), constrained_layout=True,
                                       gridspec_kw={"width_ratios": (1, 1.1)})
        _draw_spectrum(ax1, raw, drawing)
        if drawing.kind == "flake":
            _draw_flake_density(fig, ax2, raw, drawing)
        else:
            _draw_chain_density(ax2, raw, drawing)
        if not drawing.window_indices.size:
            ax2.text(0.5, 0.5, f"no in-gap states at {_gap_label(gap)}"
                     + (f" ({drawing.reasons[gap].replace('_', ' ')})"
                        if drawing.reasons[gap] != "ok" else ""),
                     transform=ax2.transAxes, ha="center", va="center", fontsize=10,
                     bbox=dict(fc="w", ec="0.5"))
    fig.suptitle(_title(raw["job"], drawing, drawing.options), fontsize=10)
    out.parent.mkdir(parents=True, exist_ok=True)
    try:
        fig.savefig(out, dpi=120)
    except OSError as exc:
        raise SweepError(f"{out}: cannot write the picture ({exc.strerror or exc}).") from None
    finally:
        plt.close(fig)
    return out, drawing
