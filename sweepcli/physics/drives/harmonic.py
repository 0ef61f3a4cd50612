"""Smooth drives ``H(t)`` (harmonic terms in the job file), integrated time-ordered in slices."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass

from ..lattice import TightBinding
from ..registry import Param
from . import DRIVES
from .base import (
    SLICING_KEYS,
    Factor,
    SlicedDrive,
    Slicing,
    check_period,
    read_slicing,
    real,
    smooth_factors,
)


@dataclass(frozen=True)
class HarmonicSpec(Slicing):
    """The ``[[drive.term]]`` tables: ``(parameter, amplitude, harmonic n, phase)`` adding
    ``amplitude * cos(n omega t + phase)`` to the parameter, and the slicing settings (see
    :mod:`sweepcli.physics.drives.base` for the hook contract)."""

    terms: tuple

    covers_period = False

    def expressions(self) -> list:
        return [e for _, amp, _, phase in self.terms for e in (amp, phase)]

    def overrides(self) -> list[tuple]:
        return []

    def varied(self) -> set[str]:
        return {p for p, *_ in self.terms}

    def check(self, values: Mapping[str, complex], period: float,
              fail: Callable[[str], Exception]) -> None:
        """Nothing beyond the period: any amplitude and phase give a drive."""

    def compile(self, values: Mapping[str, complex], period: float,
                build: Callable[[Mapping[str, complex]], TightBinding]) -> HarmonicDrive:
        omega = 2 * math.pi / period
        terms = [(p, real(a(values)), n, real(ph(values))) for p, a, n, ph in self.terms]

        def hamiltonian_at(t: float) -> TightBinding:
            shifted = dict(values)
            for p, amp, n, phase in terms:
                shifted[p] = real(shifted[p]) + amp * math.cos(n * omega * t + phase)
            return build(shifted)

        return HarmonicDrive(period, hamiltonian_at, **self.slicing())


def parse_harmonic(t: Mapping, r) -> HarmonicSpec:
    """The ``[[drive.term]]`` tables (``param``, ``amplitude``, ``harmonic``, ``phase``) and
    ``tol``, ``max_slices``, ``scheme``."""
    terms = []
    for i, term in enumerate(r.entries("term")):
        table = f"drive.term.{i}"
        r.only(table, term, ["param", "amplitude", "harmonic", "phase"])
        param = term.get("param")
        if param not in r.model_params:
            raise r.fail(table, "param", "a model parameter (" + ", ".join(sorted(r.model_params))
                         + ")", param, r.suggest(str(param), r.model_params))
        n = r.number(table, "harmonic", term.get("harmonic", 1),
                     Param("harmonic", kind="int", low=1))
        terms.append((param, r.expr(table, "amplitude", term.get("amplitude")),
                      n, r.expr(table, "phase", term.get("phase", 0))))
    return HarmonicSpec(tuple(terms), **read_slicing(t, r))


@DRIVES.register("harmonic", description="model parameters plus sums of cos(n omega t + phase), "
                 "integrated in time slices until U converges",
                 source="Blanes and Moan, J. Comput. Phys. 227, 4566 (2008) (integrator)",
                 keys=("term", *SLICING_KEYS), parse=parse_harmonic)
@dataclass(frozen=True, eq=False)
class HarmonicDrive(SlicedDrive):
    """Smooth drive ``H(t)``, evaluated on demand and integrated time-ordered (sliced).

    Parameters
    ----------
    period : float
        ``T > 0``.
    hamiltonian_at : callable ``t -> TightBinding``
        The Hamiltonian at time ``t`` (e.g. a model factory with ``cos(omega t)`` terms).
    tol, max_slices, scheme, min_slices
        Keyword-only; see :class:`~sweepcli.physics.drives.base.SlicedDrive`.
    """

    period: float
    hamiltonian_at: Callable[[float], TightBinding]

    def __post_init__(self) -> None:
        object.__setattr__(self, "period", check_period(self.period))
        super().__post_init__()

    @property
    def norb(self) -> int:
        return self.hamiltonian_at(0.0).norb

    @property
    def dim(self) -> int:
        return self.hamiltonian_at(0.0).dim

    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors for ``slices`` equal slices of ``[start, stop]`` (default ``min_slices``)."""
        stop = start + self.period if stop is None else stop
        n = self.min_slices if slices is None else int(slices)
        return smooth_factors(self.hamiltonian_at, start, stop, n, self.scheme)
