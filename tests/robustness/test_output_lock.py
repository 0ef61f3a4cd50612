"""Two runs writing the same results file at once: the second refuses at once (exit 2, naming
the lock) and the first is not disturbed."""

import os
import signal
import subprocess
import sys
import time

import pytest

from sweepcli.run.session import output_lock
from sweepcli.store import Results

from .test_interruption import JOB


def start(job, out, *extra):
    env = dict(os.environ, TQDM_DISABLE="1")
    return subprocess.Popen([sys.executable, "-m", "sweepcli", "run", str(job), "-o", str(out),
                             "--checkpoint-every", "0", "--no-progress", *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def test_second_run_on_the_same_output_refuses(tmp_path):
    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(tmp_path / "unused.h5")))
    out = tmp_path / "run.h5"
    lock = tmp_path / "run.h5.lock"
    first = start(job, out)
    try:
        t0 = time.monotonic()
        while not out.exists():  # the first checkpoint is written under the lock
            if first.poll() is not None or time.monotonic() - t0 > 60:
                pytest.fail(f"first run did not start: {first.communicate()}")
            time.sleep(0.05)
        assert lock.exists()
        for extra in ([], ["--force"], ["--resume"]):
            second = start(job, out, *extra)
            _, err = second.communicate(timeout=60)
            assert second.returncode == 2, err
            assert err == (f"error: {lock}: another run is writing {out} and holds this lock; "
                           "refusing to write the same file at once. Wait for it to finish or "
                           "use -o OTHER_FILE.\n")
        assert first.poll() is None, "the first run should still be running"
    finally:
        first.send_signal(signal.SIGTERM)
        first.communicate(timeout=60)
    assert first.returncode == 3
    assert not lock.exists()
    assert Results.read(out).n_done > 0
    # Released: it can be taken again.
    with output_lock(out) as taken:
        assert taken == lock and lock.read_text() == f"{os.getpid()}\n"
    assert not lock.exists()
