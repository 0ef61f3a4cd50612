"""Parsing a job file into a :class:`~sweepcli.jobfile.spec.Job`: one pass over every table,
each bad value a :class:`~sweepcli.errors.JobError` naming the file, the table and key."""

from __future__ import annotations

import itertools
import math
import re
import tomllib
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
import tomli_w

from ..errors import JobError, sentence, suggest
from ..expressions import Expression, ExpressionError, parse
from ..physics.drives import DRIVES
from ..physics.measurements import MEASUREMENTS, quantities_of
from ..physics.models import MODELS
from ..physics.registry import Param
from .checker import Checker
from .checks import check_values
from .spec import Axis, CustomModel, DriveSpec, Job, Refine

TABLES = ("job", "model", "params", "sweep", "refine", "drive", "measure", "predict", "output")
LATTICES = {
    "chain": np.array([[1.0]]),
    "square": np.eye(2),
    "honeycomb": np.array([[1.5, math.sqrt(3) / 2], [1.5, -math.sqrt(3) / 2]]),
}
DRIVE_KINDS = ("static", *DRIVES.names())
HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"  # the first 8 bytes of an HDF5 file (no user block)
MEASURE_SETTINGS = (
    Param("filling", kind="int", default=None, low=1, doc="number of occupied bands"),
    Param("gap_tol", default=1e-6, low=0, open_low=True, doc="gaps below this count as closed"),
)


def read_toml(path: str | Path) -> tuple[str, dict]:
    """Read and parse a TOML file; syntax errors become ``FILE:LINE:COL: message``."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise JobError(f"{path}: no such job file.") from None
    except OSError as exc:
        raise JobError(f"{path}: cannot read the job file ({exc}).") from None
    if raw.startswith(HDF5_SIGNATURE):
        raise JobError(f"{path}: is an HDF5 file (a results file?), not a TOML job file; "
                       f"`sweepcli show {path}` describes a results file.")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise JobError(f"{path}: cannot read the job file ({exc}).") from None
    try:
        return text, tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        if m:
            msg = msg[: m.start()].strip()
            raise JobError(f"{path}:{m.group(1)}:{m.group(2)}: invalid TOML: {msg}.") from None
        raise JobError(f"{path}: invalid TOML: {msg}.") from None


def load_job(path: str | Path) -> Job:
    """Parse and validate the job file at ``path``.

    Raises
    ------
    JobError
        One message naming the file, the key, what was expected and what was given.
    """
    text, doc = read_toml(path)
    return build_job(doc, text=text, path=str(path))


def build_job(doc: dict, *, text: str, path: str) -> Job:
    """Validate a parsed job file: each table in turn, then values at sample grid points."""
    ck = Checker(path)
    for key in doc:
        if key not in TABLES:
            raise JobError(f"{path}: unknown table [{key}] (allowed: {', '.join(TABLES)})."
                           f"{suggest(key, TABLES)}")
    name, title, description = _job_table(ck, doc)
    model_t = ck.table(doc, "model")
    model, custom, model_params, declared, dim, norb = _model_table(ck, model_t)
    params_t, sweep_t = ck.table(doc, "params"), ck.table(doc, "sweep")
    axes, fixed, exprs, missing = _parameters(ck, params_t, sweep_t, declared)
    known = set(fixed) | set(exprs) | {a.name for a in axes}
    derived = _order_expressions(ck, exprs, known)
    drive = _drive_table(ck, doc, known, declared, missing, model)
    used = set(declared).union(*(e.names for e in exprs.values())).union(drive.names)
    for key in list(params_t) + list(sweep_t):
        if key not in used:
            table = "params" if key in params_t else "sweep"
            raise ck.unknown(table, key, sorted(declared), what="parameter")
    driven = drive.kind != "static"
    measurements, filling, gap_tol = _measure_table(ck, doc, dim, norb, custom, model, driven)
    refine = _refine(ck, ck.table(doc, "refine"), measurements, dim, axes, driven)
    predict = _predict(ck, ck.table(doc, "predict"), dim, "predict" in doc)
    if refine is not None:
        axes = tuple(_finer(a, refine.depth) for a in axes)

    output_t = ck.table(doc, "output")
    ck.only("output", output_t, ["path", "main"])
    output = output_t.get("path", f"results/{name}.h5")
    if not isinstance(output, str) or not output:
        raise ck.fail("output", "path", "a file path", output)
    main = output_t.get("main")

    clash = {a.name for a in axes} & {q.name for m, _ in measurements
                                      for q in quantities_of(m, dim, driven)}
    if clash:
        raise JobError(f"{path}: [sweep] parameter {sorted(clash)[0]!r} has the name of a "
                       "measured quantity; rename it.")

    normalised = {
        "job": {"name": name, "title": title, "description": description},
        "model": _normalised_model(model, model_t),
        "params": {k: (v if not isinstance(v, complex) else str(v))
                   for k, v in sorted(fixed.items()) if v is not None}
                  | {k: e.text for k, e in sorted(exprs.items())},
        # Labels (doc, units) describe an axis and are no part of the job's identity.
        "sweep": {k: ({kk: vv for kk, vv in v.items() if kk not in ("doc", "units")}
                      if isinstance(v, dict) else v) for k, v in sweep_t.items()},
        "drive": drive.normalised(),
        **({"predict": {"momenta": [list(k) for k in predict]}} if predict is not None else {}),
        **({"refine": {"by": refine.by, "depth": refine.depth, "gap_var": refine.gap_var}
            | ({"gap_below": refine.gap_below} if refine.gap_below is not None else {})}
           if refine is not None else {}),
        "measure": {"filling": filling if filling is not None else norb // 2, "gap_tol": gap_tol}
                   | {m: {k: _plain(v) for k, v in opts if v is not None}
                      for m, opts in measurements},
    }
    job = Job(path=path, text=text, name=name, title=title, model=model, custom=custom,
              model_params=model_params, fixed=tuple(sorted(fixed.items())), derived=derived,
              axes=axes, drive=drive, measurements=tuple(measurements), filling=filling,
              gap_tol=gap_tol, output=output, normalised=tomli_w.dumps(normalised),
              dim=dim, norb=norb, refine=refine, predict=predict, main=main)
    if main is not None:
        stored = [q.name for _, qs in job.quantities() for q in qs] + [
            r.quantity.name for r in job.consistency_rules()]
        if main not in stored:
            raise ck.fail("output", "main", "one of the quantities the job measures ("
                          + ", ".join(stored) + ")", main,
                          suggest(main, stored) if isinstance(main, str) else "")
    check_values(ck, job, declared, exprs)
    return job


def _job_table(ck: Checker, doc: dict) -> tuple[str, str, str]:
    """``[job]``: name (default the file's stem), title and description."""
    job_t = ck.table(doc, "job")
    ck.only("job", job_t, ["name", "title", "description"])
    name = job_t.get("name", Path(ck.path).stem)
    if not isinstance(name, str) or not re.fullmatch(r"[A-Za-z0-9_.-]+", name):
        raise ck.fail("job", "name", "a name of letters, digits, '_', '.' or '-'", name)
    title = job_t.get("title", name)
    if not isinstance(title, str):
        raise ck.fail("job", "title", "a string", title)
    description = job_t.get("description", "")
    if not isinstance(description, str):
        raise ck.fail("job", "description", "a string", description)
    return name, title, description


def _model_table(ck: Checker, model_t: dict) -> tuple:
    """``[model]``: a built-in model or a custom one; returns ``(name, custom model or None,
    the built-in factory's parameter names, declared parameters, dim, norb)``."""
    if "name" not in model_t:
        raise ck.fail("model", "name", "the name of a built-in model or \"custom\" "
                      f"(built-in: {', '.join(MODELS.names())})", None)
    model = model_t["name"]
    if model != "custom" and model not in MODELS:
        raise ck.fail("model", "name", f"a built-in model or \"custom\" "
                      f"(built-in: {', '.join(MODELS.names())})", model,
                      suggest(str(model), MODELS.names() + ["custom"]))
    if model == "custom":
        custom = _custom_model(ck, model_t)
        declared = {n: Param(n) for n in sorted(custom.names)}
        return model, custom, (), declared, len(custom.lattice), len(custom.positions)
    for key in model_t:
        if key != "name":
            raise ck.unknown("model", key, ["name"],
                             what="key (model parameters go in [params] or [sweep])")
    entry = MODELS[model]
    return (model, None, tuple(p.name for p in entry.params), {p.name: p for p in entry.params},
            entry.extra["dim"], entry.extra["norb"])


def _parameters(ck: Checker, params_t: dict, sweep_t: dict, declared: dict[str, Param]
                ) -> tuple:
    """``[sweep]`` axes and ``[params]`` values; returns ``(axes, fixed values, expressions,
    required parameters given nowhere)`` (defaults of the others are filled in)."""
    if not sweep_t:
        raise ck.fail("sweep", "", "a table with at least one swept parameter, e.g. "
                      "m = { start = -3.0, stop = 3.0, num = 61 }", "an empty table")
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


def _drive_table(ck: Checker, doc: dict, known: set[str], declared: dict[str, Param],
                 missing: list[Param], model: str) -> DriveSpec:
    """``[drive]``, and the required model parameters given nowhere unless the drive sets
    them at all times."""
    drive = _drive(ck, ck.table(doc, "drive"), known, set(declared))
    for p in missing:
        if p.name not in drive.always_set:
            what = f" ({p.doc})" if p.doc else ""
            raise JobError(f"{ck.path}: [params] {p.name} is required by model {model!r}{what} "
                           f"and must be {p.expectation()}; it is neither in [params] nor "
                           "in [sweep]" + (" nor set by every [[drive.step]]."
                                           if drive.protocol is not None
                                           and drive.protocol.covers_period else "."))
    return drive


def _measure_table(ck: Checker, doc: dict, dim: int, norb: int, custom: CustomModel | None,
                   model: str, driven: bool) -> tuple:
    """``[measure]``: the measurements with their options, ``filling`` and ``gap_tol``."""
    measure_t = ck.table(doc, "measure")
    settings: dict[str, Any] = {}
    measurements: list[tuple[str, tuple[tuple[str, Any], ...]]] = []
    setting_names = [p.name for p in MEASURE_SETTINGS]
    for key, value in measure_t.items():
        if isinstance(value, dict):
            measurements.append((key, _measurement(ck, key, value, dim, norb, custom, model,
                                                   driven=driven)))
        elif key in setting_names:
            param = next(p for p in MEASURE_SETTINGS if p.name == key)
            settings[key] = ck.option("measure", key, value, param)
        else:
            raise ck.unknown("measure", key, setting_names + MEASUREMENTS.names(),
                             what="setting or measurement")
    if not measurements:
        raise ck.fail("measure", "", "a table with at least one measurement such as "
                      "[measure.gap] (available: " + ", ".join(MEASUREMENTS.names()) + ")",
                      "no measurement")
    filling = settings.get("filling")
    if filling is not None and filling >= norb:
        raise ck.fail("measure", "filling", f"an integer in [1, {norb - 1}] for a model with "
                      f"{norb} bands", filling)
    return measurements, filling, float(settings.get("gap_tol", 1e-6))


def _refine(ck: Checker, t: dict, measurements: list, dim: int, axes: tuple,
            driven: bool) -> Refine | None:
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


def _predict(ck: Checker, t: dict, dim: int, given: bool) -> tuple | None:
    """Momenta (reduced, rad) at which transitions are predicted; default all of {0, pi}^dim."""
    if not given:
        return None
    ck.only("predict", t, ["momenta"])
    if "momenta" not in t:
        return tuple(tuple(float(x) for x in k)
                     for k in itertools.product((0.0, math.pi), repeat=dim))
    value = t["momenta"]
    expected = f"a list of momenta, each {dim} reduced coordinates in rad (e.g. \"pi\")"
    if not isinstance(value, list) or not value or not all(
            isinstance(k, list) and len(k) == dim for k in value):
        raise ck.fail("predict", "momenta", expected, value)
    out = []
    for k in value:
        coords = []
        for x in k:
            c = ck.constant("predict", "momenta", x)
            if isinstance(c, bool) or not isinstance(c, (int, float)):
                raise ck.fail("predict", "momenta", expected, value)
            coords.append(float(c))
        out.append(tuple(coords))
    return tuple(out)


def _finer(axis: Axis, depth: int) -> Axis:
    n = len(axis.values)
    if n == 1:
        return axis
    m = (n - 1) * 2 ** depth + 1
    lo, hi = axis.values[0], axis.values[-1]
    vals = np.geomspace(lo, hi, m) if axis.spacing == "log" else np.linspace(lo, hi, m)
    # Keep the base values bit for bit, so a refined run and a coarse run share their points.
    vals[:: 2 ** depth] = axis.values
    return replace(axis, values=tuple(float(v) for v in vals))


class _DriveReader:
    """What a drive protocol's ``parse`` hook may use to read its part of the ``[drive]`` table
    (the contract is in :mod:`sweepcli.physics.drives.base`)."""

    def __init__(self, ck: Checker, t: dict, known: set[str], model_params: set[str]) -> None:
        self.ck, self.t, self.known, self.model_params = ck, t, known, model_params
        self.only, self.number, self.fail = ck.only, ck.number, ck.fail
        self.suggest = suggest

    def expr(self, table: str, key: str, value: object) -> Expression:
        """An arithmetic expression of the job's parameters."""
        ck = self.ck
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise ck.fail(table, key, "a number or an arithmetic expression", value)
        try:
            e = parse(str(value), table, key)
        except ExpressionError as exc:
            raise ck.fail(table, key, "a number or an arithmetic expression", value,
                          " " + sentence(exc)) from None
        for n in sorted(e.names):
            if n not in self.known:
                raise ck.fail(table, key, "an expression of defined parameters", value,
                              f" {n!r} is not defined in [params] or [sweep]."
                              f"{suggest(n, self.known)}")
        return e

    def overrides(self, table: str, value: object) -> tuple:
        """A ``set = { param = expression, ... }`` table of model parameters."""
        if value is None:
            return ()
        if not isinstance(value, dict):
            raise self.ck.fail(table, "set", "a table of model parameters and values, e.g. "
                               "{ m = \"m1\" }", value)
        out = []
        for key, v in value.items():
            if key not in self.model_params:
                raise self.ck.unknown(f"{table}.set", key, sorted(self.model_params),
                                      what="model parameter")
            out.append((key, self.expr(f"{table}.set", key, v)))
        return tuple(out)

    def entries(self, key: str) -> list[dict]:
        """The ``[[drive.KEY]]`` tables (at least one)."""
        value = self.t.get(key)
        if not isinstance(value, list) or not value or not all(isinstance(v, dict) for v in value):
            raise self.ck.fail("drive", key, f"one or more tables [[drive.{key}]]", value)
        return value


def _drive(ck: Checker, t: dict, known: set[str], model_params: set[str]) -> DriveSpec:
    """The ``[drive]`` table: ``kind`` picks the registered protocol, whose hook reads the rest."""
    kind = t.get("kind", "static")
    if kind not in DRIVE_KINDS:
        raise ck.fail("drive", "kind", "one of " + ", ".join(repr(k) for k in DRIVE_KINDS),
                      kind, suggest(str(kind), DRIVE_KINDS))
    if kind == "static":
        ck.only("drive", t, ["kind"])
        return DriveSpec()
    entry = DRIVES[kind]
    ck.only("drive", t, ["kind", "period", "omega", *entry.extra["keys"]])
    reader = _DriveReader(ck, t, known, model_params)
    if ("period" in t) == ("omega" in t):
        raise ck.fail("drive", "period", "given, or omega instead (exactly one of them)",
                      None if "period" not in t else "both")
    period = reader.expr("drive", "period", t["period"]) if "period" in t else None
    omega = reader.expr("drive", "omega", t["omega"]) if "omega" in t else None
    return DriveSpec(kind, period, omega, entry.extra["parse"](t, reader), source=tuple(t.items()))


def _plain(value: Any) -> Any:
    """A TOML-writable form: complex matrices become nested lists of numbers or "a+bj" strings."""
    if isinstance(value, np.ndarray):
        return [[(float(x.real) if x.imag == 0 else repr(complex(x))) for x in row]
                for row in value]
    return value


def _normalised_model(model: str, model_t: dict) -> dict:
    if model != "custom":
        return {"name": model}
    return {k: v for k, v in model_t.items()}


def _axis(ck: Checker, key: str, value: object, param: Param | None) -> Axis:
    param = param or Param(key)
    if param is not None and not param.sweepable:
        raise JobError(f"{ck.path}: [sweep] {key} cannot be swept.")
    spec_help = ("a list of values or a table { start = A, stop = B, num = N } "
                 "(optionally spacing = \"log\")")
    if isinstance(value, list):
        if not value:
            raise ck.fail("sweep", key, spec_help, value, " The list is empty.")
        vals = tuple(ck.number("sweep", key, ck.constant("sweep", key, v), param) for v in value)
        return Axis(key, tuple(float(v) for v in vals), "list")
    if not isinstance(value, dict):
        raise ck.fail("sweep", key, spec_help, value)
    ck.only(f"sweep.{key}", value, ["start", "stop", "num", "spacing", "doc", "units"])
    for k in ("doc", "units"):
        if not isinstance(value.get(k, ""), str):
            raise ck.fail(f"sweep.{key}", k, "a string", value[k])
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


def _order_expressions(ck: Checker, exprs: dict[str, Expression], known: set[str]) -> tuple:
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


def _custom_model(ck: Checker, t: dict) -> CustomModel:
    allowed = ["name", "lattice", "orbitals", "positions", "onsite", "hopping", "operators"]
    ck.only("model", t, allowed)
    lat = t.get("lattice")
    if isinstance(lat, str):
        if lat not in LATTICES:
            raise ck.fail("model", "lattice", "one of " + ", ".join(map(repr, LATTICES)) +
                          " or a list of lattice vectors", lat, suggest(lat, LATTICES))
        vectors = LATTICES[lat]
    elif isinstance(lat, list) and lat and all(isinstance(r, list) for r in lat):
        try:
            vectors = np.array(lat, dtype=float)
        except (TypeError, ValueError):
            raise ck.fail("model", "lattice", "a list of d lattice vectors of length d",
                          lat) from None
        if vectors.ndim != 2 or vectors.shape[0] != vectors.shape[1] \
                or vectors.shape[0] not in (1, 2) \
                or abs(np.linalg.det(vectors)) < 1e-12:
            raise ck.fail("model", "lattice", "1 or 2 linearly independent vectors of matching "
                          "length", lat)
    else:
        raise ck.fail("model", "lattice", "\"chain\", \"square\", \"honeycomb\" or a list of "
                      "lattice vectors", lat)
    dim = vectors.shape[0]
    if "positions" in t:
        pos = t["positions"]
        try:
            positions = np.array(pos, dtype=float)
        except (TypeError, ValueError):
            positions = np.zeros((0,))
        if positions.ndim != 2 or positions.shape[1] != dim or len(positions) == 0:
            raise ck.fail("model", "positions", f"a list of orbital positions, each with {dim} "
                          "reduced coordinates", pos)
    elif "orbitals" in t:
        n = ck.number("model", "orbitals", t["orbitals"], Param("orbitals", kind="int", low=1))
        positions = np.zeros((n, dim))
    else:
        raise ck.fail("model", "orbitals", "the number of orbitals per cell (or give positions)",
                      None)
    n = len(positions)

    def terms(key: str) -> list[dict]:
        value = t.get(key, [])
        if not isinstance(value, list) or not all(isinstance(v, dict) for v in value):
            raise ck.fail("model", key, f"an array of tables [[model.{key}]]", value)
        return value

    onsite = []
    for i, term in enumerate(terms("onsite")):
        where = f"model.onsite.{i}"
        ck.only(where, term, ["matrix", "coeff"])
        onsite.append((ck.matrix(where, "matrix", term.get("matrix"), n),
                       _coeff(ck, where, term.get("coeff", 1))))
    hoppings = []
    for i, term in enumerate(terms("hopping")):
        where = f"model.hopping.{i}"
        ck.only(where, term, ["d", "matrix", "coeff"])
        d = term.get("d")
        if not (isinstance(d, list) and len(d) == dim and all(
                isinstance(x, int) and not isinstance(x, bool) for x in d)) or not any(d):
            raise ck.fail(where, "d", f"a nonzero integer displacement of length {dim}", d)
        hoppings.append((tuple(d), ck.matrix(where, "matrix", term.get("matrix"), n),
                         _coeff(ck, where, term.get("coeff", 1))))
    if not onsite and not hoppings:
        raise ck.fail("model", "hopping", "at least one [[model.onsite]] or [[model.hopping]] term",
                      None)
    ops_t = t.get("operators", {})
    if not isinstance(ops_t, dict):
        raise ck.fail("model", "operators", "a table of named matrices", ops_t)
    operators = tuple((k, ck.matrix("model.operators", k, v, n)) for k, v in ops_t.items())
    return CustomModel(tuple(map(tuple, vectors)), tuple(map(tuple, positions)), tuple(onsite),
                       tuple(hoppings), operators)


def _coeff(ck: Checker, where: str, value: object) -> Expression:
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise ck.fail(where, "coeff", "a number or an arithmetic expression", value)
    try:
        return parse(str(value), where, "coeff")
    except ExpressionError as exc:
        raise ck.fail(where, "coeff", "a number or an arithmetic expression", value,
                      " " + sentence(exc)) from None


def _measurement(ck: Checker, name: str, options: dict, dim: int, norb: int,
                 custom: CustomModel | None, model: str, driven: bool) -> tuple:
    if name not in MEASUREMENTS:
        raise ck.unknown("measure", name, MEASUREMENTS.names(), what="measurement")
    entry = MEASUREMENTS[name]
    table = f"measure.{name}"
    dims = entry.extra.get("dims", (1, 2))
    if dim not in dims:
        raise JobError(f"{ck.path}: [{table}] applies to {' or '.join(f'{d}D' for d in dims)} "
                       f"lattices; model {model!r} is {dim}D.")
    wants_drive = entry.extra.get("driven")
    if wants_drive is not None and wants_drive != driven:
        need = "a periodic drive ([drive] kind other than \"static\")" if wants_drive else \
            "a static job ([drive] kind = \"static\")"
        raise JobError(f"{ck.path}: [{table}] needs {need}.")
    have = {k for k, _ in custom.operators} if custom else set(_builtin_operators(model))
    for op in entry.extra.get("operators", ()):
        if op not in have:
            raise JobError(f"{ck.path}: [{table}] needs a model with a {op!r} operator; model "
                           f"{model!r} has " + (", ".join(sorted(have)) or "none") +
                           (" (declare it under [model.operators])." if custom else "."))
    out = []
    for key, value in options.items():
        param = entry.param(key)
        if param is None:
            raise ck.unknown(table, key, [p.name for p in entry.params], what="option")
        if param.kind == "matrix" and isinstance(value, str) and value in have:
            out.append((key, value))  # a cell operator of the model, looked up at each point
        elif param.kind == "matrix":
            out.append((key, ck.matrix(table, key, value, norb)))
        else:
            out.append((key, ck.option(table, key, value, param)))
    given = {k for k, _ in out}
    for p in entry.params:
        if p.name not in given:
            if p.required:
                raise ck.fail(table, p.name, p.expectation(), None)
            out.append((p.name, p.default))
    return tuple(out)


def _builtin_operators(model: str) -> tuple[str, ...]:
    entry = MODELS[model]
    if "operators" in entry.extra:
        return tuple(entry.extra["operators"])
    sample = {p.name: (p.default if not p.required else _sample_value(p)) for p in entry.params}
    return tuple(entry.func(**sample).operators)


def _sample_value(p: Param) -> float:
    lo = p.low if p.low is not None else None
    hi = p.high if p.high is not None else None
    if lo is not None and hi is not None:
        return (lo + hi) / 2
    if lo is not None:
        return lo + 1
    if hi is not None:
        return hi - 1
    return 0.5
