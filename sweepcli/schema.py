"""The names every layer shares: why a stored value is missing, and what a stored variable is.

Measurements (physics) return a :class:`Reason` beside their values and declare their outputs
as :class:`Quantity`; the job file and the runner pass them on; the store writes them (the
reason codes become the ``flag_values`` of each reason variable, see :func:`reason_variable`
and results-schema.md); reports read them back. The job and the stored results both span a grid
from their axes, whose shape and size :class:`Grid` computes for both. Standard library only,
so that any layer may import it without pulling in another.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import IntEnum


class Reason(IntEnum):
    """Why a quantity at a point is missing; stored in a reason variable (uint8), one per
    measurement or one per gap (:func:`reason_variable`)."""

    OK = 0
    GAP_CLOSED = 1  # the gap the invariant needs is below the tolerance
    NOT_CONVERGED = 2  # the k-grid (or time grid) could not be raised far enough
    SECTOR_GAP_CLOSED = 3  # an auxiliary spectrum (spin, symmetry sector) is gapless
    FAILED = 4  # the evaluation raised; the message is in the point's failure record
    NOT_COMPUTED = 5  # the point was not (yet) evaluated
    FINITE_SIZE = 6  # a boundary count the largest allowed open sample cannot settle
    EDGE_GAP_CLOSED = 7  # the edges of the sample are gapless, so corner modes are not defined
    NO_CHIRAL_FRAME = 8  # the drive has no chiral-symmetric time frame: chiral invariants undefined
    NOT_REQUESTED = 9  # a [confirm] job did not select this cell for its boundary measurements


@dataclass(frozen=True)
class Quantity:
    """A stored output variable: lowercase snake-case name, dtype, units and long name.

    ``group`` is the reason group the quantity belongs to (``"0"`` or ``"pi"``: the quasienergy
    gap whose invariant or count it is) for a measurement that stores one reason per gap;
    ``""`` for a quantity of the whole measurement (a solver code, a k-mesh, the sectors of a
    line symmetry), which is explained by all of the measurement's reasons together.
    """

    name: str
    dtype: str  # "float64" or "int32"
    units: str
    long_name: str
    group: str = ""


def reason_variable(measurement: str, group: str = "") -> str:
    """Name of a reason variable: ``<measurement>_reason`` for a measurement with one reason,
    ``<measurement>_<group>_reason`` for one reason group of it (``corner_modes_pi_reason``)."""
    return f"{measurement}_{group}_reason" if group else f"{measurement}_reason"


class Grid:
    """The grid spanned by ``self.axes`` (objects with a ``values`` sequence): a base of the job
    and of the stored results, so that both count their points one way."""

    axes: tuple | list

    @property
    def shape(self) -> tuple[int, ...]:
        """The number of ``values`` of each axis, in axis order."""
        return tuple(len(a.values) for a in self.axes)

    @property
    def size(self) -> int:
        """Number of grid points: the product of :attr:`shape` (1 for no axes)."""
        return math.prod(self.shape)
