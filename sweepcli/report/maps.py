"""``sweepcli map``: phase maps drawn with matplotlib from a results file.

Integer invariants (and half-integer ones such as the spin Chern number) get discrete colours
tied to their values, the same in every map of every file: 0 neutral, positive values red and
negative values blue, deeper with magnitude (:func:`value_colour`), with a colour bar that has
one tick per value. Gaps get a continuous scale. Points where a quantity is ill-defined are grey;
points not computed yet (an unfinished run) are hatched white, and the title counts them. Grid
nodes next to a bulk-gap closing and predicted closings are marked over every 2D map so that
phase changes can be compared with gap closings. A 1D sweep draws a line plot with the same
colours.
"""

from __future__ import annotations

import textwrap
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import ResultsError, SweepError, suggest
from ..schema import Reason
from ..store import FILL_INT, Results
from ..store.refined import display_values

FORMATS = (".png", ".svg", ".pdf")
MISSING_COLOUR = "#9a9a9a"  # ill-defined: gap closed, not converged, failed
NOT_COMPUTED_FACE = "#ffffff"  # not evaluated (yet): white, hatched
NOT_COMPUTED_HATCH = "////"
HATCH_COLOUR = "#8c8c8c"
ZERO_COLOUR = "#e9e4d4"  # the trivial phase: a neutral that is neither grey nor white
GAP_VARIABLES = ("gap", "gap_0", "gap_pi")
#: |value| -> distance from the centre of the diverging red-blue scale (0.5 = its darkest end).
#: Fixed, so that a value has one colour in every map; |value| >= 4 share the darkest shade.
_STRENGTH = ((0.5, 1.0, 2.0, 3.0, 4.0), (0.17, 0.25, 0.36, 0.44, 0.5))
#: Largest number of distinct half-integer values for which a float variable is drawn discretely.
MAX_DISCRETE = 24


def value_colour(value: float) -> tuple[float, float, float, float]:
    """The RGBA colour of an integer or half-integer ``value`` in every map.

    0 is :data:`ZERO_COLOUR`; positive values take reds and negative values blues of the
    ColorBrewer red-blue scale (matplotlib's ``RdBu_r``), deeper with ``|value|``.
    """
    import matplotlib
    from matplotlib.colors import to_rgba

    if value == 0:
        return to_rgba(ZERO_COLOUR)
    offset = float(np.interp(abs(value), *_STRENGTH))
    return tuple(float(c) for c in matplotlib.colormaps["RdBu_r"](0.5 + np.copysign(offset, value)))


def discrete_levels(dtype: str, values: np.ndarray, units: str = "1") -> list[float] | None:
    """Sorted distinct values when ``values`` are to be drawn discretely, else ``None``.

    Integer variables always; a dimensionless float variable (``units`` "1" or "", so never a
    gap that happens to be 0 or 2) whose finite values are all integers or half-integers
    (within 1e-6), with at most :data:`MAX_DISCRETE` distinct values: a spin Chern number.
    """
    finite = np.asarray(values, float)
    finite = finite[np.isfinite(finite)]
    if dtype in ("int32", "uint8"):
        return sorted(float(v) for v in np.unique(finite))
    if not finite.size or units not in ("", "1"):
        return None
    twice = np.round(2 * finite)
    if np.max(np.abs(2 * finite - twice)) > 2e-6 or len(np.unique(twice)) > MAX_DISCRETE:
        return None
    return sorted(float(v) / 2 for v in np.unique(twice))


def level_text(value: float) -> str:
    """A level as printed on ticks and legends: ``1``, ``-1/2``, ``3/2``."""
    if value == int(value):
        return str(int(value))
    return f"{int(round(2 * value))}/2"


def gap_variable_for(results: Results, var: str) -> str | None:
    """The gap whose closings bound the phases of ``var``: gap_pi for pi-gap quantities."""
    pi_gap = any(token.endswith("pi") for token in var.split("_"))  # gap_pi, nu_pi, line_wpi_s1
    order = ("gap_pi", "gap", "gap_0") if pi_gap else GAP_VARIABLES
    return next((g for g in order if g in results.variables and g != var), None)


def default_variable(results: Results) -> str:
    """The variable ``map`` draws by default: the job's main invariant.

    The one the job names (``[output] main``, stored as the root attribute ``main_variable``);
    else the first integer invariant that takes more than one value on the computed points
    (diagnostics such as ``*_kmesh``, ``*_method`` and the ``agree_*`` flags are skipped), else
    the first integer invariant, else the first variable.
    """
    main = results.attrs.get("main_variable", "")
    if main in results.variables:
        return main
    plain = [v for v in results.variables.values() if not v.is_reason]
    if not plain:
        raise ResultsError("the results file holds no variables to draw.")
    ints = [v.name for v in plain if v.dtype == "int32" and not v.name.startswith("agree_")
            and not v.name.endswith(("_kmesh", "_method"))]
    done = results.done.astype(bool)
    for name in ints:
        vals = results.data[name][done]
        if len(np.unique(vals[vals != FILL_INT])) > 1:
            return name
    return ints[0] if ints else plain[0].name


def check_variable(results: Results, var: str | None) -> str:
    if var is None:
        return default_variable(results)
    if var not in results.variables:
        names = list(results.variables)
        raise ResultsError(f"no variable {var!r} in the results file (available: "
                           f"{', '.join(names)}).{suggest(var, names)}")
    return var


def axis_index(axis, value: float) -> int:
    """Index of the grid value of ``axis`` nearest to ``value``.

    Raises
    ------
    ResultsError
        ``value`` lies off the axis: beyond its first or last value by more than half a step.
    """
    v = np.asarray(axis.values, float)
    i = int(np.argmin(np.abs(v - value)))
    tol = 1e-9 * (1 + abs(value))
    if len(v) > 1:
        steps = np.abs(np.diff(np.sort(v)))
        lo, hi = v.min() - steps[0] / 2, v.max() + steps[-1] / 2
    else:
        lo = hi = v[0]
    if not lo - tol <= value <= hi + tol:
        raise ResultsError(f"--at {axis.name}={value:g} is off the swept axis of {axis.name} "
                           f"({len(v)} value{'s' if len(v) != 1 else ''} from {v.min():g} to "
                           f"{v.max():g}); give a value on it.")
    return i


def at_notes(results: Results, at: dict[str, float]) -> list[str]:
    """One line per ``--at`` value that is not a grid value, naming the grid value used."""
    notes = []
    for a in results.axes:
        if a.name in at:
            used = float(a.values[axis_index(a, at[a.name])])
            if not np.isclose(used, at[a.name], rtol=1e-9, atol=1e-12):
                notes.append(f"--at {a.name}={at[a.name]:g} is not a grid value; drawn at the "
                             f"nearest, {a.name}={used:g}.")
    return notes


def select(results: Results, at: dict[str, float]) -> tuple[list[int], tuple]:
    """Indices of the axes to draw (at most two, longer than 1 and not fixed by ``at``) and the
    index tuple that selects them, other axes fixed at the grid value nearest to ``at[name]``
    (refused when off the axis, see :func:`axis_index`) or at their first value."""
    names = [a.name for a in results.axes]
    for name in at:
        if name not in names:
            raise ResultsError(f"--at names {name!r}, which is not a swept parameter (swept: "
                               f"{', '.join(names)}).{suggest(name, names)}")
    free = [i for i, a in enumerate(results.axes) if a.name not in at and len(a.values) > 1][:2]
    if not free:
        free = [0]
    index = []
    for i, a in enumerate(results.axes):
        if i in free:
            index.append(slice(None))
        else:
            index.append(axis_index(a, at[a.name]) if a.name in at else 0)
    return free, tuple(index)


def _transition_rows(results: Results, index: tuple) -> list[dict]:
    """Predicted transitions that lie on the drawn slice (other axes at their selected values)."""
    table = results.tables.get("transitions")
    if not table or not len(table["gap"]):
        return []
    keep = np.ones(len(table["gap"]), bool)
    for a, i in zip(results.axes, index):
        if isinstance(i, int) and len(a.values) > 1:
            keep &= np.isclose(table[a.name], a.values[i], rtol=0,
                               atol=1e-12 * (1 + abs(a.values[i])))
    cols = list(table)
    rows = [{c: table[c][j] for c in cols} for j in np.flatnonzero(keep)]
    names = [a.name for a in results.axes]
    seen, out = set(), []
    for r in rows:  # a crossing found along two axes (or at a grid value) is drawn once
        key = (r["gap"], *(round(float(r[n]), 12) for n in names))
        if key not in seen:
            seen.add(key)
            out.append(r)
    return out


def _draw_transitions(ax, results: Results, index: tuple, x: str, y: str) -> list:
    from matplotlib.lines import Line2D

    rows = _transition_rows(results, index)
    handles = []
    for gap, marker, colour in (("0", "+", "tab:red"), ("pi", "x", "k")):
        pts = [(r[x], r[y]) for r in rows if r["gap"] == gap]
        if pts:
            px, py = zip(*pts)
            ax.plot(px, py, ls="", marker=marker, ms=4, mew=0.8, color=colour)
            handles.append(Line2D([], [], ls="", marker=marker, color=colour,
                                  label=f"predicted closing at {gap}"))
    return handles


def closing_nodes(gap: np.ndarray) -> np.ndarray:
    """Grid nodes nearest to a gap closing.

    Near a closing the gap is V-shaped, ``|s| * distance``; a node whose gap is at most half
    the largest change to a neighbour lies within about half a cell of the zero.
    """
    finite = np.isfinite(gap)
    gap = np.where(finite, gap, 0.0)
    change = np.zeros_like(gap)
    for axis in range(gap.ndim):
        both = np.logical_and(np.take(finite, range(1, gap.shape[axis]), axis),
                              np.take(finite, range(0, gap.shape[axis] - 1), axis))
        d = np.where(both, np.abs(np.diff(gap, axis=axis)), 0.0)
        pad = [(0, 0)] * gap.ndim
        pad[axis] = (1, 0)
        change = np.maximum(change, np.pad(d, pad))
        pad[axis] = (0, 1)
        change = np.maximum(change, np.pad(d, pad))
    return finite & (change > 0) & (gap <= 0.5 * change)


def _edges(values: np.ndarray, log: bool) -> np.ndarray:
    v = np.log(values) if log else np.asarray(values, float)
    if len(v) == 1:
        e = np.array([v[0] - 0.5, v[0] + 0.5])
    else:
        mid = (v[1:] + v[:-1]) / 2
        e = np.concatenate([[2 * v[0] - mid[0]], mid, [2 * v[-1] - mid[-1]]])
    return np.exp(e) if log else e


def _label(axis) -> str:
    unit = f" [{axis.units}]" if axis.units and axis.units != "1" else ""
    name = axis.name if axis.long_name in ("", axis.name) else f"{axis.name} ({axis.long_name})"
    return name + unit


def disagreement(results: Results) -> np.ndarray:
    """Grid mask of points where any bulk-boundary flag (``agree_*``) is 0."""
    mask = np.zeros(results.shape, bool)
    for name, v in results.variables.items():
        if name.startswith("agree_") and v.dtype == "int32":
            mask |= results.done.astype(bool) & (results.data[name] == 0)
    return mask


def missing_reasons(results: Results, var: str, index: tuple, mask: np.ndarray) -> Counter:
    """Reason names (``"gap_closed"``, ...) of the points of ``mask`` (on the drawn slice) where
    ``var`` is missing although evaluated, counted; ``{"missing": n}`` without a reason variable."""
    meta = results.variables[var]
    rname = f"{meta.measurement}_reason"
    if rname not in results.variables or rname == var:
        return Counter({"missing": int(mask.sum())})
    reasons = display_values(results, rname)[0][index][mask]
    return Counter(Reason(int(r)).name.lower() for r in reasons.ravel())


def missing_text(counts: Counter) -> str:
    """``missing: gap closed (12)`` or ``missing: gap closed 10, not converged 2``."""
    words = {k.replace("_", " "): v for k, v in sorted(counts.items())}
    if len(words) == 1:
        (name, n), = words.items()
        return f"missing: {name} ({n})" if name != "missing" else f"missing ({n})"
    return "missing: " + ", ".join(f"{k} {v}" for k, v in words.items())


@dataclass
class Slice:
    """What a map draws: ``values`` of ``var`` on the drawn axes (NaN where missing),
    ``not_computed`` (not evaluated yet) and ``ill`` (evaluated but missing) masks, ``levels``
    (the discrete values, ``None`` for a continuous scale) and the counts for the title."""

    var: str
    values: np.ndarray
    not_computed: np.ndarray
    ill: np.ndarray
    levels: list[float] | None
    n_known: int
    n_total: int


def map_slice(results: Results, var: str, index: tuple) -> Slice:
    meta = results.variables[var]
    data, known = display_values(results, var)
    n_known = int(known.sum())
    data, known = data[index], known[index].astype(bool)
    values = data.astype(float)
    bad = (data == FILL_INT) if meta.dtype == "int32" else ~np.isfinite(values)
    values[bad | ~known] = np.nan
    return Slice(var, values, ~known, known & bad, discrete_levels(meta.dtype, values, meta.units),
                 n_known, results.size)


def _title(results: Results, s: Slice, index: tuple) -> str:
    meta = results.variables[s.var]
    fixed = [f"{a.name}={a.values[i]:g}" for a, i in zip(results.axes, index) if isinstance(i, int)
             and len(a.values) > 1]
    lines = [results.attrs.get("title", "")] if results.attrs.get("title") else []
    lines.append(f"{s.var}: {meta.long_name}" + (f" at {', '.join(fixed)}" if fixed else ""))
    if s.n_known < s.n_total:
        lines.append(f"unfinished run: {s.n_known} of {s.n_total} points computed")
    return "\n".join(textwrap.fill(line, 80) for line in lines)


def _value_label(var: str, meta) -> str:
    return var + (f" [{meta.units}]" if meta.units not in ("", "1") else "")


def _hatch_cells(ax, xe: np.ndarray, ye: np.ndarray, mask: np.ndarray) -> None:
    """White hatched rectangles over the cells of ``mask`` (shape (nx, ny)): not computed."""
    from matplotlib.collections import PatchCollection
    from matplotlib.patches import Rectangle

    rects = [Rectangle((xe[i], ye[j]), xe[i + 1] - xe[i], ye[j + 1] - ye[j])
             for i, j in np.argwhere(mask)]
    ax.add_collection(PatchCollection(rects, facecolor=NOT_COMPUTED_FACE, edgecolor=HATCH_COLOUR,
                                      linewidth=0, hatch=NOT_COMPUTED_HATCH, zorder=1.5))


def _missing_handles(results: Results, s: Slice, index: tuple, one_d: bool) -> list:
    """Legend entries of the missing and not-computed points of the slice."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    out = []
    if s.ill.any():
        text = missing_text(missing_reasons(results, s.var, index, s.ill))
        out.append(Line2D([], [], ls="", marker="x", color="crimson", label=text) if one_d
                   else Patch(facecolor=MISSING_COLOUR, label=text))
    if s.not_computed.any():
        text = f"not computed yet ({int(s.not_computed.sum())})"
        out.append(Line2D([], [], ls="", marker="s", mfc="none", mec=HATCH_COLOUR, label=text)
                   if one_d else Patch(facecolor=NOT_COMPUTED_FACE, edgecolor=HATCH_COLOUR,
                                       hatch=NOT_COMPUTED_HATCH, label=text))
    return out


def map_figure(results: Results, var: str | None = None, at: dict[str, float] | None = None,
               mark_disagree: bool = False):
    """The matplotlib figure of ``var`` (default :func:`default_variable`).

    Two free axes give a phase map with a colour bar (discrete, a tick per value, for integer
    and half-integer variables) and a legend below the axes for the marks: missing points by
    reason, points not computed yet, gap closings, predicted closings, bulk-boundary
    disagreements. One free axis gives a line plot with the gap on a second y axis.
    """
    var = check_variable(results, var)
    free, index = select(results, at or {})
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.colors import BoundaryNorm, ListedColormap
    from matplotlib.lines import Line2D

    meta = results.variables[var]
    s = map_slice(results, var, index)
    values = s.values
    fig, ax = plt.subplots(figsize=(7, 5.6), layout="constrained")
    handles: list = []
    gap_name = gap_variable_for(results, var)
    if len(free) == 1:
        axis = results.axes[free[0]]
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
                            (s.not_computed, dict(marker="s", mfc="none", mec=HATCH_COLOUR))):
            if mask.any():
                ax.plot(x[mask], np.full(int(mask.sum()), 0.04), ls="", ms=5, clip_on=False,
                        transform=ax.get_xaxis_transform(), **style)
        handles += _missing_handles(results, s, index, one_d=True)
        if axis.spacing == "log":
            ax.set_xscale("log")
        ax.set_xlabel(_label(axis))
        ax.set_ylabel(_value_label(var, meta))
        if gap_name is not None:
            twin = ax.twinx()
            gap = np.where(~s.not_computed, results.data[gap_name][index].astype(float), np.nan)
            twin.plot(x, gap, "-", color="0.45", lw=1)
            twin.set_ylabel(_value_label(gap_name, results.variables[gap_name]), color="0.45")
            twin.set_ylim(bottom=0)
            handles.append(Line2D([], [], color="0.45", lw=1,
                                  label=f"{gap_name} ({results.variables[gap_name].long_name}; "
                                        "right axis)"))
        if mark_disagree:
            bad = disagreement(results)[index]
            if bad.any():
                ax.plot(x[bad], np.nan_to_num(values[bad]), ls="", marker="o", mfc="none",
                        mec="crimson", ms=9)
                handles.append(Line2D([], [], ls="", marker="o", mfc="none", mec="crimson",
                                      label="bulk and boundary disagree"))
        drawn = set()
        for row in _transition_rows(results, index):
            style = (dict(color="k", ls=":") if row["gap"] == "pi"
                     else dict(color="tab:red", ls="--"))
            ax.axvline(row[axis.name], lw=0.8, **style)
            if row["gap"] not in drawn:  # one legend entry per gap
                drawn.add(row["gap"])
                handles.append(Line2D([], [], lw=0.8, label=f"predicted closing at {row['gap']}",
                                      **style))
    else:
        xa, ya = results.axes[free[0]], results.axes[free[1]]
        grid = values.T  # pcolormesh wants rows along y (the second free axis)
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
        else:
            cmap = matplotlib.colormaps["viridis"].with_extremes(bad=MISSING_COLOUR)
            mesh = ax.pcolormesh(xe, ye, np.ma.masked_invalid(grid), cmap=cmap, shading="flat")
            bar = fig.colorbar(mesh, ax=ax, pad=0.02, aspect=30)
        bar.set_label(_value_label(var, meta))
        if s.not_computed.any():
            _hatch_cells(ax, xe, ye, s.not_computed)
        handles += _missing_handles(results, s, index, one_d=False)
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
        ax.set_xlabel(_label(xa))
        ax.set_ylabel(_label(ya))
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
