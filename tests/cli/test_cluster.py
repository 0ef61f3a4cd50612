"""Shards and merge, batch scripts, and the dask engine on a LocalCluster (loopback)."""

import subprocess

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.errors import SweepError
from sweepcli.run.shards import Shard, parse_shard

from .test_end_to_end import assert_same_content

JOB = """
[job]
name = "shardy"
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


@pytest.fixture
def job(tmp_path):
    path = tmp_path / "job.toml"
    path.write_text(JOB.replace("OUT", str(tmp_path / "full.h5")))
    return path


def invoke(*args):
    return CliRunner().invoke(app, [str(a) for a in args])


def test_shards_cover_the_grid_once():
    size = 27
    parts = [Shard(i, 4).indices(size) for i in range(1, 5)]
    assert np.array_equal(np.sort(np.concatenate(parts)), np.arange(size))
    assert max(map(len, parts)) - min(map(len, parts)) <= 1


def test_shard_from_the_environment():
    slurm = {"SLURM_ARRAY_TASK_ID": "7", "SLURM_ARRAY_TASK_MIN": "5", "SLURM_ARRAY_TASK_COUNT": "4"}
    assert parse_shard("auto", slurm) == Shard(3, 4)
    stepped = {"SLURM_ARRAY_TASK_ID": "20", "SLURM_ARRAY_TASK_MIN": "0",
               "SLURM_ARRAY_TASK_STEP": "10", "SLURM_ARRAY_TASK_MAX": "30"}
    assert parse_shard("auto", stepped) == Shard(3, 4)
    assert parse_shard("auto/8", {"PBS_ARRAY_INDEX": "2"}) == Shard(2, 8)
    assert parse_shard("auto/8", {"PBS_ARRAYID": "8"}) == Shard(8, 8)
    with pytest.raises(SweepError, match="PBS exports no array size"):
        parse_shard("auto", {"PBS_ARRAY_INDEX": "2"})
    with pytest.raises(SweepError, match="no array-task index in the environment"):
        parse_shard("auto", {})
    with pytest.raises(SweepError, match="--shard must be"):
        parse_shard("5/4", {})


def test_four_shards_merged_equal_a_full_run(job, tmp_path):
    assert invoke("run", job, "--no-progress").exit_code == 0
    shards = []
    for i in range(1, 5):
        result = invoke("run", job, "--shard", f"{i}/4", "--no-progress")
        assert result.exit_code == 0, result.output
        shards.append(tmp_path / f"full.shard-{i}-of-4.h5")
    merged = tmp_path / "merged.h5"
    result = invoke("merge", merged, *shards)
    assert result.exit_code == 0, result.output
    assert "merged 4 shards: 27/27 points" in result.stdout
    assert_same_content(merged, tmp_path / "full.h5")


def test_incomplete_set_is_refused_and_reported(job, tmp_path):
    for i in (1, 2):
        assert invoke("run", job, "--shard", f"{i}/3", "--no-progress").exit_code == 0
    shards = [tmp_path / f"full.shard-{i}-of-3.h5" for i in (1, 2)]
    result = invoke("merge", tmp_path / "m.h5", *shards)
    assert result.exit_code == 2
    assert "9 of 27 points are in none of the 2 shards (first: m=-3, t=1.5;" in result.stderr
    assert not (tmp_path / "m.h5").exists()
    result = invoke("merge", tmp_path / "m.h5", *shards, "--partial")
    assert result.exit_code == 0 and (tmp_path / "m.h5").exists()


def test_shards_of_different_jobs_are_refused(job, tmp_path):
    other = tmp_path / "other.toml"
    other.write_text(job.read_text().replace("[measure.chern]", "[measure.chern]\nkmesh = 30"))
    assert invoke("run", job, "--shard", "1/2", "--no-progress").exit_code == 0
    assert invoke("run", other, "--shard", "2/2", "--no-progress").exit_code == 0
    result = invoke("merge", tmp_path / "m.h5", tmp_path / "full.shard-1-of-2.h5",
                    tmp_path / "full.shard-2-of-2.h5")
    assert result.exit_code == 2
    assert "belongs to a different job" in result.stderr


def test_overlapping_shards_with_conflicting_values_are_refused(job, tmp_path):
    import h5py

    assert invoke("run", job, "--shard", "1/2", "--no-progress").exit_code == 0
    a = tmp_path / "full.shard-1-of-2.h5"
    b = tmp_path / "copy.h5"
    b.write_bytes(a.read_bytes())
    with h5py.File(b, "r+") as f:
        f["gap"][0, 0] = f["gap"][0, 0] + 1.0
        f.attrs["shard"] = "2/2"  # posing as the other shard, so only the values conflict
    result = invoke("merge", tmp_path / "m.h5", a, b, "--partial")
    assert result.exit_code == 2
    assert ("point m=-3, t=0.5 was also computed in another shard with a different gap"
            in result.stderr)


def test_the_same_shard_twice_is_refused(job, tmp_path):
    assert invoke("run", job, "--shard", "1/2", "--no-progress").exit_code == 0
    a = tmp_path / "full.shard-1-of-2.h5"
    result = invoke("merge", tmp_path / "m.h5", a, a, "--partial")
    assert result.exit_code == 2
    assert f"{a}: is given twice" in result.stderr and not (tmp_path / "m.h5").exists()
    copy = tmp_path / "copy.h5"
    copy.write_bytes(a.read_bytes())
    result = invoke("merge", tmp_path / "m.h5", a, copy, "--partial")
    assert result.exit_code == 2
    assert f"{copy}: holds shard 1/2, as does {a}" in result.stderr


def test_batch_scripts_are_valid_shell_naming_the_shard_variables(job, tmp_path):
    result = invoke("batch", job, "--tasks", "4", "--workers", "2", "--dir", tmp_path / "b")
    assert result.exit_code == 0, result.output
    names = ["shardy.slurm.sh", "shardy.merge.slurm.sh", "shardy.pbs.sh", "shardy.merge.pbs.sh"]
    for name in names:
        subprocess.run(["bash", "-n", str(tmp_path / "b" / name)], check=True)
    slurm = (tmp_path / "b" / "shardy.slurm.sh").read_text()
    assert "#SBATCH --array=1-4" in slurm and "--shard auto " in slurm
    assert "SLURM_ARRAY_TASK_ID" in slurm and "SLURM_ARRAY_TASK_COUNT" in slurm
    pbs = (tmp_path / "b" / "shardy.pbs.sh").read_text()
    assert "#PBS -J 1-4" in pbs and "--shard auto/4" in pbs
    assert "PBS_ARRAY_INDEX" in pbs and "PBS_ARRAYID" in pbs
    merge = (tmp_path / "b" / "shardy.merge.slurm.sh").read_text()
    assert "sweepcli merge" in merge and "full.shard-4-of-4.h5" in merge


def test_local_dask_cluster_equals_a_joblib_run(job, tmp_path):
    pytest.importorskip("distributed")
    from distributed import LocalCluster

    assert invoke("run", job, "-o", tmp_path / "joblib.h5", "--workers", "2",
                  "--no-progress").exit_code == 0
    with LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                      dashboard_address=None, processes=True) as cluster:
        result = invoke("run", job, "-o", tmp_path / "dask.h5", "--scheduler",
                        cluster.scheduler_address, "--no-progress")
        assert result.exit_code == 0, result.output
    assert_same_content(tmp_path / "dask.h5", tmp_path / "joblib.h5")


def test_check_can_time_one_point_and_batch_can_use_it(job, tmp_path):
    result = invoke("check", job, "--time-one")
    assert result.exit_code == 0, result.output
    assert "measured: " in result.stdout and "s for the middle grid point" in result.stdout
    result = invoke("batch", job, "--tasks", "3", "--seconds-per-point", "600", "--dir",
                    tmp_path / "b")
    assert result.exit_code == 0, result.output
    # 9 points per task x 600 s x safety 2 + 10 min margin = 3 h 10 min.
    assert "#SBATCH --time=03:10:00" in (tmp_path / "b" / "shardy.slurm.sh").read_text()
    assert "#PBS -l walltime=03:10:00" in (tmp_path / "b" / "shardy.pbs.sh").read_text()
    result = invoke("batch", job, "--tasks", "3", "--time-one", "--dir", tmp_path / "c")
    assert result.exit_code == 0, result.output
    assert "#SBATCH --time=00:1" in (tmp_path / "c" / "shardy.slurm.sh").read_text()  # ~10 min


def test_batch_times_one_point_by_default_and_says_so(job, tmp_path):
    result = invoke("batch", job, "--tasks", "3", "--dir", tmp_path / "a")
    assert result.exit_code == 0, result.output
    assert result.stdout.startswith("timed the middle grid point: ")
    assert "s per point (the larger of the estimate (" in result.stdout
    slurm = (tmp_path / "a" / "shardy.slurm.sh").read_text()
    assert "and the timed middle grid point (" in slurm
    result = invoke("batch", job, "--tasks", "3", "--no-time-one", "--dir", tmp_path / "b")
    assert result.exit_code == 0, result.output
    assert "timed" not in result.stdout and "s per point (estimated)" in result.stdout


def test_batch_plan_takes_the_longer_of_estimate_and_timed_point(job):
    from sweepcli.jobfile import load_job
    from sweepcli.run.batch import MARGIN_S, SAFETY, plan

    j = load_job(job)
    # A timed point far above any estimate of this small job sizes the wall time: 9 points per
    # task x 1000 s x safety + margin.
    p = plan(j, 3, 1, measured=1000.0)
    assert p.seconds_per_point == 1000.0
    assert p.walltime_s == SAFETY * 1000 * 9 + MARGIN_S
    # A given per-point time overrides both.
    assert plan(j, 3, 1, seconds_per_point=5.0, measured=1000.0).seconds_per_point == 5.0
    # A fast timed point never lowers the estimate (which is positive).
    fast = plan(j, 3, 1, measured=0.0)
    assert fast.seconds_per_point > 0 and fast.basis.startswith("the larger of the estimate")
    assert plan(j, 3, 1).basis == "estimated"


FAKE_SBATCH = """#!/bin/bash
# Fake sbatch: run the job script in the background on this machine and print a job id.
script="${@: -1}"
id=$RANDOM
cp "$script" "$FAKE_SLURM/job-$id.sh"
nohup bash "$FAKE_SLURM/job-$id.sh" > "$FAKE_SLURM/job-$id.log" 2>&1 &
echo $! > "$FAKE_SLURM/job-$id.pid"
echo "Submitted batch job $id"
"""
FAKE_SCANCEL = """#!/bin/bash
for id in "$@"; do f="$FAKE_SLURM/job-$id.pid"; [ -f "$f" ] && pkill -P "$(cat "$f")"; done
exit 0
"""


def test_slurm_cluster_through_a_fake_sbatch(job, tmp_path):
    # dask-jobqueue writes a real Slurm job script; a stand-in sbatch runs it here, so the
    # SLURMCluster path (--dask-cluster slurm:N) is exercised without a scheduler.
    pytest.importorskip("dask_jobqueue")
    import os
    import signal
    import sys

    fake = tmp_path / "fake-slurm"
    fake.mkdir()
    for name, text in (("sbatch", FAKE_SBATCH), ("scancel", FAKE_SCANCEL)):
        (fake / name).write_text(text)
        (fake / name).chmod(0o755)
    env = dict(os.environ, PATH=f"{fake}:{os.path.dirname(sys.executable)}:{os.environ['PATH']}",
               FAKE_SLURM=str(fake), TQDM_DISABLE="1", DASK_JOBQUEUE__SLURM__CORES="1",
               DASK_JOBQUEUE__SLURM__MEMORY="2GB", DASK_JOBQUEUE__SLURM__INTERFACE="lo",
               DASK_JOBQUEUE__SLURM__SCHEDULER_OPTIONS='{"host": "127.0.0.1"}')
    try:
        proc = subprocess.run([sys.executable, "-m", "sweepcli", "run", str(job), "-o",
                               str(tmp_path / "slurm.h5"), "--dask-cluster", "slurm:1",
                               "--no-progress"], env=env, capture_output=True, text=True,
                              timeout=240)
        assert proc.returncode == 0, proc.stderr
        assert list(fake.glob("job-*.sh")), "sbatch was never called"
        assert "#SBATCH" in next(fake.glob("job-*.sh")).read_text()
    finally:
        for pid_file in fake.glob("job-*.pid"):
            subprocess.run(["pkill", "-P", pid_file.read_text().strip()], check=False)
            try:
                os.kill(int(pid_file.read_text()), signal.SIGKILL)
            except ProcessLookupError:
                pass
    assert invoke("run", job, "-o", tmp_path / "local.h5", "--no-progress").exit_code == 0
    assert_same_content(tmp_path / "slurm.h5", tmp_path / "local.h5")
