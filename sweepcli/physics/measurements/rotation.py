"""Corner charge from the rotation eigenvalues of the filled bands at the high-symmetry momenta
(Benalcazar, Li and Hughes, PRB 99, 245151 (2019); :mod:`sweepcli.physics.rotation`).

Static 2D jobs whose model provides a ``C_n`` rotation (``TightBinding.rotations``: the
built-in ``bbh`` (C4, ``delta = 0``), ``breathing_kagome`` (C3) and ``kekule_honeycomb``
(C6), and a custom model's ``[model.rotation]``; the job file refuses the measurement on a model
that provides none, flagged ``rotation=True`` here). The rotation is checked against the
Hamiltonian before its eigenvalues are read: a declared rotation that is not a symmetry raises
(the point is ``FAILED`` with the message).
"""

from __future__ import annotations

import math
from typing import Any

from ...schema import Quantity, Reason
from .. import rotation as rt
from ..point import Point
from ..registry import Param
from . import MEASUREMENTS
from .driven import bulk_closed

_BLH = "Benalcazar, Li and Hughes, PRB 99, 245151 (2019) (formulas from memory)"

#: The indices stored in ``corner_charge_i1``, ``_i2``, ``_i3`` for each order.
INDEX_SLOTS = {4: ("X1(2)", "M1(4)", "M2(4)"), 3: ("K1(3)", "K2(3)", None),
               6: ("M1(2)", "K1(3)", "K2(3)")}

_QUANTITIES = (
    Quantity("corner_charge", "float64", "1",
             "corner charge of a C_n-symmetric flake from the rotation indicators, in units of "
             "the electron charge (filled states +1 against a uniform background), mod 1"),
    Quantity("corner_charge_order", "int32", "1", "order n of the rotation used (3, 4 or 6)"),
    Quantity("corner_charge_i1", "int32", "1",
             "first indicator: [X_1^(2)] (C4), [K_1^(3)] (C3), [M_1^(2)] (C6)"),
    Quantity("corner_charge_i2", "int32", "1",
             "second indicator: [M_1^(4)] (C4), [K_2^(3)] (C3), [K_1^(3)] (C6)"),
    Quantity("corner_charge_i3", "int32", "1",
             "third indicator: [M_2^(4)] (C4), none (C3), [K_2^(3)] (C6)"),
    Quantity("corner_charge_symmetry_error", "float64", "1",
             "largest |H(k') - D H(k) D^dagger| of the symmetry check, relative to the largest "
             "hopping"),
)


@MEASUREMENTS.register(
    "corner_charge",
    description="corner charge of C3, C4 and C6 crystalline insulators from the rotation "
                "eigenvalues of the filled bands at the high-symmetry momenta",
    source=_BLH,
    params=(Param("order", kind="choice", default=0, choices=(0, 3, 4, 6),
                  doc="order n of the rotation (3, 4 or 6); 0 takes the highest order the "
                      "model provides", sweepable=False),),
    quantities=_QUANTITIES, dims=(2,), driven=False, operators=(), rotation=True,
)
def corner_charge(point: Point, *, order: int = 0) -> dict[str, Any]:
    """The BLH corner charge and its indices.

    Missing with ``GAP_CLOSED`` where the gap above the filled bands is closed, with
    ``NO_SYMMETRY`` where the model has no rotation of the order at this point (``bbh`` with
    ``delta != 0``) and where the rotation's ``n``-th power is -1 (a pi flux through its
    centre: ``bbh``), for which the formulas do not hold; the indices are then still stored.
    """
    out: dict[str, Any] = {q.name: (None if q.dtype == "int32" else math.nan)
                           for q in _QUANTITIES}
    rots = point.tb.rotations
    n = order or max((m for m in rots if m in rt.ORDERS), default=0)
    if n not in rots:
        return out | {"reason": Reason.NO_SYMMETRY}
    out["corner_charge_order"] = n
    if bulk_closed(point):
        return out | {"reason": Reason.GAP_CLOSED}
    ind = rt.indicators(point.tb, rots[n], point.nocc)
    out["corner_charge_symmetry_error"] = ind.symmetry_error
    for slot, name in zip(("i1", "i2", "i3"), INDEX_SLOTS[n]):
        if name is not None:
            out[f"corner_charge_{slot}"] = ind.indices[name]
    if ind.charge is None:
        return out | {"reason": Reason.NO_SYMMETRY}
    out["corner_charge"] = float(ind.charge)
    return out | {"reason": Reason.OK}
