"""The dask engine under faults: all workers lost (the run stops within --dask-lost-timeout,
saves its points and exits 3), Ctrl-C and SIGTERM (exit 3, points saved), and an in-flight
limit that follows the workers present as the cluster grows."""

import json
import os
import signal
import subprocess
import sys
import time

import pytest

from sweepcli.store import Results

from ..cli.test_end_to_end import assert_same_content
from .test_interruption import JOB, wait_for_points

pytest.importorskip("distributed")


def slow_identity(x):
    time.sleep(0.05)
    return x


def test_in_flight_limit_follows_a_growing_cluster():
    from distributed import Client, LocalCluster

    from sweepcli.run.executors import DaskExecutor

    with LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                      dashboard_address=None) as cluster, Client(cluster) as client:
        executor = DaskExecutor(client, poll=0.1)
        assert executor.workers == 1
        seen_before, seen_after, results = [], [], []
        for x in executor.imap(slow_identity, ((i,) for i in range(200))):
            results.append(x)
            if len(results) == 5:
                cluster.scale(4)
                client.wait_for_workers(4, timeout=60)
            (seen_before if len(results) <= 5 else seen_after).append(executor.in_flight)
        assert sorted(results) == list(range(200))
        assert max(seen_before) <= 2  # 2 per worker thread, one thread
        assert max(seen_after) >= 7  # up to 8 with four


@pytest.fixture
def dask_scheduler(tmp_path):
    """A scheduler and one worker (no nanny: a killed worker stays dead) as processes."""
    info = tmp_path / "scheduler.json"
    # A worker's death is seen when its connection drops; the short time-to-live also removes
    # a worker that stops answering without closing it (a loaded machine), as a cluster would.
    env = dict(os.environ, DASK_DISTRIBUTED__WORKER__DAEMON="False",
               DASK_DISTRIBUTED__SCHEDULER__WORKER_TTL="10s")
    procs = [subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_scheduler",
                               "--host", "127.0.0.1", "--port", "0", "--no-dashboard",
                               "--scheduler-file", str(info)], env=env,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)]
    try:
        t0 = time.monotonic()
        while not info.exists() or not info.read_text().strip():
            assert time.monotonic() - t0 < 60, "the dask scheduler did not start"
            time.sleep(0.1)
        address = json.loads(info.read_text())["address"]
        procs.append(subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_worker",
                                       address, "--no-nanny", "--nthreads", "1",
                                       "--no-dashboard", "--host", "127.0.0.1"], env=env,
                                      stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
        yield address, procs[1]
    finally:
        for p in procs[::-1]:
            if p.poll() is None:
                p.kill()
            p.wait()


def start_dask_run(job, out, address, *extra):
    env = dict(os.environ, TQDM_DISABLE="1")
    return subprocess.Popen([sys.executable, "-m", "sweepcli", "run", str(job), "-o", str(out),
                             "--checkpoint-every", "0", "--no-progress", "--scheduler", address,
                             "--chunk-size", "4", *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


@pytest.fixture
def job(tmp_path):
    path = tmp_path / "job.toml"
    path.write_text(JOB.replace("OUT", str(tmp_path / "unused.h5")))
    return path


def test_losing_every_worker_saves_and_exits_3(dask_scheduler, job, tmp_path):
    address, worker = dask_scheduler
    out = tmp_path / "dask.h5"
    proc = start_dask_run(job, out, address, "--dask-lost-timeout", "3")
    wait_for_points(out, proc, minimum=8)
    worker.kill()
    try:
        _, err = proc.communicate(timeout=120)  # hung for ever before
    except subprocess.TimeoutExpired:
        proc.send_signal(signal.SIGINT)
        try:
            _, err = proc.communicate(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
            _, err = proc.communicate()
        pytest.fail(f"the run did not stop within 120 s of losing its worker; stderr:\n{err}")
    assert proc.returncode == 3, err
    assert "Traceback" not in err
    assert "all dask workers were lost (none for 3 s, --dask-lost-timeout)" in err
    assert "finished points are saved; rerun with --resume" in err
    partial = Results.read(out)
    assert 8 <= partial.n_done < partial.size
    # Resumed without dask, the file equals one run in one go.
    for cmd in (["-o", str(out), "--resume"], ["-o", str(tmp_path / "ref.h5")]):
        done = subprocess.run([sys.executable, "-m", "sweepcli", "run", str(job), "--no-progress",
                               *cmd], capture_output=True, text=True, timeout=300)
        assert done.returncode == 0, done.stderr
    assert_same_content(out, tmp_path / "ref.h5")


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_signals_stop_a_dask_run(dask_scheduler, job, tmp_path, sig):
    address, _ = dask_scheduler
    out = tmp_path / "dask.h5"
    proc = start_dask_run(job, out, address)
    wait_for_points(out, proc, minimum=8)
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 3, err
    assert "interrupted: " in err and "--resume" in err and "Traceback" not in err
    partial = Results.read(out)
    assert 8 <= partial.n_done < partial.size
    assert not (tmp_path / "dask.h5.tmp").exists() and not (tmp_path / "dask.h5.lock").exists()


def test_left_over_gather_tasks_are_not_reported_after_a_worker_loss():
    # When a worker dies while a result is being gathered, distributed leaves a task behind
    # whose AllExit asyncio logs as "Task exception was never retrieved" with a traceback:
    # the executor's filter drops exactly those records from the asyncio logger.
    import logging

    from distributed.client import AllExit

    from sweepcli.run.executors import _QuietGatherExit

    def record(exc):
        info = (type(exc), exc, None) if exc is not None else None
        return logging.LogRecord("asyncio", logging.ERROR, __file__, 1,
                                 "Task exception was never retrieved", None, info)

    quiet = _QuietGatherExit()
    assert not quiet.filter(record(AllExit()))
    assert quiet.filter(record(RuntimeError("a real failure")))
    assert quiet.filter(record(None))
