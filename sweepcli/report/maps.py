"""``sweepcli map``: phase maps drawn with matplotlib from a results file.

Integer invariants get discrete colours with a legend, gaps a continuous scale; the contour where
the bulk gap falls to a small fraction of its range is drawn over every 2D map so that phase
changes can be compared with gap closings. A 1D sweep draws a line plot.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import ResultsError, SweepError, suggest
from ..store import FILL_INT, Results
from ..store.refined import display_values

FORMATS = (".png", ".svg", ".pdf")
MISSING_COLOUR = "#bbbbbb"
GAP_VARIABLES = ("gap", "gap_0", "gap_pi")


def gap_variable_for(results: Results, var: str) -> str | None:
    """The gap whose closings bound the phases of ``var``: gap_pi for pi-gap quantities."""
    pi_gap = any(token.endswith("pi") for token in var.split("_"))  # gap_pi, nu_pi, line_wpi_s1
    order = ("gap_pi", "gap", "gap_0") if pi_gap else GAP_VARIABLES
    return next((g for g in order if g in results.variables and g != var), None)


def default_variable(results: Results) -> str:
    """The first integer invariant, else the first float variable."""
    plain = [v for v in results.variables.values() if not v.is_reason]
    for v in plain:
        if v.dtype == "int32" and not v.name.endswith("_kmesh"):
            return v.name
    if not plain:
        raise ResultsError("the results file holds no variables to draw.")
    return plain[0].name


def check_variable(results: Results, var: str | None) -> str:
    if var is None:
        return default_variable(results)
    if var not in results.variables:
        names = list(results.variables)
        raise ResultsError(f"no variable {var!r} in the results file (available: "
                           f"{', '.join(names)}).{suggest(var, names)}")
    return var


def select(results: Results, at: dict[str, float]) -> tuple[list[int], tuple]:
    """Indices of the axes to draw (at most two, longer than 1 and not fixed by ``at``) and the
    index tuple that selects them, other axes fixed at the value nearest to ``at[name]`` (or
    their first value)."""
    for name in at:
        if name not in [a.name for a in results.axes]:
            names = [a.name for a in results.axes]
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
            target = at.get(a.name, a.values[0])
            index.append(int(np.argmin(np.abs(a.values - target))))
    return free, tuple(index)


def _transition_rows(results: Results, index: tuple) -> list[dict]:
    """Predicted transitions that lie on the drawn slice (other axes at their selected values)."""
    table = results.tables.get("transitions")
    if not table or not len(table["gap"]):
        return []
    keep = np.ones(len(table["gap"]), bool)
    for a, i in zip(results.axes, index):
        if isinstance(i, int) and len(a.values) > 1:
            keep &= np.isclose(table[a.name], a.values[i], rtol=0, atol=1e-12 * (1 + abs(a.values[i])))
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


def draw_map(results: Results, out: str | Path, var: str | None = None,
             at: dict[str, float] | None = None, mark_disagree: bool = False) -> Path:
    """Draw ``var`` (default: the first integer invariant) to ``out``; format from the suffix."""
    out = Path(out)
    if out.suffix.lower() not in FORMATS:
        raise SweepError(f"{out}: the picture format follows the suffix, which must be one of "
                         f"{', '.join(FORMATS)}; got {out.suffix or 'none'!r}.")
    var = check_variable(results, var)
    free, index = select(results, at or {})
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.colors import BoundaryNorm, ListedColormap
    from matplotlib.patches import Patch

    meta = results.variables[var]
    data, done = display_values(results, var)
    data, done = data[index], done[index].astype(bool)
    is_int = meta.dtype in ("int32", "uint8")
    values = data.astype(float)
    missing = ~done | ((data == FILL_INT) if meta.dtype == "int32" else ~np.isfinite(values))
    values[missing] = np.nan
    title = results.attrs.get("title", "")
    fixed = [f"{a.name}={a.values[i]:g}" for a, i in zip(results.axes, index) if isinstance(i, int)
             and len(a.values) > 1]
    subtitle = meta.long_name + (f" at {', '.join(fixed)}" if fixed else "")

    fig, ax = plt.subplots(figsize=(7, 5.2), constrained_layout=True)
    if len(free) == 1:
        axis = results.axes[free[0]]
        x = axis.values
        ax.plot(x, values, "o-" if not is_int else "o", ms=3, drawstyle="steps-mid" if is_int else "default",
                label=var)
        if missing.any():
            # On the bottom edge of the axes, so that no value is suggested.
            ax.plot(x[missing], np.full(missing.sum(), 0.02), "x", color="crimson",
                    transform=ax.get_xaxis_transform(), clip_on=False,
                    label="missing (see *_reason)")
        if axis.spacing == "log":
            ax.set_xscale("log")
        ax.set_xlabel(_label(axis))
        ax.set_ylabel(f"{var}" + (f" [{meta.units}]" if meta.units not in ("", "1") else ""))
        gap_name = gap_variable_for(results, var)
        if gap_name is not None:
            twin = ax.twinx()
            gap = results.data[gap_name][index].astype(float)
            twin.plot(x, gap, "-", color="grey", lw=1, alpha=0.7, label=gap_name)
            twin.set_ylabel(f"{gap_name} [{results.variables[gap_name].units}]", color="grey")
            twin.set_ylim(bottom=0)
        if is_int and np.isfinite(values).any():
            lo, hi = int(np.nanmin(values)), int(np.nanmax(values))
            ax.set_yticks(range(lo, hi + 1))
        if mark_disagree:
            bad = disagreement(results)[index]
            if bad.any():
                ax.plot(x[bad], np.nan_to_num(values[bad]), ls="", marker="o", mfc="none",
                        mec="crimson", ms=8, label="bulk and boundary disagree")
        for row in _transition_rows(results, index):
            ax.axvline(row[axis.name], color="k" if row["gap"] == "pi" else "tab:red", lw=0.8,
                       ls=":" if row["gap"] == "pi" else "--",
                       label=f"predicted closing at {row['gap']}")
        ax.legend(loc="best", fontsize=8)
    else:
        xa, ya = results.axes[free[0]], results.axes[free[1]]
        grid = values.T  # pcolormesh wants rows along y (the second free axis)
        xe, ye = _edges(xa.values, xa.spacing == "log"), _edges(ya.values, ya.spacing == "log")
        handles = []
        if is_int:
            levels = sorted(set(int(v) for v in values[np.isfinite(values)]))
            colours = list(plt.get_cmap("tab10").colors) + list(plt.get_cmap("Set3").colors)
            if not levels:
                levels = [0]
            cmap = ListedColormap([colours[i % len(colours)] for i in range(len(levels))]
                                  ).with_extremes(bad=MISSING_COLOUR)
            coded = np.full(grid.shape, np.nan)
            for i, lv in enumerate(levels):
                coded[grid == lv] = i
            norm = BoundaryNorm(np.arange(len(levels) + 1) - 0.5, len(levels))
            ax.pcolormesh(xe, ye, np.ma.masked_invalid(coded), cmap=cmap, norm=norm,
                          shading="flat")
            handles = [Patch(color=cmap(i), label=f"{var} = {lv}") for i, lv in enumerate(levels)]
            if np.isnan(grid).any():
                handles.append(Patch(color=MISSING_COLOUR, label="missing (see *_reason)"))
        else:
            cmap = plt.get_cmap("viridis").with_extremes(bad=MISSING_COLOUR)
            mesh = ax.pcolormesh(xe, ye, np.ma.masked_invalid(grid), cmap=cmap, shading="flat")
            fig.colorbar(mesh, ax=ax, label=f"{var}" + (f" [{meta.units}]" if meta.units not in ("", "1") else ""))
        gap_name = gap_variable_for(results, var)
        if gap_name is not None:
            # Evaluated points only: filled-in values of a refined file are flat by construction.
            gap = np.where(results.done[index].astype(bool),
                           results.data[gap_name][index].astype(float), np.nan)
            closing = closing_nodes(gap)
            if closing.any():
                gx, gy = np.meshgrid(xa.values, ya.values, indexing="ij")
                ax.plot(gx[closing], gy[closing], "k.", ms=3)
                from matplotlib.lines import Line2D

                handles.append(Line2D([], [], color="k", marker=".", ls="", ms=4,
                                      label=f"{gap_name} closes within half a cell"))
        handles += _draw_transitions(ax, results, index, xa.name, ya.name)
        if mark_disagree:
            bad = disagreement(results)[index]
            if bad.any():
                from matplotlib.lines import Line2D

                gx, gy = np.meshgrid(xa.values, ya.values, indexing="ij")
                ax.plot(gx[bad], gy[bad], ls="", marker="o", mfc="none", mec="crimson", ms=7)
                handles.append(Line2D([], [], ls="", marker="o", mfc="none", mec="crimson",
                                      label="bulk and boundary disagree"))
        if xa.spacing == "log":
            ax.set_xscale("log")
        if ya.spacing == "log":
            ax.set_yscale("log")
        ax.set_xlabel(_label(xa))
        ax.set_ylabel(_label(ya))
        if handles:
            ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.01, 1), fontsize=8,
                      borderaxespad=0)
    ax.set_title(f"{title}\n{subtitle}" if title else subtitle, fontsize=10)
    out.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(out, dpi=120)
    plt.close(fig)
    return out
