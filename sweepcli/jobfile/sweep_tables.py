"""The ``[params]``, ``[sweep]`` and ``[refine]`` tables: fixed values and expressions, the
swept axes, the order in which expressions are evaluated, and the refinement of the grid."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from ..errors import JobError, sentence, suggest
from ..expressions import Expression, ExpressionError, parse
from ..physics.measurements import quantities_of
from ..physics.registry import Param
from .checker import Checker
from .spec import Axis, Refine


def read_parameters(ck: Checker, params_t: dict, sweep_t: dict, declared: dict[str, Param]
                    ) -> tuple:
    """``[sweep]`` axes and ``[params]`` values; returns ``(axes, fixed values, expressions,
    required parameters given nowhere)`` (defaults of the others are filled in)."""
    if not sweep_t:
        raise ck.fail("sweep", "", "a table with at least one swept parameter, e.g. "
                      "m = { start = -3.0, stop = 3.0, num = 61 }", "an empty table")
    _check_grid_size(ck, sweep_t)
    axes = tuple(_axis(ck, key, value, declared.get(key)) for key, value in sweep_t.items())
    fixed: dict[str, float] = {}
    exprs: dict[str, Expression] = {}
    for key, value in params_t.items():
        if key in sweep_t:
            raise JobError(f"{ck.path}: [params] {key} is also swept in [sweep]; give it in one "
                           "place only.")
        if isinstance(value, str):
            try:
                exprs[key] = parse(value, "params", key)
            except ExpressionError as exc:
                raise ck.fail("params", key, "a number or an arithmetic expression",
                              value, " " + sentence(exc)) from None
        else:
            fixed[key] = ck.number("params", key, value, declared.get(key, Param(key)))
    missing = []
    for p in declared.values():
        if p.name not in fixed and p.name not in exprs and p.name not in sweep_t:
            if p.required:
                missing.append(p)
            else:
                fixed[p.name] = p.default
    return axes, fixed, exprs, missing


MAX_POINTS = 10_000_000  # grid points of one job (each holds several numbers per quantity)


def _check_grid_size(ck: Checker, sweep_t: dict) -> None:
    """Refuse a grid of more than ``MAX_POINTS`` points by counting them from the ``num`` and
    list lengths of ``[sweep]``, before any axis is built (the axes are checked afterwards)."""
    sizes = []
    for key, value in sweep_t.items():
        n = 1
        if isinstance(value, list):
            n = len(value)
        elif isinstance(value, dict):
            if isinstance(value.get("values"), list):
                n = len(value["values"])
            elif isinstance(value.get("num"), int) and not isinstance(value["num"], bool):
                n = value["num"]
        if n > MAX_POINTS:
            if isinstance(value, list):
                raise ck.fail("sweep", key, f"a list of at most {MAX_POINTS:,} values",
                              f"a list of {n:,}")
            raise ck.fail(f"sweep.{key}", "values" if "values" in value else "num",
                          f"at most {MAX_POINTS:,} points", n)
        sizes.append((key, max(n, 1)))
    total = math.prod(n for _, n in sizes)
    if total > MAX_POINTS:
        shape = " x ".join(f"{n} ({k})" for k, n in sizes)
        raise JobError(f"{ck.path}: [sweep] must give a grid of at most {MAX_POINTS:,} points; "
                       f"got {shape} = {total:,} points.")


def _axis(ck: Checker, key: str, value: object, param: Param | None) -> Axis:
    param = param or Param(key)
    if param is not None and not param.sweepable:
        raise JobError(f"{ck.path}: [sweep] {key} cannot be swept.")
    spec_help = ("a list of values or a table { start = A, stop = B, num = N } "
                 "(optionally spacing = \"log\") or { values = [...] }")
    if isinstance(value, list):
        return Axis(key, _list_values(ck, "sweep", key, value, param, spec_help), "list")
    if not isinstance(value, dict):
        raise ck.fail("sweep", key, spec_help, value)
    ck.only(f"sweep.{key}", value, ["start", "stop", "num", "spacing", "values", "doc", "units"])
    for k in ("doc", "units"):
        if not isinstance(value.get(k, ""), str):
            raise ck.fail(f"sweep.{key}", k, "a string", value[k])
    if "values" in value:
        for k in ("start", "stop", "num", "spacing"):
            if k in value:
                raise ck.fail(f"sweep.{key}", k, "absent when values is given (a list or a "
                              "range, not both)", value[k])
        if not isinstance(value["values"], list):
            raise ck.fail(f"sweep.{key}", "values", "a list of values", value["values"])
        vals = _list_values(ck, f"sweep.{key}", "values", value["values"], param,
                            "a list of values")
        return Axis(key, vals, "list", value.get("doc", ""), value.get("units", ""))
    for k in ("start", "stop", "num"):
        if k not in value:
            raise ck.fail(f"sweep.{key}", k, "given (" + spec_help + ")", None)
    start = ck.number(f"sweep.{key}", "start", ck.constant(f"sweep.{key}", "start", value["start"]),
                      Param("start"))
    stop = ck.number(f"sweep.{key}", "stop", ck.constant(f"sweep.{key}", "stop", value["stop"]),
                     Param("stop"))
    num = ck.number(f"sweep.{key}", "num", value["num"], Param("num", kind="int", low=1))
    spacing = value.get("spacing", "linear")
    if spacing not in ("linear", "log"):
        raise ck.fail(f"sweep.{key}", "spacing", "\"linear\" or \"log\"", spacing)
    if num > 1 and start == stop:
        raise ck.fail(f"sweep.{key}", "stop", "different from start when num > 1", stop,
                      " The range is empty.")
    if spacing == "log":
        if start <= 0 or stop <= 0:
            raise ck.fail(f"sweep.{key}", "start" if start <= 0 else "stop",
                          "positive for a logarithmic range", start if start <= 0 else stop)
        vals = np.geomspace(start, stop, num)
    else:
        vals = np.linspace(start, stop, num)
    for v in vals:
        if param.kind == "int" and v != round(v):
            raise ck.fail("sweep", key, "a range of integers", value)
        if not param.admits(float(v)):
            raise ck.fail(f"sweep.{key}", "start" if v == vals[0] else "stop",
                          f"such that every value is {param.expectation()}", float(v))
    return Axis(key, tuple(float(v) for v in vals), spacing, value.get("doc", ""),
                value.get("units", ""))


def _list_values(ck: Checker, table: str, key: str, value: list, param: Param,
                 expected: str) -> tuple[float, ...]:
    """The values of an explicit list axis (numbers or constant expressions), each checked
    against the parameter's declaration."""
    if not value:
        raise ck.fail(table, key, expected, value, " The list is empty.")
    vals = tuple(ck.number(table, key, ck.constant(table, key, v), param) for v in value)
    return tuple(float(v) for v in vals)


def order_expressions(ck: Checker, exprs: dict[str, Expression], known: set[str]) -> tuple:
    """``[params]`` expressions as ``(name, expression)`` pairs in an order in which each refers
    only to known names and earlier ones; an unknown name or a cycle is a job error."""
    for key, expr in exprs.items():
        for n in sorted(expr.names):
            if n not in known:
                raise ck.fail("params", key, "an expression of defined parameters", expr.text,
                              f" {n!r} is not defined in [params] or [sweep].{suggest(n, known)}")
    ordered: list[tuple[str, Expression]] = []
    done: set[str] = set(known) - set(exprs)
    pending = dict(exprs)
    while pending:
        ready = [k for k, e in pending.items() if e.names <= done]
        if not ready:
            cycle = ", ".join(sorted(pending))
            raise JobError(f"{ck.path}: [params] expressions {cycle} refer to each other in a "
                           "cycle; break it with a number.")
        for k in ready:
            ordered.append((k, pending.pop(k)))
            done.add(k)
    return tuple(ordered)


def read_refine(ck: Checker, t: dict, measurements: list, dim: int, axes: tuple,
                driven: bool) -> Refine | None:
    """``[refine]``: the integer quantity whose changes are refined, the depth and the optional
    gap criterion; ``None`` without the table."""
    if not t:
        return None
    allowed = ["by", "depth", "gap_below", "gap_var"]
    ck.only("refine", t, allowed)
    qs = [q for m, _ in measurements for q in quantities_of(m, dim, driven)]
    ints = [q.name for q in qs if q.dtype == "int32"]
    floats = [q.name for q in qs if q.dtype == "float64"]
    by = t.get("by")
    if by not in ints:
        raise ck.fail("refine", "by", "an integer quantity of the job's measurements (" +
                      (", ".join(ints) or "none measured") + ")", by, suggest(str(by), ints))
    depth = ck.number("refine", "depth", t.get("depth", 3),
                      Param("depth", kind="int", low=1, high=10))
    gap_below = t.get("gap_below")
    if gap_below is not None:
        gap_below = float(ck.number("refine", "gap_below", gap_below,
                                    Param("gap_below", low=0, open_low=True)))
    gap_var = t.get("gap_var", "gap")
    if gap_below is not None and gap_var not in floats:
        raise ck.fail("refine", "gap_var", "a float quantity of the job's measurements (" +
                      ", ".join(floats) + ")", gap_var, suggest(str(gap_var), floats))
    for a in axes:
        if a.spacing == "list":
            raise JobError(f"{ck.path}: [refine] needs ranges in [sweep]; {a.name} is an explicit "
                           "list.")
    return Refine(by, depth, gap_below, gap_var)


def finer_axis(axis: Axis, depth: int) -> Axis:
    """The axis with ``2**depth - 1`` values inserted between neighbours (same spacing)."""
    n = len(axis.values)
    if n == 1:
        return axis
    m = (n - 1) * 2 ** depth + 1
    lo, hi = axis.values[0], axis.values[-1]
    vals = np.geomspace(lo, hi, m) if axis.spacing == "log" else np.linspace(lo, hi, m)
    # Keep the base values bit for bit, so a refined run and a coarse run share their points.
    vals[:: 2 ** depth] = axis.values
    return replace(axis, values=tuple(float(v) for v in vals))
