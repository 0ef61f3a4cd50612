"""Declared parameters and the registries that hold models, drives and measurements.

Each family is a :class:`Registry` filled by a decorator placed beside the definition, so adding
a model or a measurement is one new function in one file. Parameters are declared with their
constraints (:class:`Param`); the job-file layer validates a whole job against these
declarations once, at load, and the kernels trust their inputs.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import Any, Generic, TypeVar

REQUIRED: Any = object()


@dataclass(frozen=True)
class Param:
    """One declared parameter.

    kind
        ``"real"`` (an int is accepted), ``"int"`` (a float is refused), ``"bool"``, ``"choice"``
        (one of ``choices``), ``"str"``, ``"matrix"`` (a square complex matrix or a Pauli word),
        ``"vector"`` (a list of reals), ``"points"`` (a list of ``[x, y]`` pairs of reals).
    low, high
        Interval bounds (inclusive unless ``open_low`` / ``open_high``); ``None`` is unbounded.
    sweepable
        Whether the value may be swept or computed from an expression at each grid point.
    """

    name: str
    kind: str = "real"
    default: Any = REQUIRED
    doc: str = ""
    units: str = ""
    low: float | None = None
    high: float | None = None
    open_low: bool = False
    open_high: bool = False
    choices: tuple = ()
    sweepable: bool = True

    @property
    def required(self) -> bool:
        return self.default is REQUIRED

    def expectation(self) -> str:
        """Human description of what is accepted, for error messages."""
        if self.kind == "choice":
            return "one of " + ", ".join(repr(c) for c in self.choices)
        base = {"real": "a real number", "int": "an integer", "bool": "true or false",
                "str": "a string", "matrix": "a square matrix or a Pauli word such as \"zx\"",
                "vector": "a list of real numbers",
                "points": "a list of at least 3 [x, y] pairs of real numbers"}[self.kind]
        if self.low is None and self.high is None:
            return base
        lo = "-inf" if self.low is None else f"{self.low:g}"
        hi = "inf" if self.high is None else f"{self.high:g}"
        lb = "(" if self.open_low or self.low is None else "["
        rb = ")" if self.open_high or self.high is None else "]"
        return f"{base} in {lb}{lo}, {hi}{rb}"

    def admits(self, value: float) -> bool:
        """Whether a numeric value lies in the declared interval (and is finite)."""
        if not math.isfinite(value):
            return False
        if self.low is not None and (value < self.low or (self.open_low and value == self.low)):
            return False
        if self.high is not None and (value > self.high or (self.open_high and value == self.high)):
            return False
        return True


@dataclass(frozen=True)
class Entry:
    """A registered model, drive or measurement."""

    name: str
    func: Callable[..., Any]
    description: str
    source: str
    params: tuple[Param, ...] = ()
    extra: dict = field(default_factory=dict)

    def param(self, name: str) -> Param | None:
        return next((p for p in self.params if p.name == name), None)


T = TypeVar("T")


class Registry(Generic[T]):
    """A name -> :class:`Entry` mapping filled by the :meth:`register` decorator."""

    def __init__(self, family: str) -> None:
        self.family = family
        self._entries: dict[str, Entry] = {}

    def register(self, name: str, *, description: str, source: str,
                 params: tuple[Param, ...] = (), **extra: Any) -> Callable[[T], T]:
        def decorate(func: T) -> T:
            if name in self._entries:
                raise ValueError(f"{self.family} {name!r} registered twice")
            self._entries[name] = Entry(name, func, description, source, tuple(params), dict(extra))
            return func
        return decorate

    def __getitem__(self, name: str) -> Entry:
        return self._entries[name]

    def __contains__(self, name: object) -> bool:
        return name in self._entries

    def __iter__(self) -> Iterator[Entry]:
        return iter(self._entries.values())

    def names(self) -> list[str]:
        return list(self._entries)
