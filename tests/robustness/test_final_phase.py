"""SIGINT / SIGTERM after the last point, while the results are written: exit 3 with a
message, the previous complete file left (no ``*.tmp``), no joblib folder left behind, and
--resume finishes the file. And the heartbeat of runs without a progress bar."""

import os
import re
import signal
import subprocess
import sys
import time

import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.store import Results

JOB = """
[model]
name = "qwz"
[sweep]
m = { start = -3.0, stop = 3.0, num = 12 }
[measure.gap]
[predict]
[output]
path = "OUT"
"""

# Runs the command line with the final write held up: when the file that marks the run
# finished is built, it creates MARKER and sleeps, so the test can signal in that phase.
DRIVER = """
import pathlib, sys, time
from sweepcli.store import Results
marker = pathlib.Path(sys.argv[1])
image = Results.image
def slow_final_image(self):
    if self.attrs.get("finished"):
        marker.touch()
        time.sleep(120)
    return image(self)
Results.image = slow_final_image
from sweepcli.cli import app
app(sys.argv[2:], prog_name="sweepcli")
"""


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_signal_while_writing_the_final_results(tmp_path, sig):
    out = tmp_path / "out.h5"
    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(out)))
    marker = tmp_path / "final-phase"
    joblib_dir = tmp_path / "joblib"
    joblib_dir.mkdir()
    env = dict(os.environ, JOBLIB_TEMP_FOLDER=str(joblib_dir), TQDM_DISABLE="1")
    proc = subprocess.Popen([sys.executable, "-c", DRIVER, str(marker), "run", str(job),
                             "--workers", "2", "--no-progress"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    try:
        t0 = time.monotonic()
        while not marker.exists():
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() - t0 < 240, "the final phase was never reached"
            time.sleep(0.05)
        proc.send_signal(sig)
        _, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 3, err
    assert "Traceback" not in err
    assert re.search(r"interrupted while writing the results: 12/12 points saved in .*out\.h5\. "
                     r"Resume with: sweepcli run .* --resume", err), err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["final-phase", "job.toml", "joblib",
                                                         "out.h5"]
    assert list(joblib_dir.iterdir()) == []
    r = Results.read(out)  # the last checkpoint: every point, not yet marked finished
    assert r.n_done == 12 and not r.attrs["finished"]
    result = CliRunner().invoke(app, ["run", str(job), "--resume", "--no-progress"])
    assert result.exit_code == 0, result.output
    r = Results.read(out)
    assert r.n_done == 12 and r.attrs["finished"] and "transitions" in r.tables


def test_heartbeat_lines_without_a_progress_bar(tmp_path):
    # 400 points of about 10-40 ms each (a Chern number on a 2-band model) against a heartbeat
    # of 0.2 s: several lines, each with the count, rate and ETA.
    out = tmp_path / "out.h5"
    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(out)).replace("num = 12", "num = 400")
                   .replace("[predict]", "[measure.chern]"))
    proc = subprocess.run([sys.executable, "-m", "sweepcli", "run", str(job), "--no-progress",
                           "--heartbeat", "0.2", "--chunk-size", "20"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    pattern = (r"\[\d{4}-\d\d-\d\d \d\d:\d\d:\d\d\] (\d+)/400 points \(\d+%\), ([\d.e+]+) "
               r"points/s, elapsed \d+s, ETA (\S+)")
    beats = [re.fullmatch(pattern, ln) for ln in proc.stderr.splitlines() if "points/s" in ln]
    assert len(beats) >= 2 and all(beats), proc.stderr
    counts = [int(b.group(1)) for b in beats]
    assert counts == sorted(counts), counts
    moving = [b for b in beats if 0 < int(b.group(1)) < 400]
    assert moving and all(float(b.group(2)) > 0 and b.group(3) != "?" for b in moving), beats
    quiet = subprocess.run([sys.executable, "-m", "sweepcli", "--quiet", "run", str(job), "-o",
                            str(tmp_path / "q.h5"), "--heartbeat", "0.2", "--chunk-size", "400"],
                           capture_output=True, text=True, timeout=300)
    assert quiet.returncode == 0 and "points/s" not in quiet.stderr, quiet.stderr
