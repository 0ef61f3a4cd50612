"""Every built-in model against hoppings and Bloch formulas written out here, by hand.

Each model is checked three ways at random momenta: the library's ``H(k)`` (i) against a direct
sum over a real-space hopping table typed in below, (ii) against the closed-form ``H(k)`` of its
docstring, also typed in below, and (iii) for the generic properties every Bloch Hamiltonian
has (shape, Hermiticity, periodicity in reduced k). Matrices here are built with this file's own
Pauli matrices, not the library's.
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepcli.physics.models import MODELS

RNG = np.random.default_rng(20240607)

S0 = np.eye(2, dtype=complex)
SX = np.array([[0, 1], [1, 0]], dtype=complex)
SY = np.array([[0, -1j], [1j, 0]], dtype=complex)
SZ = np.array([[1, 0], [0, -1]], dtype=complex)
P = {"0": S0, "x": SX, "y": SY, "z": SZ}


def kr(word: str) -> np.ndarray:
    """tau_a (x) sigma_b for word 'ab' (first letter outermost)."""
    return np.kron(P[word[0]], P[word[1]])


# Parameters chosen so that every term of every model is switched on (generic values).
SAMPLES = {
    "qwz": dict(m=0.7, t=1.3),
    "ssh": dict(v=0.4, w=1.1),
    "kitaev": dict(mu=0.6, t=0.9, delta=0.7),
    "haldane": dict(t1=1.1, t2=0.17, phi=0.8, M=0.23),
    "bhz": dict(M=1.3, A=0.9, B=1.2, C=0.3, D=0.25, mix=0.15),
    "bhz_corner": dict(m=0.8, t=1.1, delta1=0.9, delta2=0.45),
    "bbh": dict(gamma=0.4, lam=1.2, delta=0.1),
    "bipartite_square": dict(j1=0.3, j2=0.7, j3=1.1, j4=0.5, delta=0.2),
    "graphene_field": dict(t=1.1, M=0.2, ax=0.3, ay=-0.45),
    "breathing_kagome": dict(ta=0.3, tb=1.2, mu=0.15),
    "kekule_honeycomb": dict(t0=0.6, t1=1.1, mu=0.2),
}


# ---------------------------------------------------------------------------------------------
# (i) Real-space hopping tables: entries (R, i, j, amplitude) meaning <i, cell 0|H|j, cell R>.
# R = 0 entries with i != j get their Hermitian partner added; diagonal R = 0 entries are onsite
# energies; R != 0 entries get the partner <j, cell R|H|i, cell 0> = conj(amplitude).


def table_qwz(m, t):
    # Asboth et al. 2016, ch. 6 (real-space form): u sigma_z onsite and hoppings
    # <x|H|x+1> = t (sigma_z - i sigma_x)/2, <y|H|y+1> = t (sigma_z - i sigma_y)/2.
    rows = [((0, 0), 0, 0, m), ((0, 0), 1, 1, -m)]
    tx, ty = t * (SZ - 1j * SX) / 2, t * (SZ - 1j * SY) / 2
    rows += [((1, 0), i, j, tx[i, j]) for i in range(2) for j in range(2)]
    rows += [((0, 1), i, j, ty[i, j]) for i in range(2) for j in range(2)]
    return rows, 2


def table_ssh(v, w):
    # Su, Schrieffer and Heeger 1979 / Asboth et al. 2016, ch. 1: v inside the cell (A-B),
    # w from B of cell m to A of cell m + 1.
    return [((0,), 0, 1, v), ((1,), 1, 0, w)], 2


def table_kitaev(mu, t, delta):
    # Kitaev 2001: H = sum -mu c+c - t (c+_j c_{j+1} + h.c.) + delta (c_j c_{j+1} + h.c.), in
    # Nambu (c_j, c_j^+) with H = (1/2) Psi+ H_BdG Psi. The pairing term equals
    # (delta/2)(c+_{j+1} c+_j - c+_j c+_{j+1}), so <p, j+1|H|h, j> = +delta and
    # <p, j|H|h, j+1> = -delta; particle hopping -t, hole hopping +t.
    rows = [((0,), 0, 0, -mu), ((0,), 1, 1, mu),
            ((1,), 0, 0, -t), ((1,), 1, 1, t),
            ((1,), 0, 1, -delta),  # <p, 0|H|h, 1>
            ((1,), 1, 0, delta)]  # <h, 0|H|p, 1> = conj(<p, 1|H|h, 0>)
    return rows, 2


def table_haldane(t1, t2, phi, M):
    # Haldane 1988: A (0) and B (1); A couples to B of its own cell and of cells -a1, -a2;
    # next-nearest neighbours along b = a1, a2 - a1, -a2 with t2 e^{+i phi} on A, e^{-i phi} on B.
    rows = [((0, 0), 0, 0, M), ((0, 0), 1, 1, -M), ((0, 0), 0, 1, t1),
            ((-1, 0), 0, 1, t1), ((0, -1), 0, 1, t1)]
    for b in [(1, 0), (-1, 1), (0, -1)]:
        rows += [(b, 0, 0, t2 * np.exp(1j * phi)), (b, 1, 1, t2 * np.exp(-1j * phi))]
    return rows, 2


def _matrix_rows(r, mat):
    return [(r, i, j, mat[i, j]) for i in range(mat.shape[0]) for j in range(mat.shape[1])
            if mat[i, j] != 0]


def _onsite_rows(r0, mat):
    # Upper triangle and diagonal only: the table convention adds the lower triangle.
    n = mat.shape[0]
    return [(r0, i, j, mat[i, j]) for i in range(n) for j in range(i, n) if mat[i, j] != 0]


def table_bhz(M, A, B, C, D, mix):
    # Lattice BHZ (Bernevig, Hughes and Zhang 2006): eps and d3 come from nearest-neighbour
    # hoppings D + B tau_z (cos k), the linear terms from -(i A/2) tau_x sigma_z along x and
    # -(i A/2) tau_y along y (sin k); onsite C - 4D + (M - 4B) tau_z + mix tau_y sigma_y.
    onsite = (C - 4 * D) * kr("00") + (M - 4 * B) * kr("z0") + mix * kr("yy")
    tx = D * kr("00") + B * kr("z0") - 0.5j * A * kr("xz")
    ty = D * kr("00") + B * kr("z0") - 0.5j * A * kr("y0")
    return _onsite_rows((0, 0), onsite) + _matrix_rows((1, 0), tx) + _matrix_rows((0, 1), ty), 4


def table_bhz_corner(m, t, delta1, delta2):
    # Schindler et al. 2018 (2D form, from memory): hoppings t/2 tau_z +- delta2/2 tau_y along
    # x / y and -(i delta1/2) tau_x sigma_{x,y}; onsite m tau_z.
    tx = 0.5 * t * kr("z0") + 0.5 * delta2 * kr("y0") - 0.5j * delta1 * kr("xx")
    ty = 0.5 * t * kr("z0") - 0.5 * delta2 * kr("y0") - 0.5j * delta1 * kr("xy")
    rows = _onsite_rows((0, 0), m * kr("z0")) + _matrix_rows((1, 0), tx) + _matrix_rows((0, 1), ty)
    return rows, 4


def table_bbh(gamma, lam, delta):
    # Benalcazar, Bernevig and Hughes 2017, Fig. 1 (from memory): four sites per plaquette,
    # intra-cell bonds gamma with one negative bond (1-2), inter-cell bonds lam with one negative
    # bond (2 -> 1 of the cell above); delta on Gamma0 = diag(1, 1, -1, -1).
    rows = [((0, 0), 0, 2, gamma), ((0, 0), 0, 3, gamma), ((0, 0), 1, 3, gamma),
            ((0, 0), 1, 2, -gamma),
            ((1, 0), 0, 2, lam), ((1, 0), 3, 1, lam), ((0, 1), 0, 3, lam), ((0, 1), 2, 1, -lam)]
    rows += [((0, 0), i, i, s * delta) for i, s in enumerate((1, 1, -1, -1))]
    return rows, 4


def table_bipartite_square(j1, j2, j3, j4, delta):
    return [((0, 0), 0, 0, delta), ((0, 0), 1, 1, -delta), ((0, 0), 0, 1, j1),
            ((0, -1), 0, 1, j2), ((-1, -1), 0, 1, j3), ((-1, 0), 0, 1, j4)], 2


def table_graphene_field(t, M, ax, ay):
    # Bonds A -> B: to the B of the same cell and of the cells -a_1, -a_2 (Cartesian deltas).
    a1, a2 = np.array([1.0, 0.0]), np.array([0.5, np.sqrt(3) / 2])
    ra, rb = (a1 + a2) / 3, 2 * (a1 + a2) / 3
    rows = [((0, 0), 0, 0, M), ((0, 0), 1, 1, -M)]
    for r in ((0, 0), (-1, 0), (0, -1)):
        delta = rb + r[0] * a1 + r[1] * a2 - ra
        rows.append((r, 0, 1, t * np.exp(1j * (ax * delta[0] + ay * delta[1]))))
    return rows, 2


def table_breathing_kagome(ta, tb, mu):
    # Ezawa, PRL 120, 026801 (2018): -ta on the bonds of the upward triangle (A, B, C of one
    # cell), -tb on those of the downward triangles (A to B of the cell -a_1, A to C of the cell
    # -a_2, B to C of the cell a_1 - a_2).
    rows = [((0, 0), i, i, mu) for i in range(3)]
    rows += [((0, 0), 0, 1, -ta), ((0, 0), 0, 2, -ta), ((0, 0), 1, 2, -ta),
             ((-1, 0), 0, 1, -tb), ((0, -1), 0, 2, -tb), ((1, -1), 1, 2, -tb)]
    return rows, 3


def table_kekule_honeycomb(t0, t1, mu):
    # Hexagon of six sites m = 0..5 (site m towards the neighbouring hexagon in direction
    # 60 m degrees): -t0 between m and m + 1 of one hexagon, -t1 from m to m + 3 of the
    # hexagon in direction m: a_1, a_2, a_2 - a_1 for m = 0, 1, 2.
    rows = [((0, 0), i, i, mu) for i in range(6)]
    rows += [((0, 0), m, (m + 1) % 6, -t0) for m in range(6)]
    rows += [((1, 0), 0, 3, -t1), ((0, 1), 1, 4, -t1), ((-1, 1), 2, 5, -t1)]
    return rows, 6


TABLES = {"breathing_kagome": table_breathing_kagome, "kekule_honeycomb": table_kekule_honeycomb,
          "graphene_field": table_graphene_field, "bipartite_square": table_bipartite_square,
          "qwz": table_qwz, "ssh": table_ssh, "kitaev": table_kitaev, "haldane": table_haldane,
          "bhz": table_bhz, "bhz_corner": table_bhz_corner, "bbh": table_bbh}


def bloch_from_table(rows, n, k):
    """H(k) = sum over the table, one term at a time (k: (d,) reduced momentum)."""
    h = np.zeros((n, n), complex)
    for r, i, j, amp in rows:
        if not any(r):
            h[i, j] += amp
            if i != j:
                h[j, i] += np.conj(amp)
        else:
            ph = np.exp(1j * np.dot(k, r))
            h[i, j] += amp * ph
            h[j, i] += np.conj(amp * ph)
    return h


# ---------------------------------------------------------------------------------------------
# (ii) The closed-form H(k) of each docstring.


def formula(name, p, k):
    c, s = np.cos(k), np.sin(k)
    if name == "qwz":
        m, t = p["m"], p["t"]
        return t * s[0] * SX + t * s[1] * SY + (m + t * c[0] + t * c[1]) * SZ
    if name == "ssh":
        v, w = p["v"], p["w"]
        return np.array([[0, v + w * np.exp(-1j * k[0])], [v + w * np.exp(1j * k[0]), 0]])
    if name == "kitaev":
        return (-2 * p["t"] * c[0] - p["mu"]) * SZ + 2 * p["delta"] * s[0] * SY
    if name == "haldane":
        t1, t2, phi, M = p["t1"], p["t2"], p["phi"], p["M"]
        kb = np.array([k[0], k[1] - k[0], -k[1]])
        return (2 * t2 * np.cos(phi) * np.sum(np.cos(kb)) * S0
                + t1 * ((1 + c[0] + c[1]) * SX + (s[0] + s[1]) * SY)
                + (M - 2 * t2 * np.sin(phi) * np.sum(np.sin(kb))) * SZ)
    if name == "bhz":
        cc = 2 - c[0] - c[1]
        d3 = p["M"] - 2 * p["B"] * cc
        eps = p["C"] - 2 * p["D"] * cc
        return (eps * kr("00") + d3 * kr("z0") + p["A"] * s[0] * kr("xz")
                + p["A"] * s[1] * kr("y0") + p["mix"] * kr("yy"))
    if name == "bhz_corner":
        return ((p["m"] + p["t"] * (c[0] + c[1])) * kr("z0")
                + p["delta1"] * (s[0] * kr("xx") + s[1] * kr("xy"))
                + p["delta2"] * (c[0] - c[1]) * kr("y0"))
    if name == "bbh":
        g, lam, dl = p["gamma"], p["lam"], p["delta"]
        g0, g4 = kr("z0"), kr("x0")
        g1, g2, g3 = -kr("yx"), -kr("yy"), -kr("yz")
        return ((g + lam * c[0]) * g4 + lam * s[0] * g3 + (g + lam * c[1]) * g2
                + lam * s[1] * g1 + dl * g0)
    if name == "graphene_field":
        a1, a2 = np.array([1.0, 0.0]), np.array([0.5, np.sqrt(3) / 2])
        deltas = [(a1 + a2) / 3, (a1 + a2) / 3 - a1, (a1 + a2) / 3 - a2]
        kc = np.linalg.solve(np.array([a1, a2]), k)  # Cartesian k from reduced (k.a_i = k_i)
        # Peierls phase on each bond; periodic gauge: Bloch phase of the cell displacement.
        f = sum(p["t"] * np.exp(1j * np.dot([p["ax"], p["ay"]], d))
                * np.exp(1j * kc @ (d - deltas[0]))
                for d in deltas)
        return np.array([[p["M"], f], [np.conj(f), -p["M"]]])
    if name == "bipartite_square":
        disp = [(0, 0), (0, -1), (-1, -1), (-1, 0)]
        f = sum(p[f"j{i + 1}"] * np.exp(1j * np.dot(k, r)) for i, r in enumerate(disp))
        return np.array([[p["delta"], f], [np.conj(f), -p["delta"]]])
    if name == "breathing_kagome":
        # Ezawa (2018), periodic gauge: H_AB = -(ta + tb e^{-ik1}), H_AC = -(ta + tb e^{-ik2}),
        # H_BC = -(ta + tb e^{i(k1 - k2)}).
        ta, tb = p["ta"], p["tb"]
        ab = -(ta + tb * np.exp(-1j * k[0]))
        ac = -(ta + tb * np.exp(-1j * k[1]))
        bc = -(ta + tb * np.exp(1j * (k[0] - k[1])))
        return p["mu"] * np.eye(3) + np.array([[0, ab, ac], [np.conj(ab), 0, bc],
                                               [np.conj(ac), np.conj(bc), 0]])
    if name == "kekule_honeycomb":
        # Ring of six sites with -t0, and -t1 e^{i k.d_m} from site m to site m + 3, d_m the
        # direction of the neighbouring hexagon (a_1, a_2, a_2 - a_1 for m = 0, 1, 2).
        h = p["mu"] * np.eye(6, dtype=complex)
        for m in range(6):
            h[m, (m + 1) % 6] = h[(m + 1) % 6, m] = -p["t0"]
        for m, kd in enumerate((k[0], k[1], k[1] - k[0])):
            h[m, m + 3] = -p["t1"] * np.exp(1j * kd)
            h[m + 3, m] = np.conj(h[m, m + 3])
        return h
    raise KeyError(name)


# ---------------------------------------------------------------------------------------------
# Shared checker over the whole registry.

NAMES = MODELS.names()


def test_every_model_has_a_sample_and_a_table():
    assert set(NAMES) == set(SAMPLES) == set(TABLES)


@pytest.mark.parametrize("name", NAMES)
def test_declarations(name):
    entry = MODELS[name]
    assert entry.description and entry.source
    assert entry.func.__doc__ and "H(k)" in entry.func.__doc__
    declared = {p.name for p in entry.params}
    assert declared == set(SAMPLES[name])
    for p in entry.params:
        assert p.kind in {"real", "int", "bool", "choice", "str", "matrix", "vector"}
        if not p.required:
            assert p.admits(p.default)
    # Only the required parameters are needed.
    tb = entry.func(**{p.name: SAMPLES[name][p.name] for p in entry.params if p.required})
    assert (tb.dim, tb.norb) == (entry.extra["dim"], entry.extra["norb"])


@pytest.mark.parametrize("name", NAMES)
def test_bloch_matrix(name):
    entry, p = MODELS[name], SAMPLES[name]
    tb = entry.func(**p)
    d, n = entry.extra["dim"], entry.extra["norb"]
    ks = RNG.uniform(-np.pi, np.pi, size=(6, d))
    h = tb.bloch(ks)
    assert h.shape == (6, n, n)
    np.testing.assert_allclose(h, np.conj(np.swapaxes(h, -1, -2)), atol=1e-14)
    for i in range(d):
        np.testing.assert_allclose(tb.bloch(ks + 2 * np.pi * np.eye(d)[i]), h, atol=1e-12)
    rows, n_table = TABLES[name](**p)
    assert n_table == n
    for k, hk in zip(ks, h):
        np.testing.assert_allclose(hk, bloch_from_table(rows, n, k), atol=1e-12)
        np.testing.assert_allclose(hk, formula(name, p, k), atol=1e-12)
    assert tb.orbital_positions.shape == (n, d)
    assert tb.lattice_vectors.shape == (d, d)


@pytest.mark.parametrize("name", NAMES)
def test_cell_operators(name):
    tb = MODELS[name].func(**SAMPLES[name])
    h = tb.bloch(RNG.uniform(-np.pi, np.pi, size=(5, tb.dim)))
    for key, op in tb.operators.items():
        np.testing.assert_allclose(op, op.conj().T, atol=1e-14)
        np.testing.assert_allclose(op @ op, np.eye(tb.norb), atol=1e-14)
        if key == "chiral":
            np.testing.assert_allclose(op @ h + h @ op, 0, atol=1e-12)


def test_expected_operators():
    ops = {name: set(MODELS[name].func(**SAMPLES[name]).operators) for name in NAMES}
    assert ops["ssh"] == {"chiral"} and ops["kitaev"] == {"chiral"}
    assert ops["bhz"] == {"spin"}
    assert ops["bhz_corner"] == {"chiral", "mirror_diag"}
    assert ops["bbh"] == set()  # delta != 0 in the sample breaks the chiral symmetry
    assert set(MODELS["bbh"].func(gamma=0.4).operators) == {"chiral"}
    assert ops["breathing_kagome"] == set()  # three sublattices: no chiral operator
    assert ops["kekule_honeycomb"] == set()  # mu != 0 in the sample breaks the sublattice one
    assert set(MODELS["kekule_honeycomb"].func(t0=0.6).operators) == {"chiral"}


# ---------------------------------------------------------------------------------------------
# Geometry: orbital positions consistent with the bonds the hoppings describe.


def bond_lengths(name, p):
    tb = MODELS[name].func(**p)
    rows, _ = TABLES[name](**p)
    a, pos = tb.lattice_vectors, tb.orbital_positions
    out = []
    for r, i, j, amp in rows:
        if i == j and not any(r):
            continue
        out.append((abs(amp), np.linalg.norm((pos[j] + np.array(r) - pos[i]) @ a)))
    return out


def test_haldane_honeycomb_geometry():
    # Haldane 1988: nearest neighbours at 1/sqrt(3) of the Bravais constant, next-nearest at 1.
    p = dict(t1=1.0, t2=0.3, phi=0.4, M=0.0)
    for amp, length in bond_lengths("haldane", p):
        expected = 1 / np.sqrt(3) if np.isclose(amp, 1.0) else 1.0
        assert np.isclose(length, expected)
    a = MODELS["haldane"].func(**p).lattice_vectors
    assert np.isclose(np.dot(a[0], a[1]), 0.5)  # 60 degrees between a1 and a2, |a_i| = 1


@pytest.mark.parametrize("name", ["ssh", "bbh", "breathing_kagome"])
def test_bonds_join_neighbouring_sites(name):
    # SSH chain sites half a cell apart; BBH sites on a square lattice of spacing 1/2; kagome
    # sites at the corners of triangles of side 1/2.
    p = dict(SAMPLES[name], **({"delta": 0.0} if name == "bbh" else {}))
    for _, length in bond_lengths(name, p):
        assert np.isclose(length, 0.5)


def test_kekule_bonds_all_one_third():
    # Honeycomb of nearest-neighbour distance 1/3 (Kekule cell sqrt 3 x sqrt 3 larger): every
    # intra- and inter-hexagon bond has that length.
    name = "kekule_honeycomb"
    lengths = [length for _, length in bond_lengths(name, SAMPLES[name])]
    assert len(lengths) == 9 and np.allclose(lengths, 1 / 3)


def test_bbh_pi_flux_per_plaquette():
    # BBH 2017: each plaquette (inside a cell, and between four cells) carries flux pi, i.e.
    # the product of its four bond amplitudes is negative.
    p = dict(gamma=0.7, lam=1.3, delta=0.0)
    amp = {(r, i, j): a for r, i, j, a in TABLES["bbh"](**p)[0]}
    intra = amp[(0, 0), 0, 2] * amp[(0, 0), 1, 2] * amp[(0, 0), 1, 3] * amp[(0, 0), 0, 3]
    # Around the corner shared by cells (0,0), (1,0), (1,1), (0,1): 0(0,0) - 2(1,0) - 1(1,1)
    # - 3(0,1) - 0(0,0).
    inter = amp[(1, 0), 0, 2] * amp[(0, 1), 2, 1] * amp[(1, 0), 3, 1] * amp[(0, 1), 0, 3]
    assert intra < 0 and inter < 0


# ---------------------------------------------------------------------------------------------
# Symmetries named in the docstrings.


def test_bhz_time_reversal_and_spin():
    # T = i sigma_y K with T^2 = -1 (Bernevig, Hughes and Zhang 2006): i sigma_y H*(-k)
    # (i sigma_y)^+ = H(k), also with the spin-mixing term.
    p = SAMPLES["bhz"]
    tb = MODELS["bhz"].func(**p)
    ty = np.kron(S0, 1j * SY)
    k = RNG.uniform(-np.pi, np.pi, size=(5, 2))
    h, hm = tb.bloch(k), tb.bloch(-k)
    np.testing.assert_allclose(ty @ hm.conj() @ ty.conj().T, h, atol=1e-12)
    s = tb.operators["spin"]
    np.testing.assert_allclose(s, kr("0z"))
    assert np.max(np.abs(s @ h - h @ s)) > 1e-3  # mix != 0: spin not conserved
    h0 = MODELS["bhz"].func(**dict(p, mix=0.0)).bloch(k)
    np.testing.assert_allclose(s @ h0 - h0 @ s, 0, atol=1e-12)


def test_bhz_corner_diagonal_mirror():
    # Schindler et al. 2018 (2D form): the diagonal mirror maps H(k1, k2) to H(k2, k1), so it
    # commutes with H on the invariant line k1 = k2; spin is not conserved (delta1 mixes it).
    tb = MODELS["bhz_corner"].func(**SAMPLES["bhz_corner"])
    mir = tb.operators["mirror_diag"]
    k = RNG.uniform(-np.pi, np.pi, size=(6, 2))
    np.testing.assert_allclose(mir @ tb.bloch(k) @ mir.conj().T, tb.bloch(k[:, ::-1]),
                               atol=1e-12)
    diag = tb.bloch(np.stack([k[:, 0], k[:, 0]], axis=-1))
    np.testing.assert_allclose(mir @ diag - diag @ mir, 0, atol=1e-12)
    assert np.allclose(np.sort(np.linalg.eigvalsh(mir)), [-1, -1, 1, 1])
    chiral = tb.operators["chiral"]
    np.testing.assert_allclose(mir @ chiral - chiral @ mir, 0, atol=1e-14)
    sz = kr("0z")
    h = tb.bloch(k)
    assert np.max(np.abs(sz @ h - h @ sz)) > 1e-2
    # The delta2 term breaks C4 (k1, k2) -> (-k2, k1): no unitary of the form below maps
    # H(k) to H(Rk); only the combination with time reversal survives (antiunitary).
    rot = np.kron(S0, np.diag([np.exp(-1j * np.pi / 4), np.exp(1j * np.pi / 4)]))
    rk = np.stack([-k[:, 1], k[:, 0]], axis=-1)
    assert np.max(np.abs(rot @ h @ rot.conj().T - tb.bloch(rk))) > 1e-2
    # (C4 T): T = i sigma_y K; C4 T H(k) (C4 T)^-1 = H(Rk) with k -> -k from T.
    t_op = np.kron(S0, 1j * SY)
    c4t = rot @ t_op
    c4t_h = np.einsum("ij,...jk,kl->...il", c4t, h.conj(), c4t.conj().T)
    np.testing.assert_allclose(c4t_h, tb.bloch(np.stack([k[:, 1], -k[:, 0]], axis=-1)),
                               atol=1e-12)


def test_bbh_gamma_matrices_anticommute():
    # BBH 2017 (from memory): Gamma0 = tau3 sigma0, Gamma_k = -tau2 sigma_k, Gamma4 = tau1 sigma0
    # form a Clifford algebra, {Gamma_a, Gamma_b} = 2 delta_ab.
    from sweepcli.physics.models.bhz import bbh_gammas

    gs = bbh_gammas()
    np.testing.assert_allclose(gs[0], kr("z0"))
    np.testing.assert_allclose(gs[4], kr("x0"))
    for i, s in enumerate("xyz", start=1):
        np.testing.assert_allclose(gs[i], -kr("y" + s))
    for a in range(5):
        for b in range(5):
            np.testing.assert_allclose(gs[a] @ gs[b] + gs[b] @ gs[a], 2 * (a == b) * np.eye(4),
                                       atol=1e-14)
