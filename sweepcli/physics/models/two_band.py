"""Two-band Chern insulators: Qi-Wu-Zhang (square) and Haldane (honeycomb)."""

from __future__ import annotations

import numpy as np

from ..lattice import TightBinding, assemble, fourier_term, pauli
from ..registry import Param
from . import MODELS, SQUARE


@MODELS.register(
    "qwz",
    description="Qi-Wu-Zhang two-band Chern insulator on the square lattice",
    source="Qi, Wu and Zhang, PRB 74, 085308 (2006); Asboth, Oroszlany and Palyi, "
           "A Short Course on Topological Insulators (Springer 2016), ch. 6",
    params=(Param("m", doc="staggered mass u", units="t"),
            Param("t", default=1.0, doc="hopping", units="energy")),
    dim=2, norb=2,
)
def qwz(*, m: float, t: float = 1.0) -> TightBinding:
    """H(k) = t sin k1 sigma_x + t sin k2 sigma_y + (m + t cos k1 + t cos k2) sigma_z.

    Asboth et al.'s convention (their u is our m). Gap closes at m = 0 (at (0, pi) and (pi, 0)),
    m = -2t (at (0, 0)) and m = +2t (at (pi, pi)); Chern number of the lower band is nonzero for
    0 < |m| < 2|t| with opposite signs on either side of m = 0.
    """
    sx, sy, sz = pauli("x"), pauli("y"), pauli("z")
    terms = [fourier_term((1, 0), cos=t * sz, sin=t * sx),
             fourier_term((0, 1), cos=t * sz, sin=t * sy)]
    return assemble(SQUARE, np.zeros((2, 2)), m * sz, terms)


HONEYCOMB = np.array([[1.0, 0.0], [0.5, np.sqrt(3.0) / 2.0]])
# Displacements (reduced) of the three next-nearest-neighbour vectors b_1 = a_1,
# b_2 = a_2 - a_1, b_3 = -a_2; they are related by 120-degree rotations and sum to zero.
_HALDANE_NNN = ((1, 0), (-1, 1), (0, -1))


@MODELS.register(
    "haldane",
    description="Haldane model: graphene with a staggered flux and a sublattice mass",
    source="Haldane, PRL 61, 2015 (1988)",
    params=(Param("t1", default=1.0, doc="nearest-neighbour hopping", units="energy"),
            Param("t2", doc="next-nearest-neighbour hopping modulus", units="energy"),
            Param("phi", doc="phase of the next-nearest-neighbour hopping", units="rad"),
            Param("M", doc="sublattice mass (+M on A, -M on B)", units="energy")),
    dim=2, norb=2,
)
def haldane(*, t2: float, phi: float, M: float, t1: float = 1.0) -> TightBinding:
    """Haldane's honeycomb Chern insulator.

    Lattice: ``a_1 = (1, 0)``, ``a_2 = (1/2, sqrt(3)/2)`` (Bravais constant 1, right-handed, so
    the reduced ``(k_1, k_2)`` orientation is the Cartesian one); sublattice A at reduced
    position ``(1/3, 1/3)``, B at ``(2/3, 2/3)``, nearest-neighbour distance ``1/sqrt(3)``.
    Basis order (A, B), Pauli matrices ``sigma`` in sublattice space.

    Each A site couples with ``t1`` to the B sites of its own cell and of the cells ``-a_1``
    and ``-a_2``; next-nearest neighbours are joined along ``b_1 = a_1``, ``b_2 = a_2 - a_1``,
    ``b_3 = -a_2`` with amplitude ``t2 exp(+i phi)`` on A and ``t2 exp(-i phi)`` on B
    (``<A, 0|H|A, b_i> = t2 e^{i phi}``), Haldane's flux pattern with zero net flux per cell.
    In the periodic gauge (reduced momenta, ``k.b_i`` = ``k_1``, ``k_2 - k_1``, ``-k_2``)::

        H(k) = 2 t2 cos(phi) sum_i cos(k.b_i) 1
               + t1 [ (1 + cos k_1 + cos k_2) sigma_x + (sin k_1 + sin k_2) sigma_y ]
               + [ M - 2 t2 sin(phi) sum_i sin(k.b_i) ] sigma_z

    The nearest-neighbour term vanishes at ``K = (2 pi/3, -2 pi/3)`` and ``K' = -K``, where
    ``sum_i sin(k.b_i) = +3 sqrt(3)/2`` and ``-3 sqrt(3)/2``. The gap therefore closes at K
    for ``M = 3 sqrt(3) t2 sin(phi)`` and at K' for ``M = -3 sqrt(3) t2 sin(phi)`` (while
    ``|t2| < |t1|/3``, so that the bands do not overlap). Phase diagram (Haldane 1988): the
    lower band has Chern number +-1 for ``|M| < 3 sqrt(3) |t2 sin(phi)|``, with the sign of
    ``-sin(phi)`` in the convention of :func:`sweepcli.physics.chern.fhs_chern`, and 0
    outside.
    """
    s0, sx, sz = pauli("0"), pauli("x"), pauli("z")
    ab = np.zeros((2, 2), complex)
    ab[0, 1] = t1  # <A, 0|H|B, R> for R = -a_1, -a_2 (R = 0 is in onsite)
    terms = [((-1, 0), ab), ((0, -1), ab)]
    terms += [fourier_term(b, cos=2.0 * t2 * np.cos(phi) * s0, sin=-2.0 * t2 * np.sin(phi) * sz)
              for b in _HALDANE_NNN]
    return assemble(HONEYCOMB, [[1 / 3, 1 / 3], [2 / 3, 2 / 3]], t1 * sx + M * sz, terms)


@MODELS.register(
    "graphene_field",
    description="graphene (honeycomb, nearest neighbours) in a uniform vector potential",
    source="Oka and Aoki, PRB 79, 081406 (2009); Kitagawa, Oka, Brataas, Fu and Demler, PRB 84, "
           "235108 (2011)",
    params=(Param("t", default=1.0, doc="nearest-neighbour hopping", units="energy"),
            Param("M", default=0.0, doc="sublattice mass (+M on A, -M on B)", units="energy"),
            Param("ax", default=0.0, doc="vector potential along x (Peierls phase per length)",
                  units="1/a"),
            Param("ay", default=0.0, doc="vector potential along y", units="1/a")),
    dim=2, norb=2,
)
def graphene_field(*, t: float = 1.0, M: float = 0.0, ax: float = 0.0, ay: float = 0.0
                   ) -> TightBinding:
    """Graphene with Peierls phases ``<A|H|B> = t exp(i A . delta)`` for a uniform vector
    potential ``A = (ax, ay)`` (Cartesian, charge and hbar absorbed; ``delta`` the bond from A to
    B). Geometry and basis as :func:`haldane`; with ``A = 0``::

        H(k) = t [ (1 + cos k_1 + cos k_2) sigma_x + (sin k_1 + sin k_2) sigma_y ] + M sigma_z

    A time-dependent ``A(t) = A0 (cos wt, sin wt)`` (circularly polarised light, set through a
    harmonic drive of ``ax`` and ``ay``) opens a gap at the Dirac points K, K' and gives the
    Floquet bands Chern numbers +-1 (Oka and Aoki 2009; Kitagawa et al. 2011). The gap closes
    at ``A = 0`` only where ``M = 0`` (at K and K').
    """
    vec = np.array([ax, ay])
    pos = np.array([[1 / 3, 1 / 3], [2 / 3, 2 / 3]]) @ HONEYCOMB
    terms = []
    onsite = M * pauli("z")
    for r in ((0, 0), (-1, 0), (0, -1)):
        delta = pos[1] + np.array(r) @ HONEYCOMB - pos[0]
        amp = t * np.exp(1j * vec @ delta)
        if r == (0, 0):
            onsite = onsite + np.array([[0, amp], [np.conj(amp), 0]])
        else:
            hop = np.zeros((2, 2), complex)
            hop[0, 1] = amp
            terms.append((r, hop))
    return assemble(HONEYCOMB, [[1 / 3, 1 / 3], [2 / 3, 2 / 3]], onsite, terms)
