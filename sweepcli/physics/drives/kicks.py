"""A static Hamiltonian interrupted by delta kicks."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

from ..lattice import TightBinding
from . import DRIVES
from .base import (
    TIME_RTOL,
    Drive,
    Factor,
    check_compatible,
    check_period,
    combine,
    overridden,
    real,
)


@dataclass(frozen=True)
class KicksSpec:
    """The ``[[drive.kick]]`` tables: ``(time, strength, overrides)`` with the time a fraction
    of the period and the kick ``exp(-i strength H)``, ``H`` the model at the overridden
    parameters (see :mod:`sweepcli.physics.drives.base` for the hook contract)."""

    kicks: tuple

    covers_period = False

    def expressions(self) -> list:
        return [e for time, strength, over in self.kicks
                for e in (time, strength, *(x for _, x in over))]

    def overrides(self) -> list[tuple]:
        return [over for *_, over in self.kicks]

    def varied(self) -> set[str]:
        return {k for over in self.overrides() for k, _ in over}

    def check(self, values: Mapping[str, complex], period: float,
              fail: Callable[[str], Exception]) -> None:
        for i, (time, _, _) in enumerate(self.kicks):
            tv = real(time(values))
            if not 0 <= tv < 1:
                raise fail(f"[drive.kick.{i}] time must be a fraction of the period in [0, 1); "
                           f"it is {tv:g}")

    def compile(self, values: Mapping[str, complex], period: float,
                build: Callable[[Mapping[str, complex]], TightBinding]) -> KickDrive:
        kicks = tuple((real(time(values)) * period,
                       combine([(real(strength(values)), build(overridden(values, over)))]))
                      for time, strength, over in self.kicks)
        return KickDrive(period, build(values), kicks)


def parse_kicks(t: Mapping, r) -> KicksSpec:
    """The ``[[drive.kick]]`` tables (``time``, ``strength``, ``set``)."""
    kicks = []
    for i, kick in enumerate(r.entries("kick")):
        table = f"drive.kick.{i}"
        r.only(table, kick, ["time", "strength", "set"])
        if "time" not in kick:
            raise r.fail(table, "time", "the kick time as a fraction of the period, in [0, 1)",
                         None)
        kicks.append((r.expr(table, "time", kick["time"]),
                      r.expr(table, "strength", kick.get("strength", 1)),
                      r.overrides(table, kick.get("set"))))
    return KicksSpec(tuple(kicks))


@DRIVES.register("kicks", description="a static Hamiltonian interrupted by delta kicks "
                 "exp(-i strength H_kick)", source="Casati, Chirikov, Izrailev and Ford, "
                 "Lecture Notes in Physics 93, 334 (1979) (kicked rotor; from memory)",
                 keys=("kick",), parse=parse_kicks)
@dataclass(frozen=True, eq=False)
class KickDrive(Drive):
    """A static Hamiltonian interrupted by delta kicks ``exp(-i K_j)`` at times ``t_j`` (exact).

    Parameters
    ----------
    period : float
        ``T > 0``.
    base : TightBinding
        Evolves the system between kicks.
    kicks : tuple of (time, TightBinding)
        Kick times in ``[0, T)``; a kick at ``t`` acts at the instant ``t`` (a window
        ``[start, stop)`` contains the kicks with ``start <= t < stop``). ``K`` is
        dimensionless (the kick strength times its duration).
    """

    period: float
    base: TightBinding
    kicks: tuple[tuple[float, TightBinding], ...] = field(default=())

    def __post_init__(self) -> None:
        period = check_period(self.period)
        kicks = tuple(sorted(((float(t), k) for t, k in self.kicks), key=lambda x: x[0]))
        for t, _ in kicks:
            if not (0 <= t < period):
                raise ValueError(f"kick time {t} is outside [0, {period})")
        check_compatible([self.base] + [k for _, k in kicks], "drive part")
        object.__setattr__(self, "period", period)
        object.__setattr__(self, "kicks", kicks)

    @property
    def norb(self) -> int:
        return self.base.norb

    @property
    def dim(self) -> int:
        return self.base.dim

    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors from ``start`` to ``stop`` (default ``start + T``); kicks have duration 1."""
        stop = start + self.period if stop is None else stop
        T = self.period
        eps = TIME_RTOL * T
        events = []
        m0, m1 = math.floor(start / T) - 1, math.ceil(stop / T) + 1
        for m in range(m0, m1 + 1):
            for t, k in self.kicks:
                tt = t + m * T
                if start - eps <= tt < stop - eps:
                    events.append((tt, k))
        events.sort(key=lambda x: x[0])
        out: list[Factor] = []
        t = start
        for tt, k in events:
            if tt - t > eps:
                out.append((tt - t, self.base))
            out.append((1.0, k))
            t = max(t, tt)
        if stop - t > eps:
            out.append((stop - t, self.base))
        return out
