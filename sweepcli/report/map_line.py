"""A 1D cut through the results drawn with matplotlib: the variable along one free axis, its
levels in the fixed value colours, missing points on the bottom edge, the gap on a second y
axis and predicted closings as vertical lines. matplotlib is imported inside functions only.
"""

from __future__ import annotations

import numpy as np

from ..schema import split_scale
from ..store import Results
from .map_data import Slice, disagreement, gap_variable_for, transition_rows
from .map_style import (
    CONFIRMED_MARK,
    HATCH_COLOUR,
    axis_label,
    level_text,
    missing_handles,
    value_colour,
    value_label,
)


def draw_cut(ax, results: Results, s: Slice, index: tuple, axis,
             mark_disagree: bool = False) -> list:
    """Draw the slice ``s`` (one free axis, ``axis``) on ``ax``; return the legend entries."""
    from matplotlib.lines import Line2D

    var, values = s.var, s.values
    meta = results.variables[var]
    gap_name = gap_variable_for(results, var)
    handles: list = []
    x = np.asarray(axis.values, float)
    if s.levels is not None:
        ax.plot(x, values, "-", color="0.7", lw=1, drawstyle="steps-mid", zorder=1)
        for lv in s.levels:
            sel = np.isclose(values, lv)
            ax.plot(x[sel], values[sel], ls="", marker="o", ms=5, mfc=value_colour(lv),
                    mec="0.25", mew=0.5, zorder=2)
        if s.levels:
            ax.set_yticks(s.levels, [level_text(v) for v in s.levels])
            # Room below the lowest level, so that the marks of missing points at the bottom
            # are never read as a value.
            ax.set_ylim(min(s.levels) - 0.8, max(s.levels) + 0.5)
    else:
        ax.plot(x, values, "o-", ms=3, color="tab:blue")
    # Missing points on the bottom edge of the axes, apart from every value level.
    for mask, style in ((s.ill, dict(marker="x", color="crimson")),
                        (s.not_computed, dict(marker="s", mfc="none", mec=HATCH_COLOUR)),
                        (s.not_requested, dict(marker="|", color=HATCH_COLOUR))):
        if mask is not None and mask.any():
            ax.plot(x[mask], np.full(int(mask.sum()), 0.04), ls="", ms=5, clip_on=False,
                    transform=ax.get_xaxis_transform(), **style)
    if s.confirmed is not None and s.confirmed.any():  # [confirm]: boundary measured here
        ax.plot(x[s.confirmed], np.full(int(s.confirmed.sum()), 0.97), ls="", ms=5,
                clip_on=False, transform=ax.get_xaxis_transform(),
                **dict(CONFIRMED_MARK, marker="v", mfc="k"))
    handles += missing_handles(results, s, index, one_d=True)
    if axis.spacing == "log":
        ax.set_xscale("log")
    ax.set_xlabel(axis_label(axis))
    ax.set_ylabel(value_label(var, meta))
    if gap_name is not None:
        twin = ax.twinx()
        gap = np.where(~s.not_computed, results.data[gap_name][index].astype(float), np.nan)
        twin.plot(x, gap, "-", color="0.45", lw=1)
        twin.set_ylabel(value_label(gap_name, results.variables[gap_name]), color="0.45")
        twin.set_ylim(bottom=0)
        gap_meta = split_scale(results.variables[gap_name].units,
                               results.variables[gap_name].long_name)
        handles.append(Line2D([], [], color="0.45", lw=1,
                              label=f"{gap_name} ({gap_meta[0]}; right axis)"))
    if mark_disagree:
        bad = disagreement(results)[index]
        if bad.any():
            ax.plot(x[bad], np.nan_to_num(values[bad]), ls="", marker="o", mfc="none",
                    mec="crimson", ms=9)
            handles.append(Line2D([], [], ls="", marker="o", mfc="none", mec="crimson",
                                  label="bulk and boundary disagree"))
    drawn = set()
    for row in transition_rows(results, index):
        style = (dict(color="k", ls=":") if row["gap"] == "pi"
                 else dict(color="tab:red", ls="--"))
        ax.axvline(row[axis.name], lw=0.8, **style)
        if row["gap"] not in drawn:  # one legend entry per gap
            drawn.add(row["gap"])
            handles.append(Line2D([], [], lw=0.8, label=f"predicted closing at {row['gap']}",
                                  **style))
    return handles
