"""The batch scripts on a real one-node Slurm (slurmctld, slurmd and munge on this machine,
started by tests/cluster/start-slurm.sh, which installs Debian's slurm-wlm where it is missing).

One array job of four tasks for a small job: task 3 is cancelled, `sweepcli shards` says so and
prints the resubmission line, which is run as printed (`sbatch --array=3 ...` and the merge after
it); the merged file then equals a run on this machine, variable by variable, byte for byte.
Skipped only where Slurm cannot be installed (not root, or no apt-get); with
SWEEPCLI_REQUIRE_SLURM=1 (CI) that is a failure instead.
"""

import os
import re
import socket
import subprocess
import time
from pathlib import Path

import h5py
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.store import Results

START = Path(__file__).with_name("start-slurm.sh")
WAIT_S = 150  # at most, for the jobs of one step to leave the queue

JOB = """
[job]
name = "slurmy"
[model]
name = "qwz"
[sweep]
m = { start = -3.0, stop = 3.0, num = 9 }
t = [0.5, 1.0, 1.5]
[measure.gap]
[measure.chern]
[output]
path = "OUT"
"""


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def slurm(tmp_path_factory):
    """A private one-node Slurm: the environment that reaches it (``SLURM_CONF``)."""
    state = tmp_path_factory.mktemp("slurm")
    env = dict(os.environ, SWEEPCLI_SLURMCTLD_PORT=str(_free_port()),
               SWEEPCLI_SLURMD_PORT=str(_free_port()))
    proc = subprocess.run(["bash", str(START), "start", str(state)], env=env,
                          capture_output=True, text=True, timeout=600)
    if proc.returncode == 3:
        message = f"no Slurm here: {proc.stderr.strip()}"
        if os.environ.get("SWEEPCLI_REQUIRE_SLURM") == "1":
            pytest.fail(message + " (SWEEPCLI_REQUIRE_SLURM=1)")
        pytest.skip(message)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    env["SLURM_CONF"] = str(state / "slurm.conf")
    try:
        yield env
    finally:
        queued = subprocess.run(["squeue", "-h", "-o", "%i"], env=env, capture_output=True,
                                text=True).stdout.split()
        if queued:
            subprocess.run(["scancel", *queued], env=env, check=False)
        subprocess.run(["bash", str(START), "stop", str(state)], env=env, check=False)


def _slurm(env, *args):
    proc = subprocess.run(list(args), env=env, capture_output=True, text=True, cwd="/",
                          timeout=60)
    assert proc.returncode == 0, f"{args}: {proc.stderr}"
    return proc.stdout.strip()


def _wait(env, ids, state_dir):
    """Wait until the jobs ``ids`` leave the queue; their final states."""
    deadline = time.monotonic() + WAIT_S
    while time.monotonic() < deadline:
        if not _slurm(env, "squeue", "-h", "-j", ",".join(ids), "-o", "%i %T"):
            break
        time.sleep(0.5)
    else:
        pytest.fail(f"jobs {ids} still queued after {WAIT_S} s: "
                    + _slurm(env, "squeue", "-o", "%i %T %r"))
    states = {}
    for i in ids:
        shown = _slurm(env, "scontrol", "show", "job", i)
        for block in shown.split("\n\n"):
            task = re.search(r"ArrayTaskId=(\d+)", block)
            state = re.search(r"JobState=(\w+)", block)
            states[f"{i}_{task.group(1)}" if task else i] = state.group(1)
    return states


def _export(env):
    """`--export=NONE`: the tasks get no environment (no virtual environment on PATH); only
    PYTHONPATH is passed where the tests run sweepcli from a source tree."""
    return ("--export=NONE" + (f",PYTHONPATH={env['PYTHONPATH']}" if env.get("PYTHONPATH")
                               else ""))


def test_array_job_resubmitted_task_and_merge_equal_a_local_run(slurm, tmp_path):
    env = slurm
    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(tmp_path / "out" / "full.h5")))
    folder = tmp_path / "scripts"
    runner = CliRunner()
    result = runner.invoke(app, ["batch", str(job), "--tasks", "4", "--dir", str(folder),
                                 "--seconds-per-point", "0.5"])
    assert result.exit_code == 0, result.output
    script, merge = folder / "slurmy.slurm.sh", folder / "slurmy.merge.slurm.sh"

    # As the header says, from another folder: the array held, then task 3 cancelled before it
    # runs (a lost task), then the rest released; the merge waits on all of them.
    array = _slurm(env, "sbatch", "--parsable", "--hold", _export(env), str(script))
    merge_job = _slurm(env, "sbatch", "--parsable", _export(env),
                       f"--dependency=afterok:{array}", str(merge))
    _slurm(env, "scancel", f"{array}_3")
    _slurm(env, "scontrol", "release", array)
    states = _wait(env, [array], folder)
    assert {states.get(f"{array}_{i}") for i in (1, 2, 4)} == {"COMPLETED"}, states
    assert states.get(f"{array}_3", "CANCELLED") == "CANCELLED", states  # or purged already
    assert not (tmp_path / "out" / "full.shard-3-of-4.h5").exists()
    # afterok can never be met: the merge stays pending; cancel it as a user would.
    assert _slurm(env, "squeue", "-h", "-j", merge_job, "-o", "%T") == "PENDING"
    assert not (tmp_path / "out" / "full.h5").exists()
    _slurm(env, "scancel", merge_job)

    result = runner.invoke(app, ["shards", str(folder)])
    assert result.exit_code == 5, result.output
    assert "shard 3/4  absent" in result.stdout and "3 done, 1 absent" in result.stdout
    line = re.search(r"Slurm: (.*)", result.stdout).group(1)
    assert line == (f"jid=$(sbatch --parsable --array=3 {script}) && "
                    f"sbatch --dependency=afterok:$jid {merge}")
    # The line exactly as printed, run from another folder in a shell without the environment.
    proc = subprocess.run(["bash", "-c", line.replace("sbatch ", f"sbatch {_export(env)} ")],
                          env=env, cwd="/", capture_output=True, text=True, timeout=60)
    assert proc.returncode == 0, proc.stderr
    second_merge = re.search(r"Submitted batch job (\d+)", proc.stdout).group(1)
    resubmitted = str(int(second_merge) - 1)  # sbatch numbers jobs in order
    states = _wait(env, [resubmitted, second_merge], folder)
    assert set(states.values()) == {"COMPLETED"}, (states, _logs(folder))
    result = runner.invoke(app, ["shards", str(folder)])
    assert result.exit_code == 0 and "4 done" in result.stdout, result.output

    local = tmp_path / "local.h5"
    result = runner.invoke(app, ["run", str(job), "-o", str(local), "--no-progress"])
    assert result.exit_code == 0, result.output
    merged = tmp_path / "out" / "full.h5"
    a, b = Results.read(merged), Results.read(local)
    assert list(a.variables) == list(b.variables) and a.n_done == a.size
    for name in a.variables:
        if name == "point_seconds":  # compute times differ from run to run
            continue
        assert a.data[name].dtype == b.data[name].dtype, name
        assert a.data[name].tobytes() == b.data[name].tobytes(), name
    assert a.done.tobytes() == b.done.tobytes()
    assert a.failure.tolist() == b.failure.tolist()
    # Every shard's own provenance, the resubmitted one included.
    table = a.tables["shards"]
    assert table["shard"].tolist() == ["1/4", "2/4", "3/4", "4/4"]
    for i in range(4):
        assert f"--shard {i + 1}/4" in table["command_line"][i]
        assert table["host"][i] and table["started"][i] and table["finished"][i]
    with h5py.File(merged) as f:
        assert "shard" not in f.attrs


def _logs(folder):
    return "\n".join(f"{p.name}:\n{p.read_text()}" for p in sorted(folder.glob("*.log")))
