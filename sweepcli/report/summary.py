"""``sweepcli show``: provenance and a per-variable summary of a results file."""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from ..schema import POINT_SECONDS, Reason
from ..store import FILL_INT, Results

PROVENANCE_KEYS = ("title", "job_name", "job_path", "job_sha256", "shard", "refine_by",
                   "refine_stride", "schema_version",
                   "sweepcli_version", "numpy_version", "scipy_version", "h5py_version",
                   "host", "command_line", "started", "finished")
ATTRIBUTE_CHARS = 300  # longer attributes are cut in show and in map titles


def clipped(text: str, limit: int = ATTRIBUTE_CHARS) -> str:
    """``text`` cut to ``limit`` characters, saying so and how long it was."""
    text = str(text)
    if len(text) <= limit:
        return text
    return f"{text[:limit]}... [truncated: {len(text):,} characters in all]"


@dataclass
class VariableSummary:
    name: str
    dtype: str
    units: str
    long_name: str
    present: int
    missing: int
    counts: dict = field(default_factory=dict)  # integer variables: value -> count
    minimum: float | None = None
    maximum: float | None = None


@dataclass
class Summary:
    provenance: dict
    axes: list[tuple[str, int, float, float, str]]
    done: int
    total: int
    failed: list[tuple[dict, str]]
    variables: list[VariableSummary]
    empty: list[str] = field(default_factory=list)
    # compute times (point_seconds): total, median, slowest and where; None without them
    timing: tuple[float, float, float, dict] | None = None


def empty_slots(results: Results) -> list[str]:
    """Variables with no value at any evaluated point where their measurement succeeded
    (reason ``ok``): slots a measurement declares but this job never fills, such as the
    windings of symmetry sectors beyond those its operator has (``line_w0_s3`` of a
    two-sector operator). "Succeeded" is judged by the variable's own reason variables
    (:meth:`~sweepcli.store.Results.reason_variables`)."""
    done = results.done.astype(bool)
    out = []
    for var in results.variables.values():
        if var.dtype not in ("int32", "float64"):
            continue
        codes = results.reason_codes(var.name)
        if codes is None:
            continue
        ok = done & (codes == Reason.OK)
        if not ok.any():
            continue
        data = results.data[var.name][ok]
        if np.all(data == FILL_INT) if var.dtype == "int32" else np.all(np.isnan(data)):
            out.append(var.name)
    return out


def summarise(results: Results, max_failed: int = 20) -> Summary:
    """Structured summary; the CLI only formats it. Empty slots (:func:`empty_slots`) are
    named, not summarised."""
    done = results.done.astype(bool)
    variables = []
    empty = empty_slots(results)
    for var in results.variables.values():
        if var.name in empty:
            continue
        data = results.data[var.name][done]
        if var.dtype == "int32":
            ok = data != FILL_INT
            counts = dict(sorted(Counter(int(v) for v in data[ok]).items()))
            variables.append(VariableSummary(var.name, var.dtype, var.units, var.long_name,
                                             int(ok.sum()), int((~ok).sum()), counts))
        elif var.dtype == "uint8":
            counts = {Reason(int(v)).name.lower(): int(c)
                      for v, c in sorted(Counter(data.tolist()).items())}
            variables.append(VariableSummary(var.name, var.dtype, var.units, var.long_name,
                                             int(data.size), 0, counts))
        else:
            ok = np.isfinite(data)
            vals = data[ok]
            variables.append(VariableSummary(
                var.name, var.dtype, var.units, var.long_name, int(ok.sum()), int((~ok).sum()),
                minimum=float(vals.min()) if vals.size else None,
                maximum=float(vals.max()) if vals.size else None))
    failed = []
    for flat in np.flatnonzero(results.failure.ravel() != "")[:max_failed]:
        multi = np.unravel_index(flat, results.shape)
        params = {a.name: float(a.values[i]) for a, i in zip(results.axes, multi)}
        failed.append((params, str(results.failure.ravel()[flat])))
    timing = None
    if POINT_SECONDS in results.variables:
        times = np.where(done, results.data[POINT_SECONDS], np.nan)
        if np.isfinite(times).any():
            slow = int(np.nanargmax(times))
            multi = np.unravel_index(slow, results.shape)
            timing = (float(np.nansum(times)), float(np.nanmedian(times)),
                      float(times.ravel()[slow]),
                      {a.name: float(a.values[i]) for a, i in zip(results.axes, multi)})
    return Summary(
        timing=timing,
        provenance={k: results.attrs.get(k, "") for k in PROVENANCE_KEYS},
        axes=[(a.name, len(a.values), float(a.values[0]), float(a.values[-1]), a.units)
              for a in results.axes],
        done=int(done.sum()), total=results.size, failed=failed, variables=variables,
        empty=empty)


def format_summary(s: Summary) -> str:
    lines = []
    for k, v in s.provenance.items():
        if v:
            lines.append(f"{k:>17}: {clipped(v)}")
    lines.append("")
    lines.append("grid:")
    for name, n, lo, hi, units in s.axes:
        unit = f" [{units}]" if units and units != "1" else ""
        lines.append(f"  {name}{unit}: {n} values from {lo:g} to {hi:g}")
    pct = 100.0 * s.done / s.total if s.total else 100.0
    lines.append(f"completion: {s.done}/{s.total} points ({pct:.1f}%)"
                 + (" of the finest grid (refined: only cells with a boundary are evaluated)"
                    if s.provenance.get("refine_stride") else ""))
    if not s.provenance.get("finished"):
        lines.append("status: not finished: still running, or interrupted (continue with "
                     "`sweepcli run JOB -o FILE --resume`); figures are from the last checkpoint")
    if s.timing is not None:
        total, median, slowest, where = s.timing
        at = ", ".join(f"{k}={v:g}" for k, v in where.items())
        lines.append(f"compute time: {total:.3g} s in all (about {total / 3600:.2g} core-hours), "
                     f"median {median:.3g} s per point, slowest {slowest:.3g} s"
                     + (f" at {at}" if at else ""))
    if s.failed:
        lines.append(f"failed points: {len(s.failed)} shown")
        for params, msg in s.failed:
            where = ", ".join(f"{k}={v:g}" for k, v in params.items())
            lines.append(f"  {where}: {msg}")
    agree = [v for v in s.variables if v.name.startswith("agree_") and v.dtype == "int32"]
    if agree:
        lines.append("")
        lines.append("bulk-boundary consistency:")
        for v in agree:
            bad, good = v.counts.get(0, 0), v.counts.get(1, 0)
            lines.append(f"  {v.name}: {bad} of {bad + good} points disagree"
                         + (f" ({v.missing} undecided: a side is missing)" if v.missing else ""))
    lines.append("")
    lines.append("variables:")
    for v in s.variables:
        if v.dtype == "int32":
            counts = ", ".join(f"{k}: {c}" for k, c in v.counts.items()) or "none"
            lines.append(f"  {v.name} ({v.long_name}): values {counts}; missing {v.missing}")
        elif v.dtype == "uint8":
            counts = ", ".join(f"{k}: {c}" for k, c in v.counts.items())
            lines.append(f"  {v.name}: {counts}")
        else:
            rng = (f"{v.minimum:.4g} .. {v.maximum:.4g}" if v.minimum is not None else "none")
            unit = f" {v.units}" if v.units and v.units != "1" else ""
            lines.append(f"  {v.name} ({v.long_name}): range {rng}{unit}; missing {v.missing}")
    if s.empty:
        lines.append(f"  not filled by this job (no value wherever their measurement succeeded): "
                     f"{', '.join(s.empty)}")
    return "\n".join(lines)
