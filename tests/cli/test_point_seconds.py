"""Each point's compute time (point_seconds): stored by the worker, summed over the passes of a
[confirm] run, summarised by show, drawn by map, left out by diff, and used by check and batch
as the measured cost of a job whose results file exists."""

import re
import tomllib

import h5py
import numpy as np
import pytest
import tomli_w
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.jobfile import build_job
from sweepcli.run.batch import plan
from sweepcli.run.confirm import Recorder
from sweepcli.run.cost import measured_cost
from sweepcli.run.layout import results_for_job
from sweepcli.schema import POINT_SECONDS
from sweepcli.store import Results

from ..conftest import JOBS

ENV = {"COLUMNS": "300", "TQDM_DISABLE": "1"}


def invoke(*args):
    return CliRunner().invoke(app, [str(a) for a in args], env=ENV)


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    d = tmp_path_factory.mktemp("seconds")
    text = (JOBS / "quickstart.toml").read_text()
    text = text.replace("num = 31", "num = 5").replace("num = 11", "num = 3")
    text = text.replace('path = "results/quickstart.h5"', f'path = "{d / "qs.h5"}"')
    (d / "qs.toml").write_text(text)
    result = invoke("run", d / "qs.toml", "--no-progress")
    assert result.exit_code == 0, result.output
    return d / "qs.toml", d / "qs.h5"


def test_every_point_stores_its_time(run):
    _, out = run
    with h5py.File(out) as f:
        ds = f[POINT_SECONDS]
        assert ds.dtype == np.float64 and ds.shape == (5, 3) and ds.attrs["units"] == "s"
        times = ds[()]
    assert np.all(np.isfinite(times)) and np.all(times > 0)

    shown = invoke("show", out)
    assert shown.exit_code == 0, shown.output
    line = next(ln for ln in shown.stdout.splitlines() if ln.startswith("compute time:"))
    total, median, slowest = (float(x) for x in re.findall(
        r"([0-9.e+-]+) s in all.*median ([0-9.e+-]+) s per point, slowest ([0-9.e+-]+) s", line)[0])
    assert total == pytest.approx(times.sum(), rel=6e-3)
    assert median == pytest.approx(np.median(times), rel=6e-3)
    assert slowest == pytest.approx(times.max(), rel=6e-3)
    r = Results.read(out)
    i, j = np.unravel_index(np.argmax(times), times.shape)
    assert f"at m={r.axes[0].values[i]:g}, t={r.axes[1].values[j]:g}" in line

    png = out.with_name("seconds.png")
    assert invoke("map", out, "--var", POINT_SECONDS, "-o", png).exit_code == 0
    assert png.stat().st_size > 10_000


def test_diff_ignores_compute_times(run, tmp_path):
    job, out = run
    again = tmp_path / "again.h5"
    assert invoke("run", job, "-o", again, "--no-progress").exit_code == 0
    result = invoke("diff", out, again)
    assert result.exit_code == 0, result.output
    assert POINT_SECONDS not in result.stdout


def test_check_and_batch_use_the_measured_times(run, tmp_path):
    job_path, out = run
    times = h5py.File(out, "r")[POINT_SECONDS][()]
    checked = invoke("check", job_path)
    assert checked.exit_code == 0, checked.output
    assert (f"measured in the previous run: {times.mean():.3g} s per point on average over the "
            f"15 points of {out}") in checked.stdout
    from sweepcli.jobfile import load_job

    job = load_job(job_path)
    previous = measured_cost(job)
    assert previous.points == 15 and previous.total == pytest.approx(times.sum())
    p = plan(job, 3, 1, previous=previous)
    assert p.seconds_per_point == pytest.approx(times.mean()) and p.basis.startswith("measured")
    result = invoke("batch", job_path, "--tasks", "3", "--dir", tmp_path / "b")
    assert result.exit_code == 0, result.output
    assert "timed the middle grid point" not in result.stdout
    assert f"{times.mean():.3g} s per point (measured: mean over the 15 points" in result.stdout
    # another job (a different sha256) writing to the same file: no measured times
    other = job_path.read_text().replace("num = 5", "num = 6")
    assert other != job_path.read_text()
    (tmp_path / "other.toml").write_text(other)
    assert measured_cost(load_job(tmp_path / "other.toml")) is None


def test_times_of_the_two_passes_of_a_confirm_run_add_up():
    path = JOBS / "driven-corner-map.toml"
    doc = tomllib.loads(path.read_text())
    for axis in doc["sweep"].values():
        axis["num"] = 3
    text = tomli_w.dumps(doc)
    job = build_job(tomllib.loads(text), text=text, path=str(path))
    results = results_for_job(job)
    store = Recorder(job, results)
    store(4, {POINT_SECONDS: 1.25}, "")  # the bulk pass
    store(4, {POINT_SECONDS: 0.5}, "")  # the boundary pass
    assert results.data[POINT_SECONDS].reshape(-1)[4] == 1.75
    assert np.isnan(results.data[POINT_SECONDS].reshape(-1)[3])


def test_a_file_without_times_can_still_be_resumed():
    results = results_for_job(build_job(tomllib.loads(
        '[model]\nname = "qwz"\n[sweep]\nm = [0, 1]\n[measure.gap]\n'), text="", path="j.toml"))
    del results.variables[POINT_SECONDS], results.data[POINT_SECONDS]
    results.record(0, {"gap": 1.0, "gap_reason": 0, POINT_SECONDS: 0.1})
    assert results.done.ravel()[0] == 1
