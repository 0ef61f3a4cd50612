"""Breathing kagome lattice: three sites per cell, corner modes on triangular flakes."""

from __future__ import annotations

import numpy as np

from ..lattice import TightBinding, assemble
from ..registry import Param
from ..rotation import site_rotation
from . import MODELS

#: Triangular Bravais lattice, ``a_2`` = ``a_1`` rotated by 60 degrees (lattice constant 1).
TRIANGULAR = np.array([[1.0, 0.0], [0.5, np.sqrt(3.0) / 2.0]])
#: Sites A, B, C of the upward triangle of a cell (reduced coordinates): the cell origin and the
#: midpoints of a_1 and a_2, so nearest neighbours are 1/2 apart.
KAGOME_SITES = ((0.0, 0.0), (0.5, 0.0), (0.0, 0.5))


@MODELS.register(
    "breathing_kagome",
    description="breathing kagome lattice, intra-cell t_a and inter-cell t_b hoppings, three "
                "bands",
    source="Ezawa, PRL 120, 026801 (2018)",
    params=(Param("ta", doc="hopping inside the upward triangle (the cell)", units="energy"),
            Param("tb", default=1.0, doc="hopping inside the downward triangle (between cells)",
                  units="energy"),
            Param("mu", default=0.0, doc="onsite energy of every site", units="energy")),
    dim=2, norb=3,
)
def breathing_kagome(*, ta: float, tb: float = 1.0, mu: float = 0.0) -> TightBinding:
    """Breathing kagome lattice (Ezawa 2018): ``H = -t_a sum_up - t_b sum_down + mu``.

    Sites A, B, C at the corner and the midpoints of ``a_1`` and ``a_2`` of the cell (lattice
    vectors ``a_1 = (1, 0)``, ``a_2 = (1/2, sqrt 3/2)``); each upward triangle (one cell) has
    hoppings ``-t_a`` between its three sites, each downward triangle (B of cell R, A of cell
    R + a_1, C of cell R + a_1 - a_2, ...) ``-t_b``. Basis (A, B, C)::

        H(k) = mu - [[0, t_a + t_b e^{-i k_1}, t_a + t_b e^{-i k_2}],
                     [.., 0, t_a + t_b e^{i (k_1 - k_2)}],
                     [.., .., 0]]        (Hermitian)

    Facts checked in this project (tests/physics/test_kagome.py, by diagonalisation): one band
    is flat at ``mu + t_a + t_b``; the gap between the lowest two bands closes at K only at
    ``t_a = t_b`` (the kagome Dirac point), and zero energy (``mu = 0``) lies in that gap for
    ``-1 < t_a / t_b < 1/2`` and ``t_a / t_b > 2``.

    From Ezawa (2018), as remembered here: a triangular flake built of whole upward triangles
    (the built-in ``triangle`` polygon of this lattice) has one zero-energy state at each of
    its three corners for ``-1 < t_a / t_b < 1/2`` (topological phase; the corner site's bonds
    to the rest are the weak ``t_a`` ones) and none for ``t_a / t_b > 2`` (trivial); between
    the two zero energy lies in a bulk band. The bulk polarisation changes at ``t_a = t_b``,
    where the gap closes. The states are at zero energy only for ``mu = 0`` (``mu`` moves them
    with every other level); Ezawa protects them with a generalised chiral symmetry of the
    three sublattices, which this model does not register: there is no ``"chiral"`` operator
    (no two-sublattice chiral symmetry exists on three sublattices), so corner counts are by
    pinning, in a window centred on the energy of the modes (``energy = 0`` in
    ``[measure.polygon_modes]``).

    Rotation (``rotations[3]``): the three-fold rotation about the centre of the upward
    triangle (reduced (1/6, 1/6)) takes A to B to C, with no cell shifts; a symmetry for every
    parameter set. Its indicator gives the corner charge 1/3 at filling one (one band) for
    ``-1 < t_a / t_b < 1/2`` and 0 for ``t_a / t_b > 2`` (:mod:`sweepcli.physics.rotation`;
    the 1/3 is BLH 2019's, from memory, and checked against flakes in
    tests/physics/test_rotation.py).
    """
    j = np.ones((3, 3)) - np.eye(3)
    onsite = mu * np.eye(3) - ta * j
    terms = []
    for (i, k), r in (((1, 0), (1, 0)),     # B(R) - A(R + a_1)
                      ((2, 0), (0, 1)),     # C(R) - A(R + a_2)
                      ((1, 2), (1, -1))):   # B(R) - C(R + a_1 - a_2)
        t = np.zeros((3, 3))
        t[i, k] = -tb
        terms.append((r, t))
    rot = site_rotation(TRIANGULAR, KAGOME_SITES, 3, (1.0 / 6.0, 1.0 / 6.0))
    return assemble(TRIANGULAR, KAGOME_SITES, onsite, terms, rotations={3: rot})
