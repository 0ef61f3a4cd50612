"""A static Hamiltonian interrupted by delta kicks."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np

from ..lattice import TightBinding
from . import DRIVES
from .base import (
    TIME_RTOL,
    Drive,
    Factor,
    NoSymmetricTime,
    check_compatible,
    check_period,
    combine,
    mirror_defect,
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
        Kick times in ``[0, T)``; ``K`` is dimensionless (the kick strength times its
        duration). Kicks at the same time act in the order given.

    Notes
    -----
    A kick at ``t`` acts at the instant ``t``: a window ``[start, stop]`` holds the kicks
    strictly inside it, and a kick on its edge contributes half of itself there: the kicks
    ``K_1 .. K_n`` at one time are split into a first half ``K_1 .. K_h`` (``h = n // 2``)
    followed by ``K_{h+1}/2`` if ``n`` is odd, and a second half (``K_{h+1}/2`` if ``n`` is
    odd, then ``K_{h+2} .. K_n``); a window gets the second half at its start and the first
    half at its stop. Windows then compose, ``U(t3, t2) U(t2, t1) = U(t3, t1)``, a period
    starting on a kick holds it once (``exp(-i K/2)`` at each end, a frame unitarily
    equivalent to any other), and a frame starting at a symmetric time
    (:meth:`symmetric_times`) is the mirror image of itself factor by factor.
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

    def groups(self) -> list[tuple[float, tuple[TightBinding, ...]]]:
        """The kicks grouped by time: ``(t, (K_1, ..., K_n))`` in time order."""
        eps = TIME_RTOL * self.period
        out: list[tuple[float, list[TightBinding]]] = []
        for t, k in self.kicks:
            if out and t - out[-1][0] <= eps:
                out[-1][1].append(k)
            else:
                out.append((t, [k]))
        return [(t, tuple(ks)) for t, ks in out]

    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors from ``start`` to ``stop`` (default ``start + T``): a kick ``exp(-i K)`` is
        a factor of duration 1 (its half, duration 1/2); kicks on the edges of the window are
        split as the class notes say; ``slices`` is ignored (the factors are exact)."""
        stop = start + self.period if stop is None else stop
        T = self.period
        eps = TIME_RTOL * T
        if stop - start <= eps:
            return []
        events: list[tuple[float, list[Factor]]] = []
        m0, m1 = math.floor(start / T) - 1, math.ceil(stop / T) + 1
        for m in range(m0, m1 + 1):
            for t, ks in self.groups():
                tt = t + m * T
                h = len(ks) // 2
                middle = [(0.5, ks[h])] if len(ks) % 2 else []
                if abs(tt - start) <= eps:
                    events.append((start, middle + [(1.0, k) for k in ks[h + len(middle):]]))
                elif abs(tt - stop) <= eps:
                    events.append((stop, [(1.0, k) for k in ks[:h]] + middle))
                elif start < tt < stop:
                    events.append((tt, [(1.0, k) for k in ks]))
        events.sort(key=lambda x: x[0])
        out: list[Factor] = []
        t = start
        for tt, fs in events:
            if tt - t > eps:
                out.append((tt - t, self.base))
            out.extend(fs)
            t = max(t, tt)
        if stop - t > eps:
            out.append((stop - t, self.base))
        return out

    def symmetric_times(self, chiral: np.ndarray | None = None, atol: float = 1e-10
                        ) -> tuple[float, float]:
        """The two symmetric starting times ``t1, t2 = t1 + T/2`` of the kicked drive.

        Derivation. ``H(t) = H0 + sum_j K_j delta(t - t_j)`` (continued periodically). With
        ``P[h] = -chiral h chiral`` (``P[h] = h`` without ``chiral``), ``P[H(t* + s)] = H(t* -
        s)`` for all ``s`` holds exactly when ``P[H0] = H0`` (the free evolution between kicks
        is chiral odd) and the reflection ``t -> 2 t* - t`` maps the kicks onto the kicks: the
        group ``K_1 .. K_n`` at ``t_a`` has a group at ``2 t* - t_a`` (modulo ``T``) that reads
        ``P[K_n] .. P[K_1]`` (the time order reverses), and a group on a fixed point ``t*`` or
        ``t* + T/2`` is its own mirror image, ``P[K_i] = K_{n + 1 - i}`` (for one kick, ``P[K]
        = K``). The durations of free evolution between kicks then mirror as well. As the first
        group must go to some group ``b``, ``t*`` is ``(t_0 + t_b)/2`` or that plus ``T/2``;
        these candidates are checked in time order. ``factors(start=t*)`` splits a group on
        ``t*`` (and on ``t* + T/2`` for the half period) into its two halves at the ends of the
        window, so the frame is the mirror image of itself factor by factor and ``chiral U
        chiral = U^dagger`` holds exactly (Asboth and Obuse, PRB 88, 121406 (2013)).

        Returns
        -------
        (t1, t2) : floats in ``[0, T)``; ``(0, T/2)`` without kicks.

        Raises
        ------
        ValueError
            If ``H0`` is not its own image or no candidate maps the kicks onto themselves.
        """
        T = self.period
        eps = TIME_RTOL * T
        g = None if chiral is None else np.asarray(chiral, complex)
        what = "chiral-symmetric" if g is not None else "time-reversal-symmetric"
        dev = mirror_defect(self.base, self.base, g)
        if dev > atol:
            odd = "chiral odd (chiral H chiral = -H)" if g is not None else "real"
            raise NoSymmetricTime(f"this kick drive has no {what} starting time: the Hamiltonian "
                             f"between kicks is not {odd}; it deviates by {dev:.3g}")
        groups = self.groups()
        if not groups:
            return 0.0, T / 2

        def close(a: float, b: float) -> bool:
            d = (a - b) % T
            return min(d, T - d) <= eps

        def mirrored(ts: float) -> bool:
            for ta, ka in groups:
                target = (2 * ts - ta) % T
                match = [kb for tb, kb in groups if close(tb, target)]
                if not match or len(match[0]) != len(ka):
                    return False
                if any(mirror_defect(x, y, g) > atol for x, y in zip(ka, reversed(match[0]))):
                    return False
            return True

        t0 = groups[0][0]
        cands = sorted({round(((t0 + tb) / 2 + h) % T, 15) for tb, _ in groups
                        for h in (0.0, T / 2)})
        for ts in cands:
            ts = 0.0 if T - ts <= eps else ts
            if mirrored(ts):
                return ts, (ts + T / 2) % T
        raise NoSymmetricTime(f"this kick drive has no {what} starting time: no reflection of the "
                         f"period maps the kicks (at t/T = "
                         f"{', '.join(f'{t / T:.6g}' for t, _ in groups)}) onto their mirror "
                         f"images")
