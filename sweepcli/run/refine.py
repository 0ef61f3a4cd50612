"""Adaptive refinement on the finest grid of a job with a ``[refine]`` table.

All points live on the finest uniform grid (``stride = 2**depth`` times denser than the base
grid of ``[sweep]``). Level 0 evaluates the base points (every ``stride``-th point). Level ``l``
looks at the cells of level ``l - 1`` (corner spacing ``2s``, ``s = stride / 2**l``) whose
corners were all evaluated, and evaluates every point of spacing ``s`` inside the cells whose
corners disagree in the ``by`` quantity (a missing value counts as a value of its own) or where
a corner's gap is below ``gap_below``. Decisions depend only on stored values, so a resumed run
makes the same ones.
"""

from __future__ import annotations

import itertools

import numpy as np

from ..store import FILL_INT, Results
from ..store.refined import refined_axes

MISSING = np.iinfo(np.int64).min


def base_indices(shape: tuple[int, ...], stride: int) -> np.ndarray:
    """Flat indices of the base grid points."""
    grids = [np.arange(0, n, stride) if n > 1 else np.arange(1) for n in shape]
    mesh = np.meshgrid(*grids, indexing="ij")
    return np.ravel_multi_index([m.ravel() for m in mesh], shape)


def _as_int(data: np.ndarray) -> np.ndarray:
    out = data.astype(np.int64)
    out[data == FILL_INT] = MISSING
    return out


def level_indices(results: Results, by: str, stride: int, level: int,
                  gap_below: float | None = None, gap_var: str = "gap") -> np.ndarray:
    """Flat indices of the points level ``level`` (>= 1) asks for, evaluated or not."""
    shape = results.shape
    s = stride // 2 ** level
    coarse = 2 * s
    axes = refined_axes(shape)
    sl = tuple(slice(None, None, coarse) if i in axes else slice(None) for i in range(len(shape)))
    values = _as_int(results.data[by])[sl]
    done = results.done.astype(bool)[sl]
    small = None
    if gap_below is not None:
        gap = results.data[gap_var][sl]
        small = np.isfinite(gap) & (gap < gap_below)
    # Corners of every cell: offsets 0/1 along each refined axis of the coarse lattice.
    cell_shape = tuple(n - 1 if i in axes else n for i, n in enumerate(values.shape))
    if any(n < 1 for n in cell_shape):
        return np.zeros(0, np.int64)
    lo = np.full(cell_shape, np.iinfo(np.int64).max)
    hi = np.full(cell_shape, np.iinfo(np.int64).min)
    all_done = np.ones(cell_shape, bool)
    any_small = np.zeros(cell_shape, bool)
    for offset in itertools.product((0, 1), repeat=len(axes)):
        corner = [slice(None)] * len(shape)
        for ax, o in zip(axes, offset):
            corner[ax] = slice(o, o + cell_shape[ax])
        corner = tuple(corner)
        lo = np.minimum(lo, values[corner])
        hi = np.maximum(hi, values[corner])
        all_done &= done[corner]
        if small is not None:
            any_small |= small[corner]
    active = all_done & ((lo != hi) | any_small)
    if not active.any():
        return np.zeros(0, np.int64)
    cells = np.argwhere(active)  # lower corners in coarse-lattice coordinates
    points = []
    for offset in itertools.product((0, 1, 2), repeat=len(axes)):
        idx = cells.copy()
        for k, ax in enumerate(axes):
            idx[:, ax] = cells[:, ax] * coarse + offset[k] * s
        points.append(np.ravel_multi_index(idx.T, shape))
    return np.unique(np.concatenate(points))
