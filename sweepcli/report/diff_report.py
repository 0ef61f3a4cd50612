"""The report of ``sweepcli diff``: text (with optional pictures of where values differ)
and a JSON-ready dictionary."""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

from .diff import ResultsDiff, VariableDiff
from .diff_match import Change
from .terminal import Axis, fmt, render_grid

PICTURE_GLYPHS = ("·", "▒", "█")  # equal, missing in one file only, values differ
PICTURE_COLOURS = ("90", "33", "31")


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
