"""Ramped steps (``kind = "ramp"``) against references written here: the Schroedinger equation
i dU/dt = H(t) U integrated by scipy.integrate.solve_ivp (DOP853) with H(t) interpolated by
hand, and the limit ramp -> 0, which is the abrupt step drive (a product of scipy.linalg.expm).
"""

from __future__ import annotations

import tomllib

import numpy as np
import pytest
import scipy.linalg as sl
from scipy.integrate import solve_ivp

from sweepcli.errors import JobError
from sweepcli.jobfile import build_job
from sweepcli.physics.drives.evolution import floquet_evolution
from sweepcli.physics.drives.ramp import RampDrive
from sweepcli.physics.drives.steps import StepDrive
from sweepcli.physics.models import MODELS

QWZ = MODELS["qwz"].func
T = 2.0
MASSES = (1.6, -0.4, 2.2)  # three steps, so the ramp from the last to the first is exercised
SPANS = (0.3, 0.45, 0.25)


def mass_at(t: float, ramp: float) -> float:
    """m(t) by hand: each switch time b_j is the middle of a linear ramp of length ``ramp``."""
    b = np.concatenate([[0.0], np.cumsum(SPANS)]) * T
    t = t % T
    for j in range(len(MASSES) + 1):
        bj = b[j]
        if abs(t - bj) <= ramp / 2 or abs(t - T - bj) <= ramp / 2:
            tt = t if abs(t - bj) <= ramp / 2 else t - T
            s = (tt - bj) / ramp + 0.5
            return (1 - s) * MASSES[(j - 1) % 3] + s * MASSES[j % 3]
    return MASSES[int(np.searchsorted(b, t, side="right")) - 1]


def reference(k: np.ndarray, ramp: float) -> np.ndarray:
    """U(T, 0) at one momentum from solve_ivp, split at the kinks of m(t)."""
    b = np.concatenate([[0.0], np.cumsum(SPANS)]) * T
    kinks = np.unique(np.clip(np.concatenate([b - ramp / 2, b + ramp / 2, [0.0, T]]), 0, T))
    u = np.eye(2, dtype=complex)
    for t0, t1 in zip(kinks[:-1], kinks[1:]):
        def rhs(t, y):
            h = QWZ(m=mass_at(t, ramp)).bloch(k)
            return (-1j * h @ y.reshape(2, 2)).ravel()
        sol = solve_ivp(rhs, (t0, t1), u.ravel(), method="DOP853", rtol=1e-12, atol=1e-13)
        u = sol.y[:, -1].reshape(2, 2)
    return u


def drive(ramp: float) -> RampDrive:
    return RampDrive(T, tuple((sp * T, QWZ(m=m)) for sp, m in zip(SPANS, MASSES)), ramp,
                     tol=1e-10)


def test_ramped_steps_equal_the_schroedinger_equation():
    k = np.array([[0.3, -1.1], [2.0, 0.7], [np.pi, 0.0]])
    ev = floquet_evolution(drive(0.4), k)
    assert ev.converged and ev.slices > 8
    for i in range(len(k)):
        np.testing.assert_allclose(ev.u[i], reference(k[i], 0.4), atol=1e-8)


def test_a_frame_inside_a_ramp_is_the_same_drive_shifted():
    """U(t0 + T, t0) = U(t0, 0) U(T, 0) U(t0, 0)^-1 with t0 in the middle of a ramp."""
    d, k, t0 = drive(0.4), np.array([[0.9, 0.2]]), 0.1
    full = floquet_evolution(d, k).u[0]
    head = floquet_evolution(d, k, stop=t0, slicing=None).u[0]
    shifted = floquet_evolution(d, k, start=t0).u[0]
    np.testing.assert_allclose(shifted, head @ full @ np.conj(head.T), atol=1e-9)


def test_a_vanishing_ramp_is_the_step_drive():
    k = np.array([[0.5, 1.3], [-2.2, 0.1]])
    steps = StepDrive(T, tuple((sp * T, QWZ(m=m)) for sp, m in zip(SPANS, MASSES)))
    for i in range(len(k)):
        exact = np.eye(2, dtype=complex)
        for d, tb in steps.factors():
            exact = sl.expm(-1j * d * tb.bloch(k[i])) @ exact
        errs = [np.max(np.abs(floquet_evolution(drive(r), k[i:i + 1]).u[0] - exact))
                for r in (1e-2, 1e-4, 1e-6)]
        # The difference is O(ramp): it falls with the ramp and is gone at 1e-6.
        assert errs[0] > errs[1] > errs[2] and errs[2] < 1e-5


def test_the_ramp_must_fit_in_the_shortest_step():
    with pytest.raises(ValueError, match="shortest step"):
        drive(0.25 * T + 0.1)
    with pytest.raises(ValueError, match="shortest step"):
        drive(0.0)


JOB = """
[model]
name = "qwz"
[sweep]
m1 = [1.6]
[drive]
kind = "ramp"
period = 2.0
ramp = RAMP
[[drive.step]]
span = 0.3
set = { m = "m1" }
[[drive.step]]
span = 0.45
set = { m = -0.4 }
[[drive.step]]
span = 0.25
set = { m = 2.2 }
[measure.quasienergy_gaps]
"""


def job(text: str):
    return build_job(tomllib.loads(text), text=text, path="ramp.toml")


def test_the_job_file_builds_the_same_ramped_drive():
    job_ = job(JOB.replace("RAMP", "0.2"))  # a fraction of the period: 0.4 time units
    k = np.array([[0.3, -1.1]])
    u = floquet_evolution(job_.point(0).drive, k).u[0]
    np.testing.assert_allclose(u, reference(k[0], 0.4), atol=1e-7)


def test_bad_ramps_are_refused_with_one_line():
    with pytest.raises(JobError) as e:
        job(JOB.replace("RAMP", "0.3"))
    assert str(e.value) == ("ramp.toml: [drive] ramp must be a fraction of the period in "
                            "(0, 0.25] (the shortest step); it is 0.3 at grid point 0.")
    with pytest.raises(JobError) as e:
        job(JOB.replace("RAMP", "0.2").replace('kind = "ramp"', 'kind = "ramps"'))
    assert str(e.value) == ("ramp.toml: [drive] kind must be one of 'static', 'harmonic', "
                            "'kicks', 'steps', 'ramp'; got 'ramps'. Did you mean 'ramp'?")
    with pytest.raises(JobError, match=r"\[drive\] ramp must be the ramp time at each switch"):
        job(JOB.replace("ramp = RAMP\n", ""))
