"""``sweepcli diff``: compare two results files, their provenance and their values.

Two strengths: by default only the values count (the grids, the set of variables and every
value on the grid points both files hold); ``provenance=True`` also counts a different job
(its normalised keys), different library versions and other provenance attributes
(:mod:`.diff_match`). The values are compared here on the common points of the matched grids;
:mod:`.diff_report` writes the result as text or JSON.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..schema import POINT_SECONDS, Reason
from ..store import FILL_INT, Results
from .diff_match import GridMatch, ProvenanceDiff, compare_provenance, match_grids


@dataclass
class Deviation:
    """A point where a variable differs. ``a``/``b`` are ``None`` where missing, with the
    reason code's name in ``a_note``/``b_note``; ``deviation`` is ``|b - a|`` when both are
    numbers, ``None`` otherwise."""

    params: dict[str, float]
    a: int | float | str | None
    b: int | float | str | None
    deviation: float | None
    a_note: str = ""
    b_note: str = ""


@dataclass
class VariableDiff:
    name: str
    dtype: str
    compared: int  # common points
    n_differ: int  # of which differ (values, or missing in exactly one file)
    n_missing_one: int  # of which are missing in exactly one file
    max_deviation: float | None  # largest |b - a| where both are present numbers
    worst: list[Deviation]
    changed: np.ndarray = field(repr=False)  # 0 equal, 1 missing in one, 2 differs; common grid

    @property
    def fraction(self) -> float:
        return self.n_differ / self.compared if self.compared else 0.0


@dataclass
class ResultsDiff:
    a: str
    b: str
    strength: str  # "values" or "provenance"
    common_only: bool  # a grid that is a subset or refinement is not itself a difference
    rtol: float
    atol: float
    provenance: ProvenanceDiff
    grid: GridMatch
    variables: list[VariableDiff]
    only_a: list[str]
    only_b: list[str]

    @property
    def reasons(self) -> list[str]:
        """Why the files count as different at this strength; empty when they agree."""
        out = []
        if self.strength == "provenance":
            p = self.provenance
            if not p.same_job:
                out.append(f"different jobs ({len(p.job)} job key(s) differ)")
            if p.versions:
                out.append(f"versions differ ({', '.join(c.key for c in p.versions)})")
            if p.attrs:
                out.append(f"provenance differs ({', '.join(c.key for c in p.attrs)})")
        g = self.grid
        if g.problem:
            out.append(f"grids cannot be compared: {g.problem}")
        elif not g.comparable:
            out.append("the grids have no point in common")
        elif not g.same and not self.common_only:
            out.append(f"grids differ ({g.describe()})")
        if self.only_a:
            out.append(f"only in {self.a}: {', '.join(self.only_a)}")
        if self.only_b:
            out.append(f"only in {self.b}: {', '.join(self.only_b)}")
        for v in self.variables:
            if v.n_differ:
                out.append(f"{v.name} differs at {v.n_differ} of {v.compared} points")
        return out

    @property
    def agree(self) -> bool:
        return not self.reasons


def _common(r: Results, grid: GridMatch, name: str, side: str) -> np.ndarray:
    """``name`` (or ``done``) of ``r`` on the common points, axes in A's order."""
    arr = r.done if name == "done" else r.data[name]
    if side == "b":
        arr = np.transpose(arr, [grid.axes_b.index(n) for n in grid.axes_a])
    idx = [m.index_a if side == "a" else m.index_b for m in grid.axes]
    return arr[np.ix_(*idx)] if idx else arr


def _missing(dtype: str, data: np.ndarray, done: np.ndarray) -> np.ndarray:
    if dtype == "int32":
        return (data == FILL_INT) | ~done
    if dtype == "uint8":
        return np.zeros(data.shape, dtype=bool)
    return np.isnan(data) | ~done


def _scalar(dtype: str, value: Any) -> int | float | str:
    if dtype == "uint8":
        return Reason(int(value)).name.lower()
    if dtype == "int32":
        return int(value)
    return float(value)


def compare_variable(a: Results, b: Results, grid: GridMatch, name: str, rtol: float,
                     atol: float, top: int = 5) -> VariableDiff:
    """Count the common points where ``name`` differs and list the ``top`` largest deviations.

    Integers and reason codes must be equal; floats satisfy
    ``|a - b| <= atol + rtol * max(|a|, |b|)`` (symmetric, unlike ``numpy.isclose``). A value
    missing in one file and present in the other differs; missing in both is equal.
    Missing-versus-present points are listed first, then the largest ``|b - a|``.
    """
    va, vb = a.variables[name], b.variables[name]
    da, db = _common(a, grid, name, "a"), _common(b, grid, name, "b")
    ma = _missing(va.dtype, da, _common(a, grid, "done", "a").astype(bool))
    mb = _missing(vb.dtype, db, _common(b, grid, "done", "b").astype(bool))
    one = ma ^ mb
    both = ~ma & ~mb
    exact = va.dtype in ("int32", "uint8") and vb.dtype in ("int32", "uint8")
    if exact:
        x, y = da.astype(np.int64), db.astype(np.int64)
        values_differ = both & (x != y)
        dev = np.where(both, np.abs(y - x), 0).astype(float)
    else:
        x, y = da.astype(float), db.astype(float)
        with np.errstate(invalid="ignore", over="ignore"):
            dev = np.abs(y - x)
            close = (x == y) | (dev <= atol + rtol * np.maximum(np.abs(x), np.abs(y)))
        values_differ = both & ~close
        dev = np.where(both & ~close, dev, 0.0)
    changed = np.zeros(da.shape, dtype=np.int8)
    changed[one] = 1
    changed[values_differ] = 2
    differ = changed > 0
    score = np.where(one, np.inf, dev)
    flat = np.flatnonzero(differ.ravel())
    ranked = flat[np.argsort(-score.ravel()[flat], kind="stable")][:top]
    reasons = {}
    for side, r in (("a", a), ("b", b)):
        codes = r.reason_codes(name, lambda n, r=r, side=side: _common(r, grid, n, side))
        if codes is not None:
            reasons[side] = codes
    worst = []
    for k in ranked:
        multi = np.unravel_index(k, da.shape)
        params = {m.name: float(m.values[i]) for m, i in zip(grid.axes, multi)}
        notes = {}
        for side, miss in (("a", ma), ("b", mb)):
            if miss[multi] and side in reasons:
                reason = Reason(int(reasons[side][multi])).name.lower()
                notes[side] = reason if reason != "ok" else ""
        worst.append(Deviation(
            params,
            None if ma[multi] else _scalar(va.dtype, da[multi]),
            None if mb[multi] else _scalar(vb.dtype, db[multi]),
            None if one[multi] or va.dtype == "uint8" else float(dev[multi]),
            notes.get("a", ""), notes.get("b", "")))
    finite_dev = dev[values_differ] if va.dtype != "uint8" else np.array([])
    return VariableDiff(name, va.dtype, int(da.size), int(differ.sum()), int(one.sum()),
                        float(finite_dev.max()) if finite_dev.size else None, worst, changed)


def diff_results(a: Results, b: Results, *, labels: tuple[str, str] = ("A", "B"),
                 rtol: float = 1e-6, atol: float = 1e-12, coord_tol: float = 1e-9,
                 provenance: bool = False, common_only: bool = False,
                 top: int = 5) -> ResultsDiff:
    """Compare two results.

    Parameters
    ----------
    a, b : the results; ``labels`` name them in messages (the CLI passes the paths).
    rtol, atol : float tolerance, ``|a - b| <= atol + rtol * max(|a|, |b|)``.
    coord_tol : relative tolerance for matching coordinate values
        (see :func:`.diff_match.match_axis`).
    provenance : also count job, version and provenance differences.
    common_only : judge only the common points; a subset or refinement is then no difference.
    top : deviations listed per variable.

    Returns
    -------
    ResultsDiff
        ``agree`` is true when no difference counts at the chosen strength; ``reasons`` lists
        the ones that do.
    """
    grid = match_grids(a, b, coord_tol)
    variables = []
    # compute times are provenance of a run, not values: never a difference
    common = [n for n in a.variables if n in b.variables and n != POINT_SECONDS]
    if grid.comparable:
        variables = [compare_variable(a, b, grid, n, rtol, atol, top) for n in common]
    return ResultsDiff(
        a=labels[0], b=labels[1], strength="provenance" if provenance else "values",
        common_only=common_only, rtol=rtol, atol=atol,
        provenance=compare_provenance(a, b, labels), grid=grid, variables=variables,
        only_a=[n for n in a.variables if n not in b.variables and n != POINT_SECONDS],
        only_b=[n for n in b.variables if n not in a.variables and n != POINT_SECONDS])
