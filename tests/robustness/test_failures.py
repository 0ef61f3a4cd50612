"""A point whose evaluation raises is recorded with its reason and the sweep goes on; a
checkpoint that cannot be written leaves the previous file intact."""

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.errors import ResultsError
from sweepcli.jobfile import load_job
from sweepcli.physics.measurements import MEASUREMENTS
from sweepcli.physics.registry import Entry
from sweepcli.run.layout import results_for_job
from sweepcli.run.runner import run_sweep
from sweepcli.store import Results

JOB = """
[model]
name = "qwz"
[sweep]
m = { start = -3.0, stop = 3.0, num = 7 }
[measure.gap]
[output]
path = "OUT"
"""


@pytest.fixture
def failing_gap(monkeypatch):
    entry = MEASUREMENTS["gap"]

    def gap_or_fail(point, **options):
        if point.params["m"] == 1.0:
            raise RuntimeError("deliberate failure at m = 1")
        return entry.func(point, **options)

    monkeypatch.setitem(MEASUREMENTS._entries, "gap", Entry(
        entry.name, gap_or_fail, entry.description, entry.source, entry.params, entry.extra))


def test_failing_point_is_recorded_and_others_finish(tmp_path, failing_gap):
    job = tmp_path / "job.toml"
    out = tmp_path / "out.h5"
    job.write_text(JOB.replace("OUT", str(out)))
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 4, result.output  # finished, but a point failed
    assert "1 failed" in result.stdout
    r = Results.read(out)
    assert r.n_done == 7
    m = r.axis("m").values
    bad = m == 1.0
    assert np.all(np.isnan(r.data["gap"][bad])) and r.data["gap_reason"][bad][0] == 4
    assert r.failure[bad][0] == "gap: RuntimeError: deliberate failure at m = 1"
    assert np.all(np.isfinite(r.data["gap"][~bad]))
    shown = CliRunner().invoke(app, ["show", str(out)]).stdout
    assert "failed points: 1 shown" in shown and "m=1: gap: RuntimeError" in shown


def test_unwritable_checkpoint_keeps_the_previous_file(tmp_path, monkeypatch):
    job_path = tmp_path / "job.toml"
    out = tmp_path / "out.h5"
    job_path.write_text(JOB.replace("OUT", str(out)))
    job = load_job(job_path)
    results = results_for_job(job)
    results.write(out)
    before = out.read_bytes()

    def full_disk(self, path):
        raise ResultsError(f"{path}: cannot write the results file (No space left on device).")

    monkeypatch.setattr(Results, "write", full_disk)
    with pytest.raises(ResultsError, match="No space left on device"):
        run_sweep(job, results, checkpoint=lambda r: r.write(out), checkpoint_every=0,
                  progress=False)
    assert out.read_bytes() == before
    assert Results.read(out).n_done == 0


def test_failed_ok_exits_zero_and_a_clean_run_exits_zero(tmp_path, failing_gap):
    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(tmp_path / "out.h5")))
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress", "--failed-ok"])
    assert result.exit_code == 0, result.output
    assert "1 failed" in result.stdout
    clean = tmp_path / "clean.toml"
    clean.write_text(JOB.replace("OUT", str(tmp_path / "c.h5")).replace("num = 7", "num = 2"))
    result = CliRunner().invoke(app, ["run", str(clean), "--no-progress"])
    assert result.exit_code == 0 and "failed (see" not in result.stdout, result.output


@pytest.mark.parametrize("value", ["1e308", "1180591620717411303424", '"2**70"', "-1e13"])
def test_absurd_magnitudes_are_refused_at_load(tmp_path, value):
    # 1e308 ran with overflow warnings and stored a gap of 4e292; 2**70 leaves the other terms
    # of H no significant digits (float64 keeps about 16).
    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(tmp_path / "out.h5"))
                   .replace("[sweep]", f"[params]\nt = {value}\n[sweep]"))
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 2, result.output
    assert "magnitude at most 1e+12" in result.stderr and "[params] t must be" in result.stderr
    assert not (tmp_path / "out.h5").exists()
