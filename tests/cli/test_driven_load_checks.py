"""Driven jobs that the loader must refuse or accept: frame times that are not time-symmetric
partners, and custom-model coefficients that only the drive steps set (issue 12)."""

import numpy as np
import pytest
from scipy.linalg import expm
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.jobfile import load_job
from sweepcli.physics.drives.evolution import evolve
from sweepcli.store import Results

# The two-step chiral chain of jobs/driven-chain.toml: SSH bonds (v intra-cell, w inter-cell),
# v1 = 1, a for T/2, then v = -0.8, w = 1.4 for T/2. The segment centres T/4 and 3T/4 are its
# two time-symmetric points.
CHAIN = """
[model]
name = "ssh"
[sweep]
T = [2.0, 7.55]
[drive]
kind = "steps"
period = "T"
[[drive.step]]
span = 0.5
set = { v = 1.0, w = 0.37 }
[[drive.step]]
span = 0.5
set = { v = -0.8, w = 1.4 }
[measure.chiral_windings]
TIMES
[output]
path = "OUT"
"""


def invoke(*args):
    return CliRunner().invoke(app, [str(a) for a in args])


def refused(tmp_path, text):
    job = tmp_path / "bad.toml"
    job.write_text(text.replace("OUT", str(tmp_path / "bad.h5")))
    result = invoke("run", job, "--no-progress")
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output
    lines = [ln for ln in result.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, result.stderr
    assert not (tmp_path / "bad.h5").exists()
    return lines[0].removeprefix("error: ").replace(str(job), "JOB")


@pytest.mark.parametrize("times", ["[0.5, 0.5]", "[0.25, 0.5]", "[0.25, 1.25]", "[0.1, 0.6, 0.2]"])
def test_frame_times_that_are_not_partners_are_refused(tmp_path, times):
    msg = refused(tmp_path, CHAIN.replace("TIMES", f"times = {times}"))
    assert msg == ("JOB: [measure.chiral_windings] times must be one or two starting times as "
                   "fractions of the period in [0, 1), the second the time-symmetric partner of "
                   f"the first (t2 = t1 + 0.5 modulo 1); got {times}.")


def test_frame_times_off_the_symmetry_points_are_refused(tmp_path):
    # The segment boundaries 0 and T/2 of two unequal steps are partners but not mirror points:
    # H(0 + s) = step 1, H(0 - s) = step 2.
    msg = refused(tmp_path, CHAIN.replace("TIMES", "times = [0.0, 0.5]"))
    assert msg.startswith("JOB: [measure.chiral_windings] times must be time-symmetric points of "
                          "the drive (where G U G = U^dagger); got [0.0, 0.5]. At t = 0 T the "
                          "frame deviates by ")


def ssh_open(n: int, v: float, w: float) -> np.ndarray:
    """Open SSH chain of n cells, sites (A_m, B_m) at 2m, 2m + 1 (Asboth, Oroszlany and Palyi
    2016, ch. 1), written here independently of the project's lattice code."""
    h = np.zeros((2 * n, 2 * n))
    for m in range(n):
        h[2 * m, 2 * m + 1] = h[2 * m + 1, 2 * m] = v
        if m + 1 < n:
            h[2 * m + 1, 2 * m + 2] = h[2 * m + 2, 2 * m + 1] = w
    return h


def left_end_chiral_charges(T: float, n: int = 60) -> tuple[int, int]:
    """Signed numbers of quasienergy-0 and pi modes on the left end of an open chain, in the
    frame starting at t1 = T/4: Tr(P G) over the left half for the projector P on the
    eigenvectors of U(t1 + T, t1) with eigenphase within 0.05 of 0 (resp. pi), G = +1 on A, -1 on B.

    In a time-symmetric frame G U G = U^dagger, so P commutes with G and these traces are
    integers; by Asboth, Tarasinski and Delplace, PRB 90, 125143 (2014) they are the
    invariants nu_0 and nu_pi of that frame (the count of modes per end is their magnitude)."""
    h1, h2 = ssh_open(n, 1.0, 0.37), ssh_open(n, -0.8, 1.4)
    half1 = expm(-1j * h1 * T / 4)
    u = half1 @ expm(-1j * h2 * T / 2) @ half1  # later times on the left
    lam, vec = np.linalg.eig(u)
    g_left = np.where(np.arange(2 * n) % 2 == 0, 1.0, -1.0) * (np.arange(2 * n) < n)
    out = []
    for target in (1.0, -1.0):
        # In-gap modes of the two ends hybridise by ~1e-6 rad at 60 cells; the bulk quasienergy
        # bands stay > 0.3 rad away from 0 and pi at these periods.
        sel = np.abs(np.angle(lam * target)) < 0.05
        q, _ = np.linalg.qr(vec[:, sel])
        out.append(round(float(np.real(np.einsum("ia,i,ia->", q.conj(), g_left, q)))))
    return out[0], out[1]


def test_partner_times_give_the_end_mode_charges_of_an_open_chain(tmp_path):
    # Asboth, Tarasinski and Delplace, PRB 90, 125143 (2014): nu_0, nu_pi of a step-driven
    # chiral chain from the frames at the two time-symmetric points; values above 1 at low
    # frequency (T = 7.55 here). Expected values: the chiral charges of the end modes of an
    # open 60-cell chain, computed above with scipy.linalg.expm.
    expected = [left_end_chiral_charges(T) for T in (2.0, 7.55)]
    assert max(max(abs(a), abs(b)) for a, b in expected) == 2
    got = {}
    for label, times in (("partners", "times = [0.25, 0.75]"), ("one", "times = [0.25]"),
                         ("swapped", "times = [0.75, 0.25]"), ("auto", "")):
        job = tmp_path / f"{label}.toml"
        out = tmp_path / f"{label}.h5"
        job.write_text(CHAIN.replace("TIMES", times).replace("OUT", str(out)))
        result = invoke("run", job, "--no-progress")
        assert result.exit_code == 0, result.output
        r = Results.read(out)
        got[label] = [(int(r.data["nu_0"][i]), int(r.data["nu_pi"][i])) for i in range(2)]
    assert got["partners"] == got["one"] == got["auto"] == expected
    # Exchanging the frames flips the sign of nu_pi and keeps nu_0 (floquet.chiral_windings).
    assert got["swapped"] == [(a, -b) for a, b in expected]


# A custom chain whose coefficients v, w are set only inside [[drive.step]].
CUSTOM = """
[model]
name = "custom"
lattice = "chain"
positions = [[0.0], [0.5]]
operators = { chiral = "z" }
[[model.onsite]]
matrix = "x"
coeff = "v"
[[model.hopping]]
d = [1]
matrix = [[0, 0], [1, 0]]
coeff = "w"
[sweep]
T = [2.0, 7.55]
[drive]
kind = "steps"
period = "T"
[[drive.step]]
span = 0.5
set = { v = 1.0, w = 0.37 }
[[drive.step]]
span = 0.5
set = SECOND
[measure.chiral_windings]
[output]
path = "OUT"
"""


def test_custom_coefficients_set_by_every_step_need_no_static_value(tmp_path):
    job = tmp_path / "custom.toml"
    out = tmp_path / "custom.h5"
    job.write_text(CUSTOM.replace("SECOND", "{ v = -0.8, w = 1.4 }").replace("OUT", str(out)))
    loaded = load_job(job)
    # The drive the job builds is the two-step evolution written here with scipy.linalg.expm:
    # H(k) = v sigma_x + (w e^{ik} |B><A| + h.c.) per step.
    k = np.array([[0.3], [1.7], [-2.4]])
    u = evolve([(d, tb.bloch(k)) for d, tb in loaded.point(1).drive.factors()])
    def h(v, w, kj):
        off = v + w * np.exp(-1j * kj)
        return np.array([[0, off], [np.conj(off), 0]])

    for j, kj in enumerate(k[:, 0]):
        ref = expm(-1j * h(-0.8, 1.4, kj) * 7.55 / 2) @ expm(-1j * h(1.0, 0.37, kj) * 7.55 / 2)
        assert np.allclose(u[j], ref, atol=1e-10)
    result = invoke("run", job, "--no-progress")
    assert result.exit_code == 0, result.output
    r = Results.read(out)
    expected = [left_end_chiral_charges(T) for T in (2.0, 7.55)]
    assert [(int(r.data["nu_0"][i]), int(r.data["nu_pi"][i])) for i in range(2)] == expected


def test_custom_coefficient_missing_from_one_step_is_refused(tmp_path):
    msg = refused(tmp_path, CUSTOM.replace("SECOND", "{ v = -0.8 }"))
    assert msg == ("JOB: [params] w is required by model 'custom' and must be a real number; "
                   "it is neither in [params] nor in [sweep] nor set by every [[drive.step]].")
