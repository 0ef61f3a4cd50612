"""Predicted transition lines of a drive: where U(k*) at high-symmetry momenta has eigenvalue
+1 or -1, found between grid values by root finding, stored in the file and drawn by map."""

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.store import Results

JOB = """
[model]
name = "ssh"
[sweep]
omega = { start = 0.6, stop = 2.0, num = 15 }
[drive]
kind = "steps"
omega = "omega"
[[drive.step]]
span = 0.5
set = { v = 0.5, w = 0 }
[[drive.step]]
span = 0.5
set = { v = 0, w = 1.0 }
[measure.quasienergy_gaps]
[predict]
[output]
path = "OUT"
"""


def test_predicted_closings_of_the_two_step_chain(tmp_path):
    # Analytic (derived in tests/cli/test_driven_jobs.py): at k = 0, U = exp(-i (th1 + th2) s_x)
    # with th1 + th2 = (v + w) T / 2 = pi (v + w) / omega: eigenvalue -1 at omega = v + w = 1.5,
    # eigenvalue +1 at omega = (v + w) / 2 = 0.75. At k = pi, U = exp(-i (th1 - th2) s_x): its
    # crossings (omega = |v - w| = 0.5 for pi, none for 0 with v != w) lie outside the range.
    job = tmp_path / "job.toml"
    out = tmp_path / "p.h5"
    job.write_text(JOB.replace("OUT", str(out)))
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 0, result.output
    t = Results.read(out).tables["transitions"]
    found = sorted((str(g), round(float(w), 9), float(k)) for g, w, k in
                   zip(t["gap"], t["omega"], t["k1"]))
    assert found == [("0", 0.75, 0.0), ("pi", 1.5, 0.0)]
    # The computed gap closes where predicted: gap_pi is smallest at the grid value 1.5.
    r = Results.read(out)
    assert r.axis("omega").values[np.argmin(r.data["gap_pi"])] == 1.5
    png = tmp_path / "p.png"
    assert CliRunner().invoke(app, ["map", str(out), "--var", "gap_pi", "-o",
                                    str(png)]).exit_code == 0
    assert png.stat().st_size > 10_000


def test_merged_shards_get_the_predicted_transitions_of_a_full_run(tmp_path):
    from .test_end_to_end import assert_same_content

    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(tmp_path / "full.h5")))
    runner = CliRunner()
    assert runner.invoke(app, ["run", str(job), "--no-progress"]).exit_code == 0
    shards = []
    for i in (1, 2):
        assert runner.invoke(app, ["run", str(job), "--shard", f"{i}/2",
                                   "--no-progress"]).exit_code == 0
        shards.append(str(tmp_path / f"full.shard-{i}-of-2.h5"))
        assert "transitions" not in Results.read(shards[-1]).tables
    result = runner.invoke(app, ["merge", str(tmp_path / "merged.h5"), *shards])
    assert result.exit_code == 0, result.output
    assert_same_content(tmp_path / "merged.h5", tmp_path / "full.h5")
    a = Results.read(tmp_path / "merged.h5").tables["transitions"]
    b = Results.read(tmp_path / "full.h5").tables["transitions"]
    assert a.keys() == b.keys() and all(np.array_equal(a[c], b[c]) for c in a)


def test_static_qwz_predicted_closings_at_the_published_masses(tmp_path):
    # Qi, Wu and Zhang, PRB 74, 085308 (2006); Asboth et al. (2016), ch. 6: H(k) has a zero
    # eigenvalue at Gamma for m = -2t, at X and Y for m = 0, at M for m = +2t. Grid values chosen
    # so that m = 0 lies on the grid and +-2 between grid values.
    job = tmp_path / "qwz.toml"
    out = tmp_path / "q.h5"
    job.write_text(f"""
[model]
name = "qwz"
[sweep]
m = [-2.9, -2.3, -1.7, -0.4, 0.0, 0.6, 1.9, 2.2, 2.8]
[measure.gap]
[predict]
[output]
path = "{out}"
""")
    assert CliRunner().invoke(app, ["run", str(job), "--no-progress"]).exit_code == 0
    t = Results.read(out).tables["transitions"]
    found = sorted({(round(float(m), 9), round(float(k1), 3), round(float(k2), 3))
                    for m, k1, k2 in zip(t["m"], t["k1"], t["k2"])})
    assert found == [(-2.0, 0.0, 0.0), (0.0, 0.0, 0.5), (0.0, 0.5, 0.0), (2.0, 0.5, 0.5)]
    assert set(t["gap"]) == {"0"}


QWZ_2D = """
[model]
name = "qwz"
[sweep]
m = { start = -2.9, stop = 2.9, num = 9 }
t = [0.5, 1.0, 1.25]
[measure.gap]
kmesh = 8
[predict]
[output]
path = "OUT"
"""


@pytest.mark.parametrize("text, workers", [(QWZ_2D, 2), (JOB, 2), (QWZ_2D, 1)])
def test_predictions_beside_the_points_equal_the_serial_table(tmp_path, text, workers):
    from sweepcli.jobfile import load_job
    from sweepcli.run.predict import predict_transitions
    from sweepcli.run.session import RunSession

    job = tmp_path / "job.toml"
    out = tmp_path / "o.h5"
    job.write_text(text.replace("OUT", str(out)))
    serial = predict_transitions(load_job(job))
    assert len(serial["axis"]) > 0
    RunSession(job, workers=workers, progress=False, argv=["test"]).run()
    table = Results.read(out).tables["transitions"]
    assert table.keys() == serial.keys()
    assert all(np.array_equal(table[c], serial[c]) for c in serial)
    if text is QWZ_2D:
        # Analytic (Qi, Wu and Zhang, PRB 74, 085308 (2006)): closings at m = -2t, 0, 2t
        # along m at each t, found at the same m along t where the t grid brackets m / 2.
        along_m = sorted({round(float(m), 9) for a, m, t in zip(table["axis"], table["m"],
                                                                table["t"]) if a == "m"})
        assert along_m == [-2.5, -2.0, -1.0, 0.0, 1.0, 2.0, 2.5]


class FakeClock:
    """Stands in for the runner's ``time`` module: 1 s per call, plus what a task adds."""

    def __init__(self):
        self.now = 0.0

    def monotonic(self):
        self.now += 1.0
        return self.now


@pytest.mark.parametrize("resume", [False, True])
def test_reported_time_covers_the_predictions(tmp_path, monkeypatch, resume):
    # A fake clock advanced by 1000 "seconds" inside each prediction task (one worker, so the
    # tasks run in this process): the summary's time must hold every one of them, whether
    # the lines run beside the points or, on a resumed complete file, after them.
    import sweepcli.run.predict as predict
    import sweepcli.run.runner as runner
    import sweepcli.run.session as session
    from sweepcli.run.session import RunSession

    job = tmp_path / "job.toml"
    out = tmp_path / "o.h5"
    job.write_text(QWZ_2D.replace("OUT", str(out)))
    if resume:
        RunSession(job, progress=False, argv=["test"]).run()
        r = Results.read(out)
        del r.tables["transitions"]
        r.attrs.pop("finished", None)
        r.write(out)
    clock = FakeClock()
    original = predict.predict_lines
    tasks = []

    def slow_lines(job, lines):
        clock.now += 1000.0
        tasks.append(len(lines))
        return original(job, lines)

    monkeypatch.setattr(runner, "time", clock)
    monkeypatch.setattr(session, "time", clock)  # the session times the whole run
    monkeypatch.setattr(predict, "predict_lines", slow_lines)
    done = RunSession(job, progress=False, resume=resume, force=not resume,
                      argv=["test"]).run()
    assert sum(tasks) == 9 + 3  # every line: 3 along m (one per t), 9 along t (one per m)
    assert done.run.seconds >= 1000.0 * len(tasks)
    assert done.run.done == done.run.total == 27
    assert "transitions" in Results.read(out).tables


def test_progress_counts_the_predicted_lines(tmp_path):
    import io

    from sweepcli.run.progress import Progress

    stream = io.StringIO()
    bar = Progress(4, stream=stream, interval=1e9, side=(0, 3))
    bar.update(4)
    assert stream.getvalue() == ""  # points done, lines not yet: no final line
    bar.side_update(3)
    assert "4/4 points (100%), predicted lines 3/3" in stream.getvalue()
