"""Polygonal open samples and the breathing kagome lattice.

Sources: Ezawa, PRL 120, 026801 (2018) (breathing kagome: one zero-energy state at each corner
of a triangular flake of upward triangles for -1 < t_a/t_b < 1/2, none for t_a/t_b > 2, the
bulk gap closing at t_a = t_b; from memory); Schindler et al., Science Advances 4, eaat0346
(2018) (one corner mode per corner of the C4- and T-breaking BHZ model for |m| < 2|t|).
References are written here: a plain triangular flake of the kagome lattice built site by site
and diagonalised with numpy's eigh, and nearest-vertex partitions computed point by point.
"""

from __future__ import annotations

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.physics import boundary as bd
from sweepcli.physics import samples
from sweepcli.physics.models import MODELS
from sweepcli.physics.spectrum import band_gap
from sweepcli.schema import Reason

from ..robustness.test_bad_jobs import run_bad


def model(name, **kw):
    return MODELS[name].func(**kw)


def polygon(tb, name):
    return samples.Polygon(tb, *samples.POLYGONS[name])


# ---------------------------------------------------------------------------------------------
# The square is the box
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("m", [-2.5, -1.0, 0.5, 1.5, 2.6])
def test_square_polygon_reproduces_box_counts(m):
    # Same window, same decay length rule: the square of size L on the square lattice must give
    # the box's counts, corner by corner (box corners 00, 10, 01, 11 are vertices 0, 1, 3, 2),
    # the same trust variables and the same sample size (Schindler et al. 2018: one per corner
    # for |m| < 2).
    tb = model("bhz_corner", m=m, delta2=0.6)
    w = bd.static_window(tb)
    gap, xi = bd.static_boundary_gap(tb, w.centre, 12)
    box = bd.box_modes(tb, (12, 12), bd.edge_window(w, gap), xi=xi, max_side=48)
    sq = polygon(tb, "square")
    gap2, xi2 = bd.static_boundary_gap(tb, w.centre, 12, cuts=samples.polygon_cuts(sq, 12))
    assert gap2 == pytest.approx(gap, rel=1e-9) and xi2 == pytest.approx(xi, rel=1e-6)
    poly = bd.polygon_modes(tb, sq, 12, bd.edge_window(w, gap2), xi=xi2, max_size=48)
    assert box.reason == poly.reason == Reason.OK
    assert box.per_corner.tolist() == poly.per_corner[[0, 1, 3, 2]].tolist()
    assert box.per_corner.tolist() == ([1, 1, 1, 1] if abs(m) < 2 else [0, 0, 0, 0])
    assert (box.states, box.region, box.shape[0]) == (poly.states, poly.region, poly.shape[0])
    assert box.weight == pytest.approx(poly.weight, nan_ok=True)


def test_square_polygon_hamiltonian_is_the_box():
    tb = model("bhz_corner", m=1.0, delta2=0.5)
    for size in (8, 9):
        diff = samples.polygon_hamiltonian(tb, polygon(tb, "square"), size) \
            - samples.open_hamiltonian(tb, (size, size))
        assert abs(diff).max() == 0


# ---------------------------------------------------------------------------------------------
# Corner regions
# ---------------------------------------------------------------------------------------------

def test_hexagon_corner_regions_are_the_nearest_vertex_partition():
    tb = model("breathing_kagome", ta=0.3)
    hexagon = polygon(tb, "hexagon")
    size = 10
    _, _, pos = samples.polygon_sites(tb, hexagon, size)
    regions = bd.polygon_regions(hexagon, pos, size)
    # Nearest vertex, point by point, of the regular hexagon of side 10 (vertices at the six
    # neighbours of the origin on the triangular lattice, counter-clockwise from (10, 0)).
    verts = [10 * np.array([np.cos(a), np.sin(a)]) for a in np.arange(6) * np.pi / 3]
    # Sites on a bisector go where the sample's documented tie-break moves them.
    moved = pos + samples.POLYGON_SHIFT
    expected = [int(np.argmin([np.linalg.norm(p - v) for v in verts])) for p in moved]
    start = int(np.argmin(np.linalg.norm(hexagon.vertices - np.array([1.0, 0.0]), axis=1)))
    assert regions.corner.tolist() == [(e + start) % 6 for e in expected]
    assert regions.ncorner == 6 and regions.side == 10
    # Every site is inside the regular hexagon (distance to the centre at most the side).
    assert np.all(np.linalg.norm(pos, axis=1) <= 10 + 1e-9)
    # Six regions of about equal size (the boundary tie-break moves at most a side's sites).
    counts = np.bincount(regions.corner, minlength=6)
    assert counts.min() >= counts.max() - 2 * 3 * size


def test_polygon_refuses_a_side_off_the_lattice_vectors():
    tb = model("breathing_kagome", ta=0.3)
    with pytest.raises(ValueError, match="side 2 .* not along a lattice vector"):
        samples.Polygon(tb, [[0, 0], [1, 0], [0.3, 0.9]], "cartesian")
    with pytest.raises(ValueError, match="convex"):
        samples.Polygon(tb, [[0, 0], [2, 0], [2, 2], [1, 0.5], [0, 2]])


# ---------------------------------------------------------------------------------------------
# Breathing kagome (Ezawa 2018)
# ---------------------------------------------------------------------------------------------

def kagome_triangle(ta: float, tb: float, cells: int) -> tuple[np.ndarray, np.ndarray]:
    """Triangular flake of ``cells`` upward triangles along a side, built site by site:
    Hamiltonian (hoppings -ta inside an upward triangle, -tb inside a downward one) and the
    Cartesian site positions."""
    a1, a2 = np.array([1.0, 0.0]), np.array([0.5, np.sqrt(3) / 2])
    sites = {}
    for c1 in range(cells):
        for c2 in range(cells - c1):
            for o in range(3):  # A at the cell, B and C half-way along a_1 and a_2
                sites[(c1, c2, o)] = len(sites)
    pos = np.zeros((len(sites), 2))
    for (c1, c2, o), i in sites.items():
        pos[i] = (c1 + (0.5 if o == 1 else 0)) * a1 + (c2 + (0.5 if o == 2 else 0)) * a2
    h = np.zeros((len(sites), len(sites)))
    for i in range(len(sites)):
        for j in range(i + 1, len(sites)):
            if abs(np.linalg.norm(pos[i] - pos[j]) - 0.5) < 1e-9:
                (c1, c2, _), (d1, d2, _) = ([k for k, v in sites.items() if v == x][0]
                                            for x in (i, j))
                h[i, j] = h[j, i] = -ta if (c1, c2) == (d1, d2) else -tb
    return h, pos


def kagome_count(ta, size=12, max_size=48):
    tb = model("breathing_kagome", ta=ta)
    tri = polygon(tb, "triangle")
    w = bd.energy_window(tb, 0.0)
    if not w.closed(1e-6):
        gap, _ = bd.static_boundary_gap(tb, 0.0, size, cuts=samples.polygon_cuts(tri, size))
        w = bd.edge_window(w, gap)
    return bd.polygon_modes(tb, tri, size, w, max_size=max_size), tri


@pytest.mark.parametrize("ta", [0.2, 0.35])
def test_kagome_triangle_one_zero_mode_per_corner(ta):
    # Ezawa (2018): one zero-energy state at each of the three corners for 0 < ta/tb < 1/2.
    r, tri = kagome_count(ta)
    assert r.reason == Reason.OK
    assert r.per_corner.tolist() == [1, 1, 1]
    # Reference: a flake larger than the one the count settled on, diagonalised densely.
    cells = 2 * r.shape[0]
    h, pos = kagome_triangle(ta, 1.0, cells)
    e, v = np.linalg.eigh(h)
    zero = np.abs(e) < 1e-6
    assert zero.sum() == 3
    # Each zero mode sits at one corner: most of the zero-energy weight within 3 cells of it.
    corners = np.array([[0, 0], [cells, 0], [cells / 2, cells * np.sqrt(3) / 2]])
    weight = np.sum(np.abs(v[:, zero]) ** 2, axis=1)
    for c in corners:
        assert weight[np.linalg.norm(pos - c, axis=1) < 3].sum() > 0.95
    # The next level is far from zero (the window sees only the three).
    assert np.min(np.abs(e[~zero])) > 0.1


@pytest.mark.parametrize("ta", [2.4, 3.0])
def test_kagome_triangle_no_corner_mode_in_trivial_phase(ta):
    # Ezawa (2018): no zero-energy state for ta/tb > 2; zero energy is inside the gap.
    r, _ = kagome_count(ta)
    assert r.reason == Reason.OK and r.per_corner.tolist() == [0, 0, 0]
    h, _ = kagome_triangle(ta, 1.0, 2 * r.shape[0])
    assert np.min(np.abs(np.linalg.eigvalsh(h))) > 0.1


def test_kagome_zero_energy_inside_a_band_is_missing():
    # For 1/2 < ta/tb < 2 zero energy lies in a bulk band (checked here on a mesh): no window.
    r, _ = kagome_count(0.8)
    assert r.per_corner is None and r.reason == Reason.GAP_CLOSED
    tb = model("breathing_kagome", ta=0.8)
    k = np.stack(np.meshgrid(*[np.linspace(0, 2 * np.pi, 40)] * 2), axis=-1)
    e = np.linalg.eigvalsh(tb.bloch(k))
    assert np.any(e[..., 1] < 0) and np.any(e[..., 1] > 0)


def test_kagome_bulk_gap_closes_at_equal_hoppings():
    # Ezawa (2018): the gap above the lowest band closes at ta = tb (the kagome Dirac point at
    # K, at energy -t for equal hoppings, analytic) and is open on either side.
    gaps = {ta: band_gap(model("breathing_kagome", ta=ta), 1, 48).gap
            for ta in (0.8, 0.95, 1.0, 1.05, 1.2)}
    assert gaps[1.0] < 1e-6
    assert min(gaps[0.8], gaps[0.95], gaps[1.05], gaps[1.2]) > 0.04
    k_point = np.array([2 * np.pi / 3, -2 * np.pi / 3])
    e = np.linalg.eigvalsh(model("breathing_kagome", ta=1.0).bloch(k_point))
    assert e[0] == pytest.approx(-1.0, abs=1e-12) and e[1] == pytest.approx(-1.0, abs=1e-12)
    # One band is flat at ta + tb (analytic, for every k).
    k = np.random.default_rng(1).uniform(0, 2 * np.pi, (20, 2))
    assert np.allclose(np.linalg.eigvalsh(model("breathing_kagome", ta=0.3).bloch(k))[:, 2],
                       1.3)


# ---------------------------------------------------------------------------------------------
# Job file
# ---------------------------------------------------------------------------------------------

KAGOME_JOB = """
[job]
name = "tri"
[model]
name = "breathing_kagome"
[sweep]
ta = { start = 0.2, stop = 0.3, num = 2 }
[measure.polygon_modes]
POLYGON
energy = 0.0
[output]
path = "OUT"
"""


@pytest.mark.parametrize("polygon_keys, expected", [
    ('shape = "custom"\nvertices = [[0, 0], [1, 0], [0.3, 0.9]]\ncoordinates = "cartesian"',
     r"JOB: \[measure\.polygon_modes\] vertices must be a convex polygon whose sides run along "
     r"lattice vectors of the model; got .* Side 2 .* is not along a lattice vector"),
    ('shape = "custom"\nvertices = [[0, 0], [1, 0]]',
     r"JOB: \[measure\.polygon_modes\] vertices must be a list of at least 3 \[x, y\] pairs"),
    ('vertices = [[0, 0], [1, 0], [0, 1]]',
     r"JOB: \[measure\.polygon_modes\] vertices must be .* shape must be \"custom\""),
    ('shape = "pentagon"',
     r"JOB: \[measure\.polygon_modes\] shape must be one of 'triangle'"),
    ('shape = "triangle"\nsize = 6',
     r"JOB: \[measure\.polygon_modes\] size = 6 is too small"),
])
def test_bad_polygon_names_file_and_key(tmp_path, polygon_keys, expected):
    import re
    line = run_bad(tmp_path, KAGOME_JOB.replace("POLYGON", polygon_keys))
    assert re.search(expected, line), line


def test_kagome_job_validates(tmp_path):
    job = tmp_path / "tri.toml"
    job.write_text(KAGOME_JOB.replace("POLYGON", 'shape = "triangle"')
                   .replace("OUT", str(tmp_path / "o.h5")))
    result = CliRunner().invoke(app, ["check", str(job)])
    assert result.exit_code == 0, result.output


def test_driven_square_polygon_reproduces_driven_box():
    # A two-step mass drive of bhz_corner (modes at 0 and at pi/T, as in
    # test_boundary_reference.py): the square's counts per gap equal the box's, with the edge
    # gaps of the side ribbons equal to those of the two cuts.
    from sweepcli.physics.drives.steps import StepDrive

    period = 2 * np.pi / 6
    drive = StepDrive(period, ((0.4 * period, model("bhz_corner", m=-0.5, delta2=0.8)),
                               (0.6 * period, model("bhz_corner", m=3.0, delta2=0.8))))
    factors = list(drive.factors())
    windows = bd.floquet_windows(drive)
    sq = polygon(factors[0][1], "square")
    centres = [windows[g].centre for g in windows]
    box_gaps = bd.floquet_boundary_gaps(factors, period, centres, 12)
    cut_gaps = bd.floquet_boundary_gaps(factors, period, centres, 12,
                                        cuts=samples.polygon_cuts(sq, 12))
    assert np.allclose(box_gaps, cut_gaps, rtol=1e-9)
    edge = {g: bd.edge_window(windows[g], x[0]) for g, x in zip(windows, box_gaps)}
    xi = {g: x[1] for g, x in zip(windows, box_gaps)}
    box = bd.floquet_box_modes(factors, (12, 12), edge, xi=xi, max_side=24)
    poly = bd.floquet_polygon_modes(factors, sq, 12, edge, xi=xi, max_size=24)
    for g in edge:
        assert box[g].reason == poly[g].reason == Reason.OK
        assert box[g].per_corner.tolist() == poly[g].per_corner[[0, 1, 3, 2]].tolist()
        assert box[g].total == 4
