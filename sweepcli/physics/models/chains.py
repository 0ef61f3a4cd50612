"""One-dimensional chains: SSH and the Kitaev chain (BdG)."""

from __future__ import annotations

import numpy as np

from ..lattice import TightBinding, assemble, fourier_term, pauli
from ..registry import Param
from . import CHAIN, MODELS


@MODELS.register(
    "ssh",
    description="Su-Schrieffer-Heeger chain, two sites A, B per cell",
    source="Su, Schrieffer and Heeger, PRL 42, 1698 (1979); Asboth, Oroszlany and Palyi, "
           "A Short Course on Topological Insulators (Springer 2016), ch. 1",
    params=(Param("v", doc="intra-cell hopping", units="energy"),
            Param("w", default=1.0, doc="inter-cell hopping", units="energy")),
    dim=1, norb=2,
    operator_docs={"chiral": "sigma_z (+1 on A, -1 on B), anticommutes with H(k)"},
)
def ssh(*, v: float, w: float = 1.0) -> TightBinding:
    """Basis (A, B); H(k) = [[0, v + w e^{-ik}], [v + w e^{ik}, 0]] (Asboth et al., eq. 1.13).

    Chiral operator sigma_z. Winding number 1 for |v| < |w|, 0 for |v| > |w|.
    """
    hop = np.zeros((2, 2), complex)
    hop[1, 0] = w  # B in cell m to A in cell m+1
    return assemble(CHAIN, [[0.0], [0.5]], v * pauli("x"), [((1,), hop)],
                    operators={"chiral": pauli("z")})


@MODELS.register(
    "kitaev",
    description="Kitaev chain of spinless p-wave paired fermions, Bogoliubov-de Gennes form",
    source="Kitaev, Physics-Uspekhi 44, 131 (2001)",
    params=(Param("mu", doc="chemical potential", units="energy"),
            Param("t", default=1.0, doc="nearest-neighbour hopping", units="energy"),
            Param("delta", default=1.0, doc="p-wave pairing amplitude", units="energy")),
    dim=1, norb=2,
    operator_docs={"chiral": "tau_x in Nambu space, anticommutes with H(k)"},
)
def kitaev(*, mu: float, t: float = 1.0, delta: float = 1.0) -> TightBinding:
    """Kitaev chain in Nambu form.

    Real-space Hamiltonian (one spinless orbital per site, lattice constant 1)::

        H = sum_j [ -mu c_j^+ c_j - t (c_j^+ c_{j+1} + h.c.) + delta (c_j c_{j+1} + h.c.) ]

    written as ``(1/2) sum_k Psi_k^+ H(k) Psi_k`` with ``Psi_k = (c_k, c_{-k}^+)``. Basis order
    (particle, hole), Pauli matrices ``tau`` in that space::

        H(k) = (-2 t cos k - mu) tau_z + 2 delta sin k tau_y

    (the sign of the ``tau_y`` term is a choice of the pairing phase; it flips the sign of the
    winding number, not its magnitude). Both Nambu components sit at the site, position 0.

    Chiral operator ``tau_x`` (it anticommutes with ``tau_z`` and ``tau_y``). The gap
    ``2 sqrt((2 t cos k + mu)^2 + 4 delta^2 sin^2 k)`` closes at ``k = 0`` for ``mu = -2t`` and
    at ``k = pi`` for ``mu = +2t`` (and along the whole line ``|mu| < 2|t|`` only if
    ``delta = 0``). Phases (Kitaev 2001): topological, one Majorana mode at each end and winding
    number ``|nu| = 1``, for ``|mu| < 2|t|`` and ``delta != 0``; trivial for ``|mu| > 2|t|``.
    In the eigenbasis ``|+-> = (1, +-1)/sqrt(2)`` of ``tau_x`` the off-diagonal block is
    ``h(k) = <-|H|+> = -2 t cos k - mu - 2 i delta sin k``, so with the convention of
    :func:`sweepcli.physics.chiral_winding.winding_number` the winding is
    ``nu = sign(t delta)`` for ``|mu| < 2|t|`` (``mu = 0``: ``h = -2 t e^{ik}`` for
    ``delta = t``) and 0 for ``|mu| > 2|t|``.
    """
    tz, ty = pauli("z"), pauli("y")
    terms = [fourier_term((1,), cos=-2.0 * t * tz, sin=2.0 * delta * ty)]
    return assemble(CHAIN, [[0.0], [0.0]], -mu * tz, terms, operators={"chiral": pauli("x")})
