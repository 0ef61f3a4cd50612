"""The ``[model]`` table: a built-in model by name, or a custom tight-binding model given by
its lattice, orbitals and onsite and hopping terms."""

from __future__ import annotations

import math

import numpy as np

from ..errors import sentence, suggest
from ..expressions import EvaluationError, Expression, ExpressionError, parse
from ..physics.models import MODELS
from ..physics.registry import Param
from ..physics.rotation import ORDERS, RotationError, site_rotation
from .checker import Checker, constant
from .spec import CustomModel

LATTICES = {
    "chain": np.array([[1.0]]),
    "square": np.eye(2),
    "honeycomb": np.array([[1.5, math.sqrt(3) / 2], [1.5, -math.sqrt(3) / 2]]),
}


def read_model(ck: Checker, model_t: dict) -> tuple:
    """``[model]``: a built-in model or a custom one; returns ``(name, custom model or None,
    the built-in factory's parameter names, declared parameters, dim, norb)``."""
    if "name" not in model_t:
        raise ck.fail("model", "name", "the name of a built-in model or \"custom\" "
                      f"(built-in: {', '.join(MODELS.names())})", None)
    model = model_t["name"]
    if not isinstance(model, str) or (model != "custom" and model not in MODELS):
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


def _custom_model(ck: Checker, t: dict) -> CustomModel:
    allowed = ["name", "lattice", "orbitals", "positions", "onsite", "hopping", "operators",
               "rotation"]
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
    operators = tuple((k, _operator(ck, k, v, n)) for k, v in ops_t.items())
    rotation = _rotation(ck, t["rotation"], vectors, positions) if "rotation" in t else None
    return CustomModel(tuple(map(tuple, vectors)), tuple(map(tuple, positions)), tuple(onsite),
                       tuple(hoppings), operators, rotation)


def _rotation(ck: Checker, t: object, vectors: np.ndarray, positions: np.ndarray):
    """``[model.rotation]``: ``order`` (3, 4 or 6), ``centre`` (reduced, default the cell
    origin) and an orbital ``matrix`` (default 1); the sites' permutation and cell shifts come
    from the orbital positions (:func:`sweepcli.physics.rotation.site_rotation`). Whether it is
    a symmetry of the Hamiltonian is checked at the first grid point (``checks``)."""
    table = "model.rotation"
    if not isinstance(t, dict):
        raise ck.fail("model", "rotation", "a table with order (and optionally centre, matrix)",
                      t)
    ck.only(table, t, ["order", "centre", "matrix"])
    if len(vectors) != 2:
        raise ck.fail(table, "order", "absent for a 1D lattice (rotations need a 2D model)",
                      t.get("order"))
    order = t.get("order")
    if isinstance(order, bool) or order not in ORDERS:
        raise ck.fail(table, "order", "one of " + ", ".join(map(str, ORDERS)), order)
    centre_v = t.get("centre", [0, 0])
    try:
        if not (isinstance(centre_v, list) and len(centre_v) == 2):
            raise ValueError("shape")
        centre = np.array([constant(x) for x in centre_v], complex)
        if np.any(centre.imag != 0):
            raise ValueError("complex")
        centre = centre.real
    except (ValueError, ExpressionError, EvaluationError):
        raise ck.fail(table, "centre", "two reduced coordinates (numbers or constant "
                      "expressions such as \"1/6\")", centre_v) from None
    n = len(positions)
    matrix = ck.matrix(table, "matrix", t["matrix"], n) if "matrix" in t else None
    try:
        return site_rotation(vectors, positions, order, centre, matrix=matrix)
    except RotationError as exc:
        msg = str(exc)
        key = ("order" if "lattice has no" in msg else "matrix" if "orbital matrix" in msg
               else "centre")
        what = {"order": f"an order the lattice has (its vectors have no {order}-fold "
                         "rotation)",
                "matrix": "a unitary matrix that mixes only orbitals at one position",
                "centre": f"a centre about which the {order}-fold rotation maps every orbital "
                          "site onto a site of the same kind"}[key]
        got = order if key == "order" else centre_v if key == "centre" else t["matrix"]
        raise ck.fail(table, key, what, got, f" {msg[:1].upper()}{msg[1:]}.") from None


def _operator(ck: Checker, name: str, value: object, n: int) -> np.ndarray:
    """A cell operator: a Pauli word, a square matrix, or an array of tables
    ``[[model.operators.NAME]]`` with ``matrix`` and a constant ``coeff`` (default 1), summed
    like onsite terms."""
    if not (isinstance(value, list) and value and all(isinstance(v, dict) for v in value)):
        return ck.matrix("model.operators", name, value, n)
    total = np.zeros((n, n), complex)
    for i, term in enumerate(value):
        where = f"model.operators.{name}.{i}"
        ck.only(where, term, ["matrix", "coeff"])
        m = ck.matrix(where, "matrix", term.get("matrix"), n)
        c = term.get("coeff", 1)
        expected = "a number or an expression of constants such as \"1/sqrt(2)\" or \"1j\""
        if isinstance(c, bool) or not isinstance(c, (int, float, str)):
            raise ck.fail(where, "coeff", expected, c)
        try:
            total += constant(c) * m
        except (ValueError, ExpressionError, EvaluationError) as exc:
            hint = (f" {exc.detail}." if isinstance(exc, EvaluationError) else
                    " " + sentence(exc) if isinstance(exc, ExpressionError) else "")
            raise ck.fail(where, "coeff", expected, c, hint) from None
    return total


def _coeff(ck: Checker, where: str, value: object) -> Expression:
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise ck.fail(where, "coeff", "a number or an arithmetic expression", value)
    try:
        return parse(str(value), where, "coeff")
    except ExpressionError as exc:
        raise ck.fail(where, "coeff", "a number or an arithmetic expression", value,
                      " " + sentence(exc)) from None


def normalised_model(model: str, model_t: dict) -> dict:
    """The ``[model]`` table as it enters the normalised job (its identity)."""
    if model != "custom":
        return {"name": model}
    return {k: v for k, v in model_t.items()}


def model_rotations(model: str, custom: CustomModel | None) -> tuple[int, ...]:
    """Orders of the rotations a model provides: a custom model's ``[model.rotation]``, a
    built-in's from an instance at its default (or sample) parameters."""
    if custom is not None:
        return () if custom.rotation is None else (custom.rotation.order,)
    entry = MODELS[model]
    sample = {p.name: (p.default if not p.required else _sample_value(p)) for p in entry.params}
    return tuple(sorted(entry.func(**sample).rotations))


def model_operators(model: str) -> tuple[str, ...]:
    """Names of the cell operators of a built-in model (declared, else from a sample instance)."""
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
