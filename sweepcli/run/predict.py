"""Predicted transition lines: where U(k*) (or H(k*)) at fixed momenta gets an eigenvalue +1 or
-1 (a closing of the quasienergy gap at 0 or pi), located between neighbouring grid values.

For each swept parameter and each line of the grid along it (the other parameters at their
grid values), :func:`sweepcli.physics.transitions.transition_points` follows every eigenphase of
``U(k*)`` by eigenvector overlap and finds its crossings of 0 and pi by root finding. A static
job uses ``U = exp(-i tau H(k*))`` with ``tau`` small enough that phases stay within (-pi/2,
pi/2): its 0 crossings are the zero-energy closings.

A harmonic drive is evolved at the time slicing the measurements use
(:func:`sweepcli.physics.measurements.driven.point_slicing`, decided once per grid point): a
trial value between two grid values uses the finer slicing of the two.
"""

from __future__ import annotations

import itertools

import numpy as np

from ..jobfile import Job
from ..physics.drives.evolution import Slicing, floquet_operator, hermitian_exponential
from ..physics.measurements.driven import point_slicing
from ..physics.transitions import transition_points


def _operator(job: Job, k: np.ndarray):
    decided: dict[int, Slicing] = {}

    def slicing_at(line: list[int], values: np.ndarray, p: float) -> Slicing | None:
        """The finer slicing of the grid points around ``p`` (at ``p`` itself on the grid)."""
        if job.drive.kind == "static":
            return None
        j = int(np.searchsorted(values, p))
        around = [line[j]] if j < len(values) and values[j] == p else \
            [line[max(j - 1, 0)], line[min(j, len(line) - 1)]]
        for i in around:
            if i not in decided:
                decided[i] = point_slicing(job.point(i))
        return max((decided[i] for i in around), key=lambda s: s.slices)

    def u_of(line: list[int], axis: str, values: np.ndarray):
        def at(p: float) -> np.ndarray:
            point = job.point(line[0], {axis: p})
            if point.drive is not None:
                return floquet_operator(point.drive, k, slicing=slicing_at(line, values, p))
            h = point.tb.bloch(k)
            scale = float(np.max(np.sum(np.abs(h), axis=-1))) or 1.0
            return hermitian_exponential(h, 0.5 / scale)
        return at
    return u_of


def prediction_lines(job: Job) -> list[tuple[int, tuple[int, ...]]]:
    """The lines of the grid that predictions follow: ``(axis index, grid multi-index with 0 on
    that axis)`` for every swept parameter with two or more values, in table order."""
    lines = []
    for ai, axis in enumerate(job.axes):
        if len(axis.values) < 2:
            continue
        others = [range(len(a.values)) if i != ai else [0] for i, a in enumerate(job.axes)]
        lines += [(ai, tuple(int(m) for m in multi)) for multi in itertools.product(*others)]
    return lines


def predict_lines(job: Job, lines: list[tuple[int, tuple[int, ...]]]) -> list[list[tuple]]:
    """The table rows (:func:`predict_transitions`) of each of ``lines``
    (:func:`prediction_lines`), one list per line. Lines are independent, so any split of them
    gives the same rows; the slicing of a harmonic drive at a grid point is decided once per
    call (a point on two lines of one call is decided once)."""
    momenta = np.array(job.predict, dtype=float)
    u_of = _operator(job, momenta)
    out: list[list[tuple]] = []
    for ai, multi in lines:
        axis = job.axes[ai]
        line = [int(np.ravel_multi_index(multi[:ai] + (j,) + multi[ai + 1:], job.shape))
                for j in range(len(axis.values))]
        at = u_of(line, axis.name, np.asarray(axis.values, dtype=float))
        rows = []
        for t in transition_points(at, axis.values):
            coords = [a.values[m] for a, m in zip(job.axes, multi)]
            coords[ai] = t.value
            rows.append((axis.name, *coords, t.gap, *(momenta[t.index] / (2 * np.pi))))
        out.append(rows)
    return out


def transitions_table(job: Job, rows: list[tuple]) -> dict[str, np.ndarray]:
    """The rows of every line, in the order of :func:`prediction_lines`, as a table."""
    table: dict[str, np.ndarray] = {}
    columns = ["axis", *(a.name for a in job.axes), "gap",
               *(f"k{i + 1}" for i in range(job.dim))]
    for j, col in enumerate(columns):
        values = [r[j] for r in rows]
        table[col] = np.array(values, dtype=object if col in ("axis", "gap") else float)
    return table


def predict_transitions(job: Job) -> dict[str, np.ndarray]:
    """A table (columns of equal length): ``axis`` (the parameter varied), one column per swept
    parameter (the crossing point), ``gap`` ("0" or "pi") and ``k1``[, ``k2``] (k / 2 pi).

    Computed here, serially; a run computes the same lines as tasks beside its grid points
    (:class:`Predictions`)."""
    per_line = predict_lines(job, prediction_lines(job))
    return transitions_table(job, [r for rows in per_line for r in rows])


class Predictions:
    """The predicted transitions of a run, computed line by line as executor tasks beside the
    grid points (:func:`sweepcli.run.runner.evaluate_groups`), collected here in any order."""

    def __init__(self, job: Job) -> None:
        self.job = job
        self.lines = prediction_lines(job)
        self.rows: dict[int, list[tuple]] = {}

    @property
    def total(self) -> int:
        return len(self.lines)

    @property
    def complete(self) -> bool:
        return len(self.rows) == len(self.lines)

    def pending(self) -> list[int]:
        return [i for i in range(len(self.lines)) if i not in self.rows]

    def task(self, ids: list[int]) -> list[tuple[int, tuple[int, ...]]]:
        return [self.lines[i] for i in ids]

    def record(self, ids: list[int], rows: list[list[tuple]]) -> None:
        for i, r in zip(ids, rows):
            self.rows[i] = r

    def table(self) -> dict[str, np.ndarray]:
        if not self.complete:
            raise RuntimeError("predicted transitions are not complete")
        return transitions_table(self.job, [r for i in range(len(self.lines))
                                            for r in self.rows[i]])
