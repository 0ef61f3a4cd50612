"""Integers stored only when a bound proves the mesh resolves them (sweepcli.physics.certify).

Two families that defeat mesh-only checks: a two-band ``d(k).sigma`` model whose band inversion
sits in a pocket much smaller than a plaquette (large hopping scale, small inversion mass), and
chiral chains whose ``q(k)`` is a perfect square, so that two zeros of ``det q`` approach the
unit circle together near a transition. References are analytic and computed here: the degree
of ``d_hat`` from the signs of ``d_z`` at the four time-reversal-invariant momenta (the planar
part ``(A sin k1, A sin k2)`` vanishes only there, with Jacobian sign ``+, -, -, +``), and twice
the number of roots of the polynomial ``p`` inside the unit disc (``numpy.roots``) for
``q = p^2`` (argument principle).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sweepcli.physics import floquet_chern as fc
from sweepcli.physics import quasienergy as qe
from sweepcli.physics.chern import chern_number
from sweepcli.physics.chiral_frames import chiral_windings
from sweepcli.physics.chiral_winding import winding_number
from sweepcli.physics.drives.steps import StepDrive
from sweepcli.physics.lattice import assemble, fourier_term, kmesh, pauli
from sweepcli.schema import Reason

CHIRAL = np.diag([1.0, -1.0]).astype(complex)


def pocket(a: float, b: float, m: float):
    """``d = (a sin k1, a sin k2, m + b (2 - cos k1 - cos k2))``: for ``b >> |m|`` the inversion
    at ``k = 0`` (``m < 0``) is confined to a disc of radius ~ ``sqrt(|m| / b)``."""
    terms = [fourier_term((1, 0), cos=-b * pauli("z"), sin=a * pauli("x")),
             fourier_term((0, 1), cos=-b * pauli("z"), sin=a * pauli("y"))]
    return assemble(np.eye(2), np.zeros((2, 2)), (m + 2 * b) * pauli("z"), terms)


def trim_count(b: float, m: float) -> int:
    # Degree of d_hat (this project's sign for the lower band, the QWZ check of
    # test_static_invariants): (1/2) sum_i sign(J_i) sign(d_z(Gamma_i)).
    dz = {(0, 0): m, (1, 0): m + 2 * b, (0, 1): m + 2 * b, (1, 1): m + 4 * b}
    jac = {(0, 0): 1, (1, 0): -1, (0, 1): -1, (1, 1): 1}
    return int(round(0.5 * sum(jac[g] * np.sign(dz[g]) for g in dz)))


def square_chain(coeffs):
    """Chain with ``h = P_- H P_+ = q(k) = p(k)^2``, ``p = sum_j c_j e^{ijk}`` (basis A, B,
    chiral operator sigma_z)."""
    q = np.convolve(coeffs, coeffs)

    def off(x):
        t = np.zeros((2, 2), complex)
        t[1, 0] = x
        return t

    onsite = np.zeros((2, 2), complex)
    onsite[1, 0], onsite[0, 1] = q[0], np.conj(q[0])
    return assemble(np.eye(1), np.zeros((2, 1)), onsite,
                    [((j,), off(q[j])) for j in range(1, len(q))], {"chiral": CHIRAL})


def square_winding(coeffs) -> int:
    # Winding of p(e^{ik}) = number of zeros of sum_j c_j z^j in |z| < 1; q = p^2 doubles it.
    roots = np.roots(np.asarray(coeffs, complex)[::-1])
    return 2 * int(np.sum(np.abs(roots) < 1))


@pytest.mark.parametrize("a, b, m", [(0.2, 30.0, -0.05), (0.3, 50.0, -0.02), (0.5, 40.0, 0.01),
                                     (1.0, 20.0, -0.002), (0.2, 30.0, 0.05)])
def test_pocket_below_the_mesh_scale_is_proven(a, b, m):
    # The whole 2 pi of Berry flux of the pocket lies inside one plaquette of the first meshes.
    r = chern_number(pocket(a, b, m), 1)
    assert r.reason == Reason.OK and r.value == trim_count(b, m) == (-1 if m < 0 else 0)


def test_pocket_without_budget_is_missing():
    # A work limit of one 24 x 24 mesh cannot prove the pocket: missing, not 0.
    r = chern_number(pocket(0.2, 30.0, -0.002), 1, max_kmesh=24)
    assert r.value is None and r.reason == Reason.NOT_CONVERGED


@pytest.mark.parametrize("a, b", [(1.0, 0.999), (1.0, 1.001), (1.0, 0.98), (0.5, 1.0)])
def test_square_chain_winding_is_even_and_right(a, b):
    tb = square_chain([a, b])
    r = winding_number(tb, CHIRAL)
    assert r.reason == Reason.OK and r.value == square_winding([a, b]) == (2 if b > a else 0)


def test_square_chain_driven_nu0_right_or_missing():
    # One step of length T with T ||H|| < pi: U = exp(-i H T), so nu_0 is the static winding
    # and nu_pi = 0. Near the transition the drive's bound (the hopping norms times T) may not
    # be met within max_kmesh: missing then, never an odd number.
    proven = 0
    for a, b in [(1.0, 0.999), (1.0, 1.001), (1.0, 0.8), (0.7, 1.0)]:
        tb = square_chain([a, b])
        T = 0.5 / (a + b) ** 2
        r = chiral_windings(StepDrive(T, ((T, tb),)), CHIRAL)
        assert r.nu_0 is None or r.nu_0 == square_winding([a, b])
        assert r.nu_pi is None or r.nu_pi == 0
        proven += r.nu_0 is not None
    assert proven >= 2


@settings(max_examples=30, deadline=None)
@given(a=st.floats(0.1, 1.0), b=st.floats(1.0, 40.0), m=st.floats(1e-3, 0.3),
       sign=st.sampled_from([-1.0, 1.0]))
def test_random_pockets_never_a_wrong_integer(a, b, m, sign):
    r = chern_number(pocket(a, b, sign * m), 1)
    assert r.value == trim_count(b, sign * m) or (
        r.value is None and r.reason == Reason.NOT_CONVERGED)


@settings(max_examples=30, deadline=None)
@given(c=st.lists(st.complex_numbers(min_magnitude=0.2, max_magnitude=1.5), min_size=2,
                  max_size=3),
       shift=st.floats(-3e-3, 3e-3))
def test_random_square_chains_never_a_wrong_integer(c, shift):
    # A root of p near the unit circle: c_0 is moved so that p(e^{0.3 i}) = shift, i.e. two
    # zeros of det q = p^2 within a tiny distance of the loop, close to the transition.
    # Static and trivially driven (U = exp(-i H T), T ||H|| < pi: nu_0 = winding, nu_pi = 0).
    z = np.exp(0.3j)
    c = list(c)
    c[0] = c[0] - sum(cj * z ** j for j, cj in enumerate(c)) + shift
    tb = square_chain(c)
    ref = square_winding(c)
    r = winding_number(tb, CHIRAL)
    assert r.value == ref or r.value is None
    assert r.value is None or r.value % 2 == 0
    T = 0.5 / sum(abs(x) for x in np.convolve(c, c))
    d = chiral_windings(StepDrive(T, ((T, tb),)), CHIRAL)
    assert d.nu_0 == ref or d.nu_0 is None
    assert d.nu_pi in (0, None)


def trivially_driven(tb):
    # One step of length T with T ||H|| < pi: U = exp(-i H T), so the Floquet band group in
    # (-pi/T, 0) is the static lower band (quasienergy = energy) and the groups' Chern numbers
    # are the static ones; the 0-gap Rudner winding is the Chern number of the bands below 0.
    norm = float(np.max(np.abs(np.linalg.eigvalsh(tb.bloch(kmesh(16, 2))))))
    T = 0.5 / norm
    return StepDrive(T, ((T, tb),))


@pytest.mark.parametrize("a, b, m", [(0.2, 30.0, -0.05), (0.5, 40.0, 0.01), (1.0, 20.0, -0.02)])
def test_driven_pocket_is_proven_or_missing(a, b, m):
    d = trivially_driven(pocket(a, b, m))
    g = qe.floquet_gaps(d, qe.floquet_mesh(d, 24, 2))
    c = fc.floquet_chern(d, g)
    ref = trim_count(b, m)
    assert (c.reason == Reason.OK and (c.lower, c.upper) == (ref, -ref)) or (
        c.reason == Reason.NOT_CONVERGED and c.lower is None)
    w = fc.rudner_winding(d, g, chern=c)
    assert w.w_0 in (ref, None) and w.w_pi in (0, None)


def test_driven_pocket_below_the_mesh_scale():
    # The 24 x 24 base mesh puts the whole flux of the pocket inside one plaquette.
    d = trivially_driven(pocket(0.2, 30.0, -0.05))
    g = qe.floquet_gaps(d, qe.floquet_mesh(d, 24, 2))
    c = fc.floquet_chern(d, g)
    assert c.reason == Reason.OK and (c.lower, c.upper) == (-1, 1)


@settings(max_examples=12, deadline=None)
@given(a=st.floats(0.2, 1.0), b=st.floats(1.0, 30.0), m=st.floats(5e-3, 0.3),
       sign=st.sampled_from([-1.0, 1.0]))
def test_random_driven_pockets_never_a_wrong_integer(a, b, m, sign):
    d = trivially_driven(pocket(a, b, sign * m))
    g = qe.floquet_gaps(d, qe.floquet_mesh(d, 24, 2))
    c = fc.floquet_chern(d, g)
    ref = trim_count(b, sign * m)
    assert (c.lower, c.upper) == (ref, -ref) or (
        c.lower is None and c.reason == Reason.NOT_CONVERGED)


def random_step_drive(seed: int, norb: int) -> StepDrive:
    rng = np.random.default_rng(seed)

    def part():
        def herm():
            a = rng.normal(size=(norb, norb)) + 1j * rng.normal(size=(norb, norb))
            return (a + a.conj().T) / 2
        hops = {(1, 0): rng.normal(size=(norb, norb)) + 1j * rng.normal(size=(norb, norb)),
                (1, 1): 0.5 * (rng.normal(size=(norb, norb))
                               + 1j * rng.normal(size=(norb, norb)))}
        return assemble(np.eye(2), np.zeros((norb, 2)), herm(),
                        [fourier_term(r, t) for r, t in hops.items()])
    return StepDrive(1.3, ((0.5, part()), (0.3, part()), (0.5, part())))


@pytest.mark.parametrize("seed, norb", [(0, 2), (1, 2), (2, 3)])
def test_drive_jet_against_expm_differences(seed, norb):
    # Reference: scipy.linalg.expm products of the steps, differentiated by central
    # differences; the second-derivative bound must dominate their second differences.
    import scipy.linalg as sl

    d = random_step_drive(seed, norb)
    factors = d.factors()

    def product(k):
        u = np.eye(norb, dtype=complex)
        for dur, tb in factors:
            u = sl.expm(-1j * dur * tb.bloch(k)) @ u
        return u

    k = np.array([[0.37, -1.2], [2.5, 0.8]])
    u, du, _ = fc.drive_jet(factors)(k)
    h = 1e-5
    bound = fc.drive_curvature_bound(factors)
    for p in range(2):
        np.testing.assert_allclose(u[p], product(k[p]), atol=1e-12)
        for i in range(2):
            e = np.zeros(2)
            e[i] = h
            fd = (product(k[p] + e) - product(k[p] - e)) / (2 * h)
            np.testing.assert_allclose(du[p, i], fd, atol=1e-7)
            h2 = 1e-3
            e[i] = h2
            second = (product(k[p] + e) - 2 * product(k[p]) + product(k[p] - e)) / h2 ** 2
            assert np.linalg.norm(second, 2) <= bound


def test_two_band_closed_form_jet_matches_eigenbasis_form_at_degeneracy():
    # The closed form of a 2x2 step against the divided differences of numpy.linalg.eigh, at
    # exact, nearly exact and generic degeneracies of H.
    rng = np.random.default_rng(3)
    for scale in (0.0, 1e-9, 1e-3, 1.0):
        a = rng.normal(size=(5, 2, 2)) + 1j * rng.normal(size=(5, 2, 2))
        hm = (a + np.conj(np.swapaxes(a, -1, -2))) / 2
        hm[..., 0, 1] *= scale
        hm[..., 1, 0] *= scale
        hm[..., 1, 1] = hm[..., 0, 0] + scale * hm[..., 1, 1]
        b = rng.normal(size=(5, 2, 2, 2)) + 1j * rng.normal(size=(5, 2, 2, 2))
        dh = b + np.conj(np.swapaxes(b, -1, -2))
        u1, d1 = fc._factor_jet(hm, dh, 0.7)
        u2, d2 = fc._factor_jet2(hm, dh, 0.7)
        np.testing.assert_allclose(u2, u1, atol=1e-13)
        np.testing.assert_allclose(d2, d1, atol=1e-12)


@settings(max_examples=10, deadline=None)
@given(seed=st.integers(0, 10_000), norb=st.sampled_from([2, 3]))
def test_mesh_hopping_bounds_dominate_the_derivatives_everywhere(seed, norb):
    # Reference: the derivatives of H(k) written out in the test, their spectral norms
    # (numpy.linalg.norm) on a 60 x 60 mesh offset from the bound's own 24 x 24 mesh, in 12
    # directions; the mesh bound must dominate them and never exceed the hopping bound.
    from sweepcli.physics.certify import hopping_bounds, mesh_hopping_bounds

    tb = random_step_drive(seed, norb).factors()[0][1]
    l1, l2 = mesh_hopping_bounds(tb.hoppings)
    c1, c2 = hopping_bounds(tb.hoppings)
    assert l1 <= c1 + 1e-12 and l2 <= c2 + 1e-12
    k = kmesh(60, 2) + 0.013
    angles = np.linspace(0, np.pi, 12, endpoint=False)
    first = second = 0.0
    for a in angles:
        u = np.array([np.cos(a), np.sin(a)])
        for w in (u, np.array([-u[1], u[0]])):
            d1 = np.zeros(k.shape[:-1] + (norb, norb), complex)
            d2 = np.zeros_like(d1)
            for r, t in tb.hoppings.items():
                ph = np.exp(1j * (k @ np.asarray(r, float)))[..., None, None]
                ru, rw = float(np.dot(r, u)), float(np.dot(r, w))
                d1 += 1j * ru * t * ph - 1j * ru * np.conj(t.T) * np.conj(ph)
                d2 += -ru * rw * (t * ph + np.conj(t.T) * np.conj(ph))
            first = max(first, float(np.max(np.linalg.norm(d1, 2, axis=(-2, -1)))))
            second = max(second, float(np.max(np.linalg.norm(d2, 2, axis=(-2, -1)))))
    assert first <= l1 and second <= l2
