"""Four-band models of the quantum spin Hall effect and of higher-order topology.

``bhz``: Bernevig-Hughes-Zhang; ``bhz_corner``: BHZ with a C4- and T-breaking mass (corner
modes); ``bbh``: Benalcazar-Bernevig-Hughes quadrupole insulator. All three have four orbitals
per cell on the square lattice and a Kronecker basis ``tau (x) sigma`` (``pauli("ab")`` is
``tau_a (x) sigma_b``), so the basis order is (tau up, sigma up), (tau up, sigma down),
(tau down, sigma up), (tau down, sigma down).
"""

from __future__ import annotations

import numpy as np

from ..lattice import TightBinding, assemble, fourier_term, pauli
from ..registry import Param
from ..rotation import site_rotation
from . import MODELS, SQUARE

_AT_ORIGIN = np.zeros((4, 2))


@MODELS.register(
    "bhz",
    description="Bernevig-Hughes-Zhang quantum spin Hall model, four bands (orbital x spin)",
    source="Bernevig, Hughes and Zhang, Science 314, 1757 (2006)",
    params=(Param("M", doc="band-inversion mass", units="energy"),
            Param("A", default=1.0, doc="spin-orbit (linear) coupling", units="energy"),
            Param("B", default=1.0, doc="quadratic mass curvature", units="energy"),
            Param("C", default=0.0, doc="energy offset", units="energy"),
            Param("D", default=0.0, doc="particle-hole asymmetry", units="energy"),
            Param("mix", default=0.0, doc="time-reversal-symmetric spin mixing tau_y sigma_y",
                  units="energy")),
    dim=2, norb=4,
    operator_docs={"spin": "spin S = tau_0 sigma_z, conserved for mix = 0 (spin_chern "
                                   "projects on it)"},
)
def bhz(*, M: float, A: float = 1.0, B: float = 1.0, C: float = 0.0, D: float = 0.0,
        mix: float = 0.0) -> TightBinding:
    """Lattice BHZ model.

    Basis ``tau (x) sigma``: ``tau`` the orbital (E1, H1), ``sigma`` the spin, order
    (E1 up, E1 down, H1 up, H1 down). With ``c(k) = 2 - cos k_1 - cos k_2``::

        H(k) = eps(k) tau_0 sigma_0 + d3(k) tau_z sigma_0 + A sin k_1 tau_x sigma_z
               + A sin k_2 tau_y sigma_0 + mix tau_y sigma_y
        d3(k) = M - 2 B c(k),   eps(k) = C - 2 D c(k)

    Time reversal ``T = i tau_0 sigma_y K`` (``T^2 = -1``) is a symmetry for every parameter set,
    including the spin-mixing term ``mix tau_y sigma_y`` (it is real and commutes with
    ``sigma_y``). For ``mix = 0`` the spin ``S = tau_0 sigma_z`` (operator ``"spin"``) is
    conserved; the spin-up block is the two-band ``h(k) = eps + d.tau`` with
    ``d = (A sin k_1, A sin k_2, d3)`` and the spin-down block is ``h*(-k)``, i.e.
    ``d = (-A sin k_1, A sin k_2, d3)``.

    Gap closings and phase diagram (``mix = 0``, ``B > 0``, ``|D| < |B|``): the gap closes only
    where ``sin k_1 = sin k_2 = 0`` and ``d3 = 0``, i.e. at Gamma = (0, 0) for ``M = 0``, at
    X = (pi, 0) and Y = (0, pi) for ``M = 4B``, at M = (pi, pi) for ``M = 8B``, with
    ``d3(Gamma) = M``, ``d3(X) = d3(Y) = M - 4B``, ``d3(M) = M - 8B``. The spin-up Chern number is
    the degree of ``d/|d|`` (lower band, convention of :mod:`sweepcli.physics.chern`).
    The degree counts the preimages of the north pole with the orientation sign of the map,
    and equally minus those of the south pole; averaging the two, it is a sum over the four
    points ``D`` where ``d1 = d2 = 0`` of ``(1/2) sign(det J_D) sign(d3(D))``, with
    ``J_D = d(d1, d2)/d(k1, k2) = A^2 diag(cos k_1, cos k_2)`` (signs +, -, -, + at Gamma, X,
    Y, M)::

        C_up = (1/2) [sign d3(Gamma) - 2 sign d3(X) + sign d3(M)]
             = 0 (M/B < 0),  +1 (0 < M/B < 4),  -1 (4 < M/B < 8),  0 (M/B > 8)

    for ``B > 0``, and the opposite signs for ``B < 0`` (``M, B -> -M, -B`` flips ``d3``).
    T gives ``C_down = -C_up``, so the spin Chern number ``(C_up - C_down)/2 = C_up`` is nonzero
    for ``0 < M/B < 4`` and of the opposite sign for ``4 < M/B < 8`` (Bernevig, Hughes and Zhang
    2006 for the continuum version; the lattice phase diagram follows from the signs above).
    The invariant
    survives a small ``mix`` (then computed from the projected spin, Prodan's method). All four
    orbitals sit at the cell origin. The chiral-like matrix ``tau_x sigma_y`` anticommutes with
    ``H - eps`` but is a symmetry only for ``C = D = 0``, so no ``"chiral"`` is registered.
    """
    t0, tz, tzs = pauli("00"), pauli("z0"), pauli("xz")
    ty = pauli("y0")
    onsite = (C - 4 * D) * t0 + (M - 4 * B) * tz + mix * pauli("yy")
    # cos k_i enters eps with +2D and d3 with +2B.
    cos_part = 2 * D * t0 + 2 * B * tz
    terms = [fourier_term((1, 0), cos=cos_part, sin=A * tzs),
             fourier_term((0, 1), cos=cos_part, sin=A * ty)]
    return assemble(SQUARE, _AT_ORIGIN, onsite, terms, operators={"spin": pauli("0z")})


# The diagonal mirror k_1 <-> k_2 of bhz_corner, tau_z (x) (sigma_x - sigma_y)/sqrt(2): it maps
# tau_x sigma_x <-> tau_x sigma_y, tau_y -> -tau_y (matching cos k_1 - cos k_2 -> its negative)
# and leaves tau_z alone, so M H(k_1, k_2) M^+ = H(k_2, k_1).
_MIRROR_DIAG = np.kron(pauli("z"), (pauli("x") - pauli("y")) / np.sqrt(2.0))


@MODELS.register(
    "bhz_corner",
    description="BHZ-type model with a C4- and T-breaking mass: second-order topological "
                "insulator with corner modes",
    source="Schindler, Cook, Vergniory, Wang, Parkin, Bernevig and Neupert, Science Advances 4, "
           "eaat0346 (2018), eq. 1 reduced to 2D (from memory)",
    params=(Param("m", doc="mass", units="energy"),
            Param("t", default=1.0, doc="hopping", units="energy"),
            Param("delta1", default=1.0, doc="spin-orbit coupling", units="energy"),
            Param("delta2", doc="C4- and T-breaking mass amplitude", units="energy")),
    dim=2, norb=4,
    operator_docs={"chiral": "tau_x sigma_z, anticommutes with H(k)",
                   "mirror_diag": "tau_z (sigma_x - sigma_y)/sqrt(2), maps H(k1, k2) to "
                                  "H(k2, k1), commutes with H(k) on the line k1 = k2"},
)
def bhz_corner(*, m: float, delta2: float, t: float = 1.0, delta1: float = 1.0) -> TightBinding:
    """Two-dimensional second-order topological insulator.

    Basis ``tau (x) sigma`` (orbital x spin), all orbitals at the cell origin::

        H(k) = (m + t cos k_1 + t cos k_2) tau_z sigma_0
               + delta1 (sin k_1 tau_x sigma_x + sin k_2 tau_x sigma_y)
               + delta2 (cos k_1 - cos k_2) tau_y sigma_0

    This is the 2D version of eq. 1 of Schindler et al. (2018) written from memory (their
    ``k_z`` terms dropped). The four matrices anticommute, so the bands are ``+-|d(k)|``, each
    twofold degenerate, and the gap ``2 |d|`` closes only where all four coefficients vanish:
    at Gamma for ``m = -2t``, at (pi, pi) for ``m = +2t``; at X and Y for ``m = 0`` only when
    ``delta2 = 0`` (there the model is a first-order quantum spin Hall insulator, helical edge
    states; ``delta2 != 0`` gaps the edges with a mass that changes sign under C4, leaving one
    mode at each corner). Corner phase: ``|m| < 2|t|`` with ``delta2 != 0``; trivial for
    ``|m| > 2|t|``.

    Symmetries. C4 rotation and time reversal are both broken by the ``delta2`` term, their
    product is a symmetry but antiunitary and is therefore not offered as a cell operator. The
    unitary diagonal mirror ``mirror_diag = tau_z (sigma_x - sigma_y)/sqrt(2)`` satisfies
    ``mirror_diag H(k_1, k_2) mirror_diag^+ = H(k_2, k_1)``; it commutes with ``H(k)`` on the
    invariant line ``k_1 = k_2`` (eigenvalues +-1). The matrix ``tau_x sigma_z`` anticommutes
    with all four terms and is registered as ``"chiral"``; it commutes with ``mirror_diag``, so
    each mirror sector on the diagonal is itself chiral-symmetric. The spin ``sigma_z`` is not
    conserved (the ``delta1`` term mixes it) and no ``"spin"`` operator is given.
    """
    tz, ty = pauli("z0"), pauli("y0")
    terms = [fourier_term((1, 0), cos=t * tz + delta2 * ty, sin=delta1 * pauli("xx")),
             fourier_term((0, 1), cos=t * tz - delta2 * ty, sin=delta1 * pauli("xy"))]
    return assemble(SQUARE, _AT_ORIGIN, m * tz, terms,
                    operators={"chiral": pauli("xz"), "mirror_diag": _MIRROR_DIAG})


def bbh_gammas() -> tuple[np.ndarray, ...]:
    """Gamma matrices of Benalcazar, Bernevig and Hughes (2017), from memory.

    Returns ``(Gamma0, Gamma1, Gamma2, Gamma3, Gamma4)`` with ``Gamma0 = tau_3 sigma_0``,
    ``Gamma_k = -tau_2 sigma_k`` (k = 1, 2, 3), ``Gamma4 = tau_1 sigma_0``; all five anticommute.
    """
    g0 = pauli("z0")
    g1, g2, g3 = (-pauli("y" + s) for s in "xyz")
    g4 = pauli("x0")
    return g0, g1, g2, g3, g4


@MODELS.register(
    "bbh",
    description="Benalcazar-Bernevig-Hughes quadrupole insulator (pi flux per plaquette)",
    source="Benalcazar, Bernevig and Hughes, Science 357, 61 (2017) (Gamma matrices from memory)",
    params=(Param("gamma", doc="intra-cell hopping", units="energy"),
            Param("lam", default=1.0, doc="inter-cell hopping lambda", units="energy"),
            Param("delta", default=0.0, doc="onsite Gamma0 term (breaks chiral symmetry)",
                  units="energy")),
    dim=2, norb=4,
    operator_docs={"chiral": "Gamma0 = tau_z sigma_0, anticommutes with H(k); only for "
                              "delta = 0"},
)
def bbh(*, gamma: float, lam: float = 1.0, delta: float = 0.0) -> TightBinding:
    """Quadrupole insulator of Benalcazar, Bernevig and Hughes.

    With the Gamma matrices of :func:`bbh_gammas` (basis ``tau (x) sigma``)::

        H(k) = (gamma + lam cos k_1) Gamma4 + lam sin k_1 Gamma3
               + (gamma + lam cos k_2) Gamma2 + lam sin k_2 Gamma1 + delta Gamma0

    Real space: four sites per cell on the corners of a square plaquette, every bond of
    modulus ``gamma`` inside the cell and ``lam`` between cells, one bond of each plaquette
    negative (flux pi). Reading the sites off the hoppings: orbital 0 at the upper right
    (reduced position (3/4, 3/4)), 1 lower left (1/4, 1/4), 2 upper left (1/4, 3/4), 3 lower
    right (3/4, 1/4); the negative bonds are 1-2 inside the cell and 2 -> 1 of the cell above.

    Gap: Gamma1..Gamma4 anticommute, so for ``delta = 0`` the bands are
    ``+-sqrt(|gamma + lam e^{ik_1}|^2 + |gamma + lam e^{ik_2}|^2)``, each twofold degenerate;
    the gap closes only for ``|gamma| = |lam|``, at (pi, pi) for ``gamma = lam`` and at (0, 0)
    for ``gamma = -lam``, and is ``2 sqrt(2) ||gamma| - |lam||``. Phase diagram (BBH 2017):
    quadrupole phase with corner charges +-e/2 and zero-energy corner modes for
    ``|gamma/lam| < 1``, trivial for ``|gamma/lam| > 1``. ``delta`` splits the corner modes
    and breaks the chiral symmetry ``Gamma0``, which is registered (as ``"chiral"``) only when
    ``delta == 0``.

    Rotation (``rotations[4]``, only for ``delta == 0``, which ``delta`` breaks): the
    counter-clockwise four-fold rotation about the cell centre (1/2, 1/2) takes orbital 0 to
    2 to 1 to 3 to 0, with the sign -1 on the image of orbital 2 (the gauge of the pi flux;
    found by testing the signs against ``H(k') = D H(k) D^dagger``). Because of the pi flux
    through the rotation centre its fourth power is -1, so the spinless rotation indicators
    of Benalcazar, Li and Hughes (PRB 99, 245151 (2019)) are taken with the rotation times
    ``exp(i pi/4)`` and their corner-charge formula is not applied (it needs ``C_4^4 = +1``;
    :mod:`sweepcli.physics.rotation`): a flake's corner charge is 1/2 in the quadrupole phase
    (tests/physics/test_rotation.py), while the spinless formula would give 1/4.
    """
    g0, g1, g2, g3, g4 = bbh_gammas()
    terms = [fourier_term((1, 0), cos=lam * g4, sin=lam * g3),
             fourier_term((0, 1), cos=lam * g2, sin=lam * g1)]
    ops = {"chiral": g0} if delta == 0 else {}
    sites = [[0.75, 0.75], [0.25, 0.25], [0.25, 0.75], [0.75, 0.25]]
    rots = {4: site_rotation(SQUARE, sites, 4, (0.5, 0.5), phases=(1, 1, -1, 1))} \
        if delta == 0 else {}
    return assemble(SQUARE, sites, gamma * (g4 + g2) + delta * g0, terms, operators=ops,
                    rotations=rots)
