"""Piecewise-constant drives: ``H(t) = H_j`` on the ``j``-th span of the period."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from ..lattice import TightBinding
from . import DRIVES
from .base import (
    TIME_RTOL,
    Factor,
    NoSymmetricTime,
    SegmentDrive,
    check_compatible,
    check_period,
    mirror_defect,
    overridden,
    real,
)


@dataclass(frozen=True)
class StepsSpec:
    """The ``[[drive.step]]`` tables: ``(span, overrides)`` per step, the span a fraction of
    the period (see :mod:`sweepcli.physics.drives.base` for the hook contract)."""

    steps: tuple

    covers_period = True

    def expressions(self) -> list:
        return [e for span, over in self.steps for e in (span, *(x for _, x in over))]

    def overrides(self) -> list[tuple]:
        return [over for _, over in self.steps]

    def varied(self) -> set[str]:
        return {k for over in self.overrides() for k, _ in over}

    def spans(self, values: Mapping[str, complex]) -> list[float]:
        return [real(span(values)) for span, _ in self.steps]

    def check(self, values: Mapping[str, complex], period: float,
              fail: Callable[[str], Exception]) -> None:
        spans = self.spans(values)
        for i, sp in enumerate(spans):
            if not sp >= 0:
                raise fail(f"[drive.step.{i}] span must be a non-negative fraction of the "
                           f"period; it is {sp:g}")
        if abs(sum(spans) - 1) > 1e-9:
            raise fail(f"[[drive.step]] spans must add up to one period (1); they add up to "
                       f"{sum(spans):.12g}")

    def compile(self, values: Mapping[str, complex], period: float,
                build: Callable[[Mapping[str, complex]], TightBinding]) -> StepDrive:
        return StepDrive(period, tuple((sp * period, build(overridden(values, over)))
                                       for sp, (_, over) in zip(self.spans(values), self.steps)))


def parse_steps(t: Mapping, r) -> StepsSpec:
    """The ``[[drive.step]]`` tables (``span``, ``set``)."""
    steps = []
    for i, step in enumerate(r.entries("step")):
        table = f"drive.step.{i}"
        r.only(table, step, ["span", "set"])
        if "span" not in step:
            raise r.fail(table, "span", "the fraction of the period this step lasts", None)
        steps.append((r.expr(table, "span", step["span"]), r.overrides(table, step.get("set"))))
    return StepsSpec(tuple(steps))


@DRIVES.register("steps", description="piecewise-constant Hamiltonians, each for a span of "
                 "the period", source="Kitagawa, Berg, Rudner and Demler, PRB 82, 235114 (2010)",
                 keys=("step",), parse=parse_steps)
@dataclass(frozen=True, eq=False)
class StepDrive(SegmentDrive):
    """Piecewise-constant drive: ``H(t) = H_j`` on the ``j``-th span of the period (exact).

    Parameters
    ----------
    period : float
        ``T > 0`` (time units, inverse energy).
    segments : tuple of (duration, TightBinding)
        In time order from ``t = 0``; durations ``>= 0`` summing to ``period`` (relative
        tolerance ``TIME_RTOL``).
    """

    period: float
    segments: tuple[Factor, ...]

    def __post_init__(self) -> None:
        period = check_period(self.period)
        segs = tuple((float(d), tb) for d, tb in self.segments)
        if not segs:
            raise ValueError("a step drive needs at least one segment")
        for i, (d, _) in enumerate(segs):
            if not (math.isfinite(d) and d >= 0):
                raise ValueError(f"segment {i} has duration {d}; durations must be >= 0")
        total = sum(d for d, _ in segs)
        if abs(total - period) > TIME_RTOL * period:
            raise ValueError(f"the segment durations sum to {total:.12g} but the period is "
                             f"{period:.12g}; they must be equal")
        check_compatible([tb for _, tb in segs], "segment")
        object.__setattr__(self, "period", period)
        object.__setattr__(self, "segments", segs)

    def boundaries(self) -> np.ndarray:
        """Switching times ``0 = b_0 <= ... <= b_N = T``, shape ``(N + 1,)``."""
        b = np.concatenate([[0.0], np.cumsum([d for d, _ in self.segments])])
        b[-1] = self.period
        return b

    def hamiltonian_index(self, t: float) -> int:
        """Index of the segment active at time ``t`` (taken modulo the period)."""
        b = self.boundaries()
        t = float(t) % self.period
        j = int(np.searchsorted(b, t, side="right")) - 1
        j = min(max(j, 0), len(self.segments) - 1)
        while self.segments[j][0] == 0 and j + 1 < len(self.segments):
            j += 1
        return j

    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors of the evolution from ``start`` to ``stop`` (default ``start + T``).

        The drive is continued periodically; zero-length pieces are dropped; ``slices`` is
        ignored (the factors are exact).
        """
        stop = start + self.period if stop is None else stop
        b = self.boundaries()
        eps = TIME_RTOL * self.period
        out: list[Factor] = []
        t = float(start)
        while t < stop - eps:
            cycle = math.floor((t + eps) / self.period)
            local = t - cycle * self.period
            j = int(np.searchsorted(b, local + eps, side="right")) - 1
            j = min(max(j, 0), len(self.segments) - 1)
            end = min(cycle * self.period + b[j + 1], stop)
            if end - t > eps:
                out.append((end - t, self.segments[j][1]))
            t = max(end, t + eps) if end <= t else end
        return out

    def mirror_points(self, chiral: np.ndarray | None = None, atol: float = 1e-10
                      ) -> list[float]:
        """Every symmetric time in ``[0, T)`` (see :meth:`symmetric_times`), in time order.

        Under the reflection ``t -> 2 t* - t`` a switching time goes to a switching time, so a
        symmetric ``t*`` lies where the nearest switching times on either side are equally far:
        a segment centre or a segment boundary. Each candidate is checked on every piece between
        the switching times and their mirror images.
        """
        T = self.period
        b = self.boundaries()
        g = None if chiral is None else np.asarray(chiral, complex)
        rel: dict[tuple[int, int], bool] = {}

        def related(i: int, j: int) -> bool:
            if (i, j) not in rel:
                rel[(i, j)] = mirror_defect(self.segments[i][1], self.segments[j][1],
                                            g) <= atol
            return rel[(i, j)]

        cands = sorted({float(x % T) for x in list(b[:-1]) + list((b[:-1] + b[1:]) / 2)})
        out = []
        for ts in cands:
            cuts = np.sort(np.concatenate([b % T, (2 * ts - b) % T, [0.0, T]]))
            cuts = cuts[np.concatenate([[True], np.diff(cuts) > TIME_RTOL * T])]
            mids = (cuts[:-1] + cuts[1:]) / 2
            if all(related(self.hamiltonian_index(m), self.hamiltonian_index(2 * ts - m))
                   for m in mids):
                out.append(ts)
        return out

    def symmetric_times(self, chiral: np.ndarray | None = None, atol: float = 1e-10
                        ) -> tuple[float, float]:
        """The two inequivalent time-reversal-symmetric starting times ``t1, t2 = t1 + T/2``.

        A time ``t*`` is symmetric when ``H(t* + s) = H(t* - s)`` for all ``s`` (or, with
        ``chiral`` given, ``chiral H(t* + s) chiral = -H(t* - s)``, the condition under which
        the frame at ``t*`` is chiral symmetric, ``chiral U chiral = U^dagger``; Asboth and
        Obuse, PRB 88, 121406 (2013)). The reflection ``t -> 2 t* - t`` on the circle of
        length ``T`` has exactly two fixed points, ``t*`` and ``t* + T/2``; a symmetric point
        is a segment centre or a segment boundary (:meth:`mirror_points`), and the first
        symmetric one in time order is returned with its partner.

        Returns
        -------
        (t1, t2) : floats in ``[0, T)``.

        Raises
        ------
        NoSymmetricTime (a ValueError)
            If no segment centre or boundary is a symmetry point.
        """
        points = self.mirror_points(chiral, atol)
        if points:
            return points[0], (points[0] + self.period / 2) % self.period
        what = "chiral-symmetric" if chiral is not None else "time-reversal-symmetric"
        raise NoSymmetricTime(f"this step drive has no {what} starting time: no segment "
                              f"centre or boundary is a mirror point of the sequence of steps")
