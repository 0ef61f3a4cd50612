"""The ``[measure]`` table: the measurements with their options, checked against the model's
dimension, its cell operators and whether the job is driven; ``filling`` and ``gap_tol``."""

from __future__ import annotations

from typing import Any

from ..errors import JobError
from ..physics.measurements import MEASUREMENTS
from ..physics.registry import Param
from .checker import Checker
from .model_table import model_operators, model_rotations
from .spec import CustomModel

MEASURE_SETTINGS = (
    Param("filling", kind="int", default=None, low=1, doc="number of occupied bands"),
    Param("gap_tol", default=1e-6, low=0, open_low=True, doc="gaps below this count as closed"),
)


def read_measure(ck: Checker, doc: dict, dim: int, norb: int, custom: CustomModel | None,
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
    have = {k for k, _ in custom.operators} if custom else set(model_operators(model))
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
    if entry.extra.get("rotation"):
        _check_rotation_provided(ck, table, dict(out), model, custom)
    return tuple(out)


def _check_rotation_provided(ck: Checker, table: str, opts: dict, model: str,
                             custom: CustomModel | None) -> None:
    """A measurement of rotation eigenvalues needs a model that provides a rotation (of the
    requested ``order``, when one is given); otherwise every point would be ``no_symmetry``."""
    have = model_rotations(model, custom)
    how = (" (declare one under [model.rotation])" if custom else
           " (built-in models with one: breathing_kagome, kekule_honeycomb, bbh)")
    if not have:
        raise JobError(f"{ck.path}: [{table}] needs a model that provides a C3, C4 or C6 "
                       f"rotation; model {model!r} provides none{how}.")
    order = opts.get("order", 0)
    if order and order not in have:
        raise ck.fail(table, "order", "0 or an order of rotation the model provides ("
                      + ", ".join(map(str, have)) + ")", order)
