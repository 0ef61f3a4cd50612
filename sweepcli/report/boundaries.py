"""Phase boundaries of a two-parameter map as polylines, from the (refined) integer field."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

import numpy as np

from ..errors import ResultsError
from ..store import FILL_INT, Results
from ..store.refined import display_values
from .map_data import check_variable, select


@dataclass
class Boundary:
    """The boundary of the region where ``var == value``, as ``(m, 2)`` points (x, y)."""

    value: int
    points: np.ndarray


def phase_boundaries(results: Results, var: str | None = None,
                     at: dict[str, float] | None = None) -> tuple[str, str, str, list[Boundary]]:
    """``(var, x name, y name, boundaries)`` of an integer variable on a 2D map.

    Each region of one value is outlined by the 0.5 contour of its indicator on the grid, so a
    line runs midway between grid points of different values; missing points are a region of
    their own and outline nothing. A line between two regions is listed once, under the region
    of larger ``|value|`` (the non-trivial phase, when one side is 0).
    """
    var = check_variable(results, var)
    if results.variables[var].dtype != "int32":
        raise ResultsError(f"boundaries need an integer variable; {var!r} is "
                           f"{results.variables[var].dtype}.")
    free, index = select(results, at or {})
    if len(free) != 2:
        raise ResultsError("boundaries need a map over two swept parameters.")
    data, known = display_values(results, var)
    field = np.where(known & (data != FILL_INT), data, FILL_INT)[index]
    xa, ya = results.axes[free[0]], results.axes[free[1]]
    from contourpy import contour_generator

    out = []
    seen: set[frozenset] = set()
    # Non-trivial regions first (by |value|, + before -): a line between two regions is written
    # once, under the region of larger |value| that it outlines, and never again for the other.
    values = sorted(set(int(v) for v in np.unique(field)) - {int(FILL_INT)},
                    key=lambda v: (-abs(v), v < 0))
    for value in values:
        indicator = (field == value).astype(float).T  # rows along y
        gen = contour_generator(xa.values, ya.values, indicator)
        for line in gen.lines(0.5):
            for piece in _unseen_runs(np.asarray(line), seen):
                out.append(Boundary(value, piece))
    return var, xa.name, ya.name, out


def _unseen_runs(line: np.ndarray, seen: set[frozenset]) -> list[np.ndarray]:
    """The runs of consecutive segments of ``line`` (shape (m, 2)) not in ``seen``, which
    collects every segment (as the unordered pair of its rounded end points)."""
    keys = [tuple(np.round(p, 9)) for p in line]
    runs, current = [], []
    for i in range(len(line) - 1):
        seg = frozenset((keys[i], keys[i + 1]))
        if seg in seen or len(seg) < 2:
            if len(current) >= 2:
                runs.append(np.array(current))
            current = []
            continue
        seen.add(seg)
        if not current:
            current = [line[i]]
        current.append(line[i + 1])
    if len(current) >= 2:
        runs.append(np.array(current))
    return runs


def boundaries_csv(var: str, x: str, y: str, boundaries: list[Boundary]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([var, "line", x, y])
    for i, b in enumerate(boundaries):
        for px, py in b.points:
            w.writerow([b.value, i, _number(px), _number(py)])
    return buf.getvalue()


def _number(x: float) -> str:
    """Twelve significant digits: the line runs midway between grid values, and the last bits
    of that midpoint (1.2000000000000002) are rounding noise."""
    return f"{float(x):.12g}"
