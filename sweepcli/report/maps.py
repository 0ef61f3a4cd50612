"""``sweepcli map``: phase maps drawn with matplotlib from a results file.

Integer invariants (and half-integer ones such as the spin Chern number) get discrete colours
tied to their values, the same in every map of every file: 0 neutral, positive values red and
negative values blue, deeper with magnitude (:func:`.map_style.value_colour`), with a colour bar
that has one tick per value. Gaps get a continuous scale. Points where a quantity is ill-defined
are grey; points not computed yet (an unfinished run) are hatched white, and the title counts
them. In a ``[confirm]`` file, cells whose boundary measurements were not requested are dotted
white (not grey: nothing is ill-defined there) and the cells where they were computed carry a
small open square on every map. Grid nodes next to a bulk-gap closing and predicted closings are
marked over every 2D map so that phase changes can be compared with gap closings. A 1D sweep
draws a line plot with the same colours (:mod:`.map_line`). What is drawn is chosen in
:mod:`.map_data`.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np

from ..errors import SweepError
from ..store import Results
from .map_data import (
    Slice,
    check_variable,
    closing_nodes,
    disagreement,
    gap_variable_for,
    map_slice,
    select,
    transition_rows,
)
from .map_line import draw_cut
from .map_style import (
    CONFIRMED_MARK,
    MISSING_COLOUR,
    NOT_REQUESTED_HATCH,
    absent_levels,
    absent_text,
    axis_label,
    hatch_cells,
    level_text,
    missing_handles,
    value_colour,
    value_label,
)
from .summary import clipped

FORMATS = (".png", ".svg", ".pdf")


def _draw_transitions(ax, results: Results, index: tuple, x: str, y: str) -> list:
    from matplotlib.lines import Line2D

    rows = transition_rows(results, index)
    handles = []
    for gap, marker, colour in (("0", "+", "tab:red"), ("pi", "x", "k")):
        pts = [(r[x], r[y]) for r in rows if r["gap"] == gap]
        if pts:
            px, py = zip(*pts)
            ax.plot(px, py, ls="", marker=marker, ms=4, mew=0.8, color=colour)
            handles.append(Line2D([], [], ls="", marker=marker, color=colour,
                                  label=f"predicted closing at {gap}"))
    return handles


def _edges(values: np.ndarray, log: bool) -> np.ndarray:
    v = np.log(values) if log else np.asarray(values, float)
    if len(v) == 1:
        e = np.array([v[0] - 0.5, v[0] + 0.5])
    else:
        mid = (v[1:] + v[:-1]) / 2
        e = np.concatenate([[2 * v[0] - mid[0]], mid, [2 * v[-1] - mid[-1]]])
    return np.exp(e) if log else e


def _title(results: Results, s: Slice, index: tuple) -> str:
    meta = results.variables[s.var]
    fixed = [f"{a.name}={a.values[i]:g}" for a, i in zip(results.axes, index) if isinstance(i, int)
             and len(a.values) > 1]
    lines = [clipped(results.attrs["title"])] if results.attrs.get("title") else []
    lines.append(f"{s.var}: {meta.long_name}" + (f" at {', '.join(fixed)}" if fixed else ""))
    if s.n_known < s.n_total:
        lines.append(f"unfinished run: {s.n_known} of {s.n_total} points computed")
    return "\n".join(textwrap.fill(line, 80) for line in lines)


def _draw_mesh(ax, results: Results, s: Slice, index: tuple, xa, ya,
               mark_disagree: bool = False) -> list:
    """Draw the slice ``s`` (two free axes, ``xa`` along x) on ``ax`` with its colour bar;
    return the legend entries."""
    import matplotlib
    from matplotlib.colors import BoundaryNorm, ListedColormap
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    fig = ax.figure
    meta = results.variables[s.var]
    gap_name = gap_variable_for(results, s.var)
    handles: list = []
    grid = s.values.T  # pcolormesh wants rows along y (the second free axis)
    xe, ye = _edges(xa.values, xa.spacing == "log"), _edges(ya.values, ya.spacing == "log")
    if s.levels is not None:
        levels = s.levels or [0.0]
        cmap = ListedColormap([value_colour(lv) for lv in levels]).with_extremes(
            bad=MISSING_COLOUR)
        coded = np.full(grid.shape, np.nan)
        for i, lv in enumerate(levels):
            coded[np.isclose(grid, lv)] = i
        norm = BoundaryNorm(np.arange(len(levels) + 1) - 0.5, len(levels))
        mesh = ax.pcolormesh(xe, ye, np.ma.masked_invalid(coded), cmap=cmap, norm=norm,
                             shading="flat")
        bar = fig.colorbar(mesh, ax=ax, ticks=range(len(levels)), pad=0.02, aspect=30)
        bar.ax.set_yticklabels([level_text(v) for v in levels])
        bar.ax.tick_params(length=0)
        absent = absent_levels(levels)
        if absent:  # one slot per value present: say which values between them are not
            handles.append(Patch(facecolor="none", edgecolor="none",
                                 label=absent_text(s.var, absent)))
    else:
        cmap = matplotlib.colormaps["viridis"].with_extremes(bad=MISSING_COLOUR)
        mesh = ax.pcolormesh(xe, ye, np.ma.masked_invalid(grid), cmap=cmap, shading="flat")
        bar = fig.colorbar(mesh, ax=ax, pad=0.02, aspect=30)
    bar.set_label(value_label(s.var, meta))
    if s.not_computed.any():
        hatch_cells(ax, xe, ye, s.not_computed)
    if s.not_requested is not None and s.not_requested.any():
        hatch_cells(ax, xe, ye, s.not_requested, hatch=NOT_REQUESTED_HATCH)
    if s.confirmed is not None and s.confirmed.any():
        gx, gy = np.meshgrid(xa.values, ya.values, indexing="ij")
        ax.plot(gx[s.confirmed], gy[s.confirmed], ls="", ms=5, zorder=3, **CONFIRMED_MARK)
    handles += missing_handles(results, s, index, one_d=False)
    if gap_name is not None:
        # Evaluated points only: filled-in values of a refined file are flat by construction.
        gap = np.where(results.done[index].astype(bool),
                       results.data[gap_name][index].astype(float), np.nan)
        closing = closing_nodes(gap)
        if closing.any():
            gx, gy = np.meshgrid(xa.values, ya.values, indexing="ij")
            ax.plot(gx[closing], gy[closing], "k.", ms=3)
            handles.append(Line2D([], [], color="k", marker=".", ls="", ms=4,
                                  label=f"{gap_name} closes within half a cell"))
    handles += _draw_transitions(ax, results, index, xa.name, ya.name)
    if mark_disagree:
        bad = disagreement(results)[index]
        if bad.any():
            gx, gy = np.meshgrid(xa.values, ya.values, indexing="ij")
            ax.plot(gx[bad], gy[bad], ls="", marker="o", mfc="none", mec="crimson", ms=7)
            handles.append(Line2D([], [], ls="", marker="o", mfc="none", mec="crimson",
                                  label="bulk and boundary disagree"))
    ax.set_xlim(xe[0], xe[-1])
    ax.set_ylim(ye[0], ye[-1])
    if xa.spacing == "log":
        ax.set_xscale("log")
    if ya.spacing == "log":
        ax.set_yscale("log")
    ax.set_xlabel(axis_label(xa))
    ax.set_ylabel(axis_label(ya))
    return handles


def map_figure(results: Results, var: str | None = None, at: dict[str, float] | None = None,
               mark_disagree: bool = False):
    """The matplotlib figure of ``var`` (default :func:`.map_data.default_variable`).

    Two free axes give a phase map with a colour bar (discrete, a tick per value, for integer
    and half-integer variables) and a legend below the axes for the marks: missing points by
    reason, points not computed yet, gap closings, predicted closings, bulk-boundary
    disagreements. One free axis gives a line plot with the gap on a second y axis
    (:func:`.map_line.draw_cut`).
    """
    var = check_variable(results, var)
    free, index = select(results, at or {})
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    s = map_slice(results, var, index)
    fig, ax = plt.subplots(figsize=(7, 5.6), layout="constrained")
    if len(free) == 1:
        handles = draw_cut(ax, results, s, index, results.axes[free[0]], mark_disagree)
    else:
        handles = _draw_mesh(ax, results, s, index, results.axes[free[0]],
                             results.axes[free[1]], mark_disagree)
    if handles:
        fig.legend(handles=handles, loc="outside lower center", ncols=2, fontsize=8,
                   frameon=False)
    ax.set_title(_title(results, s, index), fontsize=10)
    return fig


def draw_map(results: Results, out: str | Path, var: str | None = None,
             at: dict[str, float] | None = None, mark_disagree: bool = False) -> Path:
    """Draw :func:`map_figure` to ``out``; the format follows the suffix (png, svg, pdf)."""
    out = Path(out)
    if out.suffix.lower() not in FORMATS:
        raise SweepError(f"{out}: the picture format follows the suffix, which must be one of "
                         f"{', '.join(FORMATS)}; got {out.suffix or 'none'!r}.")
    fig = map_figure(results, var, at, mark_disagree)
    import matplotlib.pyplot as plt

    out.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(out, dpi=110)
    plt.close(fig)
    return out
