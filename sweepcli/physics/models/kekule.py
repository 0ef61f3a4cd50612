"""Honeycomb lattice with a Kekule texture: six sites per cell, C6-symmetric, corner charge on
hexagonal flakes."""

from __future__ import annotations

import numpy as np

from ..lattice import TightBinding, assemble
from ..registry import Param
from ..rotation import site_rotation
from . import MODELS
from .kagome import TRIANGULAR

#: Centre of the hexagon of a cell (reduced coordinates).
HEXAGON_CENTRE = (1.0 / 3.0, 1.0 / 3.0)
#: The six neighbour directions of the triangular lattice, counter-clockwise from a_1 (reduced).
DIRECTIONS = ((1, 0), (0, 1), (-1, 1), (-1, 0), (0, -1), (1, -1))
#: Site m of the hexagon at a third of direction m from its centre: sites of neighbouring
#: hexagons are then 1/3 apart, as the sites of one hexagon.
KEKULE_SITES = tuple((HEXAGON_CENTRE[0] + d[0] / 3.0, HEXAGON_CENTRE[1] + d[1] / 3.0)
                     for d in DIRECTIONS)


@MODELS.register(
    "kekule_honeycomb",
    description="honeycomb lattice with a Kekule texture: hexagons of six sites, intra-hexagon "
                "t0 and inter-hexagon t1 hoppings, six bands",
    source="common construction, written from memory (expanded and shrunk honeycomb: Wu and "
           "Hu, PRL 114, 223901 (2015))",
    params=(Param("t0", doc="hopping inside a hexagon (the cell)", units="energy"),
            Param("t1", default=1.0, doc="hopping between neighbouring hexagons",
                  units="energy"),
            Param("mu", default=0.0, doc="onsite energy of every site", units="energy")),
    dim=2, norb=6,
    operator_docs={"chiral": "the sublattice operator diag(1, -1, 1, -1, 1, -1) of the "
                             "honeycomb, for mu = 0"},
)
def kekule_honeycomb(*, t0: float, t1: float = 1.0, mu: float = 0.0) -> TightBinding:
    """Honeycomb lattice with a Kekule texture, written from memory as a common construction
    (the hexagon of six sites whose expansion or shrinking Wu and Hu, PRL 114, 223901 (2015),
    use for their photonic crystal).

    Triangular lattice ``a_1 = (1, 0)``, ``a_2 = (1/2, sqrt 3/2)``; the cell holds one hexagon
    of the honeycomb (centre at reduced (1/3, 1/3)), site ``m = 0..5`` a third of the way from
    the centre towards the neighbouring hexagon in direction ``60 m`` degrees, so every bond
    has length 1/3. ``H = -t0 sum_(hexagon bonds) - t1 sum_(bonds between hexagons) + mu``:
    site ``m`` hops to ``m +- 1`` of its hexagon with ``-t0`` and to site ``m + 3`` of the
    hexagon in direction ``m`` with ``-t1``. In the periodic gauge, with ``d_m`` the reduced
    direction of hexagon neighbour ``m`` (``a_1``, ``a_2``, ``a_2 - a_1``, ... for
    ``m = 0, 1, 2, ...``)::

        H(k)_{m, m+-1} = -t0,   H(k)_{m, m+3} = -t1 exp(i k.d_m),   H(k)_{mm} = mu

    Facts (checked in tests/physics/test_rotation.py by diagonalisation): for ``t0 = t1`` it is
    graphene, whose two Dirac points fold onto Gamma of the enlarged cell; at half filling
    (three bands) the gap at Gamma is ``2 |t1 - t0|``, and for ``t0, t1 > 0`` the gap closes
    only at ``t0 = t1``. The six-fold rotation about
    the hexagon centre (``rotations[6]``) and the chiral sublattice operator (``mu = 0``) are
    symmetries for every parameter set. For ``t1 > t0 > 0`` the filled bands are centred on the
    bonds between hexagons (the obstructed phase: at ``t0 = 0`` each such bond holds one
    electron), for ``t0 > t1 > 0`` on the hexagons (trivial). The corner charge of the
    obstructed phase at half filling is 1/2 (BLH 2019's C6 indicator, with the conventions of
    :mod:`sweepcli.physics.rotation`, checked against hexagonal flakes in the test).
    """
    onsite = mu * np.eye(6, dtype=complex)
    for m in range(6):
        onsite[m, (m + 1) % 6] = onsite[(m + 1) % 6, m] = -t0
    terms = []
    for m in range(3):
        t = np.zeros((6, 6))
        t[m, m + 3] = -t1
        terms.append((DIRECTIONS[m], t))
    ops = {"chiral": np.diag([1.0, -1.0, 1.0, -1.0, 1.0, -1.0])} if mu == 0 else {}
    rot = site_rotation(TRIANGULAR, KEKULE_SITES, 6, HEXAGON_CENTRE)
    return assemble(TRIANGULAR, KEKULE_SITES, onsite, terms, operators=ops, rotations={6: rot})
