"""Safe arithmetic expressions for job-file parameters.

An expression such as ``"3*sqrt(3)*t2*sin(phi)"`` is parsed with :mod:`ast` and accepted only if
every node is on a whitelist: numbers (int, float, complex such as ``1j``), parameter names, the
constants ``pi`` and ``e``, ``+ - * / **``, unary minus and plus, and calls of a few named
functions with one argument. Nothing is ever passed to ``eval``; the tree is walked by
:func:`_evaluate` below.

Evaluation never returns a value that is not a finite number: a function outside its real domain
(``sqrt(-1)``, ``log(0)``, ``arcsin(2)``), a division by zero, an overflow or a real power with
a complex result (``(-8)**(1/3)``) raises :class:`EvaluationError`. Complex values come only from
complex literals such as ``1j``; with a complex argument the functions are the principal branches
of :mod:`numpy`.
"""

from __future__ import annotations

import ast
import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from .errors import suggest

FUNCTIONS = {
    "sqrt": np.sqrt, "sin": np.sin, "cos": np.cos, "tan": np.tan, "exp": np.exp, "log": np.log,
    "arcsin": np.arcsin, "arccos": np.arccos, "arctan": np.arctan, "sinh": np.sinh,
    "cosh": np.cosh, "tanh": np.tanh, "abs": abs,
}
CONSTANTS = {"pi": math.pi, "e": math.e}
_BINARY = {ast.Add: lambda a, b: a + b, ast.Sub: lambda a, b: a - b,
           ast.Mult: lambda a, b: a * b, ast.Div: lambda a, b: a / b,
           ast.Pow: lambda a, b: a ** b}
MAX_LENGTH = 1000  # characters of one expression; a longer one is refused before parsing
MAX_DEPTH = 60  # nesting of the parsed tree (operators and calls); deeper ones are refused
_UNARY = {ast.USub: lambda a: -a, ast.UAdd: lambda a: a}


class ExpressionError(ValueError):
    """An expression is not in the accepted language or names an unknown parameter."""


class EvaluationError(ExpressionError):
    """An expression has no finite value at the given parameters.

    Attributes
    ----------
    expression : the :class:`Expression` (its ``table`` and ``key`` say where it was written).
    detail : what went wrong, e.g. ``"sqrt(-1) is not a real number"``.
    """

    def __init__(self, expression: Expression, detail: str) -> None:
        super().__init__(f"{expression.text!r}: {detail}")
        self.expression = expression
        self.detail = detail


@dataclass(frozen=True)
class Expression:
    """A parsed, validated expression; ``names`` are the parameters it reads.

    ``table`` and ``key`` say where the expression was written (e.g. ``"params"``, ``"M"``), for
    error messages; they take no part in comparisons.
    """

    text: str
    tree: ast.Expression
    names: frozenset[str]
    table: str = field(default="", compare=False)
    key: str = field(default="", compare=False)

    def __call__(self, values: Mapping[str, complex]) -> complex:
        """The value at ``values`` (finite; :class:`EvaluationError` otherwise)."""
        try:
            return _evaluate(self.tree.body, values)
        except _Undefined as exc:
            raise EvaluationError(self, str(exc)) from None


def parse(text: str, table: str = "", key: str = "") -> Expression:
    """Parse ``text``, checking every node against the whitelist.

    Parameters
    ----------
    text : the expression.
    table, key : where it was written, kept for error messages.

    Raises
    ------
    ExpressionError
        With a message naming the construct that is not allowed.
    """
    if len(text) > MAX_LENGTH:
        raise ExpressionError(f"It has {len(text):,} characters; an expression may have at most "
                              f"{MAX_LENGTH}")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise ExpressionError(
            f"{text!r} is not a valid arithmetic expression ({exc.msg})") from None
    except (RecursionError, MemoryError):
        raise ExpressionError(f"It is nested too deeply; an expression may have at most "
                              f"{MAX_DEPTH} levels of operators and parentheses") from None
    if _depth(tree) > MAX_DEPTH:
        raise ExpressionError(f"It is nested too deeply; an expression may have at most "
                              f"{MAX_DEPTH} levels of operators and parentheses")
    names: set[str] = set()
    called = {id(n.func) for n in ast.walk(tree) if isinstance(n, ast.Call)}
    for node in ast.walk(tree):
        if (isinstance(node, (ast.Expression, ast.Load)) or type(node) in _BINARY
                or type(node) in _UNARY):
            continue
        if isinstance(node, ast.BinOp):
            if type(node.op) not in _BINARY:
                raise ExpressionError(f"{text!r} uses an operator that is not allowed "
                                      "(allowed: + - * / **)")
        elif isinstance(node, ast.UnaryOp):
            if type(node.op) not in _UNARY:
                raise ExpressionError(f"{text!r} uses a unary operator that is not allowed")
        elif isinstance(node, ast.Constant):
            if isinstance(node.value, bool) or not isinstance(node.value, (int, float, complex)):
                raise ExpressionError(f"{text!r} contains {node.value!r}; only numbers are allowed")
        elif isinstance(node, ast.Name):
            if node.id in FUNCTIONS and id(node) not in called:
                raise ExpressionError(f"{text!r} uses the function {node.id!r} as a value; call it "
                                      f"with one argument, e.g. {node.id}(x)")
            if node.id not in FUNCTIONS:
                names.add(node.id)
        elif isinstance(node, ast.Call):
            if not isinstance(node.func, ast.Name) or node.func.id not in FUNCTIONS:
                called = node.func.id if isinstance(node.func, ast.Name) else ast.unparse(node.func)
                raise ExpressionError(
                    f"{text!r} calls {called!r}, which is not an allowed function "
                    f"(allowed: {', '.join(FUNCTIONS)}).{suggest(called, FUNCTIONS)}")
            if node.keywords or len(node.args) != 1:
                raise ExpressionError(f"{text!r}: {node.func.id} takes exactly one argument, "
                                      f"e.g. {node.func.id}(x)")
        else:
            raise ExpressionError(f"{text!r} contains {type(node).__name__!r} syntax, which is not "
                                  "allowed in an arithmetic expression")
    names -= set(CONSTANTS)
    return Expression(text, tree, frozenset(names), table, key)


def _depth(tree: ast.AST) -> int:
    """The depth of ``tree``, found without recursion (so any depth is safe to measure)."""
    deepest, stack = 0, [(tree, 1)]
    while stack:
        node, d = stack.pop()
        deepest = max(deepest, d)
        stack.extend((child, d + 1) for child in ast.iter_child_nodes(node))
    return deepest


class _Undefined(ArithmeticError):
    """Raised inside the walk; :meth:`Expression.__call__` turns it into EvaluationError."""


def _show(x: complex) -> str:
    """An operand as written in a message: parenthesised when complex or negative."""
    return f"({x:g})" if isinstance(x, complex) or x < 0 else f"{x:g}"


def _finite(x: complex, what: str) -> complex:
    """``x`` as a Python number if it is finite; ``what`` names the operation for the error."""
    if isinstance(x, np.generic):
        x = x.item()
    if not np.isfinite(x):
        raise _Undefined(f"{what} is not a finite number")
    return x


def _binary(op: type, a: complex, b: complex) -> complex:
    sign = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}[op]
    what = f"{_show(a)} {sign} {_show(b)}"
    try:
        r = _BINARY[op](a, b)
    except ZeroDivisionError:
        raise _Undefined(f"{what} divides by zero") from None
    except OverflowError:
        raise _Undefined(f"{what} overflows") from None
    if isinstance(r, complex) and not (isinstance(a, complex) or isinstance(b, complex)):
        raise _Undefined(f"{what} is not a real number")
    return _finite(r, what)


def _call(name: str, x: complex) -> complex:
    what = f"{name}({x:g})"
    with np.errstate(all="ignore"):  # a domain error shows as nan or inf, reported below
        r = FUNCTIONS[name](x)
    if not isinstance(x, complex) and np.iscomplexobj(r):
        raise _Undefined(f"{what} is not a real number")
    if np.isnan(r):
        raise _Undefined(f"{what} is not a real number")
    return _finite(r, what)


def _evaluate(node: ast.AST, values: Mapping[str, complex]) -> complex:
    if isinstance(node, ast.Constant):
        # Integers become floats so that ``10**10**10`` overflows at once instead of running on.
        return float(node.value) if isinstance(node.value, int) else node.value
    if isinstance(node, ast.Name):
        if node.id in CONSTANTS:
            return CONSTANTS[node.id]
        return values[node.id]
    if isinstance(node, ast.BinOp):
        return _binary(type(node.op), _evaluate(node.left, values), _evaluate(node.right, values))
    if isinstance(node, ast.UnaryOp):
        return _UNARY[type(node.op)](_evaluate(node.operand, values))
    if isinstance(node, ast.Call):
        return _call(node.func.id, _evaluate(node.args[0], values))
    raise ExpressionError(f"cannot evaluate {ast.dump(node)}")  # unreachable after parse()
