"""Chiral edge modes and edge gaps of ribbons (open across, periodic along), static and driven.

The net number of chiral edge modes of a gap is the signed number of times levels localised on
the *low* edge of the ribbon (the edge at cell 0 of the open direction; weight in the low half
of the ribbon > 1/2, :func:`low_edge_mask`) cross the gap centre as ``k_par`` goes once around
the Brillouin zone, +1 for ``d eps / d k_par > 0``. Levels at neighbouring ``k`` are matched by
the overlap of their (periodic-gauge, hence continuous) Bloch eigenvectors; the ``k`` grid is
doubled until every crossing is resolved. By bulk-edge correspondence (Hatsugai, PRL 71, 3697
(1993)) this equals the Chern number of the bands below the gap up to an orientation sign. The
edge gap is twice the smallest distance of any ribbon level from the gap centre over ``k_par``
(equal to the bulk gap when the edges bind no states in the gap; ~0 when an edge is gapless).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ...schema import Reason
from .. import quasienergy as qe
from .. import samples
from ..drives.evolution import evolve
from ..lattice import TightBinding
from .windows import Window

#: Offset of the ribbon k grid, in grid steps: irrational, so that high-symmetry momenta, where
#: branches of opposite edges cross the gap centre together, are never grid points.
K_OFFSET = (math.sqrt(5) - 1) / 2


@dataclass(frozen=True)
class EdgeModes:
    """Edge spectrum of a ribbon at one gap.

    Attributes
    ----------
    chiral : net chiral modes on the low edge (+1 per mode with ``d eps / d k_par > 0``), or
        ``None`` when missing.
    edge_gap : twice the smallest distance of a ribbon level from the gap centre (energy), or
        ``nan``.
    nk : number of ``k_par`` points finally used.
    window : the window used.
    reason : :class:`Reason`.
    """

    chiral: int | None
    edge_gap: float
    nk: int = 0
    window: Window | None = None
    reason: Reason = Reason.OK


def ribbon_kgrid(nk: int) -> np.ndarray:
    """``k_par`` grid ``2 pi (j + K_OFFSET) / nk``, ``j = 0 .. nk-1`` (reduced momentum)."""
    return 2 * np.pi * (np.arange(nk) + K_OFFSET) / nk


def low_edge_mask(width: int, norb: int) -> np.ndarray:
    """``(width * norb,)`` bool: the orbitals of the low half of a ribbon (cells ``< width // 2``),
    the half whose weight marks a state of the low edge in :func:`signed_crossings`."""
    mask = np.zeros(width * norb, dtype=bool)
    mask[: (width // 2) * norb] = True
    return mask


def signed_crossings(rel: np.ndarray, vecs: np.ndarray, low: np.ndarray, halfwidth: float
                     ) -> int | None:
    """Net crossings of the gap centre by low-edge levels over one period of ``k_par``.

    Parameters
    ----------
    rel : (nk, M) levels relative to the gap centre at ``k_j`` (wrapped for quasienergies).
    vecs : (nk, M, M) eigenvectors (columns) in the periodic gauge, so that ``k_nk = k_0``.
    low : (M,) bool, orbitals of the low half of the ribbon.
    halfwidth : window half-width; only levels inside it are followed.

    Returns
    -------
    int (upward minus downward crossings), or ``None`` when the grid is too coarse to follow
    every level near the centre from ``k_j`` to ``k_{j+1}``.
    """
    wlow = np.einsum("kia,kia->ka", vecs.conj(), vecs * low[None, :, None]).real
    nxt = np.roll(vecs, -1, axis=0)
    overlap = np.abs(np.einsum("kia,kib->kab", vecs.conj(), nxt)) ** 2
    partner = np.argmax(overlap, axis=2)
    best = np.take_along_axis(overlap, partner[..., None], axis=2)[..., 0]
    rel_next = np.take_along_axis(np.roll(rel, -1, axis=0), partner, axis=1)
    w_next = np.take_along_axis(np.roll(wlow, -1, axis=0), partner, axis=1)
    cand = (np.abs(rel) < halfwidth) & (wlow > 0.5)
    up = cand & (rel < 0) & (rel_next >= 0)
    down = cand & (rel >= 0) & (rel_next < 0)
    cross = up | down
    lost = cand & (np.abs(rel) < halfwidth / 2) & ((best < 0.5) | (w_next < 0.5)
                                                  | (np.abs(rel_next) >= halfwidth))
    if np.any(lost) or np.any(cross & (np.abs(rel_next) >= halfwidth)):
        return None
    return int(up.sum() - down.sum())


def _edge_modes(spectrum: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]],
                levels_at: Callable[[float], np.ndarray], low: np.ndarray, window: Window,
                nk: int, nk_max: int) -> EdgeModes:
    """Shared ribbon logic; ``spectrum(k) -> (rel (nk, M), vecs (nk, M, M))``."""
    while True:
        k = ribbon_kgrid(nk)
        rel, vecs = spectrum(k)
        count = signed_crossings(rel, vecs, low, window.halfwidth)
        if count is not None or 2 * nk > nk_max:
            break
        nk *= 2
    dist = np.min(np.abs(rel), axis=1)
    j = int(np.argmin(dist))
    step = 2 * np.pi / nk
    from scipy.optimize import minimize_scalar  # here: scipy.optimize takes ~0.3 s to import

    res = minimize_scalar(lambda x: float(np.min(np.abs(levels_at(x)))),
                          bounds=(k[j] - step, k[j] + step), method="bounded",
                          options={"xatol": 1e-10})
    edge_gap = 2 * min(float(dist[j]), float(res.fun))
    reason = Reason.OK if count is not None else Reason.NOT_CONVERGED
    return EdgeModes(count, edge_gap, nk, window, reason)


def ribbon_modes(tb: TightBinding, width: int, window: Window, *, open_axis: int = 1,
                 nk: int = 128, nk_max: int = 2048, gap_tol: float = 1e-6) -> EdgeModes:
    """Chiral edge modes and edge gap of a static ribbon at the gap of ``window``.

    Parameters
    ----------
    tb : 2D model; width : ribbon width ``W`` in cells; open_axis : the cut lattice direction.
    window : from :func:`static_window`.
    nk : initial number of ``k_par`` points (doubled up to ``nk_max`` until crossings resolve).
    gap_tol : bulk gaps at or below this give a missing result (``GAP_CLOSED``).
    """
    if window.closed(gap_tol):
        return EdgeModes(None, float("nan"), 0, window, Reason.GAP_CLOSED)
    rb = samples.ribbon(tb, width, open_axis)

    def spectrum(k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        e, v = np.linalg.eigh(rb.bloch(k[:, None]))
        return e - window.centre, v

    def levels_at(x: float) -> np.ndarray:
        return np.linalg.eigvalsh(rb.bloch(np.array([x]))) - window.centre

    return _edge_modes(spectrum, levels_at, low_edge_mask(width, tb.norb), window, nk, nk_max)


def floquet_ribbon_modes(factors: Sequence[tuple[float, TightBinding]], width: int,
                         windows: dict[str, Window], *, open_axis: int = 1, nk: int = 128,
                         nk_max: int = 1024, gap_tol: float = 1e-6) -> dict[str, EdgeModes]:
    """Chiral edge modes and edge gaps of a driven ribbon at quasienergy 0 and ``pi/T``.

    ``U(k_par)`` of the ribbon is the time-ordered product of the steps' ribbon Bloch
    Hamiltonians (:func:`~sweepcli.physics.drives.evolution.evolve`, batched over ``k_par``),
    diagonalised by :func:`sweepcli.physics.quasienergy.unitary_eig`, whose eigenvectors stay
    orthonormal inside degenerate clusters (the overlaps that follow levels from one ``k_par``
    to the next need that). The period is that of the windows (from :func:`floquet_windows`).
    Returns ``{"0": EdgeModes, "pi": EdgeModes}``; conventions as :func:`ribbon_modes`.
    """
    period = next(iter(windows.values())).period
    ribbons = [(float(t), samples.ribbon(f, width, open_axis)) for t, f in factors]
    low = low_edge_mask(width, factors[0][1].norb)
    cache: dict[int, tuple[np.ndarray, np.ndarray]] = {}

    def operator(k: np.ndarray) -> np.ndarray:
        return evolve([(t, r.bloch(k[:, None])) for t, r in ribbons])

    def eig(k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if k.size not in cache:
            phases, v = qe.unitary_eig(operator(k))
            cache[k.size] = (-phases / period, v)
        return cache[k.size]

    out = {}
    for name, window in windows.items():
        if window.closed(gap_tol):
            out[name] = EdgeModes(None, float("nan"), 0, window, Reason.GAP_CLOSED)
            continue

        def spectrum(k: np.ndarray, c: float = window.centre) -> tuple[np.ndarray, np.ndarray]:
            eps, v = eig(k)
            return qe.wrap_quasienergy(eps - c, period), v

        def levels_at(x: float, c: float = window.centre) -> np.ndarray:
            eps = qe.quasienergy_values(operator(np.array([x])), period)
            return qe.wrap_quasienergy(eps - c, period)

        out[name] = _edge_modes(spectrum, levels_at, low, window, nk, nk_max)
    return out
