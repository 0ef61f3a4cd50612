"""The names every layer shares: why a stored value is missing, and what a stored variable is.

Measurements (physics) return a :class:`Reason` beside their values and declare their outputs
as :class:`Quantity`; the job file and the runner pass them on; the store writes them (the
reason codes become the ``flag_values`` of each ``<measurement>_reason`` variable, see
results-schema.md); reports read them back. The job and the stored results both span a grid
from their axes, whose shape and size :func:`grid_shape` and :func:`grid_size` compute. Standard
library only, so that any layer may import it without pulling in another.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from enum import IntEnum
from typing import Any


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


def grid_shape(axes: Iterable[Any]) -> tuple[int, ...]:
    """Shape of the grid spanned by ``axes``, in axis order: the number of ``values`` of each
    (objects with a ``values`` sequence, such as the job's and the store's axes)."""
    return tuple(len(a.values) for a in axes)


def grid_size(axes: Iterable[Any]) -> int:
    """Number of points of the grid spanned by ``axes``: the product of :func:`grid_shape`
    (1 for no axes)."""
    return math.prod(grid_shape(axes))
