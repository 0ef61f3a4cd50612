"""The ``[confirm]`` table: boundary measurements on selected cells only.

Open-sample measurements (the ones registered in
:mod:`sweepcli.physics.measurements.boundary`) cost far more than a bulk point. With
``[confirm]`` they run only on the cells chosen from the bulk map (``across``, ``per_region``,
``stride``); every other measurement runs on every point. The table is no part of the job's
identity (sha256): a changed selection resumes the same file (README, "Confirming where it
matters").
"""

from __future__ import annotations

from ..errors import JobError, suggest
from ..physics.measurements import MEASUREMENTS, quantities_of
from ..physics.registry import Param
from .checker import Checker
from .spec import Confirm

KEYS = ["across", "per_region", "stride", "measurements"]


def boundary_measurements() -> list[str]:
    """Names of the registered open-sample (boundary) measurements."""
    from ..physics.measurements import boundary

    return [e.name for e in MEASUREMENTS if e.func.__module__ == boundary.__name__]


def _names(ck: Checker, key: str, value: object, expected: str) -> list[str]:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise ck.fail("confirm", key, expected, value)
    return list(value)


def read_confirm(ck: Checker, doc: dict, measurements: list, dim: int, driven: bool
                 ) -> Confirm | None:
    """``[confirm]``: the boundary measurements to confirm, the invariants whose changes are
    bracketed, representatives per region and the stride; ``None`` without the table."""
    if "confirm" not in doc:
        return None
    t = ck.table(doc, "confirm")
    ck.only("confirm", t, KEYS)
    job_names = [m for m, _ in measurements]
    boundary = [m for m in job_names if m in boundary_measurements()]
    if not boundary:
        raise JobError(f"{ck.path}: [confirm] needs a boundary measurement in [measure] (one of "
                       f"{', '.join(boundary_measurements())}); the job has none.")
    expected = "a non-empty list of the job's boundary measurements (" + ", ".join(boundary) + ")"
    chosen = _names(ck, "measurements", t.get("measurements", boundary), expected)
    if not chosen:
        raise ck.fail("confirm", "measurements", expected, chosen)
    for name in chosen:
        if name not in boundary:
            raise ck.fail("confirm", "measurements", expected, name, suggest(name, boundary))
    if len(set(chosen)) != len(chosen):
        raise ck.fail("confirm", "measurements", expected + " without repeats", chosen)
    stored = [q for m in job_names if m not in chosen for q in quantities_of(m, dim, driven)
              if q.dtype == "int32" or q.units in ("", "1")]
    names = [q.name for q in stored]
    later = {q.name for m in chosen for q in quantities_of(m, dim, driven)}
    expected = ("a list of invariants the job stores on every point (integer or dimensionless "
                "quantities of its other measurements: " + (", ".join(names) or "none") + ")")
    across = _names(ck, "across", t.get("across", []), expected)
    for name in across:
        if name not in names:
            hint = (f" {name} is measured only on the selected cells." if name in later
                    else suggest(name, names))
            raise ck.fail("confirm", "across", expected, name, hint)
    per_region = ck.number("confirm", "per_region", t.get("per_region", 1),
                           Param("per_region", kind="int", low=0))
    stride = t.get("stride")
    if stride is not None:
        stride = ck.number("confirm", "stride", stride, Param("stride", kind="int", low=1))
    if not across and per_region == 0 and stride is None:
        raise JobError(f"{ck.path}: [confirm] must select cells: give across = [invariants], "
                       "per_region >= 1 or stride; got per_region = 0 and no across or stride.")
    return Confirm(tuple(dict.fromkeys(across)), per_region, stride, tuple(chosen))
