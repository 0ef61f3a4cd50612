"""What a measurement sees at one grid point.

A :class:`Point` is built by the runner from the resolved parameter values of one grid point.
Measurements are pure functions ``f(point, **options) -> dict`` registered in
:data:`sweepcli.physics.measurements.MEASUREMENTS`; results that several measurements need (the
bulk gap, say) are memoised in ``point.cache`` so a point computes them once. A measurement
reports why a value is missing with :class:`sweepcli.schema.Reason`.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

from .lattice import TightBinding


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
