"""What a map shows, without drawing it: the variable, the slice of the grid, the discrete
levels, the missing points and their reasons, gap closings and predicted transitions.

Shared by the matplotlib maps (:mod:`.maps`, :mod:`.map_line`), the terminal maps and the
boundary lines; numpy only.
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass

import numpy as np

from ..errors import ResultsError, suggest
from ..schema import Reason, is_energy
from ..store import FILL_INT, Results
from ..store.refined import display_values

GAP_VARIABLES = ("gap", "gap_0", "gap_pi")
#: Largest number of distinct half-integer values for which a float variable is drawn discretely.
MAX_DISCRETE = 24


def discrete_levels(dtype: str, values: np.ndarray, units: str = "1",
                    long_name: str = "") -> list[float] | None:
    """Sorted distinct values when ``values`` are to be drawn discretely, else ``None``.

    Integer variables always; a dimensionless float variable (``units`` "1" or "", and not an
    energy in units of the model's, so never a gap that happens to be 0 or 2) whose finite
    values are all integers or half-integers (within 1e-6), with at most :data:`MAX_DISCRETE`
    distinct values: a spin Chern number.
    """
    finite = np.asarray(values, float)
    finite = finite[np.isfinite(finite)]
    if dtype in ("int32", "uint8"):
        return sorted(float(v) for v in np.unique(finite))
    if not finite.size or units not in ("", "1") or is_energy(units, long_name):
        return None
    twice = np.round(2 * finite)
    if np.max(np.abs(2 * finite - twice)) > 2e-6 or len(np.unique(twice)) > MAX_DISCRETE:
        return None
    return sorted(float(v) / 2 for v in np.unique(twice))


def gap_variable_for(results: Results, var: str) -> str | None:
    """The gap whose closings bound the phases of ``var``: gap_pi for pi-gap quantities."""
    pi_gap = any(token.endswith("pi") for token in var.split("_"))  # gap_pi, nu_pi, line_wpi_s1
    order = ("gap_pi", "gap", "gap_0") if pi_gap else GAP_VARIABLES
    return next((g for g in order if g in results.variables and g != var), None)


def default_variable(results: Results) -> str:
    """The variable ``map`` draws by default: the job's main invariant.

    The one the job names (``[output] main``, stored as the root attribute ``main_variable``);
    else the first integer invariant that takes more than one value on the computed points
    (diagnostics such as ``*_kmesh``, ``*_method`` and the ``agree_*`` flags are skipped; a
    corner count is taken per corner, ``corner_modes_g_00`` in place of the total
    ``corner_modes_g``, since that is what the windings predict), else the first integer
    invariant, else the first variable.
    """
    main = results.attrs.get("main_variable", "")
    if main in results.variables:
        return main
    plain = [v for v in results.variables.values() if not v.is_reason]
    if not plain:
        raise ResultsError("the results file holds no variables to draw.")
    ints = [v.name for v in plain if v.dtype == "int32" and not v.name.startswith("agree_")
            and not v.name.endswith(("_kmesh", "_method"))]
    per_corner = {n: f"{n}_00" for n in ints if re.fullmatch(r"corner_modes_(0|pi)", n)
                  and f"{n}_00" in results.variables}
    ints = list(dict.fromkeys(per_corner.get(n, n) for n in ints))
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


def transition_rows(results: Results, index: tuple) -> list[dict]:
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


def disagreement(results: Results) -> np.ndarray:
    """Grid mask of points where any bulk-boundary flag (``agree_*``) is 0."""
    mask = np.zeros(results.shape, bool)
    for name, v in results.variables.items():
        if name.startswith("agree_") and v.dtype == "int32":
            mask |= results.done.astype(bool) & (results.data[name] == 0)
    return mask


def missing_reasons(results: Results, var: str, index: tuple, mask: np.ndarray) -> Counter:
    """Reason names (``"gap_closed"``, ...) of the points of ``mask`` (on the drawn slice) where
    ``var`` is missing although evaluated, counted; ``{"missing": n}`` without a reason variable.

    The reason is read from the reason variables ``var`` links to
    (:meth:`~sweepcli.store.Results.reason_codes`: its own gap's reason, e.g.
    ``corner_modes_pi_reason``; ``<measurement>_reason`` in older files)."""
    codes = results.reason_codes(var, lambda n: display_values(results, n)[0])
    if codes is None:
        return Counter({"missing": int(mask.sum())})
    reasons = codes[index][mask]
    return Counter(Reason(int(r)).name.lower() for r in reasons.ravel())


def confirm_measurements(results: Results) -> list[str]:
    """The measurements a ``[confirm]`` job ran on selected cells only (root attribute
    ``confirm_measurements``); empty for other files."""
    names = results.attrs.get("confirm_measurements", "").split(",")
    return [n for n in names if _reasons_of(results, n)]


def _reasons_of(results: Results, measurement: str) -> list[str]:
    """The stored reason variables of ``measurement`` (one, or one per gap)."""
    return [name for name, v in results.variables.items()
            if v.is_reason and v.measurement == measurement]


def not_requested(results: Results, var: str) -> np.ndarray:
    """Grid mask where ``var`` is missing because a ``[confirm]`` job did not select the cell
    (its measurement's reason is ``not_requested``)."""
    codes = results.reason_codes(var)
    if codes is None:
        return np.zeros(results.shape, bool)
    return codes == int(Reason.NOT_REQUESTED)


def confirmed(results: Results) -> np.ndarray | None:
    """Grid mask of the cells where a ``[confirm]`` job computed a boundary measurement (its
    reason is neither ``not_computed`` nor ``not_requested``); ``None`` for other files."""
    names = confirm_measurements(results)
    if not names:
        return None
    mask = np.zeros(results.shape, bool)
    for m in names:
        for rname in _reasons_of(results, m):
            r = results.data[rname]
            mask |= (r != int(Reason.NOT_COMPUTED)) & (r != int(Reason.NOT_REQUESTED))
    return mask


@dataclass
class Slice:
    """What a map draws: ``values`` of ``var`` on the drawn axes (NaN where missing),
    ``not_computed`` (not evaluated yet), ``ill`` (evaluated but missing) and ``not_requested``
    (a ``[confirm]`` job did not select the cell) masks, ``confirmed`` (the cells where a
    ``[confirm]`` job computed its boundary measurements; ``None`` for other files), ``levels``
    (the discrete values, ``None`` for a continuous scale) and the counts for the title."""

    var: str
    values: np.ndarray
    not_computed: np.ndarray
    ill: np.ndarray
    levels: list[float] | None
    n_known: int
    n_total: int
    not_requested: np.ndarray | None = None
    confirmed: np.ndarray | None = None


def map_slice(results: Results, var: str, index: tuple) -> Slice:
    meta = results.variables[var]
    data, known = display_values(results, var)
    n_known = int(known.sum())
    data, known = data[index], known[index].astype(bool)
    values = data.astype(float)
    bad = (data == FILL_INT) if meta.dtype == "int32" else ~np.isfinite(values)
    values[bad | ~known] = np.nan
    skipped = known & bad & not_requested(results, var)[index]
    mask = confirmed(results)
    return Slice(var, values, ~known, known & bad & ~skipped,
                 discrete_levels(meta.dtype, values, meta.units, meta.long_name), n_known,
                 results.size,
                 skipped, None if mask is None else mask[index] & known)
