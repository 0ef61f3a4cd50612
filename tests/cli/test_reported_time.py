"""The time `sweepcli run` reports ("N/N points in X s") counts all the user waits for: reading
the job and writing the file before the sweep, the points, the predicted transitions and the
final write, not the sweep loop alone. No test compares a duration with a fixed number: the
parts are slowed (a fake clock, or a sleep) and the report must hold at least what was added."""

import re

import numpy as np
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.schema import POINT_SECONDS
from sweepcli.store import Results

JOB = """
[model]
name = "qwz"
[sweep]
m = { start = -2.9, stop = 2.9, num = 5 }
t = [0.5, 1.0]
[measure.gap]
kmesh = 8
[predict]
[output]
path = "OUT"
"""


class FakeClock:
    """Stands in for the ``time`` module of the session and the runner: 1 s per call of
    ``monotonic``, plus what a slowed step adds."""

    def __init__(self):
        self.now = 0.0

    def monotonic(self):
        self.now += 1.0
        return self.now


def test_session_time_covers_job_reading_writes_and_predictions(tmp_path, monkeypatch):
    import sweepcli.run.predict as predict
    import sweepcli.run.runner as runner
    import sweepcli.run.session as session

    job = tmp_path / "job.toml"
    out = tmp_path / "o.h5"
    job.write_text(JOB.replace("OUT", str(out)))
    clock = FakeClock()
    added = []

    def slowed(func):
        def wrapper(*args, **kwargs):
            clock.now += 1000.0
            added.append(func.__name__)
            return func(*args, **kwargs)
        return wrapper

    monkeypatch.setattr(session, "time", clock)
    monkeypatch.setattr(runner, "time", clock)
    monkeypatch.setattr(session, "load_job", slowed(session.load_job))
    monkeypatch.setattr(Results, "write", slowed(Results.write))
    monkeypatch.setattr(predict, "predict_lines", slowed(predict.predict_lines))
    done = session.RunSession(job, progress=False, argv=["test"]).run()
    assert done.run.done == done.run.total == 10
    # read once, written first and last (and maybe at checkpoints), lines in one task or more
    assert added.count("load_job") == 1 and added.count("write") >= 2
    assert added.count("predict_lines") >= 1
    assert done.run.seconds >= 1000.0 * len(added)
    assert "transitions" in Results.read(out).tables


def test_command_line_time_covers_the_points_and_the_start(tmp_path, monkeypatch):
    # One worker: the points run in this process one after the other, so the reported time
    # holds at least the sum of their stored times, and also a slowed reading of the job
    # before the sweep (which the sweep loop's own clock did not see).
    import time

    import sweepcli.run.session as session

    job = tmp_path / "job.toml"
    out = tmp_path / "o.h5"
    job.write_text(JOB.replace("OUT", str(out)))
    pause = 0.5
    original = session.load_job

    def slow_load(path):
        time.sleep(pause)
        return original(path)

    monkeypatch.setattr(session, "load_job", slow_load)
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 0, result.output
    found = re.search(r"10/10 points in ([0-9.]+) s", result.output)
    assert found, result.output
    reported = float(found.group(1))
    seconds = np.asarray(Results.read(out).data[POINT_SECONDS], float)
    assert np.all(np.isfinite(seconds))
    assert reported + 0.05 >= float(seconds.sum()) + pause  # printed to 0.1 s
