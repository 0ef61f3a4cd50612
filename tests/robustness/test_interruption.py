"""Interrupted runs (SIGKILL, SIGTERM, SIGINT) leave a readable file with every finished point,
and --resume completes it to the same content as an uninterrupted run."""

import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from sweepcli.errors import ResultsError
from sweepcli.store import Results

from ..cli.test_end_to_end import assert_same_content

# About 10-40 ms per point, 400 points: long enough to interrupt a 1-worker run part way.
JOB = """
[job]
name = "interrupt"
[model]
name = "haldane"
[params]
t2 = 0.2
phi = 1.2
[sweep]
M = { start = -1.5, stop = 1.5, num = 400 }
[measure.gap]
[measure.chern]
[output]
path = "OUT"
"""


def start(job, out, *extra):
    env = dict(os.environ, TQDM_DISABLE="1")
    return subprocess.Popen([sys.executable, "-m", "sweepcli", "run", str(job), "-o", str(out),
                             "--checkpoint-every", "0", "--no-progress", *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def wait_for_points(out, proc, minimum=5, timeout=120):
    t0 = time.monotonic()
    while time.monotonic() - t0 < timeout:
        if proc.poll() is not None:
            pytest.fail(f"run ended before it could be interrupted: {proc.communicate()}")
        try:
            if Results.read(out).n_done >= minimum:
                return
        except ResultsError:
            pass
        time.sleep(0.05)
    pytest.fail("no points were written in time")


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    d = tmp_path_factory.mktemp("ref")
    job = d / "job.toml"
    job.write_text(JOB.replace("OUT", str(d / "unused.h5")))
    out = d / "ref.h5"
    proc = start(job, out)
    proc.communicate(timeout=300)
    assert proc.returncode == 0
    return job, out


@pytest.mark.parametrize("sig", [signal.SIGKILL, signal.SIGTERM, signal.SIGINT])
def test_interrupt_then_resume_equals_uninterrupted(reference, tmp_path, sig):
    job, ref = reference
    out = tmp_path / "run.h5"
    proc = start(job, out)
    wait_for_points(out, proc)
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=120)
    if sig == signal.SIGKILL:
        assert proc.returncode == -signal.SIGKILL
    else:
        assert proc.returncode == 3, err
        assert "interrupted:" in err and "--resume" in err
    partial = Results.read(out)  # opens, whatever the signal
    assert 0 < partial.n_done < partial.size
    full = Results.read(ref)
    done = partial.done.astype(bool)
    assert np.array_equal(partial.data["chern"][done], full.data["chern"][done])
    assert np.all(partial.data["chern_reason"][~done] == 5)  # not_computed

    proc = start(job, out, "--resume")
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    assert_same_content(out, ref)


def test_resume_refuses_a_different_job(reference, tmp_path):
    job, ref = reference
    other = tmp_path / "other.toml"
    other.write_text(job.read_text().replace("phi = 1.2", "phi = 1.0"))
    copy = tmp_path / "copy.h5"
    copy.write_bytes(ref.read_bytes())
    proc = subprocess.run([sys.executable, "-m", "sweepcli", "run", str(other), "-o", str(copy),
                           "--resume"], capture_output=True, text=True)
    assert proc.returncode == 2
    assert "was written by a different job" in proc.stderr and "refusing to resume" in proc.stderr
    assert copy.read_bytes() == ref.read_bytes()


def test_a_dying_worker_keeps_the_finished_points(reference, tmp_path):
    psutil = pytest.importorskip("psutil")
    job, ref = reference
    out = tmp_path / "run.h5"
    proc = start(job, out, "--workers", "2", "--chunk-size", "4")
    wait_for_points(out, proc, minimum=8)
    workers = [c for c in psutil.Process(proc.pid).children(recursive=True)
               if "loky" in " ".join(c.cmdline())
               and "resource_tracker" not in " ".join(c.cmdline())]
    assert workers, "no worker processes found"
    workers[-1].kill()
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 2, err
    assert "a worker process died" in err and "--resume" in err
    partial = Results.read(out)
    assert 0 < partial.n_done < partial.size
    proc = start(job, out, "--resume")
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    assert_same_content(out, ref)


def test_a_signal_dropped_in_a_weakref_callback_stops_quietly(tmp_path, monkeypatch):
    # Python drops an exception raised while a weakref callback runs and passes it to
    # sys.unraisablehook, whose default prints "Exception ignored in ... Traceback". A Ctrl-C
    # caught there must still stop the run (the stop flag), without that report; any other
    # dropped exception still reaches the hook that was there before the run.
    import weakref

    from sweepcli.jobfile import load_job
    from sweepcli.run.layout import results_for_job
    from sweepcli.run.runner import run_sweep

    class Probe:
        pass

    def drop(exc_type):
        def callback(_):
            raise exc_type("dropped in a callback")
        obj = Probe()
        ref = weakref.ref(obj, callback)
        del obj  # CPython runs the callback here and reports the exception as unraisable
        return ref

    class SignalInCallback:
        workers = 1
        stop = None

        def imap(self, func, tasks):
            for n, args in enumerate(tasks):
                yield func(*args)
                if n == 1:
                    drop(ValueError)
                    self.stop.set()  # what the signal handler does before it raises
                    drop(KeyboardInterrupt)

    reported = []

    def hook(args):
        reported.append(type(args.exc_value))

    monkeypatch.setattr(sys, "unraisablehook", hook)
    path = tmp_path / "job.toml"
    path.write_text(JOB.replace("OUT", str(tmp_path / "out.h5")))
    job = load_job(path)
    summary = run_sweep(job, results_for_job(job), executor=SignalInCallback(), progress=False,
                        chunk_size=1)
    assert summary.interrupted and 0 < summary.done < job.size
    assert reported == [ValueError] and sys.unraisablehook is hook
