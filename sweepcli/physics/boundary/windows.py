"""Energy windows of in-gap levels, from the bulk gaps of a static model or a drive.

A level of an open sample counts as *in-gap* when it lies within a window around the centre of
a bulk gap, of half-width ``fraction * gap / 2`` (default ``fraction = 0.5``: the window spans
the middle half of the gap, so bulk states pushed slightly into the gap by the boundary are not
counted, while modes bound to the boundary, which sit near the gap centre, are).

* Static: the gap above the lowest ``nocc`` bands is the *indirect* gap
  ``min_k E_nocc(k) - max_k E_{nocc-1}(k)`` (never above the direct gap of
  :func:`sweepcli.physics.spectrum.band_gap`), and the centre is its midpoint (energy 0 for a
  chiral or particle-hole symmetric model). :func:`energy_window` instead centres the window on
  a given energy inside a gap (modes pinned there by a model's own structure, such as the
  zero-energy corner modes of the breathing kagome lattice); its gap is then twice the distance
  to the nearest band, the gap of a spectrum symmetric about that energy.
* Driven (period ``T``, ``U = exp(-i H_F T)``, quasienergies ``eps`` in ``(-pi/T, pi/T]``): the
  gap at 0 is ``2 min_{k,n} |eps_n(k)|`` and the gap at ``pi/T`` is
  ``2 min_{k,n} (pi/T - |eps_n(k)|)``; each window is centred on its gap.

A gap at or below ``gap_tol`` means the window cannot be set: the counts are missing with
:attr:`~sweepcli.schema.Reason.GAP_CLOSED`. Corner windows are narrowed to the edge gap
of ribbons of the flake's width (:func:`edge_window`), since corner modes of a second-order
phase live in the edge gap.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import quasienergy as qe
from ..drives.base import Drive
from ..drives.evolution import Slicing, decide_slicing
from ..lattice import TightBinding, kmesh
from ..spectrum import band_edges, band_gap, energies, polish_minima, velocity_bound

WINDOW_FRACTION = 0.5


@dataclass(frozen=True)
class Window:
    """Energy window of in-gap levels.

    Attributes
    ----------
    centre : gap centre (energy; ``0`` or ``pi/T`` for a drive).
    halfwidth : ``fraction * gap / 2`` (energy); ``nan`` if the gap is closed.
    gap : bulk gap (energy), ``>= 0``.
    period : drive period ``T`` (time), ``None`` for a static model.
    """

    centre: float
    halfwidth: float
    gap: float
    period: float | None = None

    def closed(self, gap_tol: float) -> bool:
        return not self.gap > gap_tol


def default_kmesh(dim: int) -> int:
    """Points per direction of the bulk mesh of static windows (refined in continuous k)."""
    return 256 if dim == 1 else 48


def static_window(tb: TightBinding, nocc: int | None = None, fraction: float = WINDOW_FRACTION,
                  kmesh_n: int | None = None, direct_gap: float | None = None) -> Window:
    """Window of in-gap levels of a static model (see module docstring).

    Parameters
    ----------
    tb : the model.
    nocc : bands below the gap (default ``tb.norb // 2``).
    fraction : half-width as a fraction of half the gap, ``0 < fraction <= 1``.
    kmesh_n : bulk mesh points per direction (default :func:`default_kmesh`).
    direct_gap : the refined direct gap if already known (else from
        :func:`~sweepcli.physics.spectrum.band_gap` on the same mesh).

    Returns
    -------
    Window with the indirect gap (>= 0) and its midpoint; the band edges come from
    :func:`~sweepcli.physics.spectrum.band_edges` (the gap search's minima and polish), and the
    gap is never above the refined direct gap.
    """
    nocc = tb.norb // 2 if nocc is None else int(nocc)
    n = default_kmesh(tb.dim) if kmesh_n is None else int(kmesh_n)
    top, bottom = band_edges(tb, nocc, n)
    direct = band_gap(tb, nocc, n).gap if direct_gap is None else float(direct_gap)
    gap = max(0.0, min(bottom - top, direct))
    return Window(0.5 * (top + bottom), fraction * gap / 2 if gap > 0 else float("nan"), gap)


def energy_window(tb: TightBinding, energy: float, fraction: float = WINDOW_FRACTION,
                  kmesh_n: int | None = None) -> Window:
    """Window centred on ``energy`` of a static model (see module docstring).

    The bands below and above ``energy`` are told apart on the mesh, and their nearest edges
    are refined in continuous k (:func:`~sweepcli.physics.spectrum.polish_minima`); with ``d``
    the distance from ``energy`` to the nearest band, the window has half-width
    ``fraction * d`` and gap ``2 d``. An energy inside a band (on the mesh or after refining)
    gives a closed window (gap 0).
    """
    n = default_kmesh(tb.dim) if kmesh_n is None else int(kmesh_n)
    mesh = kmesh(n, tb.dim)
    e = energies(tb, mesh)
    low = e.max(axis=tuple(range(e.ndim - 1))) < energy
    high = e.min(axis=tuple(range(e.ndim - 1))) > energy
    closed = Window(float(energy), float("nan"), 0.0)
    if not np.all(low | high):
        return closed
    v = velocity_bound(tb.hoppings)
    dists = []
    nocc = int(low.sum())
    if nocc > 0:
        top = -polish_minima(lambda k: -energies(tb, k)[..., nocc - 1], -e[..., nocc - 1],
                             mesh, v)[0]
        dists.append(energy - top)
    if nocc < tb.norb:
        bottom = polish_minima(lambda k: energies(tb, k)[..., nocc], e[..., nocc], mesh, v)[0]
        dists.append(bottom - energy)
    d = min(dists)
    if not d > 0:
        return closed
    return Window(float(energy), fraction * d, 2.0 * d)


def floquet_windows(drive: Drive, fraction: float = WINDOW_FRACTION, *,
                    gaps: qe.FloquetGaps | None = None, slicing: Slicing | None = None
                    ) -> dict[str, Window]:
    """Windows at quasienergy 0 and ``pi/T`` of a drive, from its bulk quasienergy gaps.

    Parameters
    ----------
    drive : the compiled drive (its period sets ``pi/T``).
    fraction : as :func:`static_window`.
    gaps : the bulk gaps (:func:`sweepcli.physics.quasienergy.floquet_gaps`, refined in continuous
        k); computed on the default quasienergy-gap mesh at ``slicing`` when omitted.
    slicing : the drive's time slicing
        (:func:`~sweepcli.physics.drives.evolution.decide_slicing`), used only when ``gaps`` is
        omitted.

    Returns
    -------
    ``{"0": Window, "pi": Window}`` centred on 0 and ``pi/T``, gap widths as in the module
    docstring (``gap_0`` and ``gap_pi`` of the bulk).
    """
    if gaps is None:
        mesh = qe.floquet_mesh(drive, qe.GAP_KMESH, drive.dim,
                               slicing if slicing is not None else decide_slicing(drive))
        gaps = qe.floquet_gaps(drive, mesh)
    period = drive.period
    out = {}
    for name, gap, centre in (("0", gaps.gap_0, 0.0), ("pi", gaps.gap_pi, np.pi / period)):
        out[name] = Window(centre, fraction * gap / 2 if gap > 0 else float("nan"), gap, period)
    return out


def edge_window(window: Window, edge_gap: float) -> Window:
    """The corner-mode window: ``window`` narrowed in proportion to the smaller of the bulk and
    edge gaps (same fraction of the gap)."""
    gap = min(window.gap, edge_gap)
    hw = window.halfwidth * gap / window.gap if gap > 0 else float("nan")
    return Window(window.centre, hw, gap, window.period)
