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
    NOT_QUANTISED = 10  # a value a symmetry quantises (q_xy: 0 or 1/2) is not near an allowed one
    NO_SYMMETRY = 11  # the point lacks the symmetry the quantity needs (no C_n rotation, ...)


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


#: The stored variable holding each point's compute time in seconds (summed over the passes of a
#: ``[confirm]`` run); timing, not a result: ``diff`` leaves it out of the values it compares.
POINT_SECONDS = "point_seconds"

#: The CF conventions results files follow (root attribute ``Conventions``).
CF_CONVENTIONS = "CF-1.10"
#: Phrase in the ``long_name`` of a stored quantity measured in the model's own energy unit.
ENERGY_SCALE = "in units of the model's energy scale"
#: Model-relative units (as declared by models and measurements) -> the phrase that names the
#: scale in ``long_name``; the stored ``units`` is then "1" (a pure number, which UDUNITS parses).
RELATIVE_UNITS = {
    "energy": ENERGY_SCALE,
    "t": "in units of the hopping t",
    "1/a": "per lattice constant a",
}


def cf_units(units: str, long_name: str) -> tuple[str, str]:
    """``(units, long_name)`` as stored: a quantity in units of the model's energy (hopping)
    or of its lattice constant is a pure number, units ``"1"``, its scale named in
    ``long_name``; any other units are kept."""
    phrase = RELATIVE_UNITS.get(units.strip())
    if phrase is None:
        return units, long_name
    return "1", f"{long_name} ({phrase})" if phrase not in long_name else long_name


def split_scale(units: str, long_name: str) -> tuple[str, str]:
    """``(long name without its scale, short unit)`` for labels: the inverse of
    :func:`cf_units` (``"hopping (in units of the model's energy scale)"`` -> ``("hopping",
    "energy")``), and ``"(in units of X)"`` written by hand -> ``X``; other names keep their
    ``units`` (``""`` for ``"1"``)."""
    for short, phrase in RELATIVE_UNITS.items():
        if long_name.endswith(f" ({phrase})"):
            return long_name[: -len(phrase) - 3], short
    head, sep, tail = long_name.rpartition(" (in units of ")
    if sep and tail.endswith(")") and head:
        return head, tail[:-1]
    return long_name, "" if units in ("", "1") else units


def is_energy(units: str, long_name: str) -> bool:
    """Whether a stored variable is an energy (a gap): its units say so (files before
    ``Conventions``) or its long name names the model's energy scale."""
    return units in ("energy", "t") or ENERGY_SCALE in long_name or "hopping t)" in long_name


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
