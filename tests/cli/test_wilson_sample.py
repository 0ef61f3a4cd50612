"""`polarisation` and `quadrupole` through a whole run, and `sweepcli sample --wilson`: the
point rebuilt from the file's provenance, its Wilson loops computed again and drawn."""

import math

import numpy as np
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.report.wilson_data import wilson_point
from sweepcli.store import Results

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"

BBH_JOB = """
[job]
name = "bbh"
title = "BBH quadrupole"
[model]
name = "bbh"
[sweep]
gamma = [0.5, 1.0, 1.5]
[measure.quadrupole]
[measure.polarisation]
axis = 1
[measure.corner_modes]
size = 12
"""

SSH_JOB = """
[job]
name = "ssh"
title = "SSH Zak phase"
[model]
name = "ssh"
[sweep]
v = [0.4, 1.6]
[measure.polarisation]
"""


def invoke(*args):
    return CliRunner().invoke(app, [str(a) for a in args], env={"COLUMNS": "300"})


def run(tmp, name, text):
    job, out = tmp / f"{name}.toml", tmp / f"{name}.h5"
    job.write_text(text + f'[output]\npath = "{out}"\n')
    result = invoke("run", job, "--no-progress")
    assert result.exit_code == 0, result.output
    return out


def test_bbh_run_stores_q_xy_with_reasons(tmp_path):
    # Benalcazar, Bernevig and Hughes, Science 357, 61 (2017): q_xy = 1/2 for |gamma/lam| < 1,
    # 0 for |gamma/lam| > 1; the gap closes at |gamma| = |lam|.
    res = Results.read(run(tmp_path, "bbh", BBH_JOB))
    q = res.data["quadrupole"]
    assert q[0] == 0.5 and q[2] == 0.0 and math.isnan(q[1])
    codes = res.reason_codes("quadrupole")
    assert list(codes) == [0, 1, 0]  # ok, gap_closed, ok
    assert list(res.data["wannier_flow"]) == [0, np.iinfo(np.int32).min, 0]
    assert "polarisation_reason" in res.variables
    # One zero mode per corner where q_xy = 1/2, none where q_xy = 0 (BBH 2017).
    assert list(res.data["corner_modes_0_00"]) == [1, np.iinfo(np.int32).min, 0]
    assert list(res.data["agree_quadrupole_corner"]) == [1, np.iinfo(np.int32).min, 1]

    drawing = wilson_point(res, at={"gamma": 0.5})
    assert drawing.quadrupole.q == 0.5 and drawing.stored["quadrupole"] == 0.5
    assert set(drawing.nu) == {0, 1} and drawing.nu[0].shape[-1] == 2
    assert all(abs(p - 0.5) < 1e-6 for p in (drawing.nested[0].mean(), drawing.nested[1].mean()))

    path = tmp_path / "bbh.h5"
    out = tmp_path / "w.png"
    result = invoke("sample", path, "--at", "gamma=1.5", "--wilson", "-o", out)
    assert result.exit_code == 0, result.output
    assert "q_xy 0" in result.stdout and out.read_bytes()[:8] == PNG_MAGIC
    # At the transition the band group has no Wilson loop: refused, nothing drawn.
    result = invoke("sample", path, "--at", "gamma=1.0", "--wilson", "-o", tmp_path / "c.png")
    assert result.exit_code == 2 and "gap closed" in result.output
    assert not (tmp_path / "c.png").exists()
    result = invoke("sample", path, "--wilson", "--kind", "flake")
    assert result.exit_code == 2 and "--kind" in result.output


def test_ssh_sample_wilson_shows_the_zak_centre(tmp_path):
    # Asboth, Oroszlany and Palyi (2016), ch. 1-2: Zak phase pi (centre 1/2) for |v| < |w|.
    path = run(tmp_path, "ssh", SSH_JOB)
    res = Results.read(path)
    assert np.allclose(res.data["polarisation"], [0.5, 0.0], atol=1e-6)
    result = invoke("sample", path, "--at", "v=0.4", "--wilson")
    assert result.exit_code == 0, result.output
    assert "polarisation 0.5" in result.stdout
    assert (tmp_path / "ssh-wilson.png").read_bytes()[:8] == PNG_MAGIC
