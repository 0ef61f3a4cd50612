"""``sweepcli diff``: compare two results files, their provenance and their values.

Two strengths: by default only the values count (the grids, the set of variables and every
value on the grid points both files hold); ``provenance=True`` also counts a different job
(its normalised keys), different library versions and other provenance attributes. Times, host,
command line and the path the job was read from never count: two runs of one job differ in them.

Grids are matched axis by axis on coordinate values within a tolerance, so a file whose grid
is a subset, an extension or a refinement of the other is compared on the common points.
Axis order may differ between the files (``[sweep]`` tables in another order).
"""

from __future__ import annotations

import json
import math
import tomllib
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import ResultsError
from ..schema import Reason
from ..store import FILL_INT, Results
from .terminal import Axis, fmt, render_grid

# Never compared: they differ between two runs of one job.
IGNORED_ATTRS = frozenset({"started", "finished", "host", "command_line", "job_path"})
# Compared through the parsed job (``job_normalised``) instead of as text.
JOB_ATTRS = frozenset({"job_text", "job_normalised", "job_sha256", "title", "job_name"})
PICTURE_GLYPHS = ("·", "▒", "█")  # equal, missing in one file only, values differ
PICTURE_COLOURS = ("90", "33", "31")


@dataclass(frozen=True)
class Change:
    """One provenance or job key that differs; ``None`` means absent from that file."""

    key: str
    old: Any
    new: Any


@dataclass
class ProvenanceDiff:
    sha_a: str
    sha_b: str
    job: list[Change]  # dotted keys of the normalised job, e.g. ``measure.chern.kmesh``
    versions: list[Change]  # ``*_version`` attributes
    attrs: list[Change]  # other provenance attributes (e.g. ``shard``)
    job_text_differs: bool  # the verbatim job text (comments, layout); informational only

    @property
    def same_job(self) -> bool:
        return self.sha_a == self.sha_b and not self.job

    @property
    def differs(self) -> bool:
        return not self.same_job or bool(self.versions or self.attrs)


@dataclass
class AxisMatch:
    """How one swept parameter's values in A and B correspond.

    ``relation``: ``same``, ``a_in_b`` (every A value is in B), ``b_in_a``, ``overlap`` or
    ``disjoint``; ``detail`` says it in words (``B refines A``, ``B extends A``, ...).
    ``index_a[i]`` and ``index_b[i]`` are the positions of the i-th common value.
    """

    name: str
    n_a: int
    n_b: int
    relation: str
    detail: str
    index_a: np.ndarray = field(repr=False)
    index_b: np.ndarray = field(repr=False)
    values: np.ndarray = field(repr=False)  # the common values (A's coordinates)

    @property
    def n_common(self) -> int:
        return len(self.index_a)


@dataclass
class GridMatch:
    axes_a: list[str]
    axes_b: list[str]
    axes: list[AxisMatch]  # in A's axis order; empty if the swept parameters differ
    problem: str = ""  # why the grids cannot be compared at all ("" if they can)

    @property
    def comparable(self) -> bool:
        return not self.problem and all(m.n_common for m in self.axes)

    @property
    def same(self) -> bool:
        return self.comparable and all(m.relation == "same" for m in self.axes)

    @property
    def n_common(self) -> int:
        return int(np.prod([m.n_common for m in self.axes])) if self.comparable else 0

    def describe(self) -> str:
        if self.problem:
            return self.problem
        if self.same:
            sizes = ", ".join(f"{m.name}: {m.n_a}" for m in self.axes)
            return f"same axes and values ({sizes}; {self.n_common} points)"
        return "; ".join(f"{m.name}: {m.detail}" for m in self.axes)


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


# ---------------------------------------------------------------- provenance
def _flatten(table: dict, prefix: str = "") -> dict[str, Any]:
    """Dotted keys of a TOML document; empty tables vanish so that adding a key to one reads
    as one change, not two."""
    out: dict[str, Any] = {}
    for k, v in table.items():
        key = f"{prefix}.{k}" if prefix else str(k)
        if isinstance(v, dict):
            out.update(_flatten(v, key))
        else:
            out[key] = v
    return out


def _job_table(results: Results, label: str) -> dict:
    text = results.attrs.get("job_normalised", "")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ResultsError(
            f"{label}: its job_normalised attribute is not valid TOML ({exc}).") from None


def _changes(a: dict[str, Any], b: dict[str, Any]) -> list[Change]:
    keys = list(a) + [k for k in b if k not in a]
    return [Change(k, a.get(k), b.get(k)) for k in keys if a.get(k) != b.get(k)]


def compare_provenance(a: Results, b: Results,
                       labels: tuple[str, str] = ("A", "B")) -> ProvenanceDiff:
    """Job keys (parsed ``job_normalised``), versions and other attributes that differ."""
    job = _changes(_flatten(_job_table(a, labels[0])), _flatten(_job_table(b, labels[1])))
    skip = IGNORED_ATTRS | JOB_ATTRS

    def pick(r: Results, versions: bool) -> dict[str, Any]:
        return {k: v for k, v in r.attrs.items()
                if k not in skip and k.endswith("_version") == versions}

    return ProvenanceDiff(
        sha_a=a.attrs.get("job_sha256", ""), sha_b=b.attrs.get("job_sha256", ""), job=job,
        versions=_changes(pick(a, True), pick(b, True)),
        attrs=_changes(pick(a, False), pick(b, False)),
        job_text_differs=a.attrs.get("job_text") != b.attrs.get("job_text"))


# ---------------------------------------------------------------- grids
def match_axis(name: str, va: np.ndarray, vb: np.ndarray, coord_tol: float = 1e-9) -> AxisMatch:
    """Pair the values of one axis in A and B.

    Two coordinates match when ``|a - b| <= coord_tol * (max(|a|, |b|) + span)``, ``span``
    the larger axis range (1 for single-valued axes): grids built by different ``num`` differ by
    rounding only, a relative test alone would fail at coordinate 0.
    """
    va, vb = np.asarray(va, float), np.asarray(vb, float)
    span = max(np.ptp(va) if va.size else 0.0, np.ptp(vb) if vb.size else 0.0) or 1.0
    order = np.argsort(vb, kind="stable")
    sb = vb[order]
    ia, ib, used = [], [], set()
    for i, x in enumerate(va):
        p = int(np.searchsorted(sb, x))
        cand = [q for q in (p - 1, p) if 0 <= q < len(sb)]
        if not cand:
            continue
        q = min(cand, key=lambda q: abs(sb[q] - x))
        j = int(order[q])
        if j not in used and abs(sb[q] - x) <= coord_tol * (max(abs(x), abs(sb[q])) + span):
            ia.append(i)
            ib.append(j)
            used.add(j)
    ia_arr, ib_arr = np.array(ia, dtype=np.intp), np.array(ib, dtype=np.intp)
    n, na, nb = len(ia), len(va), len(vb)

    def extra_words(big: str, small: str, big_vals: np.ndarray, extra: np.ndarray,
                    small_vals: np.ndarray) -> str:
        lo, hi = small_vals.min(), small_vals.max()
        inside = (extra > lo) & (extra < hi)
        what = ("refines" if inside.all() else "extends" if not inside.any()
                else "refines and extends")
        return f"{big} {what} {small} ({n} of {len(big_vals)} points in common)"

    if n == na == nb:
        relation, detail = "same", f"same ({n} points)"
    elif n == na:
        relation = "a_in_b"
        detail = extra_words("B", "A", vb, np.delete(vb, ib_arr), va)
    elif n == nb:
        relation = "b_in_a"
        detail = extra_words("A", "B", va, np.delete(va, ia_arr), vb)
    elif n:
        relation, detail = "overlap", f"overlap ({n} common of {na} in A and {nb} in B)"
    else:
        relation, detail = "disjoint", f"no common value ({na} in A, {nb} in B)"
    return AxisMatch(name, na, nb, relation, detail, ia_arr, ib_arr, va[ia_arr])


def match_grids(a: Results, b: Results, coord_tol: float = 1e-9) -> GridMatch:
    """Match the grids axis by axis (by name; the order of the axes may differ)."""
    na, nb = [x.name for x in a.axes], [x.name for x in b.axes]
    if sorted(na) != sorted(nb):
        return GridMatch(na, nb, [], f"different swept parameters (A: {', '.join(na) or 'none'}; "
                                     f"B: {', '.join(nb) or 'none'})")
    axes = [match_axis(x.name, x.values, b.axis(x.name).values, coord_tol) for x in a.axes]
    return GridMatch(na, nb, axes)


# ---------------------------------------------------------------- values
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
    for side, r, v in (("a", a, va), ("b", b, vb)):
        rname = f"{v.measurement}_reason"
        if rname in r.variables and rname != name:
            reasons[side] = _common(r, grid, rname, side)
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
    coord_tol : relative tolerance for matching coordinate values (see :func:`match_axis`).
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
    common = [n for n in a.variables if n in b.variables]
    if grid.comparable:
        variables = [compare_variable(a, b, grid, n, rtol, atol, top) for n in common]
    return ResultsDiff(
        a=labels[0], b=labels[1], strength="provenance" if provenance else "values",
        common_only=common_only, rtol=rtol, atol=atol,
        provenance=compare_provenance(a, b, labels), grid=grid, variables=variables,
        only_a=[n for n in a.variables if n not in b.variables],
        only_b=[n for n in b.variables if n not in a.variables])


# ---------------------------------------------------------------- output
def difference_picture(d: ResultsDiff, v: VariableDiff, width: int = 80,
                       colour: bool = False) -> list[str]:
    """Block-character picture of where ``v`` differs on a 1D or 2D common grid (else [])."""
    keep = [i for i, m in enumerate(d.grid.axes) if m.n_common > 1]
    if len(keep) not in (1, 2) or not v.n_differ:
        return []
    codes = v.changed.reshape([d.grid.axes[i].n_common for i in keep]).astype(np.int64)
    axes = [Axis(d.grid.axes[i].name, d.grid.axes[i].values) for i in keep]
    colours = PICTURE_COLOURS if colour else None
    if len(keep) == 1:
        lines, note = render_grid(codes.reshape(-1, 1), PICTURE_GLYPHS, axes[0], None, width,
                                  height=1, reduce="max", colours=colours, row_label=v.name)
    else:
        lines, note = render_grid(codes, PICTURE_GLYPHS, axes[0], axes[1], width, height=24,
                                  reduce="max", colours=colours)
    legend = (f"{PICTURE_GLYPHS[2]} values differ   {PICTURE_GLYPHS[1]} missing in one file   "
              f"{PICTURE_GLYPHS[0]} equal")
    return lines + ([note] if note else []) + [legend]


def _shown(value: Any) -> str:
    if value is None:
        return "(absent)"
    return json.dumps(value, default=str)


def _value(x: Any, note: str) -> str:
    if x is None:
        return f"missing ({note})" if note else "missing"
    if isinstance(x, float):
        return f"{x:.10g}"
    return str(x)


def format_diff(d: ResultsDiff, width: int = 80, colour: bool = False,
                maps: bool = False) -> str:
    """The report the CLI prints: what differs, at how many points, the largest differences
    and where; with ``maps`` also a character picture per differing variable of where."""
    p = d.provenance
    lines = [f"A: {d.a}", f"B: {d.b}", ""]
    if p.same_job:
        lines.append(f"job: same (sha256 {p.sha_a[:12]})"
                     + ("; the job texts differ in comments or layout only" if p.job_text_differs
                        else ""))
    else:
        lines.append(f"job: different (sha256 {p.sha_a[:12] or '?'} vs {p.sha_b[:12] or '?'}); "
                     f"{len(p.job)} key(s) differ (A -> B):")
        lines += [f"  {c.key}: {_shown(c.old)} -> {_shown(c.new)}" for c in p.job]
    if p.versions:
        lines.append("versions differ (A -> B):")
        lines += [f"  {c.key}: {_shown(c.old)} -> {_shown(c.new)}" for c in p.versions]
    else:
        lines.append("versions: same")
    if p.attrs:
        lines.append("other provenance differs (A -> B):")
        lines += [f"  {c.key}: {_shown(c.old)} -> {_shown(c.new)}" for c in p.attrs]
    lines.append("")
    g = d.grid
    lines.append(f"grid: {g.describe()}")
    if g.comparable and not g.same:
        lines.append(f"  compared on the {g.n_common} common points")
    if d.variables:
        lines.append("")
        lines.append(f"variables ({g.n_common} common points; floats equal within rtol {d.rtol:g}, "
                     f"atol {d.atol:g}):")
        w = max(len(v.name) for v in d.variables)
        for v in d.variables:
            if not v.n_differ:
                lines.append(f"  {v.name:<{w}}  equal")
                continue
            extra = []
            if v.n_missing_one:
                extra.append(f"{v.n_missing_one} missing in one file")
            if v.max_deviation is not None:
                extra.append(f"largest |B - A| {v.max_deviation:.4g}")
            lines.append(f"  {v.name:<{w}}  {v.n_differ} of {v.compared} points differ "
                         f"({100 * v.fraction:.1f}%)" + (f"; {'; '.join(extra)}" if extra else ""))
            for dev in v.worst:
                where = ", ".join(f"{k}={fmt(x)}" for k, x in dev.params.items())
                size = f" (|B - A| = {dev.deviation:.4g})" if dev.deviation is not None else ""
                lines.append(f"      {where}: A {_value(dev.a, dev.a_note)}, "
                             f"B {_value(dev.b, dev.b_note)}{size}")
            if v.n_differ > len(v.worst):
                lines.append(f"      ... and {v.n_differ - len(v.worst)} more")
            pic = difference_picture(d, v, width - 6, colour) if maps else []
            if pic:
                lines.append("")
                lines += ["      " + s for s in pic]
                lines.append("")
            elif maps and sum(m.n_common > 1 for m in g.axes) > 2:
                lines.append("      (a picture is drawn for 1D and 2D grids only)")
    for label, names in ((d.a, d.only_a), (d.b, d.only_b)):
        if names:
            lines.append(f"  only in {label}: {', '.join(names)}")
    lines.append("")
    strength = "values and provenance" if d.strength == "provenance" else "values"
    if d.agree:
        lines.append(f"result: the files agree ({strength}"
                     + (", common points only" if d.common_only else "") + ")")
    else:
        lines.append(f"result: the files differ ({strength}): " + "; ".join(d.reasons))
    return "\n".join(lines)


def _json_value(x: Any) -> Any:
    if isinstance(x, float) and not math.isfinite(x):
        return None if math.isnan(x) else ("inf" if x > 0 else "-inf")
    if isinstance(x, (np.integer,)):
        return int(x)
    if isinstance(x, (np.floating,)):
        return _json_value(float(x))
    if isinstance(x, dict):
        return {str(k): _json_value(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_json_value(v) for v in x]
    if isinstance(x, (str, int, float, bool)) or x is None:
        return x
    return str(x)  # TOML dates and times


def diff_as_dict(d: ResultsDiff) -> dict[str, Any]:
    """A JSON-ready dictionary of the comparison (no grid-shaped arrays)."""
    p, g = d.provenance, d.grid

    def changes(cs: list[Change]) -> list[dict]:
        return [{"key": c.key, "old": _json_value(c.old), "new": _json_value(c.new)} for c in cs]

    return {
        "a": d.a, "b": d.b, "agree": d.agree, "strength": d.strength,
        "common_only": d.common_only, "rtol": d.rtol, "atol": d.atol, "reasons": d.reasons,
        "provenance": {"same_job": p.same_job, "sha256_a": p.sha_a, "sha256_b": p.sha_b,
                       "job": changes(p.job), "versions": changes(p.versions),
                       "attrs": changes(p.attrs), "job_text_differs": p.job_text_differs},
        "grid": {"axes_a": g.axes_a, "axes_b": g.axes_b, "problem": g.problem,
                 "comparable": g.comparable, "same": g.same, "common_points": g.n_common,
                 "axes": [{"name": m.name, "n_a": m.n_a, "n_b": m.n_b, "n_common": m.n_common,
                           "relation": m.relation, "detail": m.detail} for m in g.axes]},
        "variables": [{
            "name": v.name, "dtype": v.dtype, "compared": v.compared, "differ": v.n_differ,
            "fraction": v.fraction, "missing_in_one": v.n_missing_one,
            "max_deviation": _json_value(v.max_deviation),
            "worst": [{"params": _json_value(w.params), "a": _json_value(w.a),
                       "b": _json_value(w.b), "deviation": _json_value(w.deviation),
                       "a_note": w.a_note, "b_note": w.b_note} for w in v.worst],
        } for v in d.variables],
        "only_a": d.only_a, "only_b": d.only_b,
    }
