"""Safe arithmetic expressions for job-file parameters.

An expression such as ``"3*sqrt(3)*t2*sin(phi)"`` is parsed with :mod:`ast` and accepted only if
every node is on a whitelist: numbers (int, float, complex such as ``1j``), parameter names, the
constants ``pi`` and ``e``, ``+ - * / **``, unary minus and plus, and calls of a few named
functions with positional arguments. Nothing is ever passed to ``eval``; the tree is walked by
:func:`_evaluate` below.
"""

from __future__ import annotations

import ast
import math
from collections.abc import Mapping
from dataclasses import dataclass

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
_UNARY = {ast.USub: lambda a: -a, ast.UAdd: lambda a: a}


class ExpressionError(ValueError):
    """An expression is not in the accepted language or names an unknown parameter."""


@dataclass(frozen=True)
class Expression:
    """A parsed, validated expression; ``names`` are the parameters it reads."""

    text: str
    tree: ast.Expression
    names: frozenset[str]

    def __call__(self, values: Mapping[str, complex]) -> complex:
        return _evaluate(self.tree.body, values)


def parse(text: str) -> Expression:
    """Parse ``text``, checking every node against the whitelist.

    Raises
    ------
    ExpressionError
        With a message naming the construct that is not allowed.
    """
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise ExpressionError(f"{text!r} is not a valid arithmetic expression ({exc.msg})") from None
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Expression, ast.Load)) or type(node) in _BINARY or type(node) in _UNARY:
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
            if node.id not in FUNCTIONS:
                names.add(node.id)
        elif isinstance(node, ast.Call):
            if not isinstance(node.func, ast.Name) or node.func.id not in FUNCTIONS:
                called = node.func.id if isinstance(node.func, ast.Name) else ast.unparse(node.func)
                raise ExpressionError(f"{text!r} calls {called!r}, which is not an allowed function "
                                      f"(allowed: {', '.join(FUNCTIONS)}).{suggest(called, FUNCTIONS)}")
            if node.keywords:
                raise ExpressionError(f"{text!r}: functions take positional arguments only")
        else:
            raise ExpressionError(f"{text!r} contains {type(node).__name__!r} syntax, which is not "
                                  "allowed in an arithmetic expression")
    names -= set(CONSTANTS)
    return Expression(text, tree, frozenset(names))


def _evaluate(node: ast.AST, values: Mapping[str, complex]) -> complex:
    if isinstance(node, ast.Constant):
        # Integers become floats so that ``10**10**10`` overflows at once instead of running on.
        return float(node.value) if isinstance(node.value, int) else node.value
    if isinstance(node, ast.Name):
        if node.id in CONSTANTS:
            return CONSTANTS[node.id]
        return values[node.id]
    if isinstance(node, ast.BinOp):
        return _BINARY[type(node.op)](_evaluate(node.left, values), _evaluate(node.right, values))
    if isinstance(node, ast.UnaryOp):
        return _UNARY[type(node.op)](_evaluate(node.operand, values))
    if isinstance(node, ast.Call):
        return FUNCTIONS[node.func.id](*(_evaluate(a, values) for a in node.args))
    raise ExpressionError(f"cannot evaluate {ast.dump(node)}")  # unreachable after parse()
