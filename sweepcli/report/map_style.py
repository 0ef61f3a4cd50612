"""How a map looks: the colour of every integer and half-integer value (the same in every map
of every file), the marks of missing and not-computed points with their legend entries, and the
axis labels. matplotlib is imported inside functions only.
"""

from __future__ import annotations

from collections import Counter

import numpy as np

from ..schema import split_scale
from ..store import Results
from .map_data import Slice, missing_reasons

MISSING_COLOUR = "#9a9a9a"  # ill-defined: gap closed, not converged, failed
NOT_COMPUTED_FACE = "#ffffff"  # not evaluated (yet): white, hatched
NOT_COMPUTED_HATCH = "////"
HATCH_COLOUR = "#8c8c8c"
NOT_REQUESTED_FACE = "#ffffff"  # a [confirm] job did not select the cell: white, dotted
NOT_REQUESTED_HATCH = "..."
CONFIRMED_MARK = dict(marker="s", mfc="none", mec="k", mew=0.7)  # boundary measured here
ZERO_COLOUR = "#e9e4d4"  # the trivial phase: a neutral that is neither grey nor white
#: |value| -> distance from the centre of the diverging red-blue scale (0.5 = its darkest end).
#: Fixed, so that a value has one colour in every map.
_STRENGTH = ((0.5, 1.0, 2.0, 3.0, 4.0), (0.17, 0.25, 0.36, 0.44, 0.5))
#: Largest |value| drawn on the red-blue scale; larger values get hues of their own.
_SCALE_MAX = 4.0
_GOLDEN = (np.sqrt(5.0) - 1) / 2


def value_colour(value: float) -> tuple[float, float, float, float]:
    """The RGBA colour of an integer or half-integer ``value`` in every map; different values
    have different colours.

    0 is :data:`ZERO_COLOUR`; for ``|value| <= 4`` positive values take reds and negative
    values blues of the ColorBrewer red-blue scale (matplotlib's ``RdBu_r``), deeper with
    ``|value|``. Larger magnitudes (more than four corner modes, say) leave the scale: each
    takes a hue of its own, ``2 |value|`` times the golden ratio (mod 1), which no other value
    shares, saturated and light for positive values and darker for negative ones.
    """
    import colorsys

    import matplotlib
    from matplotlib.colors import to_rgba

    if value == 0:
        return to_rgba(ZERO_COLOUR)
    if abs(value) <= _SCALE_MAX:
        offset = float(np.interp(abs(value), *_STRENGTH))
        return tuple(float(c) for c in
                     matplotlib.colormaps["RdBu_r"](0.5 + np.copysign(offset, value)))
    hue = float((2 * abs(value) * _GOLDEN) % 1.0)
    sat, val = (0.75, 0.85) if value > 0 else (0.9, 0.5)
    return (*colorsys.hsv_to_rgb(hue, sat, val), 1.0)


def level_text(value: float) -> str:
    """A level as printed on ticks and legends: ``1``, ``-1/2``, ``3/2``."""
    if value == int(value):
        return str(int(value))
    return f"{int(round(2 * value))}/2"


def absent_levels(levels: list[float]) -> list[float]:
    """The integers (half-integers, when a level is one) between the smallest and largest of
    ``levels`` that are not among them: the discrete colour bar has one slot per value present,
    so these are left out of it."""
    if len(levels) < 2:
        return []
    step = 0.5 if any(v != int(v) for v in levels) else 1.0
    lo, hi = min(levels), max(levels)
    every = lo + step * np.arange(int(round((hi - lo) / step)) + 1)
    return [float(v) for v in every if not np.any(np.isclose(v, levels))]


def absent_text(var: str, absent: list[float], limit: int = 6) -> str:
    """Legend text saying which values the colour bar leaves out: ``corner_modes_0 = 2, 3
    occurs nowhere (not in the colour bar)``; runs of consecutive values are written ``5..7``."""
    step = 0.5 if any(v != int(v) for v in absent) else 1.0
    runs: list[list[float]] = []
    for v in absent:
        if runs and np.isclose(v - runs[-1][-1], step):
            runs[-1].append(v)
        else:
            runs.append([v])
    parts = [level_text(r[0]) if len(r) == 1 else
             (f"{level_text(r[0])}, {level_text(r[1])}" if len(r) == 2 else
              f"{level_text(r[0])}..{level_text(r[-1])}") for r in runs]
    if len(parts) > limit:
        parts = parts[:limit] + ["..."]
    return f"{var} = {', '.join(parts)} occurs nowhere (not in the colour bar)"


def missing_text(counts: Counter) -> str:
    """``missing: gap closed (12)`` or ``missing: gap closed 10, not converged 2``."""
    words = {k.replace("_", " "): v for k, v in sorted(counts.items())}
    if len(words) == 1:
        (name, n), = words.items()
        return f"missing: {name} ({n})" if name != "missing" else f"missing ({n})"
    return "missing: " + ", ".join(f"{k} {v}" for k, v in words.items())


def axis_label(axis) -> str:
    """``m (staggered mass u) [t]``: the name, the long name and the scale (stored in the long
    name when the units are the model's own, see :func:`sweepcli.schema.cf_units`)."""
    long_name, units = split_scale(axis.units, axis.long_name)
    unit = f" [{units}]" if units else ""
    name = axis.name if long_name in ("", axis.name) else f"{axis.name} ({long_name})"
    return name + unit


def value_label(var: str, meta) -> str:
    units = split_scale(meta.units, meta.long_name)[1]
    return var + (f" [{units}]" if units else "")


def hatch_cells(ax, xe: np.ndarray, ye: np.ndarray, mask: np.ndarray,
                hatch: str = NOT_COMPUTED_HATCH) -> None:
    """White hatched rectangles over the cells of ``mask`` (shape (nx, ny)): not computed
    (``////``) or, with ``hatch=NOT_REQUESTED_HATCH``, not requested (dotted)."""
    from matplotlib.collections import PatchCollection
    from matplotlib.patches import Rectangle

    rects = [Rectangle((xe[i], ye[j]), xe[i + 1] - xe[i], ye[j + 1] - ye[j])
             for i, j in np.argwhere(mask)]
    ax.add_collection(PatchCollection(rects, facecolor=NOT_COMPUTED_FACE, edgecolor=HATCH_COLOUR,
                                      linewidth=0, hatch=hatch, zorder=1.5))


def missing_handles(results: Results, s: Slice, index: tuple, one_d: bool) -> list:
    """Legend entries of the missing and not-computed points of the slice."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    out = []
    if s.ill.any():
        text = missing_text(missing_reasons(results, s.var, index, s.ill))
        out.append(Line2D([], [], ls="", marker="x", color="crimson", label=text) if one_d
                   else Patch(facecolor=MISSING_COLOUR, label=text))
    if s.not_requested is not None and s.not_requested.any():
        text = f"not requested: [confirm] did not select the cell ({int(s.not_requested.sum())})"
        out.append(Line2D([], [], ls="", marker="|", color=HATCH_COLOUR, label=text) if one_d
                   else Patch(facecolor=NOT_REQUESTED_FACE, edgecolor=HATCH_COLOUR,
                              hatch=NOT_REQUESTED_HATCH, label=text))
    if s.not_computed.any():
        text = f"not computed yet ({int(s.not_computed.sum())})"
        out.append(Line2D([], [], ls="", marker="s", mfc="none", mec=HATCH_COLOUR, label=text)
                   if one_d else Patch(facecolor=NOT_COMPUTED_FACE, edgecolor=HATCH_COLOUR,
                                       hatch=NOT_COMPUTED_HATCH, label=text))
    if s.confirmed is not None and s.confirmed.any():
        text = f"boundary measured here ([confirm]: {int(s.confirmed.sum())} cells)"
        out.append(Line2D([], [], ls="", ms=5, label=text,
                          **(dict(CONFIRMED_MARK, marker="v", mfc="k") if one_d
                             else CONFIRMED_MARK)))
    return out
