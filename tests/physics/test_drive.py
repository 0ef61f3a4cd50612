"""Drives and the evolution routine against general-purpose references.

References: scipy.linalg.expm in plain per-k loops, scipy.integrate.solve_ivp (DOP853) on the
Schroedinger equation, numpy.linalg.eig in a loop, and the closed form of exp(-i t d.sigma).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg as sl
import scipy.sparse as sp
from scipy.integrate import solve_ivp

from sweepcli.physics.drives.evolution import (
    FactorStack,
    chebyshev_propagate,
    evolve,
    floquet_evolution,
    floquet_operator,
    hermitian_exponential,
)
from sweepcli.physics.drives.harmonic import HarmonicDrive
from sweepcli.physics.drives.kicks import KickDrive
from sweepcli.physics.drives.steps import StepDrive
from sweepcli.physics.lattice import assemble, fourier_term, pauli
from sweepcli.physics.models import MODELS
from sweepcli.physics.quasienergy import quasienergies, unitary_eig

RNG = np.random.default_rng(11)


def model(name, **p):
    return MODELS[name].func(**p)


def four_band(m: float, mix: float):
    """BHZ-like d.Gamma model (Dirac type for mix = 0); ``mix`` adds a term commuting with
    Gamma_3 = sz (x) s0 that breaks the Clifford structure."""
    g1, g2, g3 = pauli("xz"), pauli("y0"), pauli("z0")
    terms = [fourier_term((1, 0), cos=g3, sin=g1), fourier_term((0, 1), cos=g3, sin=g2)]
    return assemble(np.eye(2), np.zeros((4, 2)), m * g3 + mix * pauli("0x"), terms)


def expm_product(segments, k):
    """Plain loop: U = prod_j expm(-i d_j H_j(k)), later times on the left."""
    u = np.eye(segments[0][1].norb, dtype=complex)
    for d, tb in segments:
        u = sl.expm(-1j * d * tb.bloch(k)) @ u
    return u


@pytest.mark.parametrize("mix", [0.0, 0.4])
def test_step_drive_equals_expm_product(mix):
    segs = ((0.4, four_band(1.0, mix)), (0.9, four_band(-0.5, 0.3 * mix)),
            (0.7, four_band(2.5, -mix)))
    drive = StepDrive(2.0, segs)
    k = RNG.uniform(0, 2 * np.pi, size=(6, 2))
    u = floquet_operator(drive, k)
    for i in range(len(k)):
        np.testing.assert_allclose(u[i], expm_product(segs, k[i]), atol=1e-12)


@pytest.mark.parametrize("tb", [model("qwz", m=0.7), four_band(1.3, 0.0)])
def test_closed_form_equals_eigendecomposition(tb):
    # exp(-i t (d0 + d.Gamma)) = e^{-i d0 t}[cos(|d| t) - i sin(|d| t) d.Gamma/|d|] for
    # anticommuting Gamma; compared with the eigh path and with expm.
    k = RNG.uniform(0, 2 * np.pi, size=(20, 2))
    h = tb.bloch(k) + 0.3 * np.eye(tb.norb)  # a trace part too
    fast = hermitian_exponential(h, 1.7)
    slow = hermitian_exponential(h, 1.7, closed_form=False)
    np.testing.assert_allclose(fast, slow, atol=1e-12)
    np.testing.assert_allclose(fast[3], sl.expm(-1.7j * h[3]), atol=1e-12)
    # The closed form also holds where |d| = 0 (QWZ at m = 2, k = (pi, pi)).
    h0 = model("qwz", m=2.0).bloch(np.array([[np.pi, np.pi]]))
    np.testing.assert_allclose(hermitian_exponential(h0, 2.0), sl.expm(-2j * h0[0])[None],
                               atol=1e-12)


def test_non_dirac_model_falls_back_to_eigh():
    from sweepcli.physics.drives.evolution import _dirac_exponential

    k = RNG.uniform(0, 2 * np.pi, size=(5, 2))
    assert _dirac_exponential(four_band(1.0, 0.4).bloch(k), 1.0, 1e-10) is None
    assert _dirac_exponential(four_band(1.0, 0.0).bloch(k), 1.0, 1e-10) is not None


def qwz_harmonic(T, amp, tol=1e-9):
    return HarmonicDrive(T, lambda t: model("qwz", m=1.0 + amp * np.cos(2 * np.pi * t / T)),
                         tol=tol)


@pytest.mark.parametrize("scheme, tol", [("magnus4", 1e-9), ("midpoint", 1e-6)])
def test_harmonic_converges_to_ode_reference(scheme, tol):
    T, amp = 1.3, 0.8
    drive = HarmonicDrive(T, lambda t: model("qwz", m=1.0 + amp * np.cos(2 * np.pi * t / T)),
                          tol=tol, scheme=scheme, max_slices=8192)
    k = np.array([[0.3, 1.1], [2.0, -0.4]])
    ev = floquet_evolution(drive, k)
    assert ev.converged and ev.error < tol
    for i in range(len(k)):
        def rhs(t, y, q=k[i]):
            h = model("qwz", m=1.0 + amp * np.cos(2 * np.pi * t / T)).bloch(q)
            return (-1j * h @ y.reshape(2, 2)).ravel()

        sol = solve_ivp(rhs, (0, T), np.eye(2, dtype=complex).ravel(), method="DOP853",
                        rtol=1e-12, atol=1e-12)
        # The doubling estimate bounds the error of the coarser level; the finer is kept.
        assert np.max(np.abs(sol.y[:, -1].reshape(2, 2) - ev.u[i])) < tol


def test_harmonic_reports_non_convergence():
    drive = HarmonicDrive(5.0, lambda t: model("qwz", m=1.0 + 2 * np.cos(2 * np.pi * t / 5)),
                          tol=1e-12, max_slices=16)
    ev = floquet_evolution(drive, np.array([[0.4, 1.3]]))
    assert not ev.converged and ev.error > 1e-12 and ev.slices == 16


def test_kick_drive_equals_expm_product():
    base, kick1, kick2 = model("qwz", m=0.5), model("qwz", m=-1.0, t=0.3), model("qwz", m=2.0)
    drive = KickDrive(2.0, base, ((1.5, kick2), (0.5, kick1)))
    k = np.array([0.4, 2.2])
    ref = (sl.expm(-0.5j * base.bloch(k)) @ sl.expm(-1j * kick2.bloch(k))
           @ sl.expm(-1.0j * base.bloch(k)) @ sl.expm(-1j * kick1.bloch(k))
           @ sl.expm(-0.5j * base.bloch(k)))
    np.testing.assert_allclose(floquet_operator(drive, k), ref, atol=1e-12)
    assert [d for d, _ in drive.factors()] == [0.5, 1.0, 1.0, 1.0, 0.5]
    # A kick on the edge of a window contributes half of itself at each edge: the period
    # starting on kick 1 is exp(-i K1/2) ... exp(-i K1/2), and windows compose.
    fs = drive.factors(start=0.5)
    assert fs[0] == (0.5, kick1) and fs[-1] == (0.5, kick1)
    half = sl.expm(-0.5j * kick1.bloch(k))
    ref = (half @ sl.expm(-1.0j * base.bloch(k)) @ sl.expm(-1j * kick2.bloch(k))
           @ sl.expm(-1.0j * base.bloch(k)) @ half)
    np.testing.assert_allclose(floquet_operator(drive, k, start=0.5), ref, atol=1e-12)
    first, second = (evolve((d, tb.bloch(k)) for d, tb in drive.factors(a, b))
                     for a, b in ((0.5, 1.5), (1.5, 2.5)))
    np.testing.assert_allclose(second @ first, ref, atol=1e-12)


@pytest.mark.parametrize("t", [0.0, 0.3, -1.7, 12.0])
def test_chebyshev_propagation_matches_expm(t):
    # Tal-Ezer and Kosloff (1984) expansion against scipy.linalg.expm of the dense matrix, for a
    # random sparse Hermitian matrix with complex entries, long and negative times included.
    n = 200
    a = sp.random(n, n, density=0.03, random_state=1) * (1 + 0.5j)
    h = (a + a.conj().T) / 2 + sp.diags(RNG.normal(size=n))
    psi = RNG.normal(size=(n, 2)) + 1j * RNG.normal(size=(n, 2))
    ref = sl.expm(-1j * t * h.toarray()) @ psi
    np.testing.assert_allclose(chebyshev_propagate(h, t, psi), ref, atol=1e-12)
    np.testing.assert_allclose(chebyshev_propagate(h, t, psi[:, 0]), ref[:, 0], atol=1e-12)


def test_sparse_open_chain_evolution_matches_dense():
    # Open SSH chains built by hand (Asboth et al. 2016, eq. 1.1), evolved on a block of
    # vectors (Chebyshev expansion) versus the dense product of scipy.linalg.expm.
    def chain(v, w, n):
        h = np.zeros((2 * n, 2 * n))
        for m in range(n):
            h[2 * m + 1, 2 * m] = h[2 * m, 2 * m + 1] = v
        for m in range(n - 1):
            h[2 * m + 2, 2 * m + 1] = h[2 * m + 1, 2 * m + 2] = w
        return h

    h1, h2 = chain(0.3, 1.0, 30), chain(1.2, 0.4, 30)
    psi = RNG.normal(size=(60, 3)) + 1j * RNG.normal(size=(60, 3))
    out = evolve([(0.7, sp.csr_matrix(h1)), (1.1, sp.csr_matrix(h2))], psi)
    ref = sl.expm(-1.1j * h2) @ sl.expm(-0.7j * h1) @ psi
    np.testing.assert_allclose(out, ref, atol=1e-10)
    dense = evolve([(0.7, sp.csr_matrix(h1)), (1.1, sp.csr_matrix(h2))])
    np.testing.assert_allclose(dense, sl.expm(-1.1j * h2) @ sl.expm(-0.7j * h1), atol=1e-12)
    with pytest.raises(ValueError, match="pass a block of vectors"):
        evolve([(0.7, sp.csr_matrix(h1))], dense_limit=10)


def test_factor_stack_equals_sequential_product():
    drive = qwz_harmonic(1.0, 0.5)
    fs = drive.factors(slices=13)  # 26 factors: odd levels in the tree reduction
    k = RNG.uniform(0, 2 * np.pi, size=(3, 2))
    np.testing.assert_allclose(FactorStack(fs).operator(k),
                               evolve((d, tb.bloch(k)) for d, tb in fs), atol=1e-12)


def test_symmetric_times():
    a, b, c = model("ssh", v=0.3, w=0.0), model("ssh", v=0.0, w=1.0), model("ssh", v=0.5, w=0.5)
    # Two steps: the centres of both steps are mirror points (Asboth and Obuse 2013).
    assert StepDrive(3.0, ((1.0, a), (2.0, b))).symmetric_times() == pytest.approx((0.5, 2.0))
    # Palindrome a b a: the centre of b and the join of the two a's (t = 0 = T).
    t1, t2 = StepDrive(4.0, ((1.0, a), (2.0, b), (1.0, a))).symmetric_times()
    assert (t1, t2) == pytest.approx((0.0, 2.0))
    with pytest.raises(ValueError, match="no time-reversal-symmetric starting time"):
        StepDrive(3.0, ((1.0, a), (1.0, b), (1.0, c))).symmetric_times()
    # The frame at a symmetric time is chiral symmetric: G U G = U^dagger (G = sigma_z).
    drive = StepDrive(3.0, ((1.0, a), (2.0, b)))
    g = pauli("z")
    for t in drive.symmetric_times(g):
        u = floquet_operator(drive, np.array([[0.7]]), start=t)[0]
        np.testing.assert_allclose(g @ u @ g, u.conj().T, atol=1e-12)


def test_unitary_eig_on_degenerate_unitaries():
    # U = V diag(phases) V^+ with a 3-fold degenerate phase and one near-degenerate pair: the
    # vectors must be orthonormal and the phases those of numpy.linalg.eig.
    q, _ = np.linalg.qr(RNG.normal(size=(6, 6)) + 1j * RNG.normal(size=(6, 6)))
    ph = np.array([0.4, 0.4, 0.4, -2.0, -2.0 + 1e-9, np.pi])
    u = q @ np.diag(np.exp(1j * ph)) @ q.conj().T
    p, v = unitary_eig(u[None])
    np.testing.assert_allclose(v[0].conj().T @ v[0], np.eye(6), atol=1e-12)
    np.testing.assert_allclose(u @ v[0], v[0] * np.exp(1j * p[0]), atol=1e-10)
    np.testing.assert_allclose(np.sort(p[0] % (2 * np.pi)),
                               np.sort(np.angle(np.linalg.eigvals(u)) % (2 * np.pi)), atol=1e-9)
    assert np.all(p[0] > -np.pi) and np.all(p[0] <= np.pi)
    eps, _ = quasienergies(u[None], 2.0)
    assert np.all(eps > -np.pi / 2) and np.all(eps <= np.pi / 2)
    assert eps[0, -1] == pytest.approx(np.pi / 2)  # eigenvalue -1 maps to +pi/T


def test_bad_drive_input():
    a = model("ssh", v=0.3)
    with pytest.raises(ValueError, match="sum to 1.5 but the period is 2"):
        StepDrive(2.0, ((1.0, a), (0.5, a)))
    with pytest.raises(ValueError, match="period must be a positive finite number; got -1"):
        StepDrive(-1.0, ((-1.0, a),))
    with pytest.raises(ValueError, match="durations must be >= 0"):
        StepDrive(1.0, ((1.5, a), (-0.5, a)))
    with pytest.raises(ValueError, match="period must be a positive"):
        HarmonicDrive(0.0, lambda t: a)
    with pytest.raises(ValueError, match="kick time 2.5 is outside"):
        KickDrive(2.0, a, ((2.5, a),))
    with pytest.raises(ValueError, match="share the lattice"):
        StepDrive(2.0, ((1.0, a), (1.0, model("qwz", m=1.0))))
