"""Symmetry-resolved windings along an invariant line of the Brillouin zone.

The user names the line and a unitary symmetry ``S``; ``H(k)`` or ``U(k)`` on the line is split
into the eigen-sectors of ``S`` and each sector's chiral windings are reported (how several
corner modes at 0 or pi are counted from the bulk). The frames and windings are those of
:mod:`sweepcli.physics.chiral_frames`.
"""

from __future__ import annotations

import math
from collections.abc import Collection, Sequence
from dataclasses import dataclass

import numpy as np

from ..schema import Reason
from .certify import hopping_bounds
from .chiral_frames import (
    SYMMETRY_TOL,
    ChiralWindings,
    LoopCache,
    check_chiral_frame,
    check_direction,
    chiral_from_frames,
    drive_lipschitz,
    frame_bad_steps,
    frame_times,
    frames_on,
    line_points,
    refine_windings,
)
from .chiral_winding import chiral_blocks, det_winding
from .drives.base import Drive
from .drives.evolution import Slicing
from .invariant_base import PHASE_TOL, WINDING_KMESH
from .lattice import TightBinding
from .quasienergy import dagger, unitary_eig


@dataclass(frozen=True)
class SectorWinding:
    """Windings of one eigen-sector of a symmetry operator ``S`` on a line.

    Attributes
    ----------
    eigenvalue : complex eigenvalue of ``S`` labelling the sector.
    size : number of orbitals in the sector.
    result : :class:`ChiralWindings` of the sector (for a static model ``nu_0`` is the static
        winding and ``nu_pi`` is None).
    """

    eigenvalue: complex
    size: int
    result: ChiralWindings


def symmetry_sectors(operator: np.ndarray, tol: float = 1e-6) -> list[tuple[complex, np.ndarray]]:
    """Eigen-sectors ``(eigenvalue, Q)`` of a unitary ``S``, ``Q`` with orthonormal columns.

    Sectors are ordered by the eigenvalue's phase ``angle(lambda)`` in ``(-pi, pi]``; eigenvalues
    closer than ``tol`` share a sector.
    """
    s = np.asarray(operator, dtype=complex)
    if s.ndim != 2 or s.shape[0] != s.shape[1]:
        raise ValueError("the symmetry operator must be a square matrix")
    if np.max(np.abs(s @ dagger(s) - np.eye(s.shape[0]))) > 1e-8:
        raise ValueError("the symmetry operator must be unitary")
    ph, v = unitary_eig(s)
    groups: list[list[int]] = []
    for j in range(len(ph)):
        if groups and abs(np.exp(1j * ph[j]) - np.exp(1j * ph[groups[-1][0]])) < tol:
            groups[-1].append(j)
        else:
            groups.append([j])
    first, last = np.exp(1j * ph[groups[0][0]]), np.exp(1j * ph[groups[-1][0]])
    if len(groups) > 1 and abs(first - last) < tol:
        groups[0] = groups.pop() + groups[0]  # phases just either side of pi
    return [(complex(np.exp(1j * ph[gr[0]])), v[:, gr]) for gr in groups]


def commutator_violation(s: np.ndarray, x: np.ndarray) -> float | None:
    """Largest entry of ``|[S, X]|`` when ``S`` does not commute with ``X``, else ``None``.

    ``x`` is ``(..., n, n)`` (a batch, e.g. ``H(k)`` on a line); ``S`` commutes when every
    entry is at most ``SYMMETRY_TOL * max(1, max |X|)``. The one commutation test of line
    symmetries, at job load and in :func:`line_sector_windings`.
    """
    err = float(np.max(np.abs(s @ x - x @ s), initial=0.0))
    return err if err > SYMMETRY_TOL * max(1.0, float(np.max(np.abs(x)))) else None


def _commutator_check(s: np.ndarray, x: np.ndarray, what: str, line: str) -> None:
    err = commutator_violation(s, x)
    if err is not None:
        raise ValueError(f"the symmetry operator does not commute with {what} on the line "
                         f"{line} (largest |[S, X]| = {err:.3g}); choose a line that the "
                         f"symmetry maps to itself pointwise, or another operator")


def line_sector_windings(source: Drive | TightBinding, operator: np.ndarray,
                         chiral: np.ndarray, *, origin: Sequence[float],
                         direction: Sequence[float], times: Sequence[float] | None = None,
                         gap_tol: float = 1e-6, kmesh_n: int = WINDING_KMESH,
                         max_kmesh: int = 4096, phase_tol: float = PHASE_TOL,
                         slicing: Slicing | None = None, closed_gaps: Collection[str] = ()
                         ) -> list[SectorWinding]:
    """Windings at the 0 and pi gaps of each eigen-sector of ``S`` on a line of the BZ.

    On the line ``k(s) = origin + s direction`` (reduced coordinates, ``s`` in ``[0, 2 pi)``,
    ``direction`` an integer vector so the line closes) the symmetry ``S`` must commute with
    ``U(k)`` in both symmetric frames (a drive) or with ``H(k)`` (a static model), and with the
    chiral operator. ``U`` (or ``H``) is then block diagonal in the eigen-sectors of ``S``
    (:func:`symmetry_sectors`), each block is chiral with ``G_s = Q^+ G Q``, and each block's
    ``nu_0``, ``nu_pi`` follow from the same symmetric-frame construction as
    :func:`chiral_windings` (static: the winding of ``det P_- H_s P_+``). A sector whose
    chiral operator has unequal numbers of +1 and -1 eigenvalues has no winding (its result is
    missing with ``Reason.SECTOR_GAP_CLOSED``, the sector being gapless at 0). ``slicing`` as
    in :func:`chiral_windings`. ``closed_gaps`` (``"0"``, ``"pi"``) are treated as closed
    whatever the line shows: gaps closed in the bulk, off the line.

    Raises
    ------
    ValueError
        If ``S`` is not unitary, does not commute with ``U(k)``/``H(k)`` on the line or with
        the chiral operator, or a frame is not chiral symmetric.
    """
    s = np.asarray(operator, dtype=complex)
    g = np.asarray(chiral, dtype=complex)
    dim = source.dim
    origin = np.asarray(origin, dtype=float).ravel()
    if origin.size != dim:
        raise ValueError(f"the line origin needs {dim} components; got {origin.size}")
    direction = check_direction(direction, dim)
    if s.shape != g.shape:
        raise ValueError(f"the symmetry operator is {s.shape[0]}x{s.shape[1]} but the model has "
                         f"{g.shape[0]} orbitals")
    line = f"k = {list(origin)} + s {list(direction)}"
    sectors = symmetry_sectors(s)
    _commutator_check(s, g, "the chiral operator", line)
    static = isinstance(source, TightBinding)
    t1 = t2 = 0.0
    if not static:
        t1, t2 = frame_times(source, g, times)
    if static:
        lip_u = lip_f = hopping_bounds(source.hoppings, direction)[0]
    else:
        lip_u = drive_lipschitz(source, direction, t1, t1 + source.period, slicing)
        lip_f = drive_lipschitz(source, direction, t1, t1 + source.period / 2, slicing)

    def compute(params: np.ndarray) -> tuple[tuple[np.ndarray, ...], bool]:
        k = line_points(origin, direction, params)
        if static:
            h = source.bloch(k)
            _commutator_check(s, h, "H(k)", line)
            return (h, h, h), True
        u1, u2, f, ok = frames_on(source, k, t1, t2, slicing)
        for u, t in ((u1, t1), (u2, t2)):
            _commutator_check(s, u, f"U(k) of the frame at t = {t:g}", line)
            check_chiral_frame(u, g, f"frame at t = {t:g}")
        return (u1, u2, f), ok

    cache = LoopCache(compute)

    def data(params: np.ndarray):
        (x1, x2, f), ok = cache(params)
        return x1, x2, f, ok

    out: list[SectorWinding] = []
    for lam, q in sectors:
        qh = np.conj(q.T)
        gs = qh @ g @ q
        ws = np.linalg.eigvalsh((gs + dagger(gs)) / 2)
        m = q.shape[1]
        if int(np.sum(ws < 0)) * 2 != m:
            out.append(SectorWinding(lam, m, ChiralWindings(None, None, None, None, 0.0, 0.0,
                                                            None, Reason.SECTOR_GAP_CLOSED)))
            continue

        def measure(params: np.ndarray, qh=qh, q=q, gs=gs) -> tuple[ChiralWindings, np.ndarray]:
            x1, x2, f, ok = data(params)
            n = params.size
            if static:
                hs = qh @ x1 @ q
                e = np.linalg.eigvalsh(hs)
                gap0 = 2 * float(np.min(np.abs(e)))
                if not gap0 >= gap_tol or "0" in closed_gaps:
                    return ChiralWindings(None, None, None, None, gap0, math.nan, n,
                                          Reason.GAP_CLOSED), np.zeros(n, bool)
                v, _ = det_winding(chiral_blocks(hs, gs))
                r = ChiralWindings(v, None, None, None, gap0, math.nan, n, Reason.OK)
                # A static block stands for F (and the bound of H is lip_f).
                return r, frame_bad_steps(r, hs, hs, hs, gs, params, lip_u, lip_f, phase_tol)
            if not ok:
                return ChiralWindings(None, None, None, None, math.nan, math.nan, n,
                                      Reason.NOT_CONVERGED), np.ones(n, bool)
            x1, x2, f = qh @ x1 @ q, qh @ x2 @ q, qh @ f @ q
            r, _ = chiral_from_frames(x1, x2, f, gs, source.period, gap_tol=gap_tol,
                                      phase_tol=phase_tol, closed_gaps=closed_gaps)
            return r, frame_bad_steps(r, x1, x2, f, gs, params, lip_u, lip_f, phase_tol)

        out.append(SectorWinding(lam, m, refine_windings(measure, kmesh_n, max_kmesh)))
    return out
