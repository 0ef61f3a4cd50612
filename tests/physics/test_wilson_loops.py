"""Wilson loops, Wannier centres and the quadrupole moment against analytic and published results.

Independent references: the Zak phase of the SSH chain (pi in the topological phase, so the
Wannier centre 1/2; Asboth, Oroszlany and Palyi, A Short Course on Topological Insulators
(Springer 2016), ch. 1 and 2, in the periodic gauge of their eq. 1.13), the Wannier-centre flow
of a Chern insulator (the Berry phase along k1 winds by -C as k2 runs over the zone, C the Chern
number; Yu, Qi, Bernevig, Fang and Dai, PRB 84, 075119 (2011), relation from memory) with the
Qi-Wu-Zhang phase diagram (|C| = 1 for 0 < |m| < 2, Qi, Wu and Zhang, PRB 74, 085308 (2006)),
the quadrupole moment of the Benalcazar-Bernevig-Hughes model (q_xy = 1/2 for
|gamma/lambda| < 1, 0 for |gamma/lambda| > 1; Science 357, 61 (2017)), and Floquet bands from
scipy.linalg.expm of the steps with a plain product of overlaps written here.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg as sl

from sweepcli.physics import wilson as wl
from sweepcli.physics.chern import chern_number
from sweepcli.physics.drives.steps import StepDrive
from sweepcli.physics.lattice import TightBinding, assemble, pauli
from sweepcli.physics.measurements import MEASUREMENTS
from sweepcli.physics.models import MODELS
from sweepcli.physics.point import Point
from sweepcli.schema import Reason


def model(name, **p):
    return MODELS[name].func(**p)


def point(name, drive=None, **p):
    return Point(p, lambda q: model(name, **q), drive=drive)


def measure(name, pt, **options):
    return MEASUREMENTS[name].func(pt, **options)


# ---------------------------------------------------------------------------------------------
# SSH: Zak phase (analytic)
# ---------------------------------------------------------------------------------------------

def ssh_zak_centre(v: float, w: float) -> float:
    """Wannier centre of the lower SSH band, analytic: the lower eigenvector of
    [[0, h*], [h, 0]] with h = v + w e^{ik} = |h| e^{i phi} is (1, -e^{i phi})/sqrt 2, whose
    Berry phase oint i<u|d_k u> dk = -(1/2) oint d phi is -pi times the winding of h around 0
    (1 for |v| < |w|): the centre is 1/2 mod 1 in the topological phase, 0 in the trivial one."""
    return 0.5 if abs(v) < abs(w) else 0.0


@pytest.mark.parametrize("v,w", [(0.3, 1.0), (0.8, 1.0), (1.2, 1.0), (-0.5, 1.0), (2.0, 0.7)])
def test_ssh_polarisation_is_the_zak_phase(v, w):
    r = measure("polarisation", point("ssh", v=v, w=w))
    assert r["reason"] == Reason.OK
    expected = ssh_zak_centre(v, w)
    assert float(wl.circle_distance(r["polarisation"] - expected)) < 1e-6
    assert r["wannier_gap"] == 1.0  # one band
    assert "wannier_flow" not in r


def test_ssh_at_the_transition_is_gap_closed():
    r = measure("polarisation", point("ssh", v=1.0, w=1.0))
    assert r["reason"] == Reason.GAP_CLOSED
    assert math.isnan(r["polarisation"]) and r["polarisation_kmesh"] is None


def test_loop_mesh_is_doubled_until_the_centres_settle():
    # A dimerised chain with a staggered potential (Rice-Mele; no symmetry quantises its Berry
    # phase): a coarse loop is off, the mesh grows until two meshes agree within tol, and the
    # centre then agrees with a plain product of eigh overlaps on a much finer loop.
    v, w, delta = 0.9, 1.0, 0.2
    hop = np.zeros((2, 2), complex)
    hop[1, 0] = w
    tb = assemble(np.eye(1), [[0.0], [0.5]], v * pauli("x") + delta * pauli("z"), [((1,), hop)])
    n = 20000
    _, vec = np.linalg.eigh(tb.bloch(2 * np.pi * np.arange(n)[:, None] / n))
    u = vec[:, :, 0]
    prod = np.prod(np.einsum("ji,ji->j", np.conj(np.roll(u, -1, axis=0)), u))
    expected = (np.angle(prod) / (2 * np.pi)) % 1.0
    group = wl.static_group(tb, 1)
    coarse = wl.wilson_loops(group, 1, 0, np.zeros(1), 8).nu[0, 0]
    assert float(wl.circle_distance(coarse - expected)) > 1e-3
    r = wl.wannier_bands(group, 1, kmesh_n=8, tol=1e-5)
    assert r.reason == Reason.OK and r.kmesh > 8
    # Second-order convergence: the error is about a third of the last change.
    assert float(wl.circle_distance(r.mean - expected)) < 1e-5
    short = wl.wannier_bands(group, 1, kmesh_n=8, max_kmesh=16, tol=1e-5)
    assert short.reason == Reason.NOT_CONVERGED and math.isnan(short.mean)


# ---------------------------------------------------------------------------------------------
# Qi-Wu-Zhang: the Wannier centres flow by the Chern number
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("m,size", [(-1.0, 1), (1.0, 1), (-2.6, 0), (2.5, 0), (0.4, 1)])
def test_wannier_flow_is_the_chern_number(m, size):
    tb = model("qwz", m=m)
    c = chern_number(tb, 1).value
    assert abs(c) == size  # the published phase diagram
    pt = point("qwz", m=m)
    along1 = measure("polarisation", pt, axis=0)
    along2 = measure("polarisation", pt, axis=1)
    assert along1["reason"] == along2["reason"] == Reason.OK
    # d/dk2 oint A_1 dk1 = -oint Omega_12 dk1: -C along k1, +C along k2.
    assert along1["wannier_flow"] == -c
    assert along2["wannier_flow"] == c
    if c:
        # The summed centres wind: no averaged polarisation, but one at a given k_perp.
        assert math.isnan(along1["polarisation"])
        at = measure("polarisation", pt, axis=0, k_perp=0.25)
        assert 0 <= at["polarisation"] < 1 and at["wannier_flow"] == -c
    else:
        assert 0 <= along1["polarisation"] < 1


def test_qwz_polarisation_at_k_perp_is_the_berry_phase_of_the_two_band_formula():
    # At k2 = pi/2 the lower band of d.sigma along k1: Berry phase from a plain product of
    # overlaps of numpy eigh vectors on a fine loop (independent of the unitarised links).
    m, k2 = 1.0, np.pi / 2
    pt = point("qwz", m=m)
    got = measure("polarisation", pt, axis=0, k_perp=0.25, tol=1e-6)["polarisation"]
    n = 4000
    k = np.stack([2 * np.pi * np.arange(n) / n, np.full(n, k2)], axis=-1)
    _, v = np.linalg.eigh(model("qwz", m=m).bloch(k))
    u = v[:, :, 0]
    prod = np.prod(np.einsum("ji,ji->j", np.conj(np.roll(u, -1, axis=0)), u))
    expected = (np.angle(prod) / (2 * np.pi)) % 1.0
    assert float(wl.circle_distance(got - expected)) < 2e-6


# ---------------------------------------------------------------------------------------------
# BBH: quadrupole moment from nested Wilson loops (Science 357, 61 (2017))
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("gamma,lam,q", [(0.5, 1.0, 0.5), (-0.5, 1.0, 0.5), (0.0, 1.0, 0.5),
                                         (0.9, 1.0, 0.5), (1.5, 1.0, 0.0), (-1.5, 1.0, 0.0),
                                         (1.2, 0.8, 0.0), (0.3, 0.8, 0.5)])
def test_bbh_quadrupole(gamma, lam, q):
    r = measure("quadrupole", point("bbh", gamma=gamma, lam=lam))
    assert r["reason"] == Reason.OK
    assert r["quadrupole"] == q
    # Both Wannier-sector polarisations are 1/2 in the quadrupole phase, 0 in the trivial one.
    assert float(wl.circle_distance(r["quadrupole_px"] - q)) < 1e-6
    assert float(wl.circle_distance(r["quadrupole_py"] - q)) < 1e-6
    assert r["quadrupole_wannier_gap"] > 0
    # The total polarisation of the filled bands vanishes (BBH 2017).
    p = measure("polarisation", point("bbh", gamma=gamma, lam=lam))
    assert float(wl.circle_distance(p["polarisation"])) < 1e-6 and p["wannier_flow"] == 0


def test_bbh_wannier_bands_are_symmetric_and_gapped():
    # Reflection symmetry: the Wannier bands come in pairs +-nu (BBH 2017); the gap between
    # them is twice the distance from the cuts 0 and 1/2.
    r = wl.wannier_bands(wl.static_group(model("bbh", gamma=0.5), 2), 2, 0)
    nu = r.nu
    assert np.allclose(np.sort((-nu) % 1.0, axis=-1), nu, atol=1e-7)
    assert r.wannier_gap > 0.1


def test_bbh_transition_and_broken_symmetry_are_missing():
    closed = measure("quadrupole", point("bbh", gamma=1.0, lam=1.0))
    assert closed["reason"] == Reason.GAP_CLOSED and math.isnan(closed["quadrupole"])
    # Terms that break the reflections (and the chiral symmetry Gamma0) unquantise the sector
    # polarisations while the Wannier sectors stay gapped: q_xy is not stored.
    tb = model("bbh", gamma=0.5)
    g0 = pauli("z0")
    hops = dict(tb.hoppings)
    hops[(1, 0)] = hops[(1, 0)] + 0.25 * g0 + 0.35j * pauli("xx")
    broken = TightBinding(tb.lattice_vectors, tb.orbital_positions, tb.onsite + 0.3 * g0, hops)
    r = measure("quadrupole", Point({}, lambda q: broken))
    assert r["reason"] == Reason.NOT_QUANTISED and math.isnan(r["quadrupole"])
    assert r["quadrupole_residue"] > 0.02 and r["quadrupole_wannier_gap"] > 1e-3
    loose = measure("quadrupole", Point({}, lambda q: broken), quant_tol=0.1)
    assert loose["reason"] == Reason.OK and loose["quadrupole"] in (0.0, 0.5)


# ---------------------------------------------------------------------------------------------
# Drives
# ---------------------------------------------------------------------------------------------

def test_trivially_driven_model_has_the_static_wilson_loops():
    # Two steps of the same static BBH model: U = exp(-i H T), the Floquet bands in (-pi/T, 0)
    # are the filled bands while |E| T < pi (here max |E| = 2 sqrt 2 * 1.5 ~ 4.2, T = 0.5).
    tb = model("bbh", gamma=0.5)
    drive = StepDrive(0.5, ((0.2, tb), (0.3, tb)))
    static = wl.wannier_bands(wl.static_group(tb, 2), 2, 0)
    driven = wl.wannier_bands(wl.floquet_group(drive), 2, 0)
    assert driven.reason == Reason.OK and driven.kmesh == static.kmesh
    assert np.allclose(driven.nu, static.nu, atol=1e-8)
    pt = point("bbh", drive=drive, gamma=0.5)
    r = measure("quadrupole", pt)
    assert r["reason"] == Reason.OK and r["quadrupole"] == 0.5
    # The upper group is the empty bands: same q_xy (BBH's model is chiral symmetric).
    assert measure("quadrupole", pt, band_group="upper")["quadrupole"] == 0.5


def floquet_reference(steps, k):
    """Floquet operator at reduced momenta k from scipy.linalg.expm of each step's H(k)."""
    u = np.eye(steps[0][1].norb, dtype=complex)
    for d, tb in steps:
        u = sl.expm(-1j * d * tb.bloch(k)) @ u
    return u


def test_two_step_drive_against_expm():
    # QWZ with the mass switched: m = 0.5 for 0.4 T, m = -1.5 for 0.6 T, T = 1. The lower Floquet
    # band's Wannier centre along k1 at a few k2, from a plain (not unitarised) product of
    # overlaps of numpy eig vectors of the expm operator on a fine loop.
    steps = ((0.4, model("qwz", m=0.5)), (0.6, model("qwz", m=-1.5)))
    drive = StepDrive(1.0, steps)
    got = wl.wannier_bands(wl.floquet_group(drive), 2, 0, tol=1e-6)
    assert got.reason == Reason.OK
    n = 2000
    for j in (0, 3, 5):
        k2 = got.kperp[j]
        vecs = []
        for k1 in 2 * np.pi * np.arange(n) / n:
            u = floquet_reference(steps, np.array([k1, k2]))
            w, v = np.linalg.eig(u)
            eps = -np.angle(w)  # T = 1
            vecs.append(v[:, np.argmin(eps)] / np.linalg.norm(v[:, np.argmin(eps)]))
            assert np.sum(eps < 0) == 1
        vecs = np.array(vecs)
        prod = np.prod(np.einsum("ji,ji->j", np.conj(np.roll(vecs, -1, axis=0)), vecs))
        expected = (np.angle(prod) / (2 * np.pi)) % 1.0
        assert float(wl.circle_distance(got.nu[j, 0] - expected)) < 2e-6
