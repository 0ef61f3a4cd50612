"""What a picture of one boundary-mode count needs beyond the count itself.

The count and its in-window eigenvectors come from the measurement's own
:class:`~sweepcli.physics.boundary.ModeCount` (no second solver); a picture also needs the
densities of those states, the whole spectrum of the sample (where the window lies in it) and
the ribbon bands with their weight on the low edge, composed here from
:func:`~sweepcli.physics.samples.open_hamiltonian`, :func:`~sweepcli.physics.samples.ribbon` and
:func:`~sweepcli.physics.drives.evolution.evolve`.

Conventions are those of :mod:`sweepcli.physics.boundary` and :mod:`sweepcli.physics.samples`:
sample orbital ``I = c * n + o`` (C order over cells), levels relative to the window centre,
quasienergies ``eps = -arg(lambda) / T``, reduced momentum ``k_par = k . a_p`` in radians.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from . import boundary as bd
from . import quasienergy as qe
from . import samples
from .drives.evolution import evolve
from .lattice import TightBinding


def cell_density(vectors: np.ndarray, norb: int) -> np.ndarray:
    """Density ``sum_a |psi_a(I)|^2`` of a set of states, summed over the orbitals of each cell.

    Parameters
    ----------
    vectors : (N, m) states as columns, ``N = ncell * norb``, sample orbital order.
    norb : orbitals per cell.

    Returns
    -------
    (ncell,) float, in the C order of the cells; its sum is ``sum_a |psi_a|^2`` (``m`` for
    orthonormal states). For states spanning whole degenerate clusters it is the diagonal of
    their projector, hence independent of the basis chosen inside a cluster.
    """
    w = np.sum(np.abs(np.asarray(vectors)) ** 2, axis=1)
    return w.reshape(-1, norb).sum(axis=1)


def box_spectrum(tb: TightBinding, shape: Sequence[int]) -> np.ndarray:
    """All levels (energy, ascending) of the open box sample: dense ``eigvalsh``, ``(N,)``."""
    return np.linalg.eigvalsh(samples.open_hamiltonian(tb, shape).toarray())


def floquet_box_spectrum(factors: Sequence[tuple[float, TightBinding]], shape: Sequence[int],
                         period: float) -> np.ndarray:
    """All quasienergies of the driven open box sample, ascending in ``(-pi/T, pi/T]``.

    ``U = exp(-i H_last t_last) ... exp(-i H_1 t_1)`` formed densely by
    :func:`~sweepcli.physics.drives.evolution.evolve`; ``eps = -arg(lambda) / T``
    (:func:`~sweepcli.physics.quasienergy.quasienergy_values`). ``period`` is the drive's period
    ``T``, not the sum of the factors' durations (a kick is a factor of its own). Returns
    ``(N,)``.
    """
    u = evolve([(t, h.toarray()) for t, h in bd.sample_steps(factors, shape)])
    return qe.quasienergy_values(u, period)


@dataclass(frozen=True)
class RibbonBands:
    """Bands of a ribbon against the momentum along the edge.

    Attributes
    ----------
    k : (nk,) reduced momentum ``k_par = k . a_p`` (rad).
    levels : (nk, M) energies (static) or quasienergies in ``(-pi/T, pi/T]``, ascending per k.
    low_weight : (nk, M) weight of each state in the low half of the ribbon (0 .. 1; about 1/2
        for a bulk state, near 1 for a state on the low edge, near 0 on the high edge).
    period : drive period, ``None`` for a static ribbon.
    """

    k: np.ndarray
    levels: np.ndarray
    low_weight: np.ndarray
    period: float | None = None


def ribbon_bands(tb: TightBinding, width: int, k: np.ndarray, open_axis: int = 1) -> RibbonBands:
    """Bands of a static ribbon (:func:`~sweepcli.physics.samples.ribbon`) at ``k (nk,)``.

    Batched ``eigh`` of ``ribbon(tb, width).bloch(k[:, None])`` of shape ``(nk, M, M)``,
    ``M = width * tb.norb``.
    """
    k = np.asarray(k, dtype=float)
    rb = samples.ribbon(tb, width, open_axis)
    e, v = np.linalg.eigh(rb.bloch(k[:, None]))
    low = bd.low_edge_mask(width, tb.norb)
    return RibbonBands(k, e, np.sum(np.abs(v[:, low, :]) ** 2, axis=1))


def floquet_ribbon_bands(factors: Sequence[tuple[float, TightBinding]], width: int,
                         k: np.ndarray, period: float, open_axis: int = 1) -> RibbonBands:
    """Quasienergy bands of a driven ribbon of period ``period`` at ``k (nk,)``.

    ``U(k_par)`` is the time-ordered product of the steps' ribbon Bloch Hamiltonians, batched
    over ``k`` (as in :func:`~sweepcli.physics.boundary.floquet_ribbon_modes`), diagonalised by
    :func:`~sweepcli.physics.quasienergy.quasienergies` (orthonormal eigenvectors inside degenerate
    clusters, as the driven ribbon count uses); ``eps = -arg(lambda) / T`` in ``(-pi/T, pi/T]``,
    ascending per k, with the low-edge weight of each state.
    """
    k = np.asarray(k, dtype=float)
    ribbons = [(float(t), samples.ribbon(f, width, open_axis)) for t, f in factors]
    eps, v = qe.quasienergies(evolve([(t, r.bloch(k[:, None])) for t, r in ribbons]), period)
    low = bd.low_edge_mask(width, factors[0][1].norb)
    return RibbonBands(k, eps, np.sum(np.abs(v[:, low, :]) ** 2, axis=1), period)
