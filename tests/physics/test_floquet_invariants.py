"""Floquet gaps and invariants against analytic results, published models and open chains.

Independent references: closed-form quasienergies and windings of the step-driven chiral chain
(derived below), end modes of open chains built by hand and evolved with scipy.linalg.expm,
the static Chern numbers of numpy.linalg.eigh bands, and the anomalous five-step drive of
Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg as sl

from sweepcli.physics import chiral_frames as cf
from sweepcli.physics import floquet_chern as fc
from sweepcli.physics import line_symmetry as ls
from sweepcli.physics import quasienergy as qe
from sweepcli.physics import transitions as tr
from sweepcli.physics.chern import chern_number
from sweepcli.physics.drives.evolution import floquet_operator
from sweepcli.physics.drives.harmonic import HarmonicDrive
from sweepcli.physics.drives.steps import StepDrive
from sweepcli.physics.lattice import assemble, pauli
from sweepcli.physics.measurements import MEASUREMENTS, quantities_of
from sweepcli.physics.models import MODELS
from sweepcli.physics.point import Point
from sweepcli.schema import Reason

SZ = pauli("z")


def model(name, **p):
    return MODELS[name].func(**p)


# ---------------------------------------------------------------------------------------------
# The step-driven chiral chain (Asboth and Obuse, PRB 88, 121406 (2013); Asboth, Tarasinski and
# Delplace, PRB 90, 125143 (2014)).
#
# Step 1 (T/2): intra-cell hopping v only, H1 = v sx. Step 2 (T/2): inter-cell w only,
# H2 = w (cos k sx + sin k sy) (ssh docstring, basis A, B). With th1 = vT/2, th2 = wT/2 and
# e^{-i th n.s} = cos th - i sin th n.s, the SU(2) product U = e^{-i th2 n2.s} e^{-i th1 sx} has
#     cos(eps T) = cos th1 cos th2 - sin th1 sin th2 cos k,
# so eps(k) = +-phi(k)/T. cos(eps T) is linear in cos k between cos(th1 + th2) (k = 0) and
# cos(th1 - th2) (k = pi): the 0 gap closes where th1 +- th2 is an even multiple of pi, the pi
# gap where it is an odd multiple. Half-period operator from t1 = T/4 (centre of step 1, chiral
# sz): F = e^{-i (th2/2) n2.s} e^{-i (th1/2) sx}; with c_i = cos(th_i/2), s_i = sin(th_i/2),
#     P_- F P_+ = F_BA = -i (c2 s1 + s2 c1 e^{ik}),   P_+ F P_+ = F_AA = c1 c2 - s1 s2 e^{-ik},
# whence nu_0 = wind F_BA = 1 if |tan(th2/2)| > |tan(th1/2)| else 0 and
# nu_pi = wind F_AA = -1 if |tan(th1/2) tan(th2/2)| > 1 else 0.


def vw_drive(th1: float, th2: float, T: float = 1.0) -> StepDrive:
    return StepDrive(T, ((T / 2, model("ssh", v=2 * th1 / T, w=0.0)),
                         (T / 2, model("ssh", v=0.0, w=2 * th2 / T))))


def vw_analytic(th1: float, th2: float) -> tuple[int, int]:
    nu0 = int(abs(np.tan(th2 / 2)) > abs(np.tan(th1 / 2)))
    nupi = -int(abs(np.tan(th1 / 2) * np.tan(th2 / 2)) > 1)
    return nu0, nupi


def open_chain(v: float, w: float, cells: int) -> np.ndarray:
    # Asboth, Oroszlany and Palyi (2016), eq. 1.1, basis |m,A> = 2m, |m,B> = 2m+1.
    h = np.zeros((2 * cells, 2 * cells))
    for m in range(cells):
        h[2 * m + 1, 2 * m] = h[2 * m, 2 * m + 1] = v
    for m in range(cells - 1):
        h[2 * m + 2, 2 * m + 1] = h[2 * m + 1, 2 * m + 2] = w
    return h


def end_modes(steps, T, gap0, gappi, cells=80):
    """Numbers of quasienergies within a quarter of each gap of 0 and of pi/T (both ends)."""
    u = np.eye(2 * cells, dtype=complex)
    for d, (v, w) in steps:
        u = sl.expm(-1j * d * open_chain(v, w, cells)) @ u
    eps = -np.angle(np.linalg.eigvals(u)) / T
    return (int(np.sum(np.abs(eps) < gap0 / 4)),
            int(np.sum(np.pi / T - np.abs(eps) < gappi / 4)))


def test_chiral_chain_dispersion():
    th1, th2, T = 0.7, 2.1, 1.3
    k = np.linspace(0, 2 * np.pi, 41)[:, None]
    eps = qe.quasienergy_values(floquet_operator(vw_drive(th1, th2, T), k), T)
    phi = np.arccos(np.cos(th1) * np.cos(th2) - np.sin(th1) * np.sin(th2) * np.cos(k[:, 0]))
    np.testing.assert_allclose(eps, np.stack([-phi / T, phi / T], -1), atol=1e-10)


@pytest.mark.parametrize("th1, th2", [(0.3, 0.9), (0.9, 0.3), (0.4, 2.0), (2.5, 2.9),
                                      (0.6 * np.pi, 0.8 * np.pi), (0.8 * np.pi, 0.6 * np.pi),
                                      (2.9, 1.0), (1.0, 1.4), (-0.4, 1.2)])
def test_chiral_chain_phase_diagram(th1, th2):
    r = cf.chiral_windings(vw_drive(th1, th2), SZ)
    assert r.reason == Reason.OK
    assert (r.nu_0, r.nu_pi) == vw_analytic(th1, th2)
    assert (r.nu, r.nu_prime) == (r.nu_0 + r.nu_pi, r.nu_0 - r.nu_pi)


def test_one_frame_alone_is_not_enough():
    # th1 = 0.6 pi, th2 = 0.8 pi: nu_0 = 1, nu_pi = -1 (analytic, above) but the frame at
    # t1 = T/4 has nu = 0: only the pair of frames sees both kinds of end modes.
    th1, th2, T = 0.6 * np.pi, 0.8 * np.pi, 1.0
    r = cf.chiral_windings(vw_drive(th1, th2, T), SZ)
    assert (r.nu, r.nu_prime) == (0, 2) and (r.nu_0, r.nu_pi) == (1, -1)
    modes = end_modes([(T / 2, (2 * th1 / T, 0.0)), (T / 2, (0.0, 2 * th2 / T))], T,
                      r.gap_0, r.gap_pi)
    assert modes == (2, 2)  # one 0 mode and one pi mode at each end


@pytest.mark.parametrize("v1, w1, v2, w2, T", [(0.16, 0.52, -0.93, 1.47, 6.48),
                                               (0.99, 0.37, -0.78, 1.38, 7.55),
                                               (0.77, -1.37, 0.89, 0.70, 7.33)])
def test_low_frequency_invariants_beyond_one(v1, w1, v2, w2, T):
    # Two steps of SSH with both hoppings on; at low frequency the light cone of each step
    # spans several cells and |nu| = 2 appears. Reference: the end modes of an 80-cell open
    # chain (2 |nu_0| zero modes and 2 |nu_pi| pi modes, both ends).
    d = StepDrive(T, ((T / 2, model("ssh", v=v1, w=w1)), (T / 2, model("ssh", v=v2, w=w2))))
    r = cf.chiral_windings(d, SZ)
    assert r.reason == Reason.OK and max(abs(r.nu_0), abs(r.nu_pi)) == 2
    modes = end_modes([(T / 2, (v1, w1)), (T / 2, (v2, w2))], T, r.gap_0, r.gap_pi)
    assert modes == (2 * abs(r.nu_0), 2 * abs(r.nu_pi))


def test_half_period_route_equals_frames_route():
    # A four-band chiral chain (two coupled legs, chiral operator diag(1, 1, -1, -1)) with random
    # off-diagonal blocks in two steps: nu_0 = wind det P- F P+ and nu_pi = wind det P+ F P+
    # (Asboth, Tarasinski and Delplace 2014) must equal (nu +- nu')/2 of the two frames.
    rng = np.random.default_rng(3)
    g = np.diag([1.0, 1.0, -1.0, -1.0]).astype(complex)

    def chiral_tb():
        def block(q):
            out = np.zeros((4, 4), complex)
            out[2:, :2] = q
            return out
        q0, q1 = (rng.normal(size=(2, 2)) + 1j * rng.normal(size=(2, 2)) for _ in range(2))
        return assemble(np.eye(1), np.zeros((4, 1)), block(q0) + block(q0).conj().T,
                        [((1,), block(q1) + block(rng.normal(size=(2, 2))).T)])

    checked = 0
    for _ in range(6):
        T = rng.uniform(1.0, 3.0)
        d = StepDrive(T, ((T / 2, chiral_tb()), (T / 2, chiral_tb())))
        t1, t2 = d.symmetric_times(g)
        k = cf.line_momenta(np.zeros(1), np.ones(1), 512)
        u1, u2, f, _ = cf.frames_on(d, k, t1, t2)
        r, step = cf.chiral_from_frames(u1, u2, f, g, T)
        if r.reason != Reason.OK or step > 0.5:
            continue
        assert cf.half_period_windings(f, g) == (r.nu_0, r.nu_pi)
        checked += 1
    assert checked >= 3


def test_frequency_sweep_closes_pi_gap_at_analytic_frequency():
    # v = 0.5, w = 1, each for T/2: th1 + th2 = (v + w) T/2 = pi at omega = 2 pi/T = v + w.
    # Near it the extreme of cos(eps T) sits at k = 0 with eps T = th1 + th2, so
    # gap_pi = (2/T) |pi - (th1 + th2)|.
    v, w = 0.5, 1.0

    def drive(omega):
        T = 2 * np.pi / omega
        return StepDrive(T, ((T / 2, model("ssh", v=v, w=0.0)), (T / 2, model("ssh", v=0.0, w=w))))

    for omega in (1.3, 1.45, 1.5, 1.56, 1.7):
        d = drive(omega)
        T = d.period
        g = qe.floquet_gaps(d, qe.floquet_mesh(d, 33, 1))
        assert g.gap_pi == pytest.approx(2 / T * abs(np.pi - (v + w) * T / 2), abs=1e-9)
        assert abs(g.k_pi[0]) < 1e-6
    assert qe.floquet_gaps(drive(1.5), qe.floquet_mesh(drive(1.5), 33, 1)).gap_pi < 1e-9
    grid = np.linspace(1.2, 1.8, 7)
    found = tr.transition_points(lambda om: floquet_operator(drive(om), np.zeros((1, 1))), grid)
    assert [(t.gap, round(t.value, 10)) for t in found] == [("pi", v + w)]
    # At the closing the pi invariant is missing, the 0 invariant still defined (half period).
    r = cf.chiral_windings(drive(1.5), SZ)
    assert r.reason == Reason.GAP_CLOSED and r.nu_pi is None and r.nu_0 == 1


def test_high_frequency_limit_reproduces_static_qwz():
    # A weak harmonic modulation of the QWZ mass at omega = 4 pi (pi/T = 2 pi above the static
    # bandwidth 3): the Floquet bands are the static bands dressed perturbatively, so their
    # Chern numbers are the static ones (numpy.linalg.eigh bands), the 0-gap winding is the
    # Chern number of the bands below zero and the pi gap is trivial (Rudner et al. 2013).
    T, m = 0.5, 1.0
    d = HarmonicDrive(T, lambda t: model("qwz", m=m + 0.3 * np.cos(2 * np.pi * t / T)),
                      tol=1e-7)
    g = qe.floquet_gaps(d, qe.floquet_mesh(d, 24, 2))
    c = fc.floquet_chern(d, g)
    static = chern_number(model("qwz", m=m), 1).value
    assert static == -1  # Qi, Wu and Zhang 2006 in this project's sign (chern module)
    assert c.reason == Reason.OK and (c.lower, c.upper) == (static, -static)
    w = fc.rudner_winding(d, g)
    assert w.reason == Reason.OK and (w.w_0, w.w_pi) == (static, 0) and w.residue < 1e-3


def five_step(J: float, delta: float, T: float = 1.0, order=(1, 2, 3, 4)) -> StepDrive:
    segs = [(T / 5, model("bipartite_square", **{f"j{mu}": J})) for mu in order]
    return StepDrive(T, tuple(segs) + ((T / 5, model("bipartite_square", delta=delta)),))


def test_anomalous_five_step_drive():
    # Rudner et al. 2013: at J T/5 = pi/2 every step transfers a particle fully, U(k, 4T/5) = 1,
    # all Floquet bands are flat with Chern number 0, and both gaps carry winding 1 (one chiral
    # edge mode each); reversing the circulation reverses the sign.
    T, delta = 1.0, 1.0
    d = five_step(5 * np.pi / (2 * T), delta, T)
    np.testing.assert_allclose(floquet_operator(d, np.array([[0.3, 1.7]]), start=0.0)[0],
                               sl.expm(-1j * T / 5 * delta * SZ), atol=1e-12)
    g = qe.floquet_gaps(d, qe.floquet_mesh(d, 16, 2))
    assert g.gap_0 == pytest.approx(2 * delta / 5) and g.gap_pi == pytest.approx(
        2 * (np.pi - delta / 5))
    c = fc.floquet_chern(d, g)
    assert c.reason == Reason.OK and (c.upper, c.lower) == (0, 0)
    w = fc.rudner_winding(d, g)
    assert w.reason == Reason.OK and (w.w_0, w.w_pi) == (1, 1) and w.residue < 1e-9
    rev = five_step(5 * np.pi / (2 * T), delta, T, order=(4, 3, 2, 1))
    w = fc.rudner_winding(rev, qe.floquet_gaps(rev, qe.floquet_mesh(rev, 16, 2)))
    assert (w.w_0, w.w_pi) == (-1, -1)


@pytest.mark.parametrize("a, b, T", [(0.5, -2.5, 2.0), (-1.2, 2.7, 1.7), (1.5, -0.5, 3.0)])
def test_band_chern_is_difference_of_gap_windings(a, b, T):
    # Rudner et al. 2013: C(band) = W(gap above) - W(gap below); the band in (0, pi/T) lies
    # between the 0 gap (below) and the pi gap (above). Two-step QWZ drives at low frequency
    # have |C| up to 2 here.
    d = StepDrive(T, ((T / 2, model("qwz", m=a)), (T / 2, model("qwz", m=b))))
    g = qe.floquet_gaps(d, qe.floquet_mesh(d, 24, 2))
    c = fc.floquet_chern(d, g)
    w = fc.rudner_winding(d, g)
    assert c.reason == Reason.OK and w.reason == Reason.OK
    assert c.upper == w.w_pi - w.w_0 and c.lower == w.w_0 - w.w_pi


def test_closed_gap_gives_missing_values():
    # m alternating 1 and 3: at k = (pi, pi) both steps are (m - 2) sz and commute, the mean
    # mass vanishes and U = 1 there: the 0 gap is closed exactly, the pi gap open.
    d = StepDrive(1.0, ((0.5, model("qwz", m=1.0)), (0.5, model("qwz", m=3.0))))
    g = qe.floquet_gaps(d, qe.floquet_mesh(d, 24, 2))
    assert g.gap_0 < 1e-9 and np.allclose(np.abs(g.k_0), np.pi) and g.gap_pi > 0.1
    c = fc.floquet_chern(d, g)
    assert c.reason == Reason.GAP_CLOSED and c.upper is None and c.lower is None
    # With the 0 gap closed no proven Chern number anchors the pi-gap winding: it is missing
    # rather than accepted because two quadrature levels agree.
    w = fc.rudner_winding(d, g)
    assert w.reason == Reason.GAP_CLOSED and w.w_0 is None and w.w_pi is None
    assert (w.reason_0, w.reason_pi) == (Reason.GAP_CLOSED, Reason.NOT_CONVERGED)


# ---------------------------------------------------------------------------------------------
# Symmetry-resolved windings along a line


def two_chains(params, axis):
    """Two SSH legs (orbitals 0, 1 and 2, 3) with inter-cell hopping along ``axis``."""
    (v1, w1), (v2, w2) = params
    onsite = np.zeros((4, 4), complex)
    hop = np.zeros((4, 4), complex)
    for o, (v, w) in zip((0, 2), params):
        onsite[o, o + 1] = onsite[o + 1, o] = v
        hop[o + 1, o] = w
    dim = len(axis)
    return assemble(np.eye(dim), np.zeros((4, dim)), onsite, [(tuple(axis), hop)],
                    operators={"chiral": np.diag([1.0, -1, 1, -1])})


def leg_drive(th, axis, T=1.0):
    (a1, a2), (b1, b2) = th
    return StepDrive(T, ((T / 2, two_chains(((2 * a1 / T, 0), (2 * b1 / T, 0)), axis)),
                         (T / 2, two_chains(((0, 2 * a2 / T), (0, 2 * b2 / T)), axis))))


def test_line_sector_windings():
    th = ((0.3, 0.9), (0.6 * np.pi, 0.8 * np.pi))  # analytic (1, 0) and (1, -1)
    s = np.diag([1.0, 1, -1, -1])
    g = np.diag([1.0, -1, 1, -1])
    secs = ls.line_sector_windings(leg_drive(th, (1,)), s, g, origin=[0.0], direction=[1])
    # sectors ordered by the phase of the eigenvalue of S: +1 (leg 1) first, then -1 (leg 2)
    assert np.allclose([sec.eigenvalue for sec in secs], [1, -1]) and secs[0].size == 2
    assert [(x.result.nu_0, x.result.nu_pi) for x in secs] == [vw_analytic(*th[0]),
                                                                vw_analytic(*th[1])]
    # 2D legs hopping along a1 + a2: on the diagonal k = s (1, 1) the Bloch phase is e^{2is},
    # so each sector's windings double; along k = s (1, 0) they are the chain's.
    d2 = leg_drive(th, (1, 1))
    diag = ls.line_sector_windings(d2, s, g, origin=[0.0, 0.0], direction=[1, 1])
    assert [(x.result.nu_0, x.result.nu_pi) for x in diag] == [(2, 0), (2, -2)]
    side = ls.line_sector_windings(d2, s, g, origin=[0.0, 0.3], direction=[1, 0])
    assert [(x.result.nu_0, x.result.nu_pi) for x in side] == [(1, 0), (1, -1)]
    # A static model: the winding of each sector's chiral block (SSH: 1 for |v| < |w|).
    static = ls.line_sector_windings(two_chains(((0.3, 1.0), (1.5, 1.0)), (1,)), s, g,
                                     origin=[0.0], direction=[1])
    assert [x.result.nu_0 for x in static] == [1, 0]


def test_line_winding_rejects_bad_operators():
    d = leg_drive(((0.3, 0.9), (0.4, 1.1)), (1,))
    g = np.diag([1.0, -1, 1, -1])
    mixing = np.kron(pauli("x"), np.eye(2))  # swaps the legs, which differ
    with pytest.raises(ValueError, match="does not commute with U\\(k\\)"):
        ls.line_sector_windings(d, mixing, g, origin=[0.0], direction=[1])
    with pytest.raises(ValueError, match="does not commute with the chiral operator"):
        ls.line_sector_windings(d, np.kron(np.eye(2), pauli("x")), g, origin=[0.0],
                                direction=[1])
    with pytest.raises(ValueError, match="must be unitary"):
        ls.line_sector_windings(d, 2 * np.eye(4), g, origin=[0.0], direction=[1])
    with pytest.raises(ValueError, match="nonzero integer vector"):
        ls.line_sector_windings(d, np.eye(4), g, origin=[0.0], direction=[0.5])


# ---------------------------------------------------------------------------------------------
# Measurements through a Point


def driven_point(drive, build):
    return Point(params={}, build=lambda q: build, drive=drive)


def test_driven_measurement_records():
    d = five_step(5 * np.pi / 2, 1.0)
    pt = driven_point(d, model("bipartite_square"))
    out = {}
    for name in ("quasienergy_gaps", "floquet_chern", "rudner_winding"):
        r = MEASUREMENTS[name].func(pt)
        assert set(r) == {q.name for q in quantities_of(name, 2)} | {"reason"}
        out.update(r)
    assert out["gap_0"] == pytest.approx(0.4) and out["floquet_chern_upper"] == 0
    assert (out["w_0"], out["w_pi"]) == (1, 1)
    assert -0.5 <= out["gap_0_k1"] < 0.5
    assert len([k for k in pt.cache if k[0] == "floquet_gaps"]) == 1

    chain = driven_point(vw_drive(0.6 * np.pi, 0.8 * np.pi), model("ssh", v=0.5))
    r = MEASUREMENTS["chiral_windings"].func(chain)
    assert (r["nu_0"], r["nu_pi"], r["reason"]) == (1, -1, {"0": Reason.OK, "pi": Reason.OK})
    lw = MEASUREMENTS["line_winding"].func(
        driven_point(leg_drive(((0.3, 0.9), (0.6 * np.pi, 0.8 * np.pi)), (1,)),
                     two_chains(((0.5, 1.0), (0.5, 1.0)), (1,))),
        operator=np.diag([1.0, 1, -1, -1]), direction=[1])
    assert set(lw) == {q.name for q in quantities_of("line_winding", 1, driven=True)} | {"reason"}
    assert lw["line_sectors"] == 2 and lw["line_phase_s1"] == pytest.approx(0.0)
    assert lw["line_phase_s2"] == pytest.approx(np.pi)
    assert [lw[f"line_w{g}_s{j}"] for j in (1, 2) for g in ("0", "pi")] == [1, 0, 1, -1]
    assert lw["line_w0_s3"] is None and np.isnan(lw["line_phase_s3"])
    assert MEASUREMENTS["line_winding"].extra["driven"] is None  # H(k) of a static job too
    for name in ("quasienergy_gaps", "floquet_chern", "rudner_winding", "chiral_windings",
                 "line_winding"):
        assert MEASUREMENTS[name].extra["driven"] in (True, None)
        for q in quantities_of(name, 2 if name not in ("chiral_windings",) else 1):
            assert q.name == q.name.lower() and q.dtype in ("float64", "int32")


# ---------------------------------------------------------------------------------------------
# An invariant of a gap that is closed in the bulk is missing (gap_closed in that gap's reason)
#
# The mass-switched corner model (jobs/driven-corner-modes.toml): bhz_corner with delta2 = 0.8,
# m = M_A for the first 0.4 T and m = M_B for the remaining 0.6 T. At Gamma (k = 0) and M
# (k = (pi, pi)) the delta1 and delta2 terms vanish (sin k = 0, cos k1 = cos k2), so both steps
# are multiples of tau_z there and commute:
#     U(Gamma) = exp(-i T mbar_G tau_z),  mbar_G = 0.4 (M_A + 2t) + 0.6 (M_B + 2t),
#     U(M)     = exp(-i T mbar_M tau_z),  mbar_M = 0.4 (M_A - 2t) + 0.6 (M_B - 2t),
# with quasienergies +-mbar (mod 2 pi / T). The 0 gap closes where T mbar = 2 pi n, the pi gap
# where T mbar = (2n + 1) pi, i.e. at omega = mbar / n and omega = 2 mbar / (2n + 1). For
# M_A = -0.5, M_B = 3, t = 1: mbar_G = 3.6, mbar_M = -0.4, so the 0 gap closes at Gamma for
# omega = 3.6 and the pi gap at Gamma for omega = 7.2 (n = 0).

M_A, M_B, SPAN_A = -0.5, 3.0, 0.4


def corner_drive(omega: float) -> StepDrive:
    T = 2 * np.pi / omega
    return StepDrive(T, ((SPAN_A * T, model("bhz_corner", m=M_A, delta2=0.8)),
                         ((1 - SPAN_A) * T, model("bhz_corner", m=M_B, delta2=0.8))))


def corner_hamiltonian(k1: float, k2: float, m: float, delta2: float = 0.8) -> np.ndarray:
    """bhz_corner's H(k) written out here (basis tau x sigma, t = delta1 = 1)."""
    s = {c: pauli(c) for c in ("z0", "xx", "xy", "y0")}
    return ((m + np.cos(k1) + np.cos(k2)) * s["z0"] + np.sin(k1) * s["xx"]
            + np.sin(k2) * s["xy"] + delta2 * (np.cos(k1) - np.cos(k2)) * s["y0"])


def expm_gaps(omega: float, n: int = 24) -> tuple[float, float]:
    """Bulk gaps at 0 and pi/T on an n x n k-grid, U(k) by scipy.linalg.expm (reference)."""
    T = 2 * np.pi / omega
    g0 = gpi = np.inf
    for k1 in 2 * np.pi * np.arange(n) / n:
        for k2 in 2 * np.pi * np.arange(n) / n:
            u = (sl.expm(-1j * (1 - SPAN_A) * T * corner_hamiltonian(k1, k2, M_B))
                 @ sl.expm(-1j * SPAN_A * T * corner_hamiltonian(k1, k2, M_A)))
            eps = np.angle(np.linalg.eigvals(u)) / T
            g0 = min(g0, 2 * np.min(np.abs(eps)))
            gpi = min(gpi, 2 * np.min(np.pi / T - np.abs(eps)))
    return g0, gpi


@pytest.mark.parametrize("closed, omega", [("0", 3.6), ("pi", 7.2)])
def test_line_winding_of_a_gap_closed_in_the_bulk_is_missing(closed, omega):
    mbar_g = SPAN_A * (M_A + 2) + (1 - SPAN_A) * (M_B + 2)
    assert mbar_g == pytest.approx(3.6)
    other = "pi" if closed == "0" else "0"
    # the reference: the closed gap is zero at Gamma, the other gap is wide open everywhere
    g = dict(zip(("0", "pi"), expm_gaps(omega)))
    assert g[closed] < 1e-9 and g[other] > 0.15
    pt = Point(params={}, build=lambda p: model("bhz_corner", m=M_A, delta2=0.8),
               drive=corner_drive(omega))
    out = MEASUREMENTS["line_winding"].func(pt, operator="mirror_diag", direction=[1, 1])
    assert out["reason"] == {closed: Reason.GAP_CLOSED, other: Reason.OK}
    assert out["line_sectors"] == 2
    assert all(out[f"line_w{closed}_s{j}"] is None for j in (1, 2, 3, 4))
    present = [out[f"line_w{other}_s{j}"] for j in (1, 2)]
    assert all(isinstance(v, int) for v in present)
    # The same line with its mesh shifted off Gamma: the line's own points stay gapped (the
    # closing falls between them), the bulk gap does not. The closed gap is still missing and
    # the open gap keeps its windings (taken from the half-period operator alone).
    shifted = MEASUREMENTS["line_winding"].func(pt, operator="mirror_diag", direction=[1, 1],
                                                origin=[0.013, 0.013])
    assert shifted["reason"] == out["reason"]
    assert [shifted[f"line_w{other}_s{j}"] for j in (1, 2)] == present
    assert all(shifted[f"line_w{closed}_s{j}"] is None for j in (1, 2))
    # The other gap stays open between this point and one where both gaps are open, so its
    # windings there (from both symmetric frames) are the same integers.
    near = omega - 0.1 if closed == "0" else omega + 0.1
    both = MEASUREMENTS["line_winding"].func(
        Point(params={}, build=lambda p: model("bhz_corner", m=M_A, delta2=0.8),
              drive=corner_drive(near)), operator="mirror_diag", direction=[1, 1])
    assert both["reason"] == {"0": Reason.OK, "pi": Reason.OK}
    assert [both[f"line_w{other}_s{j}"] for j in (1, 2)] == present


def test_line_winding_of_a_drive_without_a_chiral_frame():
    # Three steps with three different masses: the cyclic sequence (a, b, c) has no mirror
    # point, so no frame is chiral symmetric and the windings are undefined in both gaps
    # (Asboth and Obuse, PRB 88, 121406 (2013)); a reason of its own, not a failure.
    T = 2 * np.pi / 5.0
    drive = StepDrive(T, tuple((span * T, model("bhz_corner", m=m, delta2=0.8))
                               for span, m in ((0.3, -0.5), (0.3, 1.0), (0.4, 3.0))))
    with pytest.raises(ValueError, match="no chiral-symmetric starting time"):
        drive.symmetric_times(pauli("xz"))
    pt = Point(params={}, build=lambda p: model("bhz_corner", m=-0.5, delta2=0.8), drive=drive)
    out = MEASUREMENTS["line_winding"].func(pt, operator="mirror_diag", direction=[1, 1])
    assert out["reason"] == {"0": Reason.NO_CHIRAL_FRAME, "pi": Reason.NO_CHIRAL_FRAME}
    assert out["line_w0_s1"] is None and out["line_wpi_s1"] is None
    assert int(Reason.NO_CHIRAL_FRAME) == 8
