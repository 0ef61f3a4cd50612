"""Matching two results files for ``sweepcli diff``: their provenance and their grids.

Provenance: the parsed jobs (``job_normalised``) key by key, the library versions and the other
provenance attributes; times, host, command line and the path the job was read from never
count, two runs of one job differ in them.

Grids are matched axis by axis on coordinate values within a tolerance, so a file whose grid
is a subset, an extension or a refinement of the other is compared on the common points.
Axis order may differ between the files (``[sweep]`` tables in another order).
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import ResultsError
from ..store import Results

# Never compared: they differ between two runs of one job.
IGNORED_ATTRS = frozenset({"started", "finished", "host", "command_line", "job_path"})
# Compared through the parsed job (``job_normalised``) instead of as text.
JOB_ATTRS = frozenset({"job_text", "job_normalised", "job_sha256", "title", "job_name"})


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
