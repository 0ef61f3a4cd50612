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
    assert result.exit_code == 0, result.output
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
