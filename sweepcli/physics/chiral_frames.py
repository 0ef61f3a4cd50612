"""Invariants ``nu_0``, ``nu_pi`` of chiral 1D drives from the two symmetric time frames.

Asboth and Obuse, PRB 88, 121406 (2013); Asboth, Tarasinski and Delplace, PRB 90, 125143
(2014). 1D windings use :func:`sweepcli.physics.chiral_winding.det_winding` of the block
``P_- X P_+`` of the chiral operator's eigenspaces (SSH: +1 for ``|v| < |w|``). Conventions of
quasienergies and gaps: :mod:`sweepcli.physics.quasienergy`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Collection, Sequence
from dataclasses import dataclass

import numpy as np

from ..schema import Reason
from .certify import THETA_MAX, certified_loop, hopping_bounds, interval_theta, smallest_singular
from .chiral_winding import chiral_blocks, chiral_eigenbasis, det_winding
from .drives.base import Drive
from .drives.evolution import Slicing, floquet_evolution
from .invariant_base import PHASE_TOL, WINDING_KMESH, stacked_det
from .quasienergy import dagger, gap_distances, quasienergy_values

#: Largest accepted ``|[S, X]|`` (symmetry on a line) and ``|G U G - U^dagger|`` (chiral frame).
SYMMETRY_TOL = 1e-8


@dataclass(frozen=True)
class ChiralWindings:
    """Invariants of the 0 and pi gaps of a chiral-symmetric (sector of a) 1D drive.

    Attributes
    ----------
    nu_0, nu_pi : int or None.
    nu, nu_prime : windings of the two symmetric frames (None unless both gaps are open).
    gap_0, gap_pi : gaps on the line's mesh (energy units, ``2 min |eps|`` as in the module
        docstring).
    kmesh : mesh used last.
    reason : Reason (the first that is not OK; :meth:`gap_reason` tells the gaps apart).
    """

    nu_0: int | None
    nu_pi: int | None
    nu: int | None
    nu_prime: int | None
    gap_0: float
    gap_pi: float
    kmesh: int | None
    reason: Reason

    def gap_reason(self, gap: str, gap_tol: float) -> Reason:
        """Why the invariant of one gap (``"0"`` or ``"pi"``) is missing; ``OK`` when present.

        ``GAP_CLOSED`` when that gap is below ``gap_tol`` on the mesh, else the record's reason
        (``NOT_CONVERGED``, ``SECTOR_GAP_CLOSED``), so an open gap whose value is given reads
        ``OK`` even when the other gap is closed.
        """
        if (self.nu_0 if gap == "0" else self.nu_pi) is not None:
            return Reason.OK
        if self.reason == Reason.SECTOR_GAP_CLOSED:
            return self.reason
        if (self.gap_0 if gap == "0" else self.gap_pi) < gap_tol:
            return Reason.GAP_CLOSED
        return self.reason if self.reason != Reason.OK else Reason.NOT_CONVERGED


def check_chiral_frame(u: np.ndarray, g: np.ndarray, what: str) -> None:
    err = float(np.max(np.abs(g @ u @ g - dagger(u)), initial=0.0))
    if err > SYMMETRY_TOL * 1e3:
        raise ValueError(f"the {what} is not chiral symmetric (|G U G - U^+| = {err:.2g}); "
                         f"start the frames at time-reversal-symmetric times of a drive whose "
                         f"steps anticommute with the chiral operator")


def chiral_from_frames(u1: np.ndarray, u2: np.ndarray, f: np.ndarray, chiral: np.ndarray,
                       period: float, *, gap_tol: float = 1e-6,
                       phase_tol: float = PHASE_TOL, closed_gaps: Collection[str] = ()
                       ) -> tuple[ChiralWindings, float]:
    """``nu_0, nu_pi`` from the frames ``U_1 = U(t1 + T, t1)``, ``U_2`` and ``F = U(t1 + T/2, t1)``.

    Construction (Asboth and Obuse 2013; Asboth, Tarasinski and Delplace 2014): in a symmetric
    frame ``G U G = U^+``, so ``H_eff = (i/T) log U`` is chiral and its block
    ``h = P_- H_eff P_+`` has a winding. The block ``P_- U P_+ = -i h sin(T sqrt(h^+ h)) /
    sqrt(h^+ h)`` has the same determinant winding without any logarithm (the second factor
    is positive while both gaps are open), so ``nu`` and ``nu'`` are the windings of
    ``det P_- U_1 P_+`` and ``det P_- U_2 P_+``, and ``nu_0 = (nu + nu')/2``,
    ``nu_pi = (nu - nu')/2``. This needs both gaps. When only one gap is open the half-period
    operator is used instead: with ``U_1 = G F^+ G F``, ``U_1`` has eigenvalue +1 (-1) exactly
    where ``P_- F P_+`` (``P_+ F P_+``) is singular, and ``nu_0 = wind det P_- F P_+``,
    ``nu_pi = wind det P_+ F P_+`` (equal to the frame formula when both gaps are open; this is
    checked by the tests).

    Parameters
    ----------
    u1, u2, f : (N, m, m) on a closed loop ``k_j = k(2 pi j / N)``.
    chiral : (m, m) chiral operator (Hermitian, squares to 1, traceless).
    closed_gaps : gaps (``"0"``, ``"pi"``) to treat as closed whatever the loop shows: those
        closed in the bulk of a 2D (or, between mesh points, 1D) drive. The other gap then
        takes the half-period formula, which needs only its own gap.

    Returns
    -------
    (ChiralWindings, largest phase step) — the caller refines the mesh while the step exceeds
    ``phase_tol``.
    """
    g = np.asarray(chiral, dtype=complex)
    eps = quasienergy_values(u1, period)
    d0, dpi = gap_distances(eps, period)
    gap0, gappi = 2 * float(d0.min()), 2 * float(dpi.min())
    open0 = gap0 >= gap_tol and "0" not in closed_gaps
    openpi = gappi >= gap_tol and "pi" not in closed_gaps
    n = u1.shape[0]
    if not (open0 or openpi):
        return ChiralWindings(None, None, None, None, gap0, gappi, n, Reason.GAP_CLOSED), 0.0
    pm, pp = chiral_eigenbasis(g)
    if open0 and openpi:
        nu, s1 = det_winding(chiral_blocks(u1, g))
        nup, s2 = det_winding(chiral_blocks(u2, g))
        step = max(s1, s2)
        if (nu + nup) % 2:
            return ChiralWindings(None, None, nu, nup, gap0, gappi, n,
                                  Reason.NOT_CONVERGED), math.pi
        return ChiralWindings((nu + nup) // 2, (nu - nup) // 2, nu, nup, gap0, gappi, n,
                              Reason.OK), step
    if open0:
        v, step = det_winding(np.conj(pm.T) @ f @ pp)
        return ChiralWindings(v, None, None, None, gap0, gappi, n, Reason.GAP_CLOSED), step
    v, step = det_winding(np.conj(pp.T) @ f @ pp)
    return ChiralWindings(None, v, None, None, gap0, gappi, n, Reason.GAP_CLOSED), step


def half_period_windings(f: np.ndarray, chiral: np.ndarray) -> tuple[int, int]:
    """``(wind det P_- F P_+, wind det P_+ F P_+)`` of a half-period operator on a loop."""
    pm, pp = chiral_eigenbasis(chiral)
    return (det_winding(np.conj(pm.T) @ f @ pp)[0],
            det_winding(np.conj(pp.T) @ f @ pp)[0])


def line_momenta(origin: Sequence[float], direction: Sequence[float], n: int) -> np.ndarray:
    """``(n, d)`` momenta ``origin + s direction`` at ``s = 2 pi j / n`` (a closed loop)."""
    s = 2 * np.pi * np.arange(n) / n
    return np.asarray(origin, float)[None, :] + s[:, None] * np.asarray(direction, float)[None, :]


def line_points(origin: np.ndarray, direction: np.ndarray, s: np.ndarray) -> np.ndarray:
    """``(N, d)`` momenta ``origin + s direction`` at the loop parameters ``s``."""
    return np.asarray(origin, float)[None, :] + np.asarray(s, float)[:, None] * \
        np.asarray(direction, float)[None, :]


def check_direction(direction: Sequence[float], dim: int) -> np.ndarray:
    """A line direction as a nonzero integer vector of ``dim`` components, or ``ValueError``."""
    d = np.asarray(direction, dtype=float).ravel()
    if d.size != dim:
        raise ValueError(f"the line direction needs {dim} components; got {d.size}")
    if not np.allclose(d, np.round(d)) or not np.any(np.round(d)):
        raise ValueError(f"the line direction must be a nonzero integer vector in reduced "
                         f"coordinates so that the line closes on itself; got {list(d)}")
    return np.round(d)


def frame_times(drive: Drive, chiral: np.ndarray, times: Sequence[float] | None
                ) -> tuple[float, float]:
    """The two symmetric starting times: given (one, or two), or found by the drive
    (:meth:`~sweepcli.physics.drives.base.Drive.symmetric_times`)."""
    if times is not None:
        t = [float(x) for x in times]
        if len(t) == 1:
            t.append((t[0] + drive.period / 2) % drive.period)
        if len(t) != 2:
            raise ValueError("give one or two symmetric times")
        return t[0], t[1]
    return drive.symmetric_times(chiral)


def frames_on(drive: Drive, k: np.ndarray, t1: float, t2: float, slicing: Slicing | None = None
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray, bool]:
    """``U(t1 + T, t1)``, ``U(t2 + T, t2)``, ``U(t1 + T/2, t1)`` at ``k`` and whether all three
    time integrations converged."""
    T = drive.period
    e1 = floquet_evolution(drive, k, start=t1, slicing=slicing)
    e2 = floquet_evolution(drive, k, start=t2, slicing=slicing)
    ef = floquet_evolution(drive, k, start=t1, stop=t1 + T / 2, slicing=slicing)
    return e1.u, e2.u, ef.u, e1.converged and e2.converged and ef.converged


class LoopCache:
    """Arrays computed at loop parameters, kept so that a refined loop computes only its new
    points: ``cache(s)`` returns ``compute(s_new)``'s arrays ``(N, ...)`` at every ``s`` (in
    that order) and whether every call reported success."""

    def __init__(self, compute: Callable[[np.ndarray], tuple[tuple[np.ndarray, ...], bool]]
                 ) -> None:
        self.compute = compute
        self.s = np.zeros(0)
        self.arrays: tuple[np.ndarray, ...] | None = None
        self.ok = True

    def __call__(self, s: np.ndarray) -> tuple[tuple[np.ndarray, ...], bool]:
        new = s[~np.isin(s, self.s)]
        if new.size:
            arrays, ok = self.compute(new)
            self.ok = self.ok and ok
            self.s = np.concatenate([self.s, new])
            self.arrays = arrays if self.arrays is None else tuple(
                np.concatenate([a, b]) for a, b in zip(self.arrays, arrays))
        idx = np.searchsorted(self.s, s, sorter=np.argsort(self.s))
        order = np.argsort(self.s)[idx]
        return tuple(a[order] for a in self.arrays), self.ok


def drive_lipschitz(drive: Drive, direction: np.ndarray, start: float, stop: float,
                    slicing: Slicing | None = None) -> float:
    """Bound on ``||dU/ds||`` of ``U(stop, start)`` along ``k = k0 + s direction``:
    ``sum_j t_j ||dH_j/ds||`` over the factors (Duhamel: ``||d e^{-i t H}|| <= t ||dH||``),
    each from its hoppings (:func:`~sweepcli.physics.certify.hopping_bounds`). Sliced drives
    use the slicing given (or their ``min_slices``)."""
    slices = None if drive.exact or slicing is None else slicing.slices
    return sum(d * hopping_bounds(tb.hoppings, direction)[0]
               for d, tb in drive.factors(start, stop, slices=slices))


def frame_bad_steps(r: ChiralWindings, u1: np.ndarray, u2: np.ndarray, f: np.ndarray,
                    chiral: np.ndarray, s: np.ndarray, lip_u: float, lip_f: float,
                    phase_tol: float) -> np.ndarray:
    """Steps ``s_j -> s_{j+1}`` of a closed loop that are not proven for the windings ``r``
    was computed from (:func:`chiral_from_frames`): the blocks of ``U_1``, ``U_2`` (``||dU/ds||
    <= lip_u``) when both gaps are open, else the block of ``F`` (``lip_f``); a step fails when
    the bound :func:`~sweepcli.physics.certify.interval_theta` reaches
    :data:`~sweepcli.physics.certify.THETA_MAX` or the phase step reaches ``phase_tol``."""
    g = np.asarray(chiral, dtype=complex)
    pm, pp = chiral_eigenbasis(g)
    if r.nu is not None:
        blocks, lip = [chiral_blocks(u1, g), chiral_blocks(u2, g)], lip_u
    elif r.nu_0 is not None:
        blocks, lip = [np.conj(pm.T) @ f @ pp], lip_f
    elif r.nu_pi is not None:
        blocks, lip = [np.conj(pp.T) @ f @ pp], lip_f
    else:
        return np.ones(s.size, bool)
    h = np.diff(np.append(s, s[0] + 2 * np.pi))
    bad = np.zeros(s.size, bool)
    for q in blocks:
        d = stacked_det(q)
        steps = np.abs(np.angle(np.roll(d, -1) * np.conj(d)))
        theta = interval_theta(smallest_singular(q), np.full(s.size, lip), h, 0.0, q.shape[-1])
        bad |= (theta >= THETA_MAX) | (steps >= phase_tol)
    return bad


def refine_windings(measure: Callable[[np.ndarray], tuple[ChiralWindings, np.ndarray]],
                    kmesh_n: int, max_kmesh: int) -> ChiralWindings:
    """Bisect the unproven steps of a loop from ``kmesh_n`` uniform points, up to
    ``max_kmesh`` points (:func:`~sweepcli.physics.certify.certified_loop`); ``measure(s)``
    returns the windings on the loop parameters ``s`` and the mask of unproven steps
    (:func:`frame_bad_steps`). Missing with ``NOT_CONVERGED`` when the points run out."""
    def wrapped(s: np.ndarray) -> tuple[ChiralWindings, np.ndarray]:
        r, bad = measure(s)
        if r.reason == Reason.GAP_CLOSED and r.nu_0 is None and r.nu_pi is None:
            return r, np.zeros(s.size, bool)
        return r, bad

    r, s, proven = certified_loop(wrapped, kmesh_n, max_kmesh)
    if proven and r.reason != Reason.NOT_CONVERGED:
        return r
    return ChiralWindings(None, None, None, None, r.gap_0, r.gap_pi, s.size,
                          Reason.NOT_CONVERGED)


def chiral_windings(drive: Drive, chiral: np.ndarray, *, times: Sequence[float] | None = None,
                    origin: Sequence[float] | None = None,
                    direction: Sequence[float] | None = None, gap_tol: float = 1e-6,
                    kmesh_n: int = WINDING_KMESH, max_kmesh: int = 4096,
                    phase_tol: float = PHASE_TOL, slicing: Slicing | None = None,
                    closed_gaps: Collection[str] = ()) -> ChiralWindings:
    """``nu_0`` and ``nu_pi`` of a chiral 1D drive (or along a line of a 2D drive).

    Parameters
    ----------
    drive : the compiled drive; every step must satisfy the chiral relation at the frames.
    chiral : (n, n) chiral operator.
    times : the symmetric starting times ``(t1, t2)``; found by
        :meth:`~sweepcli.physics.drives.base.Drive.symmetric_times` when omitted. ``nu`` belongs
        to ``t1``; exchanging ``t1`` and ``t2`` flips the sign of ``nu_pi``.
    origin, direction : the loop ``k(s) = origin + s direction``, ``s`` in ``[0, 2 pi)``
        (default: the 1D Brillouin zone).
    kmesh_n, max_kmesh, phase_tol : the loop starts with ``kmesh_n`` uniform points and its
        steps are bisected until a bound proves each (:func:`frame_bad_steps`; the Lipschitz
        constant of ``U(k)`` from the hoppings of the steps, :func:`drive_lipschitz`) and every
        phase step is below ``phase_tol``, up to ``max_kmesh`` points; otherwise the windings
        are missing with ``NOT_CONVERGED``.
    slicing : the drive's time slicing if already decided
        (:func:`~sweepcli.physics.drives.evolution.decide_slicing`); otherwise converged per frame
        and mesh.
    closed_gaps : gaps closed in the bulk (see :func:`chiral_from_frames`).

    Raises
    ------
    ValueError if a frame is not chiral symmetric.
    """
    dim = drive.dim
    origin = np.zeros(dim) if origin is None else np.asarray(origin, float)
    direction = check_direction(np.ones(1) if direction is None else direction, dim)
    g = np.asarray(chiral, dtype=complex)
    t1, t2 = frame_times(drive, g, times)

    lip_u = drive_lipschitz(drive, direction, t1, t1 + drive.period, slicing)
    lip_f = drive_lipschitz(drive, direction, t1, t1 + drive.period / 2, slicing)

    def compute(s: np.ndarray) -> tuple[tuple[np.ndarray, ...], bool]:
        u1, u2, f, ok = frames_on(drive, line_points(origin, direction, s), t1, t2, slicing)
        return (u1, u2, f), ok

    frames = LoopCache(compute)

    def measure(s: np.ndarray) -> tuple[ChiralWindings, np.ndarray]:
        (u1, u2, f), ok = frames(s)
        if not ok:
            return ChiralWindings(None, None, None, None, math.nan, math.nan, s.size,
                                  Reason.NOT_CONVERGED), np.ones(s.size, bool)
        check_chiral_frame(u1, g, f"frame at t = {t1:g}")
        check_chiral_frame(u2, g, f"frame at t = {t2:g}")
        r, _ = chiral_from_frames(u1, u2, f, g, drive.period, gap_tol=gap_tol,
                                  phase_tol=phase_tol, closed_gaps=closed_gaps)
        return r, frame_bad_steps(r, u1, u2, f, g, s, lip_u, lip_f, phase_tol)

    return refine_windings(measure, kmesh_n, max_kmesh)
