"""One error shape and the int/float/bool policy for every value of a job file."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from ..errors import JobError, shown, suggest
from ..expressions import EvaluationError, ExpressionError, parse
from ..physics.lattice import pauli
from ..physics.registry import Param

# Real values beyond this are refused: spectra square and multiply them (1e308 overflows), and a
# term this much larger than the others leaves their energies no significant digits.
MAX_MAGNITUDE = 1e12
MAGNITUDE_HINT = " Larger values overflow or leave the other terms no significant digits."


class Checker:
    """Collects the helpers that turn a bad value into one clear :class:`JobError`."""

    def __init__(self, path: str) -> None:
        self.path = path

    def fail(self, table: str, key: str, expected: str, got: object, hint: str = "") -> JobError:
        where = f"[{table}] {key}" if key else f"[{table}]"
        return JobError(f"{self.path}: {where} must be {expected}; got {shown(got)}.{hint}")

    def unknown(self, table: str, key: str, allowed: list[str], what: str = "key") -> JobError:
        listed = ", ".join(allowed) if allowed else "none"
        return JobError(f"{self.path}: [{table}] has an unknown {what} {key!r} "
                        f"(allowed: {listed}).{suggest(key, allowed)}")

    def only(self, table: str, given: Mapping, allowed: list[str]) -> None:
        """Refuse a key of ``given`` that is not in ``allowed``, suggesting the closest."""
        for key in given:
            if key not in allowed:
                raise self.unknown(table, key, list(allowed))

    def table(self, doc: Mapping, name: str) -> dict:
        value = doc.get(name, {})
        if not isinstance(value, dict):
            raise self.fail(name, "", "a table", value)
        return value

    def number(self, table: str, key: str, value: object, param: Param) -> float:
        """Apply the int/float policy: int accepted for reals, float refused for counts."""
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.fail(table, key, param.expectation(), value)
        if param.kind == "int" and not isinstance(value, int):
            raise self.fail(table, key, param.expectation(), value)
        if not param.admits(float(value)):
            raise self.fail(table, key, param.expectation(), value)
        if param.kind == "real" and abs(value) > MAX_MAGNITUDE:
            raise self.fail(table, key, f"{param.expectation()} of magnitude at most "
                            f"{MAX_MAGNITUDE:g}", value, MAGNITUDE_HINT)
        return value

    def option(self, table: str, key: str, value: object, param: Param) -> Any:
        if param.kind in ("real", "int"):
            if value is None and param.default is None:
                return None
            return self.number(table, key, value, param)
        if param.kind == "bool":
            if not isinstance(value, bool):
                raise self.fail(table, key, param.expectation(), value)
            return value
        if param.kind == "choice":
            if value not in param.choices:
                raise self.fail(table, key, param.expectation(), value,
                                suggest(str(value), [str(c) for c in param.choices]))
            return value
        if param.kind == "str":
            if not isinstance(value, str):
                raise self.fail(table, key, param.expectation(), value)
            return value
        if param.kind == "vector":
            if not (isinstance(value, list) and value and all(
                    isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)):
                raise self.fail(table, key, param.expectation(), value)
            return [float(v) for v in value]
        if param.kind == "points":
            if value is None and param.default is None:
                return None
            if not (isinstance(value, list) and len(value) >= 3 and all(
                    isinstance(p, list) and len(p) == 2 and all(
                        isinstance(v, (int, float)) and not isinstance(v, bool)
                        and abs(v) <= MAX_MAGNITUDE for v in p) for p in value)):
                raise self.fail(table, key, param.expectation(), value)
            return [[float(v) for v in p] for p in value]
        if param.kind == "matrix":
            self.matrix(table, key, value)
            return value
        raise AssertionError(f"undeclared parameter kind {param.kind!r}")

    def constant(self, table: str, key: str, value: object) -> object:
        """A number, or a string holding an expression of constants only (``"-pi"``)."""
        if not isinstance(value, str):
            return value
        try:
            result = constant(value)
        except EvaluationError as exc:
            raise self.fail(table, key, "a number or an expression of constants such as "
                            "\"pi/2\"", value, f" {exc.detail}.") from None
        except ValueError:
            raise self.fail(table, key, "a number or an expression of constants such as "
                            "\"pi/2\"", value) from None
        if isinstance(result, complex):
            raise self.fail(table, key, "a real number", value)
        return float(result)

    def matrix(self, table: str, key: str, value: object, size: int | None = None) -> np.ndarray:
        """A Pauli word (``"zx"``) or a square list of numbers / constant expressions."""
        expected = ("a Pauli word such as \"zx\" or a square matrix of numbers"
                    + (f" of size {size}" if size else ""))
        if isinstance(value, str):
            if not value or set(value) - set("0xyz"):
                raise self.fail(table, key, expected, value)
            m = pauli(value)
        elif isinstance(value, list) and value and all(isinstance(r, list) for r in value):
            try:
                m = np.array([[constant(x) for x in row] for row in value], dtype=complex)
            except (ValueError, ExpressionError):
                raise self.fail(table, key, expected, value) from None
            if m.ndim != 2 or m.shape[0] != m.shape[1]:
                raise self.fail(table, key, expected, value)
        else:
            raise self.fail(table, key, expected, value)
        if size is not None and m.shape[0] != size:
            raise self.fail(table, key, expected, f"a matrix of size {m.shape[0]}")
        return m


def constant(x: object) -> complex:
    if isinstance(x, bool):
        raise ValueError("boolean")
    if isinstance(x, (int, float)):
        return x
    if isinstance(x, str):
        expr = parse(x)
        if expr.names:
            raise ValueError("names")
        return expr({})
    raise ValueError("not a number")
