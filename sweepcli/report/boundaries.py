"""Phase boundaries of a two-parameter map as polylines, from the (refined) integer field."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

import numpy as np

from ..errors import ResultsError
from ..store import FILL_INT, Results
from ..store.refined import display_values
from .maps import check_variable, select


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
    their own and outline nothing.
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
    for value in sorted(set(int(v) for v in np.unique(field)) - {int(FILL_INT)}):
        indicator = (field == value).astype(float).T  # rows along y
        gen = contour_generator(xa.values, ya.values, indicator)
        for line in gen.lines(0.5):
            if len(line) >= 2:
                out.append(Boundary(value, np.asarray(line)))
    return var, xa.name, ya.name, out


def boundaries_csv(var: str, x: str, y: str, boundaries: list[Boundary]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([var, "line", x, y])
    for i, b in enumerate(boundaries):
        for px, py in b.points:
            w.writerow([b.value, i, repr(float(px)), repr(float(py))])
    return buf.getvalue()
