"""``sweepcli sample``: the open sample behind one grid point's boundary-mode count, drawn.

The data come from :func:`sweepcli.report.sample_data.inspect_point` (the point rebuilt and its
sample solved again by the physics core); this module only draws them with matplotlib:

* a chain or flake: the spectrum (energy, or quasienergy for a drive) against state index with
  the in-gap window(s) shaded and the states counted as end/corner modes highlighted, and the
  density ``sum |psi|^2`` of the in-gap states of the chosen gap summed per cell, on the sample;
* a polygon: the same spectrum, and the density of the in-gap states on every site of the
  polygonal flake, with its outline, its vertices (each with its count and the weight in its
  corner region) and the corner regions dashed;
* a ribbon: the bands (quasienergy bands) against the momentum along the edge, each state
  coloured by its weight on the low edge.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np

from ..errors import SweepError
from ..store import Results
from .maps import FORMATS
from .sample_data import SampleDrawing, count_text, inspect_point, sample_name

MODE_COLOUR = "crimson"
EDGE_COLOUR = "darkorange"
WINDOW_COLOUR = "tab:blue"
BOUND_COLOUR = "mediumpurple"
LEVEL_COLOUR = "0.55"


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
        lines.append(f"{sample_name(drawing.kind, drawing.shape)}, open along "
                     f"a{options['open_axis'] + 1}")
    elif drawing.kind == "polygon":
        lines.append(f"{options['shape']} {sample_name(drawing.kind, drawing.shape)}, corner "
                     f"regions {drawing.region} row(s) of cells from both sides at a vertex, "
                     f"window {options['window']:g} x half the gap")
    else:
        n_reg = drawing.region
        reg = f"{n_reg} x {n_reg}" if drawing.kind == "flake" else f"{n_reg}"
        lines.append(f"{sample_name(drawing.kind, drawing.shape)}, "
                     f"{'corner' if drawing.kind == 'flake' else 'end'} regions {reg} cells, "
                     f"window {options['window']:g} x half the gap")
    for g, c in drawing.counts.items():
        text = f"at {_gap_label(g)}: {count_text(drawing.kind, c, drawing.reasons[g])}"
        if g in drawing.stored:
            s = drawing.stored[g]
            key = "chiral" if drawing.kind == "ribbon" else "total"
            why = drawing.stored_reasons.get(g, "")
            shown = (s[key] if s[key] is not None
                     else "missing" + (f" ({why.replace('_', ' ')})" if why else ""))
            text += f"   [file: {shown}]"
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
    noun = "end" if d.kind == "chain" else "corner"
    shown_kinds = set()
    for g, idx in raw["window_at"].items():
        kinds = raw["kinds"][g]
        for k, colour, ms in ((0, WINDOW_COLOUR, 4), (1, EDGE_COLOUR, 5), (2, MODE_COLOUR, 6),
                              (3, BOUND_COLOUR, 5)):
            sel = idx[kinds == k]
            if sel.size:
                ax.plot(x[sel], levels[sel], "o", ms=ms, mfc=colour, mec="k", mew=0.4, zorder=3)
                shown_kinds.add(k)
    names = {0: "in window, bulk-like", 1: "in window, on the edges", 2: f"counted as {noun} modes",
             3: f"bound to a {noun}, not pinned (not a mode)"}
    colours = {0: WINDOW_COLOUR, 1: EDGE_COLOUR, 2: MODE_COLOUR, 3: BOUND_COLOUR}
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
    rel = raw["relative"][d.gap]
    order = np.argsort(rel, kind="stable")
    kinds = raw["kinds"][d.gap][order]
    colours = np.array([WINDOW_COLOUR, EDGE_COLOUR, MODE_COLOUR, BOUND_COLOUR])[kinds]
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


def _draw_polygon_density(fig, ax, raw: dict, d: SampleDrawing) -> None:
    from matplotlib.patches import Polygon

    pos, dens, verts = d.positions, d.density, d.vertices
    top = float(dens.max()) if dens.size and dens.max() > 0 else 1.0
    lo, hi = verts.min(axis=0), verts.max(axis=0)
    extent = float(np.max(hi - lo))
    # Marker area from the area per site, so a small and a large flake look alike.
    area = _area(verts)
    per_site = area / max(len(pos), 1)
    pts = (ax.get_window_extent().width / (1.5 * extent)) ** 2 * per_site
    base = float(np.clip(0.6 * pts, 1.0, 60.0))
    ax.add_patch(Polygon(verts, closed=True, fc="0.97", ec="none", zorder=0))
    order = np.argsort(dens, kind="stable")  # heavy sites on top
    sc = ax.scatter(pos[order, 0], pos[order, 1], c=dens[order], cmap="magma_r", vmin=0,
                    vmax=top, s=base * (0.35 + 2.5 * dens[order] / top), lw=0.4,
                    edgecolors="0.6", zorder=2)
    for box in d.corner_outlines:
        ax.add_patch(Polygon(box, closed=True, fill=False, ec="tab:green", lw=1.0, ls="--",
                             zorder=3))
    ax.add_patch(Polygon(verts, closed=True, fill=False, ec="tab:blue", lw=1.4, zorder=3))
    ax.plot(verts[:, 0], verts[:, 1], "o", ms=6, mfc="tab:blue", mec="k", mew=0.5, zorder=4)
    centre = verts.mean(axis=0)
    counts = d.counts[d.gap]
    for j, v in enumerate(verts):
        out = (v - centre) / np.linalg.norm(v - centre)
        n = counts[f"v{j}"]
        txt = f"v{j}: {_or_dash(n)} mode(s)\nweight {d.corner_weight[j]:.2f}"
        at = v + 0.06 * extent * out
        ax.annotate(txt, at, fontsize=7, ha="left" if out[0] > 0.3 else
                    ("right" if out[0] < -0.3 else "center"),
                    va="bottom" if out[1] > 0.3 else ("top" if out[1] < -0.3 else "center"),
                    annotation_clip=False, zorder=5,
                    bbox=dict(fc="w", ec="0.7", lw=0.5, alpha=0.85, pad=1.5))
    pad = 0.22 * (hi - lo).max()
    ax.set_xlim(lo[0] - pad, hi[0] + pad)
    ax.set_ylim(lo[1] - pad, hi[1] + pad)
    ax.set_aspect("equal")
    ax.set_xlabel("x [lattice constant]")
    ax.set_ylabel("y [lattice constant]")
    m = len(d.window_indices)
    fig.colorbar(sc, ax=ax, shrink=0.85,
                 label=f"Σ |ψ|² per site of the {m} in-window state(s) at {_gap_label(d.gap)}")
    ax.set_title(f"where the in-gap states at {_gap_label(d.gap)} sit (blue: the polygon and its "
                 f"vertices; dashed: corner regions, {d.region} row(s))", fontsize=9)


def _area(verts: np.ndarray) -> float:
    x, y = verts[:, 0], verts[:, 1]
    return 0.5 * abs(float(np.sum(x * np.roll(y, -1) - y * np.roll(x, -1))))


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
    kind : ``"flake"``, ``"polygon"``, ``"chain"`` or ``"ribbon"`` (default from the job's boundary
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
        elif drawing.kind == "polygon":
            _draw_polygon_density(fig, ax2, raw, drawing)
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
