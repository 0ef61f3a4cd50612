"""Predicted transition lines: parameter values where an eigenphase of ``U(k*)`` crosses 0 or
pi at fixed momenta."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from .quasienergy import unitary_eig


@dataclass(frozen=True)
class Transition:
    """An eigenphase of ``U(k*)`` crossing 0 or pi as a parameter varies.

    Attributes
    ----------
    value : parameter value of the crossing.
    gap : ``"0"`` or ``"pi"``.
    index : flat index of the momentum (leading axes of ``U``) where it happens.
    """

    value: float
    gap: str
    index: int


def transition_points(u_of: Callable[[float], np.ndarray], grid: Sequence[float], *,
                      xtol: float = 1e-12, check_tol: float = 1e-6) -> list[Transition]:
    """Parameter values where an eigenphase of ``U(k*)`` crosses 0 or pi.

    Parameters
    ----------
    u_of : callable ``p -> U`` of shape ``(..., n, n)`` (fixed momenta on the leading axes, e.g.
        the high-symmetry points or a line).
    grid : increasing parameter values; crossings are searched between neighbours.

    Method: at neighbouring grid values the eigenvectors are matched by overlap (an assignment
    maximising ``sum |<v_a|v_b>|^2``), which follows each eigenphase branch through a crossing
    even when the spectrum is symmetric (``+-phi`` passing through 0 leaves the sorted phases
    unchanged). A branch whose signed phase changes sign near 0 (near pi) brackets a crossing;
    ``scipy.optimize.brentq`` then finds the root of that branch's phase (phase minus pi),
    the branch being followed at each trial value by maximal overlap with its left-end
    eigenvector. A root is kept only if ``U`` really has an eigenphase within ``check_tol`` of
    0 (pi) there. A grid value where ``U`` already has such an eigenphase is a transition at
    that value. A root is rounded to the decimal place of ``xtol`` (12 decimals by default),
    below the accuracy brentq guarantees, so that a crossing at 0.5 reads 0.5 rather than the
    root finder's last step, 0.5000000000000001.
    """
    from scipy.optimize import brentq, linear_sum_assignment  # ~0.3 s to import: only here

    decimals = max(0, int(np.floor(-np.log10(xtol))))
    grid = [float(x) for x in grid]
    if any(b <= a for a, b in zip(grid, grid[1:])):
        raise ValueError("the parameter grid must be strictly increasing")

    def eig(p: float) -> tuple[np.ndarray, np.ndarray]:
        u = np.asarray(u_of(p), dtype=complex)
        n = u.shape[-1]
        ph, v = unitary_eig(u.reshape(-1, n, n))
        return ph, v

    found: list[Transition] = []

    def on_grid(p: float, ph: np.ndarray) -> None:
        # A closing that falls on a grid value itself: no sign change brackets it, and the
        # branches touching 0 (pi) there may be degenerate, so record it directly.
        for m in range(ph.shape[0]):
            for kind, dist in (("0", np.min(np.abs(ph[m]))),
                               ("pi", np.min(np.pi - np.abs(ph[m])))):
                if dist < check_tol and not any(abs(t.value - p) < 1e3 * xtol and t.gap == kind
                                                and t.index == m for t in found):
                    found.append(Transition(p, kind, m))

    prev = eig(grid[0])
    on_grid(grid[0], prev[0])
    for a, b in zip(grid, grid[1:]):
        cur = eig(b)
        on_grid(b, cur[0])
        (pa, va), (pb, vb) = prev, cur
        for m in range(pa.shape[0]):
            overlap = np.abs(np.conj(va[m].T) @ vb[m]) ** 2
            rows, cols = linear_sum_assignment(-overlap)
            for j, jj in zip(rows, cols):
                x, y = pa[m, j], pb[m, jj]
                if np.sign(x) == np.sign(y) or x == 0 or y == 0:
                    continue
                kind = "0" if max(abs(x), abs(y)) < np.pi / 2 else "pi"
                if kind == "pi" and min(abs(x), abs(y)) < np.pi / 2:
                    continue
                ref = va[m][:, j]

                def branch(p: float, ref=ref, m=m, kind=kind) -> float:
                    ph, v = eig(p)
                    jj = int(np.argmax(np.abs(np.conj(v[m].T) @ ref)))
                    phi = ph[m, jj]
                    return phi if kind == "0" else (phi % (2 * np.pi)) - np.pi

                try:
                    root = round(float(brentq(branch, a, b, xtol=xtol)), decimals)
                except ValueError:
                    continue
                ph, _ = eig(root)
                dist = np.min(np.abs(ph[m])) if kind == "0" else np.min(np.pi - np.abs(ph[m]))
                if dist < check_tol and not any(abs(t.value - root) < 1e3 * xtol and
                                                t.gap == kind and t.index == m for t in found):
                    found.append(Transition(root, kind, m))
        prev = cur
    return sorted(found, key=lambda t: t.value)
