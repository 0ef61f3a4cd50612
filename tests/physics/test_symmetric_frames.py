"""Chiral-symmetric time frames of harmonic, kicked and ramped drives.

In a frame starting at a symmetric time ``t*`` (``G H(t* + s) G = -H(t* - s)``) the one-period
operator obeys ``G U G = U^dagger`` (Asboth and Obuse, PRB 88, 121406 (2013)). Independent
references, written here: the SSH Bloch matrix ``[[0, v + w e^{-ik}], [c.c., 0]]`` (Asboth,
Oroszlany and Palyi 2016, eq. 1.13) integrated with scipy.integrate.solve_ivp (smooth drives)
or multiplied with scipy.linalg.expm (kicks), the symmetric times derived by hand for each
drive, and the end-mode chiral charges of an open chain evolved with solve_ivp, which by
Asboth, Tarasinski and Delplace, PRB 90, 125143 (2014) are the invariants nu_0, nu_pi.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg as sl
from scipy.integrate import solve_ivp

from sweepcli.physics import chiral_frames as cf
from sweepcli.physics.drives.evolution import Slicing, floquet_operator
from sweepcli.physics.drives.harmonic import HarmonicDrive
from sweepcli.physics.drives.kicks import KickDrive
from sweepcli.physics.drives.ramp import RampDrive
from sweepcli.physics.drives.steps import StepDrive
from sweepcli.physics.lattice import assemble, pauli
from sweepcli.physics.measurements import MEASUREMENTS
from sweepcli.physics.measurements.boundary import _chiral_frame
from sweepcli.physics.models import MODELS
from sweepcli.physics.point import Point
from sweepcli.schema import Reason

SZ = pauli("z")
KS = (0.3, 1.7, -2.2, math.pi)


def ssh(v: float, w: float, u: float = 0.0):
    """The registered SSH model, or (``u != 0``) SSH plus a staggered potential ``u sigma_z``,
    which breaks the chiral symmetry (built with the project's ``assemble``)."""
    if u == 0.0:
        return MODELS["ssh"].func(v=v, w=w)
    hop = np.zeros((2, 2), complex)
    hop[1, 0] = w
    return assemble(np.eye(1), [[0.0], [0.5]], v * pauli("x") + u * SZ, [((1,), hop)],
                    operators={"chiral": SZ})


def bloch(v: float, w: float, k: float, u: float = 0.0) -> np.ndarray:
    off = v + w * np.exp(-1j * k)
    return np.array([[u, off], [np.conj(off), -u]])


def ivp_operator(h_of_t, t0: float, t1: float, n: int = 2, kinks=()) -> np.ndarray:
    """``T exp(-i int_t0^t1 H dt)`` by solve_ivp (DOP853) on ``dU/dt = -i H(t) U``, restarted
    at the ``kinks`` (times where ``H`` is not smooth)."""
    cuts = [t0, *sorted(t for t in kinks if t0 < t < t1), t1]
    y = np.eye(n, dtype=complex).ravel()
    for a, b in zip(cuts[:-1], cuts[1:]):
        sol = solve_ivp(lambda t, y: (-1j * h_of_t(t) @ y.reshape(n, n)).ravel(), (a, b), y,
                        method="DOP853", rtol=1e-11, atol=1e-12)
        y = sol.y[:, -1]
    return y.reshape(n, n)


def chiral_defect(u: np.ndarray, g: np.ndarray = SZ) -> float:
    return float(np.max(np.abs(g @ u @ g - np.swapaxes(u, -1, -2).conj())))


# ---------------------------------------------------------------------------------------------
# Harmonic drives. With H = H0 + sum_n [A_n cos(n w t) + B_n sin(n w t)], the part of each
# harmonic even about t* must be chiral odd and the odd part chiral even (HarmonicDrive
# docstring). SSH hoppings are chiral odd, a staggered potential u sigma_z chiral even.

T_H = 3.0
OM = 2 * math.pi / T_H

HARMONIC = {
    # name: (v(t), w(t), u(t), t1 / T derived by hand)
    # cos(w t) of chiral-odd terms is even about 0 and T/2.
    "cos": (lambda t: 0.5 + 0.4 * math.cos(OM * t), lambda t: 1.0, lambda t: 0.0, 0.0),
    # sin(w t) is even about T/4 and 3T/4.
    "sin": (lambda t: 0.5 + 0.4 * math.sin(OM * t), lambda t: 1.0, lambda t: 0.0, 0.25),
    # cos(w t + 0.3) on both bonds: even about t* = -0.3 / w, i.e. t*/T = 0.5 - 0.3/(2 pi).
    "phase": (lambda t: 0.5 + 0.4 * math.cos(OM * t + 0.3),
              lambda t: 1.0 - 0.3 * math.cos(OM * t + 0.3), lambda t: 0.0,
              0.5 - 0.3 / (2 * math.pi)),
    # sin(w t) on w and cos(2 w t) on v: sin is even about T/4, cos(2 w t) about every T/4.
    "two harmonics": (lambda t: 0.5 + 0.4 * math.cos(2 * OM * t),
                      lambda t: 1.0 + 0.3 * math.sin(OM * t), lambda t: 0.0, 0.25),
    # A chiral-even staggered potential sin(w t) is odd about 0: frames at 0 and T/2.
    "odd potential": (lambda t: 0.5 + 0.4 * math.cos(OM * t), lambda t: 1.0,
                      lambda t: 0.3 * math.sin(OM * t), 0.0),
}


def harmonic(v, w, u, **kw) -> HarmonicDrive:
    return HarmonicDrive(T_H, lambda t: ssh(v(t), w(t), u(t)), **kw)


@pytest.mark.parametrize("name", HARMONIC)
def test_harmonic_frames_are_chiral_symmetric(name):
    v, w, u, t1_exact = HARMONIC[name]
    drive = harmonic(v, w, u, tol=1e-9)
    t1, t2 = drive.symmetric_times(SZ)
    assert (t1 / T_H, t2 / T_H) == pytest.approx((t1_exact, t1_exact + 0.5), abs=1e-12)
    k = np.array(KS)[:, None]
    for t in (t1, t2):
        ref = np.array([ivp_operator(lambda s, kk=kk: bloch(v(s), w(s), kk, u(s)), t, t + T_H)
                        for kk in KS])
        assert chiral_defect(ref) < 1e-9
        # The converged frame of the drive is that of solve_ivp.
        np.testing.assert_allclose(floquet_operator(drive, k, start=t), ref, atol=1e-7)
        # Equal slices from t* are symmetric about the frame's centre, so even the coarsest
        # slicing (8 slices, far from converged) keeps G U G = U^dagger to rounding.
        coarse = floquet_operator(drive, k, start=t, slicing=Slicing(8, 0.0, False))
        assert np.max(np.abs(coarse - ref)) > 1e-6
        assert chiral_defect(coarse) < 1e-13
    # Off the symmetric times the frame is not chiral symmetric.
    assert chiral_defect(floquet_operator(drive, k, start=t1 + 0.1 * T_H)) > 1e-3


@pytest.mark.parametrize("v, w, u, why", [
    # cos on v needs t* in {0, T/2}, sin on w needs t* in {T/4, 3T/4}.
    (lambda t: 0.5 + 0.4 * math.cos(OM * t), lambda t: 1.0 + 0.3 * math.sin(OM * t),
     lambda t: 0.0, "candidates of harmonic 1"),
    # Different phases of the two bonds.
    (lambda t: 0.5 + 0.4 * math.cos(OM * t), lambda t: 1.0 + 0.3 * math.cos(OM * t + 0.4),
     lambda t: 0.0, "candidates of harmonic 1"),
    # A chiral-even potential even about the mirror points of the bonds.
    (lambda t: 0.5 + 0.4 * math.cos(OM * t), lambda t: 1.0, lambda t: 0.3 * math.cos(OM * t),
     "candidates of harmonic 1"),
    # A static chiral-even potential breaks the symmetry at every time.
    (lambda t: 0.5 + 0.4 * math.cos(OM * t), lambda t: 1.0, lambda t: 0.2,
     "time average of H"),
])
def test_harmonic_drive_without_symmetric_frame_raises(v, w, u, why):
    drive = harmonic(v, w, u)
    with pytest.raises(ValueError, match="no chiral-symmetric starting time.*" + why):
        drive.symmetric_times(SZ)
    # ... and indeed no frame on a fine grid of starting times is chiral symmetric (solve_ivp).
    defects = [chiral_defect(ivp_operator(lambda s, t0=t0: bloch(v(s), w(s), 0.9, u(s)),
                                          t0, t0 + T_H))
               for t0 in np.linspace(0, T_H, 24, endpoint=False)]
    assert min(defects) > 1e-4


def test_harmonic_time_reversal_without_chiral():
    # Without a chiral operator t* needs H(t* + s) = H(t* - s): the cosine drive has t* = 0.
    v, w, u, _ = HARMONIC["cos"]
    assert harmonic(v, w, u).symmetric_times() == pytest.approx((0.0, T_H / 2))


# ---------------------------------------------------------------------------------------------
# Kicks: the free SSH evolution is chiral odd, so t* must map the kicks onto their chiral images
# with time order reversed; a kick on t* is split exp(-i K/2) ... exp(-i K/2) in that frame.

H0 = (0.4, 0.2)
KA, KB = (0.0, 1.3), (0.7, 0.0)


def expm_frame(h0, kicks, start, T, k):
    """The frame from ``start`` as a product of scipy.linalg.expm, kicks ``(time, (v, w))`` at
    distinct times; a kick at ``start`` is split into halves at both ends of the period."""
    events = []
    for t, vw in kicks:
        dt = (t - start) % T
        if min(dt, T - dt) < 1e-12:
            events += [(0.0, 0.5, vw), (T, 0.5, vw)]
        else:
            events.append((dt, 1.0, vw))
    u = np.eye(2, dtype=complex)
    now = 0.0
    for dt, share, vw in sorted(events, key=lambda e: e[0]):
        u = sl.expm(-1j * share * bloch(*vw, k)) @ sl.expm(-1j * (dt - now) * bloch(*h0, k)) @ u
        now = dt
    return sl.expm(-1j * (T - now) * bloch(*h0, k)) @ u


KICKED = {
    # name: (period, kicks (time, (v, w)), t1 derived by hand)
    # One kick at 0: mirror points on the kick (t* = 0) and half-way between kicks (T/2).
    "one kick": (2.0, ((0.0, KA),), 0.0),
    # Kicks KA at 0.3 and 1.5 and KB at 0.9: mirror point at 0.9 (on KB) and 1.9.
    "three kicks": (2.0, ((0.3, KA), (0.9, KB), (1.5, KA)), 0.9),
    # KA at 0.4 and KB at 1.4, half a period apart: each is its own mirror image.
    "two kicks": (2.0, ((0.4, KA), (1.4, KB)), 0.4),
    # KA at 0.4 and at 1.2: mirror points half-way between them, 0.8 and 1.8.
    "equal pair": (2.0, ((0.4, KA), (1.2, KA)), 0.8),
}


@pytest.mark.parametrize("name", KICKED)
def test_kick_frames_are_chiral_symmetric(name):
    T, kicks, t1_exact = KICKED[name]
    drive = KickDrive(T, ssh(*H0), tuple((t, ssh(*vw)) for t, vw in kicks))
    t1, t2 = drive.symmetric_times(SZ)
    assert (t1, t2) == pytest.approx((t1_exact, (t1_exact + T / 2) % T), abs=1e-12)
    k = np.array(KS)[:, None]
    for t in (t1, t2):
        ref = np.array([expm_frame(H0, kicks, t, T, kk) for kk in KS])
        assert chiral_defect(ref) < 1e-12
        np.testing.assert_allclose(floquet_operator(drive, k, start=t), ref, atol=1e-12)
    # The frames are unitarily equivalent to the plain product from t = 0 (same quasienergies).
    u0 = floquet_operator(drive, k)
    np.testing.assert_allclose(np.sort(np.angle(np.linalg.eigvals(u0)), -1),
                               np.sort(np.angle(np.linalg.eigvals(
                                   floquet_operator(drive, k, start=t1))), -1), atol=1e-10)


def test_simultaneous_kicks_split_in_the_middle():
    # Kicks KA, KB, KA at one time form a palindrome: a frame on them starts with KB/2 then KA
    # and ends with KA then KB/2 (the order of kicks at one time is the order given).
    T = 2.0
    drive = KickDrive(T, ssh(*H0), ((0.5, ssh(*KA)), (0.5, ssh(*KB)), (0.5, ssh(*KA))))
    t1, t2 = drive.symmetric_times(SZ)
    assert (t1, t2) == pytest.approx((0.5, 1.5))
    for kk in KS:
        a, b = sl.expm(-1j * bloch(*KA, kk)), sl.expm(-0.5j * bloch(*KB, kk))
        ref = b @ a @ sl.expm(-1j * T * bloch(*H0, kk)) @ a @ b
        np.testing.assert_allclose(floquet_operator(drive, np.array([[kk]]), start=t1)[0], ref,
                                   atol=1e-12)
        assert chiral_defect(ref) < 1e-12


@pytest.mark.parametrize("base, kicks", [
    # Kicks at 0.3, 0.9 and 1.4: no reflection maps the three times onto themselves.
    (H0, ((0.3, KA), (0.9, KB), (1.4, KA))),
    # KA at 0.4 and KB at 1.2: the reflection that swaps them needs KA = KB; those about
    # either kick send the other to a time without a kick.
    (H0, ((0.4, KA), (1.2, KB))),
    # Two different kicks at one time (KA then KB) read KB then KA in the mirror.
    (H0, ((0.3, KA), (0.3, KB))),
])
def test_kick_drive_without_symmetric_frame_raises(base, kicks):
    T = 2.0
    drive = KickDrive(T, ssh(*base), tuple((t, ssh(*vw)) for t, vw in kicks))
    with pytest.raises(ValueError, match="kick drive has no chiral-symmetric starting time"):
        drive.symmetric_times(SZ)
    # The product of expm written here has no chiral-symmetric frame on a grid of times that
    # holds every candidate (kick times and the points half-way between them).
    if len({t for t, _ in kicks}) == len(kicks):
        starts = np.arange(0.05, T, 0.05)
        defects = [chiral_defect(expm_frame(base, kicks, s, T, 0.9))
                   for s in starts if all(abs(s - t) > 1e-9 for t, _ in kicks)]
        assert min(defects) > 1e-4


def test_kick_drive_with_chiral_breaking_free_evolution_raises():
    drive = KickDrive(2.0, ssh(0.4, 0.2, u=0.3), ((0.0, ssh(*KA)),))
    with pytest.raises(ValueError, match="Hamiltonian between kicks is not chiral odd"):
        drive.symmetric_times(SZ)


# ---------------------------------------------------------------------------------------------
# Ramps: steps joined by linear ramps are symmetric about the steps' mirror points; a ramp with
# another profile is not.

A_VW, B_VW = (1.0, 0.37), (-0.8, 1.4)


def ramp_hamiltonian(T, r, profile=lambda s: s):
    """H(t) of two steps of T/2 joined by ramps of width r centred on the switches at 0, T/2,
    the parameters moving by ``profile(s)`` from one step to the next."""
    def at(t, k):
        t = t % T
        for centre, (p, q) in ((0.0, (B_VW, A_VW)), (T / 2, (A_VW, B_VW)), (T, (B_VW, A_VW))):
            if abs(t - centre) < r / 2:
                s = profile((t - centre) / r + 0.5)
                return bloch(*(np.array(p) * (1 - s) + np.array(q) * s), k)
        return bloch(*(A_VW if t < T / 2 else B_VW), k)
    return at


@pytest.mark.parametrize("r", [0.3, 1.5])
def test_ramp_frames_are_chiral_symmetric(r):
    T = 3.0
    a, b = ssh(*A_VW), ssh(*B_VW)
    drive = RampDrive(T, ((T / 2, a), (T / 2, b)), r, tol=1e-10)
    t1, t2 = drive.symmetric_times(SZ)
    assert (t1, t2) == pytest.approx((T / 4, 3 * T / 4))  # the step centres
    at = ramp_hamiltonian(T, r)
    k = np.array(KS)[:, None]
    for t in (t1, t2):
        kinks = [c + d * r / 2 for c in (0.0, T / 2, T, 3 * T / 2) for d in (-1, 1)]
        ref = np.array([ivp_operator(lambda s, kk=kk: at(s, kk), t, t + T, kinks=kinks)
                        for kk in KS])
        assert chiral_defect(ref) < 1e-9
        np.testing.assert_allclose(floquet_operator(drive, k, start=t), ref, atol=1e-7)
    # Two steps are time-reversal symmetric about their centres, with or without G.
    assert drive.symmetric_times() == pytest.approx((T / 4, 3 * T / 4))


def test_ramp_with_asymmetric_profile_raises():
    # Parameters moving as s^2 across each ramp: the steps are symmetric about T/4 and 3T/4,
    # but the ramp into b (s^2) is not the mirror image of the ramp into a run backwards
    # (1 - (1 - s)^2), so no frame is chiral symmetric (checked with solve_ivp).
    T, r = 3.0, 0.6
    a, b = ssh(*A_VW), ssh(*B_VW)
    vw = {0: A_VW, 1: B_VW}

    def between(i, j, s):
        p, q = np.array(vw[i]), np.array(vw[j])
        return ssh(*(p + (q - p) * s ** 2))

    drive = RampDrive(T, ((T / 2, a), (T / 2, b)), r, between)
    assert StepDrive(T, ((T / 2, a), (T / 2, b))).symmetric_times(SZ) == (T / 4, 3 * T / 4)
    with pytest.raises(ValueError, match="the ramps between them are not"):
        drive.symmetric_times(SZ)
    at = ramp_hamiltonian(T, r, profile=lambda s: s ** 2)
    assert chiral_defect(ivp_operator(lambda s: at(s, 0.9), T / 4, T / 4 + T)) > 1e-4


# ---------------------------------------------------------------------------------------------
# Low-frequency harmonic SSH chain: |nu| = 2 (Asboth, Tarasinski and Delplace 2014), checked
# against the chiral charges of the end modes of an open chain.

V0, VA, W0, WA, T_LOW, PHASE = 0.6, -0.5, 0.0, 1.2, 8.8, 0.7


def low_frequency_bonds(t: float) -> tuple[float, float]:
    c = math.cos(2 * math.pi * t / T_LOW + PHASE)
    return V0 + VA * c, W0 + WA * c


def ssh_open(n: int, v: float, w: float) -> np.ndarray:
    """Open SSH chain of n cells, sites (A_m, B_m) at 2m, 2m + 1 (Asboth et al. 2016, eq. 1.1)."""
    h = np.zeros((2 * n, 2 * n))
    for m in range(n):
        h[2 * m, 2 * m + 1] = h[2 * m + 1, 2 * m] = v
        if m + 1 < n:
            h[2 * m + 1, 2 * m + 2] = h[2 * m + 2, 2 * m + 1] = w
    return h


def left_end_charges(t1: float, cells: int = 40) -> tuple[float, float]:
    """Tr(G P) over the left half of an open chain for the projectors P on the eigenvectors of
    U(t1 + T, t1) (solve_ivp) with eigenphase within 0.3 of 0 and of pi."""
    n = 2 * cells
    hv, hw = ssh_open(cells, 1.0, 0.0), ssh_open(cells, 0.0, 1.0)

    def h(t):
        v, w = low_frequency_bonds(t)
        return v * hv + w * hw

    u = ivp_operator(h, t1, t1 + T_LOW, n)
    g = np.where(np.arange(n) % 2 == 0, 1.0, -1.0)
    assert chiral_defect(u, np.diag(g)) < 1e-8
    lam, vec = np.linalg.eig(u)
    out = []
    for target in (1.0, -1.0):
        q, _ = np.linalg.qr(vec[:, np.abs(np.angle(lam * target)) < 0.3])
        out.append(float(np.real(np.einsum("ia,i,ia->", q.conj(), g * (np.arange(n) < cells),
                                           q))))
    return out[0], out[1]


def test_low_frequency_harmonic_chain_invariants_equal_end_charges():
    drive = HarmonicDrive(T_LOW, lambda t: ssh(*low_frequency_bonds(t)), tol=1e-8)
    t1, t2 = drive.symmetric_times(SZ)
    # Both bonds go as cos(w t + phase): even about t* = -phase / w.
    assert t1 / T_LOW == pytest.approx(0.5 - PHASE / (2 * math.pi), abs=1e-12)
    r = cf.chiral_windings(drive, SZ)
    assert r.reason == Reason.OK
    assert max(abs(r.nu_0), abs(r.nu_pi)) == 2
    q0, qpi = left_end_charges(t1)
    assert abs(q0 - round(q0)) < 1e-3 and abs(qpi - round(qpi)) < 1e-3
    assert (r.nu_0, r.nu_pi) == (round(q0), round(qpi))
    # The end-mode measurement counts in the same frame (its chiral charges per end).
    pt = Point(params={}, build=lambda q: ssh(*low_frequency_bonds(0.0)), drive=drive)
    frame, chiral = _chiral_frame(pt)
    assert frame is not None and chiral is not None
    out = MEASUREMENTS["end_modes"].func(pt, cells=40, max_cells=80)
    assert out["reason"] == {"0": Reason.OK, "pi": Reason.OK}
    assert (out["end_modes_0_left"], out["end_modes_pi_left"]) == (abs(r.nu_0), abs(r.nu_pi))
    assert (out["end_modes_0_right"], out["end_modes_pi_right"]) == (abs(r.nu_0),
                                                                      abs(r.nu_pi))
