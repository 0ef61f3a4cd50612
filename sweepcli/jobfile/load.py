"""Reading a job file and assembling the :class:`~sweepcli.jobfile.spec.Job`: one pass over
every table, each bad value a :class:`~sweepcli.errors.JobError` naming the file, the table and
key. The small tables ``[job]``, ``[predict]`` and ``[output]`` are read here; the others in
:mod:`.model_table`, :mod:`.sweep_tables`, :mod:`.drive_table`, :mod:`.measure_table` and
:mod:`.confirm_table`."""

from __future__ import annotations

import itertools
import math
import os
import re
import tomllib
from pathlib import Path
from typing import Any

import numpy as np
import tomli_w

from ..errors import JobError, suggest
from ..physics.measurements import quantities_of
from .checker import Checker
from .checks import check_values
from .confirm_table import read_confirm
from .drive_table import read_drive
from .measure_table import read_measure
from .model_table import normalised_model, read_model
from .spec import Job
from .sweep_tables import MAX_POINTS, finer_axis, order_expressions, read_parameters, read_refine

TABLES = ("job", "model", "params", "sweep", "refine", "drive", "measure", "confirm", "predict",
          "output")
HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"  # the first 8 bytes of an HDF5 file (no user block)
MAX_NESTING = 32  # arrays and tables nested deeper than this are refused (no job needs 4)


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
        doc = tomllib.loads(text)
    except RecursionError:
        raise JobError(_too_deep_in_text(path, text)) from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        if m:
            msg = msg[: m.start()].strip()
            raise JobError(f"{path}:{m.group(1)}:{m.group(2)}: invalid TOML: {msg}.") from None
        raise JobError(f"{path}: invalid TOML: {msg}.") from None
    return text, doc


def _too_deep_in_text(path: Path, text: str) -> str:
    """The message for a document too deeply nested for the TOML parser itself: the line and
    column of the first run of more than ``MAX_NESTING`` opening brackets."""
    m = re.search(r"(?:[\[{][ \t\r\n]*){" + str(MAX_NESTING + 1) + ",}", text)
    where = ""
    if m:
        line = text.count("\n", 0, m.start()) + 1
        col = m.start() - (text.rfind("\n", 0, m.start()) + 1) + 1
        where = f":{line}:{col}"
    return (f"{path}{where}: invalid TOML: arrays or tables must be nested at most {MAX_NESTING} "
            "levels deep; these are nested deeper.")


def _where(path: tuple) -> str:
    """``[table.sub] key`` for a path of keys and list indices in the document."""
    parts = [str(p) for p in path]
    if len(parts) == 1:
        return f"[{parts[0]}]"
    return f"[{'.'.join(parts[:-1])}] {parts[-1]}"


def check_document(path: str, doc: dict) -> None:
    """Refuse nesting deeper than ``MAX_NESTING`` and NUL characters in any key or string
    (HDF5 attributes end at a NUL, so such a job could never be written); the walk uses no
    recursion, so any depth the TOML parser accepted is safe here."""
    stack: list[tuple[tuple, object]] = [((), doc)]
    while stack:
        where, value = stack.pop()
        if len(where) > MAX_NESTING:
            raise JobError(f"{path}: {_where(where[:2])} must be nested at most "
                           f"{MAX_NESTING} levels deep; got deeper arrays or tables.")
        if isinstance(value, str):
            if "\x00" in value:
                raise JobError(f"{path}: {_where(where)} must be a string without NUL "
                               "characters; got one with a NUL (\\u0000) character.")
        elif isinstance(value, dict):
            for k, v in value.items():
                if "\x00" in k:
                    raise JobError(f"{path}: {_where(where + (k,))} must be a key without NUL "
                                   f"characters; got {k!r}.")
                stack.append((where + (k,), v))
        elif isinstance(value, list):
            stack.extend((where + (i,), v) for i, v in enumerate(value))


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
    check_document(path, doc)
    for key in doc:
        if key not in TABLES:
            raise JobError(f"{path}: unknown table [{key}] (allowed: {', '.join(TABLES)})."
                           f"{suggest(key, TABLES)}")
    name, title, description = _job_table(ck, doc)
    model_t = ck.table(doc, "model")
    model, custom, model_params, declared, dim, norb = read_model(ck, model_t)
    params_t, sweep_t = ck.table(doc, "params"), ck.table(doc, "sweep")
    axes, fixed, exprs, missing = read_parameters(ck, params_t, sweep_t, declared)
    known = set(fixed) | set(exprs) | {a.name for a in axes}
    derived = order_expressions(ck, exprs, known)
    drive = read_drive(ck, doc, known, declared, missing, model)
    used = set(declared).union(*(e.names for e in exprs.values())).union(drive.names)
    for key in list(params_t) + list(sweep_t):
        if key not in used:
            table = "params" if key in params_t else "sweep"
            raise ck.unknown(table, key, sorted(declared), what="parameter")
    driven = drive.kind != "static"
    measurements, filling, gap_tol = read_measure(ck, doc, dim, norb, custom, model, driven)
    refine = read_refine(ck, ck.table(doc, "refine"), measurements, dim, axes, driven)
    confirm = read_confirm(ck, doc, measurements, dim, driven)
    if confirm is not None and refine is not None:
        raise JobError(f"{path}: [confirm] and [refine] exclude each other: the selection needs "
                       "the bulk map on every point, which a refined sweep does not compute.")
    predict = _predict(ck, ck.table(doc, "predict"), dim, "predict" in doc)
    if refine is not None:
        _check_grid_size(ck, axes, refine.depth)
        axes = tuple(finer_axis(a, refine.depth) for a in axes)

    output_t = ck.table(doc, "output")
    ck.only("output", output_t, ["path", "main"])
    output = output_t.get("path", f"results/{name}.h5")
    if not isinstance(output, str) or not output:
        raise ck.fail("output", "path", "a file path", output)
    problem = output_path_problem(output, filesystem=False)  # the run checks the rest
    if problem:
        raise ck.fail("output", "path", "a file path that can be created", output, f" {problem}")
    main = output_t.get("main")

    clash = {a.name for a in axes} & {q.name for m, _ in measurements
                                      for q in quantities_of(m, dim, driven)}
    if clash:
        raise JobError(f"{path}: [sweep] parameter {sorted(clash)[0]!r} has the name of a "
                       "measured quantity; rename it.")

    # [confirm] is left out: which cells get the boundary measurements is no part of the job's
    # identity, so a run resumes (and adds cells) when the selection changes.
    normalised = {
        "job": {"name": name, "title": title, "description": description},
        "model": normalised_model(model, model_t),
        "params": {k: (v if not isinstance(v, complex) else str(v))
                   for k, v in sorted(fixed.items()) if v is not None}
                  | {k: e.text for k, e in sorted(exprs.items())},
        # Labels (doc, units) describe an axis and are no part of the job's identity; a
        # { values = [...] } table is the plain list.
        "sweep": {k: _unlabelled(v) for k, v in sweep_t.items()},
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
              dim=dim, norb=norb, refine=refine, predict=predict, main=main, confirm=confirm)
    if main is not None:
        stored = [q.name for _, qs in job.quantities() for q in qs] + [
            r.quantity.name for r in job.consistency_rules()]
        if main not in stored:
            raise ck.fail("output", "main", "one of the quantities the job measures ("
                          + ", ".join(stored) + ")", main,
                          suggest(main, stored) if isinstance(main, str) else "")
    check_values(ck, job, declared, exprs)
    return job


NAME_MAX = 255  # bytes of one file name on the usual file systems (ext4, xfs, btrfs, apfs)
PATH_MAX = 4096


def output_path_problem(path: str | Path, filesystem: bool = True) -> str:
    """Why ``path`` cannot be a results file (a sentence), or ``""``: a NUL character, a name
    longer than ``NAME_MAX`` bytes, a path longer than ``PATH_MAX``; with ``filesystem`` also an
    existing directory or a parent that is a file. Nothing is created."""
    text = str(path)
    if "\x00" in text:
        return "It contains a NUL character."
    raw = os.fsencode(text)
    if len(raw) >= PATH_MAX:
        return f"It has {len(raw):,} bytes; a path may have at most {PATH_MAX - 1}."
    parts = Path(text).parts
    for i, part in enumerate(parts):
        n = len(os.fsencode(part))
        # The run writes OUT.tmp and OUT.lock beside the file: its own name needs 5 bytes less.
        most = NAME_MAX - len(".lock") if i == len(parts) - 1 else NAME_MAX
        if n > most:
            return (f"Its name {part[:20]!r}... has {n} bytes; a file name may have at most "
                    f"{most}" + (" (the run adds '.lock' to it)." if most < NAME_MAX else "."))
    p = Path(text)
    if not filesystem:
        return ""
    if p.is_dir():
        return "It is a directory."
    for parent in p.parents:
        if parent.exists():
            if not parent.is_dir():
                return f"{str(parent)!r} is a file, not a directory."
            break
    return ""


def _check_grid_size(ck: Checker, axes: tuple, depth: int) -> None:
    """Refuse a refined grid of more than ``MAX_POINTS`` points before building its axes."""
    sizes = [(len(a.values) - 1) * 2 ** depth + 1 for a in axes]
    if math.prod(sizes) > MAX_POINTS:
        raise ck.fail("refine", "depth", f"such that the refined grid has at most {MAX_POINTS:,} "
                      "points", depth, f" It would have {' x '.join(map(str, sizes))} = "
                      f"{math.prod(sizes):,} points.")


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


def _unlabelled(value: Any) -> Any:
    """A ``[sweep]`` entry without its labels (``doc``, ``units``)."""
    if not isinstance(value, dict):
        return value
    if "values" in value:
        return value["values"]
    return {k: v for k, v in value.items() if k not in ("doc", "units")}


def _plain(value: Any) -> Any:
    """A TOML-writable form: complex matrices become nested lists of numbers or "a+bj" strings."""
    if isinstance(value, np.ndarray):
        return [[(float(x.real) if x.imag == 0 else repr(complex(x))) for x in row]
                for row in value]
    return value
