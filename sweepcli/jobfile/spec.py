"""The validated job: frozen specs of the job file's tables and what is derived from them."""

from __future__ import annotations

import hashlib
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..expressions import Expression
from ..physics.drives.base import real
from ..physics.lattice import TightBinding, assemble
from ..physics.measurements import quantities_of
from ..physics.measurements.consistency import Rule, rules_for
from ..physics.models import MODELS
from ..physics.point import Point
from ..schema import Grid, Quantity


@dataclass(frozen=True)
class Axis:
    """One swept parameter: its name, the values in order and how they were declared."""

    name: str
    values: tuple[float, ...]
    spacing: str  # "linear", "log" or "list"
    doc: str = ""  # description for axis labels ([sweep] NAME.doc; else the model's Param.doc)
    units: str = ""  # units for axis labels ([sweep] NAME.units; else the model's Param.units)


@dataclass(frozen=True)
class Refine:
    """Adaptive refinement: the grid of ``[sweep]`` is the coarse base; cells whose corners
    disagree in ``by`` (or where ``gap_var`` falls below ``gap_below``) are halved, ``depth``
    times at most. Points live on the finest grid, ``2**depth`` times denser than the base."""

    by: str
    depth: int
    gap_below: float | None
    gap_var: str

    @property
    def stride(self) -> int:
        return 2 ** self.depth


@dataclass(frozen=True)
class Confirm:
    """The ``[confirm]`` table: the boundary ``measurements`` run only on the cells chosen from
    the bulk map (both sides of every change of an ``across`` invariant along a grid axis and
    the known neighbours of a missing value; ``per_region`` cells of each connected region of
    equal invariants; every ``stride``-th cell along each axis). Not part of the job's sha256."""

    across: tuple[str, ...]
    per_region: int
    stride: int | None
    measurements: tuple[str, ...]

    def normalised(self) -> dict:
        return {"across": list(self.across), "per_region": self.per_region,
                "measurements": list(self.measurements)} | (
                    {"stride": self.stride} if self.stride is not None else {})

    @property
    def text(self) -> str:
        """The table as TOML (stored in the results file's ``confirm`` attribute)."""
        import tomli_w

        return tomli_w.dumps(self.normalised())


@dataclass(frozen=True)
class CustomModel:
    """A model declared in the job file: matrices with coefficient expressions."""

    lattice: tuple[tuple[float, ...], ...]
    positions: tuple[tuple[float, ...], ...]
    onsite: tuple[tuple[np.ndarray, Expression], ...]
    hoppings: tuple[tuple[tuple[int, ...], np.ndarray, Expression], ...]
    operators: tuple[tuple[str, np.ndarray], ...]
    #: ``[model.rotation]``: the model's ``C_n`` rotation (``physics.rotation.Rotation``), or
    #: None; a symmetry of the model is checked at load (``checks``) and at every point.
    rotation: Any = None

    @property
    def names(self) -> frozenset[str]:
        exprs = [e for _, e in self.onsite] + [e for _, _, e in self.hoppings]
        return frozenset().union(*(e.names for e in exprs)) if exprs else frozenset()

    def build(self, values: Mapping[str, complex]) -> TightBinding:
        n = len(self.positions)
        onsite = np.zeros((n, n), complex)
        for matrix, coeff in self.onsite:
            onsite = onsite + coeff(values) * matrix
        terms = [(d, coeff(values) * matrix) for d, matrix, coeff in self.hoppings]
        rotations = {} if self.rotation is None else {self.rotation.order: self.rotation}
        return assemble(np.array(self.lattice), np.array(self.positions), onsite, terms,
                        dict(self.operators), rotations)


@dataclass(frozen=True)
class DriveSpec:
    """The ``[drive]`` table: the kind, the period (or angular frequency) and the protocol.

    ``protocol`` is what the kind's registered ``parse`` hook made of the rest of the table
    (:data:`sweepcli.physics.drives.DRIVES`; the hook contract is in
    :mod:`sweepcli.physics.drives.base`): expressions of the job's parameters, compiled into the
    physics core's drive at each grid point. ``None`` for a static job.
    """

    kind: str = "static"
    period: Expression | None = None
    omega: Expression | None = None
    protocol: Any = None
    source: tuple = ()  # the table as given, for normalisation

    @property
    def names(self) -> frozenset[str]:
        exprs = [e for e in (self.period, self.omega) if e is not None]
        if self.protocol is not None:
            exprs += self.protocol.expressions()
        return frozenset().union(*(e.names for e in exprs)) if exprs else frozenset()

    def normalised(self) -> dict:
        return dict(self.source) if self.kind != "static" else {"kind": "static"}

    @property
    def overrides(self) -> list[tuple]:
        """The parameter sets the drive's parts apply, ``((name, expression), ...)`` each."""
        return self.protocol.overrides() if self.protocol is not None else []

    @property
    def varied(self) -> frozenset[str]:
        """Model parameters the drive changes in time."""
        return frozenset(self.protocol.varied()) if self.protocol is not None else frozenset()

    @property
    def always_set(self) -> frozenset[str]:
        """Model parameters that every part sets when the parts cover the whole period (steps):
        they need no value of their own."""
        if self.protocol is None or not self.protocol.covers_period:
            return frozenset()
        return frozenset.intersection(*(frozenset(k for k, _ in over)
                                        for over in self.overrides))

    def period_at(self, values: Mapping[str, complex]) -> float:
        if self.period is not None:
            return real(self.period(values))
        omega = real(self.omega(values))
        return 2 * math.pi / omega if omega != 0 else math.inf

    def compile(self, values: Mapping[str, complex], build):
        """The drive at one grid point, as the physics core's drive object."""
        return self.protocol.compile(values, self.period_at(values), build)


@dataclass(frozen=True, eq=False)
class Job(Grid):
    """A validated, normalised job. Derived things (grids, k-meshes) are computed, never stored."""

    path: str
    text: str
    name: str
    title: str
    model: str
    custom: CustomModel | None
    model_params: tuple[str, ...]
    fixed: tuple[tuple[str, float], ...]
    derived: tuple[tuple[str, Expression], ...]  # in evaluation order
    axes: tuple[Axis, ...]
    drive: DriveSpec
    measurements: tuple[tuple[str, tuple[tuple[str, Any], ...]], ...]
    filling: int | None
    gap_tol: float
    output: str
    normalised: str
    dim: int
    norb: int
    refine: Refine | None = None
    predict: tuple[tuple[float, ...], ...] | None = None  # momenta for predicted transitions
    main: str | None = None  # [output] main: the quantity `sweepcli map` draws by default
    confirm: Confirm | None = None  # [confirm]: boundary measurements on selected cells only

    @property
    def sha256(self) -> str:
        return hashlib.sha256(self.normalised.encode()).hexdigest()

    def quantities(self) -> list[tuple[str, tuple[Quantity, ...]]]:
        """``(measurement, its quantities)`` in job order."""
        driven = self.drive.kind != "static"
        return [(name, quantities_of(name, self.dim, driven)) for name, _ in self.measurements]

    def consistency_rules(self) -> list[Rule]:
        """Bulk-boundary rules that apply to the quantities this job stores."""
        return rules_for({q.name for _, qs in self.quantities() for q in qs},
                         {name: dict(opts) for name, opts in self.measurements})

    def values_at(self, index: int, overrides: Mapping[str, float] | None = None
                  ) -> dict[str, complex]:
        """All parameter values (fixed, swept, derived) at flat grid index ``index``; swept
        parameters in ``overrides`` take the given (off-grid) values instead."""
        multi = np.unravel_index(index, self.shape) if self.axes else ()
        values: dict[str, complex] = dict(self.fixed)
        for axis, i in zip(self.axes, multi):
            values[axis.name] = axis.values[i]
        values.update(overrides or {})
        for name, expr in self.derived:
            values[name] = expr(values)
        return values

    def build_model(self, values: Mapping[str, complex]) -> TightBinding:
        if self.custom is not None:
            return self.custom.build(values)
        factory = MODELS[self.model].func
        return factory(**{p: real(values[p]) for p in self.model_params})

    def point(self, index: int, overrides: Mapping[str, float] | None = None) -> Point:
        values = self.values_at(index, overrides)
        drive = (self.drive.compile(values, self.build_model) if self.drive.kind != "static"
                 else None)
        if self.drive.always_set:
            # Parameters that only the steps set: the static model is that of the first step.
            values.update({k: e(values) for k, e in self.drive.overrides[0] if k not in values})
        return Point(params=values, build=self.build_model, drive=drive,
                     filling=self.filling, gap_tol=self.gap_tol)
