"""Merging the shard files of one job into one results file."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ResultsError
from .results import Results

SHARD_ATTRS = ("shard",)
#: The table of a merged file that keeps the provenance of every shard, one row each.
SHARDS_TABLE = "shards"
#: Its columns: root attributes of each shard file (results-schema.md, "Merged files").
SHARD_PROVENANCE = ("shard", "host", "command_line", "started", "finished", "sweepcli_version",
                    "python_version", "numpy_version", "scipy_version", "h5py_version",
                    "hdf5_version")


@dataclass
class MergeReport:
    files: int
    done: int
    total: int
    # parameter values of the first missing points
    missing: list[dict] = field(default_factory=list)
    n_missing: int = 0

    @property
    def complete(self) -> bool:
        return self.n_missing == 0


def _same_grid(a: Results, b: Results) -> bool:
    return [x.name for x in a.axes] == [x.name for x in b.axes] and all(
        np.array_equal(x.values, y.values) for x, y in zip(a.axes, b.axes))


def merge_results(paths: list[str | Path], max_listed: int = 10) -> tuple[Results, MergeReport]:
    """Combine shard files of one job.

    Refuses (``ResultsError``) a file given twice, two files of the same shard, files of
    different jobs (hash), grids, schema versions or
    variables, and points evaluated in two files with different values. Missing points are
    reported, not refused; the caller decides.
    """
    if not paths:
        raise ResultsError("merge needs at least one shard file.")
    seen: dict[Path, Path] = {}
    for p in map(Path, paths):
        key = p.resolve()
        if key in seen:
            raise ResultsError(f"{p}: is given twice (as {seen[key]} and {p}); refusing to merge "
                               "a shard with itself.")
        seen[key] = p
    shards = [(Path(p), Results.read(p)) for p in paths]
    labels: dict[str, Path] = {}
    for path, r in shards:
        label = r.attrs.get("shard", "")
        if label and label in labels:
            raise ResultsError(f"{path}: holds shard {label}, as does {labels[label]} (a copy?); "
                               "refusing to merge one shard twice.")
        labels[label] = path
    first_path, first = shards[0]
    out = Results(first.axes, list(first.variables.values()),
                  {k: v for k, v in first.attrs.items() if k not in SHARD_ATTRS})
    for path, r in shards:
        for key, what in (("job_sha256", "job"), ("schema_version", "schema version")):
            if r.attrs.get(key) != first.attrs.get(key):
                raise ResultsError(f"{path}: belongs to a different {what} than {first_path} "
                                   f"({key} {r.attrs.get(key, '?')[:16]} vs "
                                   f"{first.attrs.get(key, '?')[:16]}); refusing to merge.")
        if not _same_grid(r, first):
            raise ResultsError(
                f"{path}: has a different grid than {first_path}; refusing to merge.")
        if list(r.variables) != list(first.variables):
            raise ResultsError(f"{path}: holds different variables than {first_path}; refusing "
                               "to merge.")
        mask = r.done.astype(bool)
        both = mask & out.done.astype(bool)
        if both.any():
            for name in out.variables:
                a, b = out.data[name][both], r.data[name][both]
                same = np.isclose(a, b, rtol=0, atol=0, equal_nan=True) if a.dtype.kind == "f" \
                    else a == b
                if not same.all():
                    where = np.argwhere(both)[np.flatnonzero(~same)[0]]
                    params = ", ".join(f"{ax.name}={ax.values[i]:g}"
                                       for ax, i in zip(out.axes, where))
                    raise ResultsError(f"{path}: point {params} was also computed in another shard "
                                       f"with a different {name}; refusing to merge conflicting "
                                       "values.")
        for name in out.variables:
            out.data[name][mask] = r.data[name][mask]
        out.failure[mask] = r.failure[mask]
        out.done[mask] = 1
    starts = [r.attrs.get("started", "") for _, r in shards]
    ends = [r.attrs.get("finished", "") for _, r in shards]
    out.attrs["started"] = min(starts)
    out.attrs["finished"] = max(ends) if all(ends) else ""
    out.attrs["command_line"] = " ; ".join(dict.fromkeys(r.attrs.get("command_line", "")
                                                         for _, r in shards))
    out.tables[SHARDS_TABLE] = shard_provenance([r for _, r in shards])
    missing_idx = np.flatnonzero(out.done.ravel() == 0)
    listed = []
    for flat in missing_idx[:max_listed]:
        multi = np.unravel_index(flat, out.shape)
        listed.append({a.name: float(a.values[i]) for a, i in zip(out.axes, multi)})
    report = MergeReport(len(shards), out.n_done, out.size, listed, len(missing_idx))
    return out, report


def shard_provenance(shards: list[Results]) -> dict[str, np.ndarray]:
    """The ``shards`` table of a merged file: one row per shard with its own provenance
    (:data:`SHARD_PROVENANCE`), rows of an input that is itself a merged file carried over."""
    rows: list[dict[str, str]] = []
    for r in shards:
        table = r.tables.get(SHARDS_TABLE)
        if table is not None:
            n = len(next(iter(table.values()), []))
            rows += [{c: str(table[c][i]) if c in table else "" for c in SHARD_PROVENANCE}
                     for i in range(n)]
        else:
            rows.append({c: r.attrs.get(c, "") for c in SHARD_PROVENANCE})
    return {c: np.array([row[c] for row in rows], dtype=object) for c in SHARD_PROVENANCE}
