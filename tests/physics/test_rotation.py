"""Rotation operators, rotation indicators and the corner charge of Benalcazar, Li and Hughes
(PRB 99, 245151 (2019)), checked against the corner charge of flakes diagonalised here.

Flake corner charge (written in this file, numpy eigh on a flake of whole cells built here from
the model's hoppings): the filled states are those below a Fermi level in the widest empty
interval of the flake's spectrum inside the bulk gap (so no level sits at it and in-gap corner
levels are filled or emptied together); each site carries the background ``filling / n_orb``;
the flake is cut into ``n`` sectors about its centre, bounded by the rays to the midpoints of
its sides (a site on a ray counts half to each side), and a corner's charge is the sum of
(density - background) over its sector, mod 1. A polarised crystal (kagome and the flux-free
C4 plaquette model at filling one) puts a fractional charge ``lambda`` per cell on each side;
a sector holds one side's length of edge (``N`` cells on an ``N``-cell triangle or square), so
the flakes are chosen with ``N lambda`` an integer, ``lambda`` measured here from the flakes of
``N`` and ``N + 1`` cells.
"""

import math

import numpy as np
import pytest

from sweepcli.physics import rotation as rt
from sweepcli.physics.lattice import assemble, kmesh
from sweepcli.physics.measurements import MEASUREMENTS
from sweepcli.physics.models import MODELS, SQUARE
from sweepcli.physics.point import Point
from sweepcli.schema import Reason

# ---------------------------------------------------------------------------------------------
# Flakes, written here.


def flake_hamiltonian(tb, cells):
    """Dense H of the cells (list of integer pairs) with every hopping inside the set."""
    idx = {c: i for i, c in enumerate(cells)}
    n = tb.norb
    h = np.zeros((n * len(cells),) * 2, complex)
    for c, i in idx.items():
        h[i * n:(i + 1) * n, i * n:(i + 1) * n] += tb.onsite
        for r, t in tb.hoppings.items():
            j = idx.get((c[0] + r[0], c[1] + r[1]))
            if j is not None:
                h[i * n:(i + 1) * n, j * n:(j + 1) * n] += t
                h[j * n:(j + 1) * n, i * n:(i + 1) * n] += t.conj().T
    return h


def triangle(n):  # breathing kagome: N rows of upward triangles
    return [(i, j) for i in range(n) for j in range(n) if i + j < n]


def square(n):
    return [(i, j) for i in range(n) for j in range(n)]


def hexagon(n):  # Kekule hexagons within n steps of the central one
    r = range(-n, n + 1)
    return [(i, j) for i in r for j in r if max(abs(i), abs(j), abs(i + j)) <= n]


def sector_charges(tb, cells, nu, order):
    """Charges of the ``order`` sectors of the flake (module docstring) and the Fermi level."""
    e_bulk = np.linalg.eigvalsh(tb.bloch(kmesh(36, 2)))
    lo, hi = e_bulk[..., nu - 1].max(), e_bulk[..., nu].min()
    assert hi - lo > 0.1
    e, v = np.linalg.eigh(flake_hamiltonian(tb, cells))
    inside = np.concatenate([[lo], e[(e > lo) & (e < hi)], [hi]])
    j = int(np.argmax(np.diff(inside)))
    assert inside[j + 1] - inside[j] > 0.05 * (hi - lo)
    ef = 0.5 * (inside[j] + inside[j + 1])
    rho = np.sum(np.abs(v[:, e < ef]) ** 2, axis=1) - nu / tb.norb
    pos = (np.repeat(np.array(cells, float), tb.norb, axis=0)
           + np.tile(tb.orbital_positions, (len(cells), 1))) @ tb.lattice_vectors
    pos -= pos.mean(axis=0)
    # Sides' midpoints lie at the angles of the vertices + pi/n; the sectors are centred on the
    # vertices, found as the farthest sites.
    far = pos[np.argmax(np.linalg.norm(pos, axis=1))]
    phi0 = math.atan2(far[1], far[0])
    ang = (np.arctan2(pos[:, 1], pos[:, 0]) - phi0 + math.pi / order) % (2 * math.pi)
    ang *= order / (2 * math.pi)  # sector j spans [j, j + 1)
    q = np.zeros(order)
    for a, r in zip(ang, rho):
        base = math.floor(a + 1e-9)
        if abs(a - round(a)) < 1e-9:  # on a ray between two sectors
            q[round(a) % order] += r / 2
            q[(round(a) - 1) % order] += r / 2
        else:
            q[base % order] += r
    return q, ef


def flake_corner_charge(tb, cells_of, size, nu, order):
    """Corner charge of the flake of ``size`` mod 1, after checking that its sectors agree and
    that its sides hold an integer charge per sector (the flakes of size and size + 1)."""
    q, _ = sector_charges(tb, cells_of(size), nu, order)
    q1, _ = sector_charges(tb, cells_of(size + 1), nu, order)
    assert np.allclose(q, q[0], atol=1e-6) and np.allclose(q1, q1[0], atol=1e-6)
    edge = (q1[0] - q[0]) % 1.0  # the charge of one cell of side, per sector
    assert min((size * edge) % 1.0, 1.0 - (size * edge) % 1.0) < 1e-6
    return q[0] % 1.0, edge


def same_mod1(a, b):
    return min((a - b) % 1.0, (b - a) % 1.0) < 1e-6


def ssh_plaquettes(g, lam=1.0):
    """Flux-free C4 plaquette model (the C4 example of BLH 2019, written from memory): four sites
    per cell at the corners of a plaquette, -g inside the cell, -lam between cells."""
    pos = [[0.75, 0.75], [0.25, 0.75], [0.25, 0.25], [0.75, 0.25]]  # counter-clockwise
    on = np.zeros((4, 4))
    for a, b in ((0, 1), (1, 2), (2, 3), (3, 0)):
        on[a, b] = on[b, a] = -g
    tx = np.zeros((4, 4))
    tx[0, 1] = tx[3, 2] = -lam
    ty = np.zeros((4, 4))
    ty[0, 3] = ty[1, 2] = -lam
    rot = rt.site_rotation(SQUARE, pos, 4, (0.5, 0.5))
    return assemble(SQUARE, pos, on, [((1, 0), tx), ((0, 1), ty)], rotations={4: rot})


# ---------------------------------------------------------------------------------------------
# The rotation operators.


@pytest.mark.parametrize("name, params, order, power", [
    ("bbh", dict(gamma=0.37, lam=1.1), 4, -1),   # pi flux: C4^4 = -1 (BBH 2017, from memory)
    ("breathing_kagome", dict(ta=0.4, tb=0.9, mu=0.2), 3, 1),
    ("kekule_honeycomb", dict(t0=0.7, t1=1.2, mu=-0.3), 6, 1),
])
def test_model_rotations_commute_with_h(name, params, order, power):
    tb = MODELS[name].func(**params)
    rot = tb.rotations[order]
    # Independent check at random momenta: H(k') = D(k') H(k) D(k')^+ with k' = k G^-T, and
    # G^n = 1 (the cell map is a rotation of order n).
    rng = np.random.default_rng(3)
    k = 2 * np.pi * rng.random((20, 2))
    kp = k @ np.linalg.inv(rot.cell_map).T
    d = rot.bloch(kp)
    np.testing.assert_allclose(tb.bloch(kp), d @ tb.bloch(k) @ np.swapaxes(d, 1, 2).conj(),
                               atol=1e-12)
    np.testing.assert_array_equal(np.linalg.matrix_power(rot.cell_map, order), np.eye(2))
    np.testing.assert_allclose(rot.power_at(np.zeros(2), order), power * np.eye(tb.norb),
                               atol=1e-12)


def test_a_rotation_that_is_no_symmetry_is_refused():
    tb = MODELS["breathing_kagome"].func(ta=0.3)
    broken = assemble(tb.lattice_vectors, tb.orbital_positions,
                      tb.onsite + np.diag([0.2, 0.0, 0.0]), tb.hoppings.items())
    with pytest.raises(rt.RotationError, match="not a symmetry of the model"):
        rt.indicators(broken, tb.rotations[3], 1)
    bbh = MODELS["bbh"].func(gamma=0.3)
    wrong = rt.site_rotation(bbh.lattice_vectors, bbh.orbital_positions, 4, (0.5, 0.5))
    with pytest.raises(rt.RotationError, match="not a symmetry"):
        rt.check_rotation(bbh, wrong)  # without the flux sign
    with pytest.raises(rt.RotationError, match="no 3-fold rotation"):
        rt.site_rotation(SQUARE, bbh.orbital_positions, 3, (0.5, 0.5))


def test_bbh_has_no_rotation_when_delta_breaks_it():
    # Gamma0 = tau_z puts +delta on orbitals 0, 1 and -delta on 2, 3, which C4 exchanges.
    assert MODELS["bbh"].func(gamma=0.3, delta=0.1).rotations == {}


# ---------------------------------------------------------------------------------------------
# Kekule honeycomb: analytic spectrum at Gamma and the band inversion.


@pytest.mark.parametrize("t0, t1", [(0.4, 1.0), (1.0, 0.4), (0.8, 1.3)])
def test_kekule_gamma_levels_and_band_inversion(t0, t1):
    # Analytic: at Gamma the ring modes l = 0..5 of the hexagon have -2 t0 cos(pi l/3), and the
    # inter-hexagon bond adds -t1 (-1)^l; so the half-filling gap at Gamma is 2 |t1 - t0|.
    tb = MODELS["kekule_honeycomb"].func(t0=t0, t1=t1)
    levels = sorted(-2 * t0 * np.cos(np.pi * m / 3) - t1 * (-1) ** m for m in range(6))
    np.testing.assert_allclose(np.linalg.eigvalsh(tb.bloch(np.zeros(2))), levels, atol=1e-12)
    # Band inversion of Wu and Hu (PRL 114, 223901 (2015), from memory): the filled states at
    # Gamma are l = 0 and the pair l = +-1 (C6 eigenvalues 1, exp(+-i pi/3)) for shrunk hexagons
    # (t0 > t1) and l = 0, +-2 (1, exp(+-2 i pi/3)) for expanded ones (t1 > t0).
    counts, gap = rt.eigen_counts(tb, tb.rotations[6], 3, np.zeros(2), 6)
    assert np.isclose(gap, 2 * abs(t1 - t0))
    expected = [1, 1, 0, 0, 0, 1] if t0 > t1 else [1, 0, 1, 0, 1, 0]
    assert list(counts) == expected


def test_kekule_gap_closes_only_at_equal_hoppings():
    e = np.linalg.eigvalsh(MODELS["kekule_honeycomb"].func(t0=1.0, t1=1.0).bloch(kmesh(24, 2)))
    assert np.min(e[..., 3] - e[..., 2]) < 1e-12  # graphene: Dirac points folded onto Gamma
    for t0 in (0.5, 0.9, 1.1, 2.0):
        e = np.linalg.eigvalsh(MODELS["kekule_honeycomb"].func(t0=t0).bloch(kmesh(24, 2)))
        assert np.min(e[..., 3] - e[..., 2]) > 0.1 * abs(1 - t0)


# ---------------------------------------------------------------------------------------------
# Indicator against flake.


@pytest.mark.parametrize("ta, expected", [
    (0.3, 1 / 3),    # obstructed phase -1 < ta/tb < 1/2 (Ezawa 2018; 1/3: BLH 2019, from memory)
    (-0.5, 1 / 3),
    (3.0, 0.0),      # trivial ta/tb > 2
])
def test_kagome_c3_corner_charge(ta, expected):
    tb = MODELS["breathing_kagome"].func(ta=ta)
    ind = rt.indicators(tb, tb.rotations[3], 1)
    q, edge = flake_corner_charge(tb, triangle, 6, 1, 3)
    assert same_mod1(q, expected) and same_mod1(float(ind.charge), q)
    # The obstructed phase is polarised: 1/3 of a charge per cell of side (sizes 6 and 7).
    assert same_mod1(edge, 1 / 3 if ta < 0.5 else 0.0)


@pytest.mark.parametrize("t0, expected", [
    (0.4, 0.5),      # expanded hexagons t1 > t0: filled bands on the inter-hexagon bonds
    (0.15, 0.5),
    (2.0, 0.0),      # shrunk hexagons: trivial
])
def test_kekule_c6_corner_charge(t0, expected):
    # C6 (BLH 2019, from memory): Q = [M_1^(2)]/4 + [K_2^(3)]/6; three electrons per cell on
    # the three inter-hexagon bond centres (Wyckoff 3c) give 1/2.
    tb = MODELS["kekule_honeycomb"].func(t0=t0)
    ind = rt.indicators(tb, tb.rotations[6], 3)
    q, edge = flake_corner_charge(tb, hexagon, 2, 3, 6)
    assert same_mod1(q, expected) and same_mod1(float(ind.charge), q)
    assert same_mod1(edge, 0.0)  # C6: no polarisation


@pytest.mark.parametrize("g, expected", [(0.3, 0.25), (3.0, 0.0)])
def test_flux_free_c4_corner_charge(g, expected):
    # One electron per cell at the plaquette between cells (Wyckoff 1b) for g < lam: 1/4 (BLH
    # 2019's C4 example, from memory); polarised (1/2 per cell of side), so an even size.
    tb = ssh_plaquettes(g)
    ind = rt.indicators(tb, tb.rotations[4], 1)
    assert ind.spinless
    q, edge = flake_corner_charge(tb, square, 6, 1, 4)
    assert same_mod1(q, expected) and same_mod1(float(ind.charge), q)
    assert same_mod1(edge, 0.5 if g < 1 else 0.0)


def test_bbh_corner_charge_half_and_the_indicator_refused():
    # BBH (Science 357, 61 (2017)): corner charge 1/2 in the quadrupole phase |gamma| < |lam|,
    # 0 in the trivial one; the pi flux makes C4^4 = -1, where the spinless formula does not
    # hold (it would give 1/4 here), so the indicator gives no charge.
    for gamma, expected in ((0.3, 0.5), (2.5, 0.0)):
        tb = MODELS["bbh"].func(gamma=gamma)
        q, edge = flake_corner_charge(tb, square, 5, 2, 4)
        assert same_mod1(q, expected) and same_mod1(edge, 0.0)
        ind = rt.indicators(tb, tb.rotations[4], 2)
        assert ind.charge is None and not ind.spinless
    ind = rt.indicators(MODELS["bbh"].func(gamma=0.3), MODELS["bbh"].func(gamma=0.3)
                        .rotations[4], 2)
    assert rt.corner_charge_formula(4, ind.indices) == rt.Fraction(1, 4)


# ---------------------------------------------------------------------------------------------
# The stored measurement.


def measure(model, params, filling):
    pt = Point(params, lambda p: MODELS[model].func(**p), filling=filling)
    return MEASUREMENTS["corner_charge"].func(pt)


def test_measurement_values_and_reasons():
    out = measure("breathing_kagome", {"ta": 0.3}, 1)
    assert out["reason"] == Reason.OK and np.isclose(out["corner_charge"], 1 / 3)
    assert (out["corner_charge_order"], out["corner_charge_i1"], out["corner_charge_i2"],
            out["corner_charge_i3"]) == (3, -1, 1, None)
    out = measure("kekule_honeycomb", {"t0": 0.4}, 3)
    assert out["reason"] == Reason.OK and np.isclose(out["corner_charge"], 0.5)
    # Ezawa (2018): the kagome gap closes at ta = tb.
    out = measure("breathing_kagome", {"ta": 1.0}, 1)
    assert out["reason"] == Reason.GAP_CLOSED and math.isnan(out["corner_charge"])
    # No rotation (delta breaks C4; BHZ registers none); BBH's C4^4 = -1: indices only.
    for model, params in (("bbh", {"gamma": 0.3, "delta": 0.1}), ("bhz", {"M": 1.0})):
        out = measure(model, params, 2)
        assert out["reason"] == Reason.NO_SYMMETRY and out["corner_charge_order"] is None
    out = measure("bbh", {"gamma": 0.3}, 2)
    assert out["reason"] == Reason.NO_SYMMETRY and math.isnan(out["corner_charge"])
    assert out["corner_charge_order"] == 4 and out["corner_charge_i2"] is not None
