"""Display values of a refined results file (layout: results-schema.md, "Refined sweeps")."""

from __future__ import annotations

import numpy as np

from .results import Results


def display_values(results: Results, var: str) -> tuple[np.ndarray, np.ndarray]:
    """``(values, known)`` of ``var`` on the whole grid. For a refined file, points that were not
    evaluated take their value from the enclosing evaluated cell (see :func:`filled`)."""
    data, done = results.data[var], results.done.astype(bool)
    stride = int(results.attrs.get("refine_stride", "1") or 1)
    if stride == 1:
        return data, done
    return filled(data, done, stride), filled(done, done, stride)


def filled(data: np.ndarray, done: np.ndarray, stride: int) -> np.ndarray:
    """Values on the whole finest grid for display: a point that was not evaluated takes the
    value of the lower corner of the smallest evaluated cell that contains it (whose corners
    agree, or it would have been refined)."""
    out = data.copy()
    have = done.astype(bool).copy()
    shape = data.shape
    axes = refined_axes(shape)
    s = stride
    while s > 1:
        half = s // 2
        grids = [np.arange(0, n, half) if i in axes else np.arange(n) for i, n in enumerate(shape)]
        mesh = np.meshgrid(*grids, indexing="ij")
        target = tuple(m.ravel() for m in mesh)
        source = tuple((m.ravel() // s) * s if i in axes else m.ravel() for i, m in enumerate(mesh))
        need = ~have[target]
        tgt = tuple(t[need] for t in target)
        src = tuple(c[need] for c in source)
        out[tgt] = out[src]
        have[tgt] = have[src]
        s = half
    return out


def refined_axes(shape: tuple[int, ...]) -> list[int]:
    """The axes refinement subdivides: those with more than one point."""
    return [i for i, n in enumerate(shape) if n > 1]
