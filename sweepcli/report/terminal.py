"""``sweepcli map --terminal``: phase maps drawn with characters, readable over SSH without X.

A 2D map has one character cell per grid point (resampled to the nearest grid point when the
grid is wider than the terminal); the first free axis runs left to right, the second bottom to
top, as on a plotted map. Every value gets its own character, so the picture reads without
colour; ANSI colours are added only on request (the CLI asks only when stdout is a terminal).
A 1D sweep prints a strip of the same characters with a table of the runs of equal value
(integers) or a sparkline with its range (floats). In a ``[confirm]`` file, cells whose boundary
measurements were not requested get ``-`` (missing ones ``·``), and a second picture on the same
axes marks with ``+`` the cells where they were computed.
"""

from __future__ import annotations

import os
import shutil
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import IO

import numpy as np

from ..schema import Reason, split_scale
from ..store import FILL_INT, Results
from ..store.refined import display_values
from .map_data import (
    check_variable,
    confirmed,
    discrete_levels,
    missing_reasons,
    not_requested,
    select,
)
from .map_style import level_text
from .summary import clipped

MISSING_GLYPH = "·"
NOT_COMPUTED_GLYPH = "?"
NOT_REQUESTED_GLYPH = "-"  # a [confirm] job did not select the cell
CONFIRMED_GLYPH = "+"  # a [confirm] job computed its boundary measurements here
ZERO_GLYPH = "░"  # the trivial phase is drawn lightest
LEVEL_GLYPHS = ("█", "▒", "#", "%", "@", "&", "$", "X", "O", "W", "M", "=", "+", "o", "x", "*")
RAMP_GLYPHS = ("▁", "▂", "▃", "▄", "▅", "▆", "▇", "█")  # floats: low to high
MISSING_COLOUR = "90"  # ANSI dark grey
NOT_COMPUTED_COLOUR = "2"  # faint
# Tied to values as in the plotted maps: positive red, negative blue, deeper with |value|
# (xterm-256 colours for |value| = 1/2 or 1, 2, 3, >= 4); reason codes take their own set.
POSITIVE_COLOURS = ("38;5;210", "38;5;203", "38;5;160", "38;5;88")
NEGATIVE_COLOURS = ("38;5;117", "38;5;75", "38;5;26", "38;5;18")
LEVEL_COLOURS = ("34", "31", "32", "33", "35", "36", "94", "91", "92", "93", "95", "96")
ZERO_COLOUR = "37"
RAMP_COLOURS = ("38;5;54", "38;5;61", "38;5;67", "38;5;73", "38;5;72", "38;5;107",
                "38;5;149", "38;5;226")  # dark violet to yellow, like viridis
MAX_ROWS = 48
RESET = "\x1b[0m"


def want_colour(stream: IO | None = None) -> bool:
    """Colours only for a terminal, and never when ``NO_COLOR`` is set (no-color.org)."""
    import sys

    stream = stream if stream is not None else sys.stdout
    if "NO_COLOR" in os.environ:
        return False
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


def terminal_width(default: int = 80) -> int:
    return shutil.get_terminal_size((default, 24)).columns


def fmt(value: float) -> str:
    """A coordinate or value as a short label."""
    return f"{value:.4g}"


# ---------------------------------------------------------------- character grids
def sample(n: int, m: int) -> tuple[np.ndarray, list[np.ndarray]]:
    """``min(n, m)`` evenly spaced representatives of ``range(n)`` (first and last included)
    and the contiguous bins around them (split halfway between representatives)."""
    k = max(1, min(n, m))
    reps = np.unique(np.round(np.linspace(0, n - 1, k)).astype(int)) if n else np.arange(0)
    edges = (reps[:-1] + reps[1:] + 1) // 2
    return reps, np.split(np.arange(n), edges)


@dataclass
class Axis:
    """A labelled axis of a character grid: ``values`` of the grid points, ``label`` for it."""

    label: str
    values: np.ndarray


def resample(codes: np.ndarray, ncols: int, nrows: int,
             reduce: str) -> tuple[np.ndarray, list, list]:
    """Reduce ``codes`` (nx, ny) to at most (ncols, nrows) cells.

    ``reduce="nearest"`` keeps evenly spaced grid points (a phase map stays a sample of the
    data); ``"max"`` keeps the largest code of the points nearest to each cell (a difference
    map never hides a difference). Returns the cells and the representative index of each
    column and row.
    """
    rep_x, bx = sample(codes.shape[0], ncols)
    rep_y, by = sample(codes.shape[1], nrows)
    if reduce == "nearest":
        return codes[np.ix_(rep_x, rep_y)], rep_x.tolist(), rep_y.tolist()
    out = np.empty((len(bx), len(by)), dtype=codes.dtype)
    for i, b in enumerate(bx):
        col = codes[b].max(axis=0)
        for j, c in enumerate(by):
            out[i, j] = col[c].max()
    return out, rep_x.tolist(), rep_y.tolist()


def _tick_step(n: int, label_width: int) -> int:
    """A tick spacing (in cells) wide enough for the labels, dividing ``n - 1`` if possible."""
    if n <= 1:
        return 1
    for step in range(label_width, min(3 * label_width, n - 1) + 1):
        if (n - 1) % step == 0:
            return step
    return max(label_width, 1)


def render_grid(codes: np.ndarray, glyphs: Sequence[str], x: Axis, y: Axis | None,
                width: int, height: int | None = None, reduce: str = "nearest",
                colours: Sequence[str] | None = None,
                row_label: str = "") -> tuple[list[str], str]:
    """Lines of a character picture of ``codes`` (shape (nx, ny); ``glyphs[code]``).

    Rows run from the largest ``y`` (top) to the smallest; ticks on the left carry ``y``
    values, ticks below the grid ``x`` values. ``colours[code]`` (ANSI SGR parameters) colour
    the cells when given. ``y=None`` draws one row labelled ``row_label`` (a 1D strip).
    Returns the lines and a note on resampling ("" if none).
    """
    nx, ny = codes.shape
    ylabels = [fmt(v) for v in y.values] if y is not None else [row_label]
    margin = max([len(s) for s in ylabels] + [len(y.label) if y is not None else 0, 1])
    ncols = max(8, width - margin - 2)
    nrows = height if height is not None else MAX_ROWS
    cells, rep_x, rep_y = resample(codes, ncols, nrows, reduce)
    note = []
    if len(rep_x) < nx:
        note.append(f"{x.label}: {nx} points in {len(rep_x)} columns")
    if len(rep_y) < ny:
        note.append(f"{y.label}: {ny} points in {len(rep_y)} rows")
    how = "nearest point" if reduce == "nearest" else "any point in a cell"
    note_text = f"resampled ({'; '.join(note)}; {how})" if note else ""

    def paint(codes_row: np.ndarray) -> str:
        if not colours:
            return "".join(glyphs[int(c)] for c in codes_row)
        out, start = [], 0  # one escape sequence per run of equal cells
        for i in range(1, len(codes_row) + 1):
            if i == len(codes_row) or codes_row[i] != codes_row[start]:
                c = int(codes_row[start])
                out.append(f"\x1b[{colours[c]}m{glyphs[c] * (i - start)}{RESET}")
                start = i
        return "".join(out)

    lines = []
    if y is not None:
        lines.append(f"{y.label:>{margin}}")
    nr = cells.shape[1]
    ystep = 1 if nr <= 8 else _tick_step(nr, 3)
    for r in range(nr - 1, -1, -1):
        row = paint(cells[:, r])
        labelled = (nr - 1 - r) % ystep == 0 or r == 0
        label = ylabels[rep_y[r]]
        if labelled:
            lines.append(f"{label:>{margin}} ┤{row}")
        else:
            lines.append(f"{'':>{margin}} │{row}")
    xl = [fmt(x.values[i]) for i in rep_x]
    step = _tick_step(len(rep_x), max(len(s) for s in xl) + 1)
    ticks = list(range(0, len(rep_x), step))
    axis_line = ["─"] * len(rep_x)
    label_line = [" "] * (len(rep_x) + max(len(s) for s in xl) + 1)
    for c in ticks:
        axis_line[c] = "┬"
        for k, ch in enumerate(xl[c]):
            label_line[c + k] = ch
    lines.append(f"{'':>{margin}} └" + "".join(axis_line))
    lines.append(f"{'':>{margin}}  " + "".join(label_line).rstrip())
    lines.append(f"{'':>{margin}}  {x.label}")
    return lines, note_text


# ---------------------------------------------------------------- phase maps
@dataclass
class Level:
    """One legend entry: ``glyph`` stands for ``label``; ``count`` grid points drawn."""

    glyph: str
    label: str
    count: int
    colour: str = ""


@dataclass
class Coded:
    """A variable turned into codes for drawing: ``codes[i]`` indexes ``levels``."""

    codes: np.ndarray
    levels: list[Level] = field(default_factory=list)
    ramp: bool = False


def _axis_label(axis) -> str:
    units = split_scale(axis.units, axis.long_name)[1]
    return axis.name + (f" [{units}]" if units else "")


def value_colour(value: float) -> str:
    """ANSI colour of an integer or half-integer value (see :data:`POSITIVE_COLOURS`)."""
    if value == 0:
        return ZERO_COLOUR
    shades = POSITIVE_COLOURS if value > 0 else NEGATIVE_COLOURS
    return shades[min(max(int(np.ceil(abs(value))), 1), len(shades)) - 1]


def code_variable(results: Results, var: str, index: tuple) -> Coded:
    """Codes and legend of ``results.data[var][index]`` (any shape).

    Integers, half-integer floats (spin Chern numbers) and reason codes get one character per
    value, zero the lightest; other floats eight equal-width bins between their smallest and
    largest value. Points not computed yet get :data:`NOT_COMPUTED_GLYPH`, evaluated points
    where the value is missing (the integer fill value, NaN) :data:`MISSING_GLYPH`.
    """
    meta = results.variables[var]
    data, known = display_values(results, var)
    data, known = data[index], known[index].astype(bool)
    if meta.dtype == "int32":
        bad = data == FILL_INT
    elif meta.dtype == "uint8":
        bad = np.zeros(data.shape, dtype=bool)
    else:
        bad = np.isnan(data)
    missing = ~known | bad
    levels: list[Level] = []
    codes = np.zeros(data.shape, dtype=np.int64)
    ramp = False
    discrete = discrete_levels(meta.dtype, np.where(missing, np.nan, data.astype(float)),
                               meta.units, meta.long_name)
    if discrete is not None:
        # zero first (lightest), then by size with the positive value of a pair first
        order = sorted(discrete, key=lambda v: (v != 0, abs(v), v < 0))
        others = iter(LEVEL_GLYPHS)
        for k, v in enumerate(order):
            is_zero = v == 0  # a zero invariant, or the reason code ok
            glyph = ZERO_GLYPH if is_zero else next(others, None) or chr(ord("a") + k % 26)
            if meta.dtype == "uint8":
                colour = ZERO_COLOUR if is_zero else LEVEL_COLOURS[k % len(LEVEL_COLOURS)]
                shown = Reason(int(v)).name.lower()
            else:
                colour, shown = value_colour(v), level_text(v)
            sel = ~missing & np.isclose(data.astype(float), v)
            codes[sel] = k
            levels.append(Level(glyph, f"{var} = {shown}", int(sel.sum()), colour))
    else:
        ramp = True
        finite = data[~missing]
        if finite.size:
            lo, hi = float(finite.min()), float(finite.max())
            nlev = len(RAMP_GLYPHS) if hi > lo else 1
            edges = np.linspace(lo, hi, nlev + 1)
            idx = np.clip(np.searchsorted(edges, data, side="right") - 1, 0, nlev - 1)
            unit = f" {units}" if (units := split_scale(meta.units, meta.long_name)[1]) else ""
            for k in range(nlev):
                g = RAMP_GLYPHS[k] if nlev > 1 else RAMP_GLYPHS[-1]
                sel = ~missing & (idx == k)
                codes[sel] = k
                label = (f"{fmt(edges[k])} <= {var} {'<=' if k == nlev - 1 else '<'} "
                         f"{fmt(edges[k + 1])}{unit}" if nlev > 1 else f"{var} = {fmt(lo)}{unit}")
                levels.append(Level(g, label, int(sel.sum()),
                                    RAMP_COLOURS[k] if nlev > 1 else RAMP_COLOURS[-1]))
    skipped = known & bad & not_requested(results, var)[index]
    ill = known & bad & ~skipped
    if ill.any():
        counts = missing_reasons(results, var, index, ill)
        if len(counts) > 1:
            label = "missing (" + ", ".join(f"{k}: {v}" for k, v in sorted(counts.items())) + ")"
        else:
            label = "missing" + ("" if "missing" in counts else f" ({next(iter(counts))})")
        codes[ill] = len(levels)
        levels.append(Level(MISSING_GLYPH, label, int(ill.sum()), MISSING_COLOUR))
    if skipped.any():
        codes[skipped] = len(levels)
        levels.append(Level(NOT_REQUESTED_GLYPH, "not requested ([confirm] did not select it)",
                            int(skipped.sum()), NOT_COMPUTED_COLOUR))
    if (~known).any():
        codes[~known] = len(levels)
        levels.append(Level(NOT_COMPUTED_GLYPH, "not computed yet", int((~known).sum()),
                            NOT_COMPUTED_COLOUR))
    return Coded(codes, levels, ramp)


def confirmed_grid(results: Results, index: tuple) -> Coded | None:
    """Codes of where a ``[confirm]`` job computed its boundary measurements (``+``), did not
    request them (``-``) or has not reached the cell yet (``?``); ``None`` for other files."""
    mask = confirmed(results)
    if mask is None:
        return None
    mask = mask[index]
    known = results.done[index].astype(bool)
    codes = np.where(mask, 0, np.where(known, 1, 2))
    levels = [Level(CONFIRMED_GLYPH, "boundary measured here (confirmed)", int(mask.sum()),
                    "1"),
              Level(NOT_REQUESTED_GLYPH, "not requested", int((codes == 1).sum()),
                    NOT_COMPUTED_COLOUR),
              Level(NOT_COMPUTED_GLYPH, "not computed yet", int((codes == 2).sum()),
                    NOT_COMPUTED_COLOUR)]
    return Coded(codes, levels)


def _runs(coded: Coded, values: np.ndarray) -> list[str]:
    """``name = a .. b (n points): label`` for each run of equal code along a 1D sweep."""
    out = []
    start = 0
    codes = coded.codes
    for i in range(1, len(codes) + 1):
        if i == len(codes) or codes[i] != codes[start]:
            span = (fmt(values[start]) if i - 1 == start
                    else f"{fmt(values[start])} .. {fmt(values[i - 1])}")
            n = i - start
            out.append((span, f"({n} point{'s' if n != 1 else ''})",
                        coded.levels[int(codes[start])].label))
            start = i
    w0 = max(len(s) for s, _, _ in out)
    w1 = max(len(s) for _, s, _ in out)
    return [f"{s:<{w0}} {n:<{w1}} {lab}" for s, n, lab in out]


def terminal_map(results: Results, var: str | None = None, at: dict[str, float] | None = None,
                 width: int | None = None, *, colour: bool = False,
                 height: int | None = None) -> str:
    """A character picture of one variable of ``results``.

    Parameters
    ----------
    results : the results to draw.
    var : variable name; default the first integer invariant (as ``sweepcli map``).
    at : fixed values of swept parameters not drawn, ``{name: value}`` (nearest grid value);
        other undrawn axes are fixed at their first value.
    width : total width in characters; default the terminal's (``COLUMNS``).
    colour : add ANSI colours (the characters alone already distinguish every value).
    height : most rows of the 2D picture (default 48); more grid rows are resampled.

    Returns
    -------
    str
        Title, the picture with axis ticks (first free axis horizontal, second vertical
        increasing upwards) and a legend ``glyph label (count points)``; for a 1D sweep a strip
        plus a table of runs (integers) or a sparkline with its range (floats).

    Raises
    ------
    ResultsError
        Unknown variable or ``at`` name.
    """
    var = check_variable(results, var)
    free, index = select(results, at or {})
    width = width if width is not None else terminal_width()
    meta = results.variables[var]
    coded = code_variable(results, var, index)
    palette = [lv.glyph for lv in coded.levels]
    colours = [lv.colour for lv in coded.levels] if colour else None
    fixed = [f"{a.name}={fmt(a.values[i])}" for a, i in zip(results.axes, index)
             if isinstance(i, int) and len(a.values) > 1]
    lines = []
    if results.attrs.get("title"):
        lines.append(clipped(results.attrs["title"]))
    lines.append(f"{var}: {meta.long_name}" + (f" at {', '.join(fixed)}" if fixed else ""))
    known = int(display_values(results, var)[1].sum())
    if known < results.size:
        lines.append(f"unfinished run: {known} of {results.size} points computed")
    lines.append("")
    codes = coded.codes
    if codes.ndim == 0:
        lines.append(f"{coded.levels[int(codes)].label}")
        return "\n".join(lines)
    if len(free) == 1:
        axis = results.axes[free[0]]
        grid, note = render_grid(codes.reshape(-1, 1), palette,
                                 Axis(_axis_label(axis), axis.values), None, width, height=1,
                                 colours=colours, row_label=var)
        lines += grid
    else:
        xa, ya = results.axes[free[0]], results.axes[free[1]]
        grid, note = render_grid(codes, palette, Axis(_axis_label(xa), xa.values),
                                 Axis(_axis_label(ya), ya.values), width, height=height,
                                 colours=colours)
        lines += grid
    if note:
        lines.append(note)
    lines.append("")
    lines.append("legend:")
    for lv in coded.levels:
        g = f"\x1b[{lv.colour}m{lv.glyph}{RESET}" if colour else lv.glyph
        lines.append(f"  {g}  {lv.label} ({lv.count} point{'s' if lv.count != 1 else ''})")
    marks = confirmed_grid(results, index) if codes.ndim else None
    if marks is not None:
        # [confirm]: a second picture on the same axes marks the confirmed cells.
        lines += ["", "boundary measurements ([confirm]):"]
        xa = results.axes[free[0]]
        ya = results.axes[free[1]] if len(free) > 1 else None
        grid, _ = render_grid(marks.codes.reshape(-1, 1) if ya is None else marks.codes,
                              [lv.glyph for lv in marks.levels],
                              Axis(_axis_label(xa), xa.values),
                              None if ya is None else Axis(_axis_label(ya), ya.values), width,
                              height=1 if ya is None else height,
                              colours=[lv.colour for lv in marks.levels] if colour else None,
                              row_label="confirmed")
        lines += grid
        for lv in marks.levels:
            if lv.count:
                lines.append(f"  {lv.glyph}  {lv.label} ({lv.count} point"
                             f"{'s' if lv.count != 1 else ''})")
    if len(free) == 1:
        axis = results.axes[free[0]]
        lines.append("")
        if not coded.ramp:
            lines.append(f"runs along {axis.name}:")
            lines += ["  " + s for s in _runs(coded, axis.values)]
        else:
            data = results.data[var][index]
            ok = np.isfinite(data) & results.done[index].astype(bool)
            if ok.any():
                lo, hi = int(np.nanargmin(np.where(ok, data, np.nan))), int(
                    np.nanargmax(np.where(ok, data, np.nan)))
                unit = f" {units}" if (units := split_scale(meta.units, meta.long_name)[1]) else ""
                lines.append(f"min {var} = {fmt(data[lo])}{unit} at {axis.name}="
                             f"{fmt(axis.values[lo])}; max {fmt(data[hi])}{unit} at "
                             f"{axis.name}={fmt(axis.values[hi])}")
    return "\n".join(lines)
