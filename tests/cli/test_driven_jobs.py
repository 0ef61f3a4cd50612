"""Driven jobs through the job file: the [drive] table builds the same drive as the physics
core, a frequency sweep finds the pi-gap closing at its analytic frequency, and bad drives are
refused with one clear message."""

import math

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.jobfile import load_job
from sweepcli.physics import chiral_frames as cf
from sweepcli.physics.drives.steps import StepDrive
from sweepcli.physics.models import MODELS
from sweepcli.store import Results

from .test_end_to_end import assert_same_content

CHAIN = """
[model]
name = "ssh"
[params]
v1 = 1.0
[sweep]
T = [3.0, 7.55]
a = [0.37, 1.2]
[drive]
kind = "steps"
period = "T"
[[drive.step]]
span = 0.5
set = { v = "v1", w = "a" }
[[drive.step]]
span = "1/2"
set = { v = "-0.8*v1", w = "1.4*v1" }
[measure.quasienergy_gaps]
[measure.chiral_windings]
[output]
path = "OUT"
"""


def invoke(*args):
    return CliRunner().invoke(app, [str(a) for a in args])


def test_step_drive_from_the_job_equals_the_physics_drive(tmp_path):
    job = tmp_path / "chain.toml"
    job.write_text(CHAIN.replace("OUT", str(tmp_path / "c.h5")))
    for workers, out in (("1", "one.h5"), ("2", "two.h5")):
        result = invoke("run", job, "-o", tmp_path / out, "-w", workers, "--chunk-size", "1",
                        "--no-progress")
        assert result.exit_code == 0, result.output
    assert_same_content(tmp_path / "one.h5", tmp_path / "two.h5")
    r = Results.read(tmp_path / "one.h5")
    ssh = MODELS["ssh"].func
    for i, T in enumerate((3.0, 7.55)):
        for j, a in enumerate((0.37, 1.2)):
            d = StepDrive(T, ((T / 2, ssh(v=1.0, w=a)), (T / 2, ssh(v=-0.8, w=1.4))))
            ref = cf.chiral_windings(d, ssh(v=1.0).operators["chiral"])
            assert (r.data["nu_0"][i, j], r.data["nu_pi"][i, j]) == (ref.nu_0, ref.nu_pi)
    # T = 7.55, a = 0.37 is one of the low-frequency points where an invariant reaches 2.
    assert max(abs(r.data["nu_0"][1, 0]), abs(r.data["nu_pi"][1, 0])) == 2


def test_frequency_sweep_closes_the_pi_gap_at_the_analytic_frequency(tmp_path):
    # v for T/2, then w for T/2 (each a flat band): U(k) = exp(-i th2 n(k).s) exp(-i th1 s_x) with
    # th1 = v T/2, th2 = w T/2; at k = 0 both rotate about s_x, so U = exp(-i (th1 + th2) s_x) has
    # eigenvalue -1 when th1 + th2 = pi, i.e. omega = 2 pi / T = v + w (analytic).
    v, w = 0.5, 1.0
    omegas = [1.2, 1.35, 1.5, 1.65, 1.8]
    job = tmp_path / "omega.toml"
    job.write_text(f"""
[model]
name = "ssh"
[sweep]
omega = {omegas}
[drive]
kind = "steps"
omega = "omega"
[[drive.step]]
span = 0.5
set = {{ v = {v}, w = 0 }}
[[drive.step]]
span = 0.5
set = {{ v = 0, w = {w} }}
[measure.quasienergy_gaps]
[output]
path = "{tmp_path / 'o.h5'}"
""")
    assert invoke("run", job, "--no-progress").exit_code == 0
    gap_pi = Results.read(tmp_path / "o.h5").data["gap_pi"]
    assert gap_pi[2] < 1e-8 and np.all(gap_pi[[0, 1, 3, 4]] > 1e-2)
    # Away from the closing: gap_pi = (2/T)|pi - th1 - th2| (the k = 0 bands are nearest pi).
    for om, g in zip(omegas, gap_pi):
        T = 2 * math.pi / om
        assert g == pytest.approx(2 / T * abs(math.pi - (v + w) * T / 2), abs=1e-6)


BAD = {
    "spans do not add up to one period": (
        'span = "1/2"', 'span = "0.4"',
        "JOB: [[drive.step]] spans must add up to one period (1); they add up to 0.9 at grid "
        "point 0."),
    "negative period": (
        'period = "T"', 'period = "-T"',
        "JOB: [drive] period must give a positive, finite period; it gives -3 at grid point 0."),
    "unknown parameter in a step": (
        'set = { v = "-0.8*v1", w = "1.4*v1" }', 'set = { vv = 1.0 }',
        "JOB: [drive.step.1.set] has an unknown model parameter 'vv' (allowed: v, w). Did you "
        "mean 'v'?"),
}


@pytest.mark.parametrize("case", list(BAD))
def test_bad_drives(tmp_path, case):
    old, new, expected = BAD[case]
    job = tmp_path / "bad.toml"
    out = tmp_path / "bad.h5"
    job.write_text(CHAIN.replace("OUT", str(out)).replace(old, new, 1))
    result = invoke("run", job)
    assert result.exit_code == 2, result.output
    assert result.stderr.strip().replace(str(job), "JOB") == "error: " + expected
    assert not out.exists()


HARMONIC = """
[model]
name = "qwz"
[params]
m = 1.0
[sweep]
A = [0.1, 0.2]
[drive]
kind = "harmonic"
omega = 12.0
[[drive.term]]
param = "mm"
amplitude = "A"
[measure.quasienergy_gaps]
[output]
path = "OUT"
"""


def test_harmonic_term_naming_an_unknown_parameter(tmp_path):
    job = tmp_path / "h.toml"
    job.write_text(HARMONIC.replace("OUT", str(tmp_path / "h.h5")))
    result = invoke("check", job)
    assert result.exit_code == 2
    assert result.stderr.strip().replace(str(job), "JOB") == (
        "error: JOB: [drive.term.0] param must be a model parameter (m, t); got 'mm'. Did you "
        "mean 'm'?")


def test_harmonic_drive_reproduces_the_static_chern_number_at_high_frequency(tmp_path):
    # A weak, fast modulation leaves the Floquet bands close to the static ones: the lower band
    # Chern number of QWZ at m = 1 is -1 (see tests/physics; Qi, Wu and Zhang 2006).
    job = tmp_path / "h.toml"
    text = HARMONIC.replace("OUT", str(tmp_path / "h.h5")).replace('"mm"', '"m"')
    text = text.replace("[measure.quasienergy_gaps]",
                        "[measure.quasienergy_gaps]\n[measure.floquet_chern]")
    job.write_text(text)
    assert invoke("run", job, "--no-progress").exit_code == 0
    r = Results.read(tmp_path / "h.h5")
    assert list(r.data["floquet_chern_lower"]) == [-1, -1]
    assert list(r.data["floquet_chern_upper"]) == [1, 1]


def test_line_operator_must_commute_on_the_line(tmp_path):
    job = tmp_path / "line.toml"
    job.write_text(f"""
[model]
name = "bhz_corner"
[params]
delta2 = 0.5
[sweep]
T = [1.0, 2.0]
[drive]
kind = "steps"
period = "T"
[[drive.step]]
span = 0.5
set = {{ m = 1.0 }}
[[drive.step]]
span = 0.5
set = {{ m = -1.0 }}
[measure.line_winding]
operator = "z0"
direction = [1, 1]
[output]
path = "{tmp_path / 'l.h5'}"
""")
    result = invoke("check", job)
    assert result.exit_code == 2
    assert result.stderr.startswith(
        f"error: {job}: [measure.line_winding] operator must commute "
        "with H(k) on the line k = origin + s * [1.0, 1.0]; it does not")
    # The model's own diagonal mirror (Schindler et al. 2018 model) commutes on k1 = k2.
    mirror = MODELS["bhz_corner"].func(m=1.0, delta2=0.5).operators["mirror_diag"]
    rows = ", ".join(
        "[" + ", ".join(f'"{complex(x).real!r} + {complex(x).imag!r}j"' for x in row) + "]"
        for row in mirror)
    job.write_text(job.read_text().replace('operator = "z0"', f"operator = [{rows}]"))
    assert load_job(job).measurements[0][0] == "line_winding"


def test_harmonic_drive_identical_for_one_and_two_workers(tmp_path):
    job = tmp_path / "h.toml"
    job.write_text(HARMONIC.replace("OUT", str(tmp_path / "h.h5")).replace('"mm"', '"m"')
                   .replace("A = [0.1, 0.2]", "A = [0.1, 0.5, 1.0]"))
    for workers, out in (("1", "one.h5"), ("2", "two.h5")):
        result = invoke("run", job, "-o", tmp_path / out, "-w", workers, "--chunk-size", "1",
                        "--no-progress")
        assert result.exit_code == 0, result.output
    assert_same_content(tmp_path / "one.h5", tmp_path / "two.h5")
