"""Ramped steps: a step drive whose parameters change linearly over a time ``ramp`` at each
switch instead of abruptly."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from ..lattice import TightBinding
from . import DRIVES
from .base import (
    SLICING_KEYS,
    TIME_RTOL,
    Factor,
    NoSymmetricTime,
    SegmentDrive,
    SlicedDrive,
    Slicing,
    combine,
    mirror_defect,
    overridden,
    read_slicing,
    real,
    smooth_factors,
)
from .steps import StepDrive, StepsSpec, parse_steps


@dataclass(frozen=True)
class RampSpec(Slicing):
    """``[[drive.step]]`` tables as for steps, the ramp time ``ramp`` (a fraction of the
    period) and the slicing settings (see :mod:`sweepcli.physics.drives.base`)."""

    steps: StepsSpec
    ramp: Callable

    covers_period = True  # at every time the parameters are the steps' values or between two

    def expressions(self) -> list:
        return [*self.steps.expressions(), self.ramp]

    def overrides(self) -> list[tuple]:
        return self.steps.overrides()

    def varied(self) -> set[str]:
        return self.steps.varied()

    def check(self, values: Mapping[str, complex], period: float,
              fail: Callable[[str], Exception]) -> None:
        self.steps.check(values, period, fail)
        ramp, shortest = real(self.ramp(values)), min(self.steps.spans(values))
        if not 0 < ramp <= shortest:
            raise fail(f"[drive] ramp must be a fraction of the period in (0, {shortest:g}] "
                       f"(the shortest step); it is {ramp:g}")

    def compile(self, values: Mapping[str, complex], period: float,
                build: Callable[[Mapping[str, complex]], TightBinding]) -> RampDrive:
        step_values = [overridden(values, over) for over in self.steps.overrides()]
        keys = sorted(self.varied())

        def between(i: int, j: int, s: float) -> TightBinding:
            # The parameters (not the Hamiltonians) change linearly, as the job file says.
            a, b = step_values[i], step_values[j]
            return build({**values, **{k: (1 - s) * a[k] + s * b[k] for k in keys}})

        drive = self.steps.compile(values, period, build)
        return RampDrive(period, drive.segments, real(self.ramp(values)) * period, between,
                         **self.slicing())


def parse_ramp(t: Mapping, r) -> RampSpec:
    """``[[drive.step]]`` tables, ``ramp`` and ``tol``, ``max_slices``, ``scheme``."""
    if "ramp" not in t:
        raise r.fail("drive", "ramp", "the ramp time at each switch as a fraction of the period",
                     None)
    return RampSpec(parse_steps(t, r), r.expr("drive", "ramp", t["ramp"]), **read_slicing(t, r))


@DRIVES.register("ramp", description="steps whose parameters change linearly over a ramp time "
                 "at each switch, integrated in time slices until U converges",
                 source="Blanes and Moan, J. Comput. Phys. 227, 4566 (2008) (integrator)",
                 keys=("step", "ramp", *SLICING_KEYS), parse=parse_ramp)
@dataclass(frozen=True, eq=False)
class RampDrive(SegmentDrive, SlicedDrive):
    """Steps joined by linear ramps (sliced).

    Step ``j`` holds ``H_j`` from ``b_j + ramp/2`` to ``b_{j+1} - ramp/2`` (``b_j`` the switching
    times of the step drive with the same segments); on ``[b_j - ramp/2, b_j + ramp/2]`` the
    Hamiltonian is ``between(j - 1, j, s)`` with ``s`` rising linearly from 0 to 1 (the switch at
    ``t = 0`` comes from the last step). As ``ramp -> 0`` the evolution tends to that of the
    step drive, with an error ``O(ramp ||H||)`` per switch.

    Parameters
    ----------
    period : float
        ``T > 0``.
    segments : tuple of (duration, TightBinding)
        As for :class:`~sweepcli.physics.drives.steps.StepDrive`.
    ramp : float
        Ramp time, ``0 < ramp <= min duration``.
    between : callable ``(i, j, s) -> TightBinding``, optional
        The Hamiltonian a fraction ``s`` of the way from step ``i`` to step ``j``; default the
        linear combination ``(1 - s) H_i + s H_j``.
    tol, max_slices, scheme, min_slices
        Keyword-only; see :class:`~sweepcli.physics.drives.base.SlicedDrive`; the slices of one
        ramp (a plateau is one exact factor).
    """

    period: float
    segments: tuple[Factor, ...]
    ramp: float
    between: Callable[[int, int, float], TightBinding] | None = None

    def __post_init__(self) -> None:
        steps = StepDrive(self.period, self.segments)  # checks period, durations, lattices
        object.__setattr__(self, "period", steps.period)
        object.__setattr__(self, "segments", steps.segments)
        shortest = min(d for d, _ in steps.segments)
        if not (math.isfinite(self.ramp) and 0 < self.ramp <= shortest * (1 + TIME_RTOL)):
            raise ValueError(f"the ramp time must be in (0, {shortest:g}] (the shortest step); "
                             f"got {self.ramp}")
        super().__post_init__()

    def _between(self, i: int, j: int, s: float) -> TightBinding:
        if self.between is not None:
            return self.between(i, j, s)
        return combine([(1 - s, self.segments[i][1]), (s, self.segments[j][1])])

    def _pieces(self) -> list[tuple[float, float, int, bool]]:
        """``(begin, end, j, is_ramp)`` over one period ``[-ramp/2, T - ramp/2)``."""
        b = StepDrive(self.period, self.segments).boundaries()
        r = self.ramp
        out = []
        for j in range(len(self.segments)):
            out.append((b[j] - r / 2, b[j] + r / 2, j, True))
            out.append((b[j] + r / 2, b[j + 1] - r / 2, j, False))
        return out

    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors from ``start`` to ``stop`` (default ``start + T``): one exact factor per
        plateau, ``slices`` slices (default ``min_slices``) per whole ramp (a part of a ramp
        gets its share, at least one)."""
        T, r = self.period, self.ramp
        stop = start + T if stop is None else stop
        n = self.min_slices if slices is None else int(slices)
        eps = TIME_RTOL * T
        nseg = len(self.segments)
        out: list[Factor] = []
        first = math.floor((start + r / 2) / T) - 1
        for cycle in range(first, math.ceil((stop + r / 2) / T) + 1):
            shift = cycle * T
            for begin, end, j, is_ramp in self._pieces():
                a, b = max(begin + shift, start), min(end + shift, stop)
                if b - a <= eps:
                    continue
                if not is_ramp:
                    out.append((b - a, self.segments[j][1]))
                    continue
                centre = shift + begin + r / 2
                m = max(1, math.ceil(n * (b - a) / r - 1e-9))

                def at(t: float, j: int = j, centre: float = centre) -> TightBinding:
                    s = float(np.clip((t - centre) / r + 0.5, 0.0, 1.0))
                    return self._between((j - 1) % nseg, j, s)

                out.extend(smooth_factors(at, a, b, m, self.scheme))
        return out

    def hamiltonian_at(self, t: float) -> TightBinding:
        """The Hamiltonian at time ``t`` (continued periodically): a plateau's ``H_j`` or a
        point of the ramp into it."""
        T, r = self.period, self.ramp
        local = (t + r / 2) % T - r / 2
        nseg = len(self.segments)
        for begin, end, j, is_ramp in self._pieces():
            if begin <= local < end:
                if not is_ramp:
                    return self.segments[j][1]
                s = float(np.clip((local - begin) / r, 0.0, 1.0))
                return self._between((j - 1) % nseg, j, s)
        return self.segments[-1][1]  # local = T - ramp/2 by rounding: the end of the last plateau

    def symmetric_times(self, chiral: np.ndarray | None = None, atol: float = 1e-10
                        ) -> tuple[float, float]:
        """The first mirror point of the steps (:meth:`StepDrive.mirror_points
        <sweepcli.physics.drives.steps.StepDrive.mirror_points>`) about which the ramps are
        symmetric too, and its partner half a period on.

        The reflection ``t -> 2 t* - t`` about a mirror point of the steps maps the switch from
        ``H_i`` to ``H_j`` onto a switch from ``P[H_j]`` to ``P[H_i]`` (``P[h] = -chiral h
        chiral``, or ``h``), and a ramp of width ``ramp`` centred on a switch onto one centred
        on its image, run backwards. For the default ``between`` (linear in the Hamiltonians)
        ``P[(1 - s) H_i + s H_j] = (1 - s) P[H_i] + s P[H_j]`` is the mirrored ramp at ``1 -
        s``; for a ``between`` that interpolates model parameters it holds when the model is
        linear in them (or the mirrored steps have the same parameters), not in general, so
        each ramp is checked at several points against the Hamiltonian at its mirror time,
        and a mirror point of the steps whose ramps are not symmetric is passed over.
        ``factors(start=t*)`` cuts a ramp on ``t*`` into two halves with equal numbers of
        equal slices, so the frame is the mirror image of itself factor by factor.

        Raises
        ------
        ValueError
            If no mirror point of the steps is one of the ramps.
        """
        T, r = self.period, self.ramp
        g = None if chiral is None else np.asarray(chiral, complex)
        steps = StepDrive(T, self.segments)
        points = steps.mirror_points(g, atol)
        b = steps.boundaries()[:-1]
        probe = np.array([0.0, 0.13, 0.31, 0.5, 0.62, 0.87, 1.0])
        times = (b[:, None] + (probe[None, :] - 0.5) * r).ravel()
        for ts in points:
            if all(mirror_defect(self.hamiltonian_at(t), self.hamiltonian_at(2 * ts - t), g)
                   <= atol for t in times):
                return ts, (ts + T / 2) % T
        what = "chiral-symmetric" if g is not None else "time-reversal-symmetric"
        if points:
            raise NoSymmetricTime(f"this ramp drive has no {what} starting time: the steps are "
                             f"symmetric about t/T = {', '.join(f'{t / T:.6g}' for t in points)}"
                             f", but the ramps between them are not")
        raise NoSymmetricTime(f"this ramp drive has no {what} starting time: no segment centre or "
                         f"boundary is a mirror point of the sequence of steps")
