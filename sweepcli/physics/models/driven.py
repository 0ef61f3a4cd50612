"""Lattices whose parameters are switched by periodic drives.

The step-driven chiral chain needs no model of its own: :func:`~.chains.ssh` with ``v`` and
``w`` overridden per step serves (Asboth and Obuse, PRB 88, 121406 (2013)).
"""

from __future__ import annotations

import numpy as np

from ..lattice import TightBinding, assemble, pauli
from ..registry import Param
from . import MODELS

#: Primitive vectors of the bipartite square lattice (nearest-neighbour distance 1): the cell
#: holds one A and one B site, A at the origin and B at (1, 0).
CHECKERBOARD = np.array([[1.0, 1.0], [1.0, -1.0]])

#: Cell displacements R of the B site reached from the A site of cell 0 along the four bonds
#: b1 = +x, b2 = +y, b3 = -x, b4 = -y (Cartesian b = R + (1, 0) with R in units of the
#: primitive vectors above).
BONDS = ((0, 0), (0, -1), (-1, -1), (-1, 0))


@MODELS.register(
    "bipartite_square",
    description="bipartite square lattice with one hopping per bond direction and a sublattice "
                "potential (the lattice of the anomalous five-step drive)",
    source="Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013), Fig. 1 (from memory)",
    params=(Param("j1", default=0.0, doc="hopping along bond b1 = +x from A", units="energy"),
            Param("j2", default=0.0, doc="hopping along bond b2 = +y from A", units="energy"),
            Param("j3", default=0.0, doc="hopping along bond b3 = -x from A", units="energy"),
            Param("j4", default=0.0, doc="hopping along bond b4 = -y from A", units="energy"),
            Param("delta", default=0.0, doc="sublattice potential, +delta on A and -delta on B",
                  units="energy")),
    dim=2, norb=2,
)
def bipartite_square(*, j1: float = 0.0, j2: float = 0.0, j3: float = 0.0, j4: float = 0.0,
                     delta: float = 0.0) -> TightBinding:
    """Basis (A, B); ``H(k) = delta sigma_z + sum_mu j_mu (e^{i k.R_mu} |A><B| + h.c.)``.

    ``R_mu`` (:data:`BONDS`) is the cell of the B site at Cartesian offset ``b_mu`` from A, with
    ``b1 = +x, b2 = +y, b3 = -x, b4 = -y`` and primitive vectors ``a1 = (1, 1)``,
    ``a2 = (1, -1)``. The five-step drive switches on ``j_mu = J`` alone in step ``mu``
    (``mu = 1..4``) and ``delta`` alone in step 5, each for ``T/5``. At ``J T/5 = pi/2`` each
    step moves a particle fully across its bond, so in the bulk a particle starting on A runs
    around a plaquette, +x, -y, -x, +y (clockwise), and is back after four steps:
    ``U(k, 4T/5) = 1``, every Floquet band is flat and trivial, yet the drive has one chiral
    edge mode in each gap (Rudner et al. 2013). With this order the winding of
    :func:`sweepcli.physics.floquet_chern.rudner_integral` is ``W_0 = W_pi = +1``; reversing the
    order of the steps reverses the circulation and the sign.
    """
    onsite = delta * pauli("z")
    terms = []
    for j, r in zip((j1, j2, j3, j4), BONDS):
        t = np.zeros((2, 2), complex)
        t[0, 1] = j
        if any(r):
            terms.append((r, t))
        else:
            onsite = onsite + t + t.conj().T
    return assemble(CHECKERBOARD, [[0.0, 0.0], [0.5, 0.5]], onsite, terms)
