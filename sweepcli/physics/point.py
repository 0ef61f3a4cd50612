"""What a measurement sees at one grid point, and how it reports what it found.

A :class:`Point` is built by the runner from the resolved parameter values of one grid point.
Measurements are pure functions ``f(point, **options) -> dict`` registered in
:data:`sweepcli.physics.measurements.MEASUREMENTS`; results that several measurements need (the
bulk gap, say) are memoised in ``point.cache`` so a point computes them once.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from enum import IntEnum
from functools import cached_property
from typing import Any

from .lattice import TightBinding


class Reason(IntEnum):
    """Why a quantity at a point is missing; stored as ``<measurement>_reason`` (uint8)."""

    OK = 0
    GAP_CLOSED = 1  # the gap the invariant needs is below the tolerance
    NOT_CONVERGED = 2  # the k-grid (or time grid) could not be raised far enough
    SECTOR_GAP_CLOSED = 3  # an auxiliary spectrum (spin, symmetry sector) is gapless
    FAILED = 4  # the evaluation raised; the message is in the point's failure record
    NOT_COMPUTED = 5  # the point was not (yet) evaluated
    FINITE_SIZE = 6  # a boundary count the largest allowed open sample cannot settle
    EDGE_GAP_CLOSED = 7  # the edges of the sample are gapless, so corner modes are not defined


@dataclass(frozen=True)
class Quantity:
    """A stored output variable: lowercase snake-case name, dtype, units and long name."""

    name: str
    dtype: str  # "float64" or "int32"
    units: str
    long_name: str


@dataclass
class Point:
    """One grid point.

    Attributes
    ----------
    params : resolved parameter values (model and drive), floats.
    build : model factory; ``build(params)`` returns the static :class:`TightBinding`.
    drive : the compiled drive, or ``None`` for a static job.
    filling : number of occupied bands (bands counted from the bottom).
    gap_tol : gaps below this (energy units) count as closed.
    """

    params: Mapping[str, float]
    build: Callable[[Mapping[str, float]], TightBinding]
    drive: Any = None
    filling: int | None = None
    gap_tol: float = 1e-6
    cache: dict = field(default_factory=dict)

    @cached_property
    def tb(self) -> TightBinding:
        return self.build(self.params)

    @property
    def nocc(self) -> int:
        return self.filling if self.filling is not None else self.tb.norb // 2

    def memo(self, key: Any, compute: Callable[[], Any]) -> Any:
        if key not in self.cache:
            self.cache[key] = compute()
        return self.cache[key]
