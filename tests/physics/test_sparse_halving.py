"""The twice-wider ribbon evaluated sparsely decides as the whole grid does, and the slope bound
it relies on holds.

``_halved_all`` replaces "evaluate the 2W ribbon on the whole k grid, then ``_halved``" by
evaluations at the grid points (and points between them) that provably decide; its answer must
be the whole grid's. References: the whole-grid procedure itself, run on the same functions;
closed-form distance functions whose minimum is known; ``numpy.linalg.eigvalsh`` of ribbon Bloch
matrices (finite-difference level slopes) for the slope bound.
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepcli.physics import samples
from sweepcli.physics.boundary import boxes
from sweepcli.physics.boundary.ribbons import ribbon_kgrid
from sweepcli.physics.models import MODELS


def model(name, **kw):
    return MODELS[name].func(**kw)


def whole_grid(dist, k, thresholds, lip):
    grid = dist(k)
    return [False if t is None else
            boxes._halved(lambda x, i=i: dist(x)[i], k, grid[i], t, lip)
            for i, t in enumerate(thresholds)]


class Counted:
    """A distance function ``k -> (ncentre, nk)`` that records the momenta it was asked."""

    def __init__(self, func):
        self.func, self.asked = func, []

    def __call__(self, x):
        x = np.asarray(x, dtype=float)
        self.asked.extend(x.tolist())
        return self.func(x)


def ribbon_dists(tb, width, centres, axis=1):
    rb = samples.ribbon(tb, width, axis)

    def dist(x):
        e = np.linalg.eigvalsh(rb.bloch(np.asarray(x)[:, None]))
        return np.array([np.min(np.abs(e - c), axis=-1) for c in centres])

    return rb, dist


@pytest.mark.parametrize("name, kw", [("qwz", dict(m=1.0)), ("qwz", dict(m=-1.8)),
                                      ("bhz_corner", dict(m=1.0, delta2=0.5)),
                                      ("haldane", dict(t2=0.2, phi=np.pi / 2, M=0.3))])
def test_strip_slope_bounds_every_ribbon_level_slope(name, kw):
    # A ribbon level moves no faster than ||dH/dk_par||, for any width; the bound comes from
    # the bulk alone. Levels by numpy eigvalsh, slopes by differences on a fine grid.
    tb = model(name, **kw)
    for axis in (0, 1):
        bound = boxes._strip_slope(tb, 1 - axis)
        crude = boxes._slope_bound([(1.0, samples.ribbon(tb, 3, axis))])
        assert bound <= crude
        for width in (3, 10):
            rb = samples.ribbon(tb, width, axis)
            k = np.linspace(0, 2 * np.pi, 2001)
            e = np.linalg.eigvalsh(rb.bloch(k[:, None]))
            slopes = np.abs(np.diff(e, axis=0)) / np.diff(k)[:, None]
            assert slopes.max() <= bound
            # and ||dH/dk|| itself (central difference of the Bloch matrix)
            h = 1e-5
            dh = (rb.bloch(k[:, None] + h) - rb.bloch(k[:, None] - h)) / (2 * h)
            assert np.abs(np.linalg.eigvalsh(dh)).max() <= bound * (1 + 1e-6)


def test_strip_slope_is_tight_for_a_dirac_ribbon():
    # qwz: d_par H = cos k_par sigma_x + sin k_par sigma_z (unit hoppings), norm 1 at every k,
    # where the sum of hopping norms gives 2.
    tb = model("qwz", m=1.0)
    assert boxes._strip_slope(tb, 0) == pytest.approx(1.0, rel=0.05)
    assert boxes._slope_bound([(1.0, samples.ribbon(tb, 4, 1))]) == pytest.approx(2.0, rel=1e-5)


@pytest.mark.parametrize("name, kw, width", [
    ("qwz", dict(m=1.0), 3),                  # Chern edge tunnelling across: halves
    ("qwz", dict(m=-1.8), 4),
    ("qwz", dict(m=3.0), 4),                  # trivial: the gap stays
    ("bhz_corner", dict(m=1.0, delta2=0.5), 6),   # gapped edges: the gap stays
    ("bhz_corner", dict(m=1.0, delta2=0.05), 3),  # nearly gapless edges
])
def test_sparse_halving_decides_as_the_whole_grid(name, kw, width):
    tb = model(name, **kw)
    nk = 64
    k = ribbon_kgrid(nk)
    centres = [0.0, 0.15]
    for axis in (0, 1):
        _, narrow = ribbon_dists(tb, width, centres, axis)
        rb, wide = ribbon_dists(tb, 2 * width, centres, axis)
        lip = min(boxes._slope_bound([(1.0, rb)]), boxes._strip_slope(tb, 1 - axis))
        guide = narrow(k)
        thresholds = [boxes._gap_and_decay(lambda x, i=i, f=narrow: f(x)[i], k, guide[i],
                                           curvature=False)[0] / 4 for i in range(2)]
        thresholds = [t if t > 0 else None for t in thresholds]
        counted = Counted(wide)
        got = boxes._halved_all(counted, k, thresholds, lip, guide)
        assert got == whole_grid(wide, k, thresholds, lip)


def test_sparse_halving_on_closed_forms():
    # d(x) = a + b |sin((x - x0) / 2)|: minimum a at x0, slope at most b / 2.
    nk = 64
    k = ribbon_kgrid(nk)
    step = 2 * np.pi / nk

    def shape(a, b, x0):
        return lambda x: a + b * np.abs(np.sin((np.asarray(x) - x0) / 2))

    lip = 0.5 * 1.0
    # minimum 0.1 off the grid, thresholds 0.05 (clearly not halved) and 0.2 (clearly halved:
    # grid values next to the minimum are below it)
    f = shape(0.1, 1.0, k[10] + 0.37 * step)
    dist = Counted(lambda x: np.array([f(x), f(x)]))
    assert boxes._halved_all(dist, k, [0.05, 0.2], lip, dist.func(k)) == [False, True]
    assert len(set(dist.asked)) < nk  # decided without the whole grid
    # a narrow dip below the threshold between grid points (at a notch of slope 6), away from
    # the grid minimum: the whole-grid procedure polishes only around the grid minimum and
    # misses it, and so must the sparse one (the same answer, not a better one)
    base = shape(0.3, 1.0, k[40])
    notch_at = k[10] + 0.5 * step

    def g(x):
        x = np.asarray(x, dtype=float)
        return np.minimum(base(x), 0.1 + 6.0 * np.abs(x - notch_at))

    lip_g = 0.5 + 6.0
    assert g(k).min() == pytest.approx(0.3) and g(np.array([notch_at]))[0] == pytest.approx(0.1)
    dist = Counted(lambda x: np.array([g(x)]))
    expected = whole_grid(dist.func, k, [0.2], lip_g)
    assert expected == [False]
    assert boxes._halved_all(dist, k, [0.2], lip_g, dist.func(k)) == expected
    # a centre not asked is never halved
    dist = Counted(lambda x: np.array([f(x), f(x)]))
    assert boxes._halved_all(dist, k, [None, 0.05], lip, dist.func(k)) == [False, False]
