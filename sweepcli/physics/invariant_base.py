"""What the invariant modules share: tolerances and default meshes, the record of an integer
invariant, the mesh walk of the convergence policy that some of them still use, and a batched
determinant.

The invariants themselves are in :mod:`sweepcli.physics.chern` (Fukui-Hatsugai-Suzuki Chern
numbers), :mod:`sweepcli.physics.floquet_chern` (Chern numbers of Floquet bands and Rudner
windings), :mod:`sweepcli.physics.chiral_winding` (1D windings of chiral chains) and
:mod:`sweepcli.physics.spin_chern` (Prodan's projected-spin Chern number).

Chern numbers (static and Floquet) and the chiral windings are proven on adaptive meshes
(:mod:`sweepcli.physics.certify`): a first mesh (for Chern numbers set by the gap,
:func:`gap_rule_kmesh`, at least ``CHERN_KMESH``), and every plaquette or step whose bound
(from the local gap and the Lipschitz constants of ``H(k)`` or ``U(k)``) does not prove the
integer is subdivided, within a budget of points set by ``max_kmesh``; where the budget runs
out the value is missing with :attr:`Reason.NOT_CONVERGED`. Agreement between two meshes
proves nothing and is not the policy of any invariant (the spin Chern number of
:mod:`sweepcli.physics.spin_chern` is proven too, with the bound of its projected-spin
sectors). A gap below ``gap_tol`` gives :attr:`Reason.GAP_CLOSED`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..schema import Reason
from .lattice import TightBinding
from .spectrum import band_gap

#: Largest accepted plaquette Berry flux (rad). A flux near pi means the curvature of one
#: plaquette is not resolved and the plaquette's phase may have wrapped.
FLUX_TOL = 1.0
#: Largest accepted phase step of det h(k) between neighbouring k points of a 1D mesh (rad).
PHASE_TOL = 1.0
#: Mesh growth factor between the two meshes that must agree (2D).
GROWTH = 1.5
#: Default uniform mesh of the gap search that sets the first mesh.
GAP_KMESH = 64
#: Default first meshes.
CHERN_KMESH = 24
WINDING_KMESH = 64
#: Default largest meshes.
CHERN_MAX_KMESH = 256
WINDING_MAX_KMESH = 8192


@dataclass(frozen=True)
class InvariantResult:
    """An integer invariant with its evidence.

    Attributes
    ----------
    value : the invariant, ``None`` when ill-defined (``reason`` says why).
    kmesh : points per direction of the finest mesh used (``None`` if none was built).
    max_step : largest plaquette flux (2D) or phase step (1D) on that mesh, rad (nan if none).
    reason : :class:`Reason`.
    """

    value: int | None
    kmesh: int | None
    max_step: float
    reason: Reason


def stacked_det(a: np.ndarray) -> np.ndarray:
    """Determinants of a stack ``(..., m, m)``; closed forms for m <= 2 (much faster on stacks)."""
    m = a.shape[-1]
    if m == 1:
        return a[..., 0, 0]
    if m == 2:
        return a[..., 0, 0] * a[..., 1, 1] - a[..., 0, 1] * a[..., 1, 0]
    return np.linalg.det(a)


def gap_rule_kmesh(gap: float) -> int:
    """Mesh ``ceil(3.2 / sqrt(gap / 2))`` (points per direction) found sufficient here for a gap."""
    return int(math.ceil(3.2 / math.sqrt(gap / 2.0)))


def occupied_gap(tb: TightBinding, nocc: int, gap: float | None) -> float:
    """``gap`` if given, else the direct gap above ``nocc`` bands on a :data:`GAP_KMESH` mesh."""
    if not 0 < nocc < tb.norb:
        raise ValueError(f"an invariant of {nocc} occupied bands needs 0 < nocc < {tb.norb}")
    return band_gap(tb, nocc, GAP_KMESH).gap if gap is None else gap
