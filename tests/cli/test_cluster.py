"""Shards and merge, batch scripts, and the dask engine on a LocalCluster (loopback)."""

import os
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


def test_batch_scripts_are_valid_shell_naming_the_shard_explicitly(job, tmp_path):
    result = invoke("batch", job, "--tasks", "4", "--workers", "2", "--dir", tmp_path / "b")
    assert result.exit_code == 0, result.output
    names = ["shardy.slurm.sh", "shardy.merge.slurm.sh", "shardy.pbs.sh", "shardy.merge.pbs.sh"]
    for name in names:
        subprocess.run(["bash", "-n", str(tmp_path / "b" / name)], check=True)
    slurm = (tmp_path / "b" / "shardy.slurm.sh").read_text()
    # The array index is the shard; the array's bounds are not read (a resubmitted --array=3
    # has bounds 3-3 and one task).
    assert "#SBATCH --array=1-4" in slurm and '--shard "$task/4"' in slurm
    assert "task=${SLURM_ARRAY_TASK_ID:?" in slurm and "--shard auto" not in slurm
    assert "SLURM_ARRAY_TASK_COUNT" not in slurm and "SLURM_ARRAY_TASK_MIN" not in slurm
    pbs = (tmp_path / "b" / "shardy.pbs.sh").read_text()
    assert '--shard "$task/4"' in pbs and "--shard auto" not in pbs
    assert "PBS_ARRAY_INDEX" in pbs and "PBS_ARRAYID" in pbs and "SWEEPCLI_TASK" in pbs
    merge = (tmp_path / "b" / "shardy.merge.slurm.sh").read_text()
    assert "-m sweepcli merge --replace" in merge and "full.shard-4-of-4.h5" in merge


def _script_env(**extra):
    """A bare environment, as `sbatch --export=NONE` gives: no virtual environment on PATH, only
    PYTHONPATH kept where the tests run the package from a source tree."""
    env = {"PATH": "/usr/bin:/bin", "HOME": os.environ.get("HOME", "/tmp"),
           "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1"}
    if "PYTHONPATH" in os.environ:
        env["PYTHONPATH"] = os.environ["PYTHONPATH"]
    return {**env, **extra}


def test_a_resubmitted_task_computes_its_own_shard(job, tmp_path):
    # What Slurm sets for `sbatch --array=3 SCRIPT`, and for task 4 of `--array=2,4`: the
    # script must compute shards 3/4 and 4/4, not shard 1/1 or 2/2 (the bounds of the array).
    import h5py

    assert invoke("batch", job, "--tasks", "4", "--dir", tmp_path / "b",
                  "--seconds-per-point", "1").exit_code == 0
    script = tmp_path / "b" / "shardy.slurm.sh"
    for task, bounds in ((3, {"SLURM_ARRAY_TASK_MIN": "3", "SLURM_ARRAY_TASK_MAX": "3",
                              "SLURM_ARRAY_TASK_COUNT": "1"}),
                         (4, {"SLURM_ARRAY_TASK_MIN": "2", "SLURM_ARRAY_TASK_MAX": "4",
                              "SLURM_ARRAY_TASK_STEP": "2", "SLURM_ARRAY_TASK_COUNT": "2"})):
        proc = subprocess.run(["bash", str(script)], cwd="/", capture_output=True, text=True,
                              env=_script_env(SLURM_ARRAY_TASK_ID=str(task), **bounds))
        assert proc.returncode == 0, proc.stderr
        with h5py.File(tmp_path / f"full.shard-{task}-of-4.h5") as f:
            assert f.attrs["shard"] == f"{task}/4"
    assert not (tmp_path / "full.shard-1-of-1.h5").exists()
    assert not (tmp_path / "full.shard-1-of-2.h5").exists()
    # PBS: a task of an array, and one shard submitted alone (qsub -v SWEEPCLI_TASK=2).
    pbs = tmp_path / "b" / "shardy.pbs.sh"
    for task, env in ((1, {"PBS_ARRAY_INDEX": "1"}), (2, {"SWEEPCLI_TASK": "2"})):
        proc = subprocess.run(["bash", str(pbs)], cwd="/", capture_output=True, text=True,
                              env=_script_env(**env))
        assert proc.returncode == 0, proc.stderr
        with h5py.File(tmp_path / f"full.shard-{task}-of-4.h5") as f:
            assert f.attrs["shard"] == f"{task}/4"
    proc = subprocess.run(["bash", str(pbs)], capture_output=True, text=True, env=_script_env())
    assert proc.returncode != 0 and "submit with qsub -J 1-4" in proc.stderr


def test_batch_scripts_use_absolute_paths_their_folder_and_this_python(job, tmp_path,
                                                                       monkeypatch):
    import json
    import sys

    monkeypatch.chdir(tmp_path)
    relative = tmp_path / "rel.toml"
    relative.write_text(job.read_text().replace(str(tmp_path / "full.h5"), "out/r.h5"))
    result = invoke("batch", "rel.toml", "--tasks", "2", "--dir", "scripts",
                    "--seconds-per-point", "1")
    assert result.exit_code == 0, result.output
    folder = tmp_path / "scripts"
    slurm = (folder / "shardy.slurm.sh").read_text()
    assert f"#SBATCH --chdir={folder}\n" in slurm
    assert f"#SBATCH --output={folder}/shardy-%A_%a.log" in slurm
    assert f"python={sys.executable}\n" in slurm and 'exec "$python" -m sweepcli run' in slurm
    assert f"the Python\n# `sweepcli batch` was run with ({sys.executable})" in slurm
    assert f" {relative} --shard" in slurm and f"-o {tmp_path}/out/r.shard-" in slurm
    pbs = (folder / "shardy.pbs.sh").read_text()
    assert f"\ncd {folder}\n" in pbs and f"python={sys.executable}\n" in pbs
    for name in ("shardy.merge.slurm.sh", "shardy.merge.pbs.sh"):
        merge = (folder / name).read_text()
        assert (f"merge --replace {tmp_path}/out/r.h5 {tmp_path}/out/r.shard-1-of-2.h5 "
                f"{tmp_path}/out/r.shard-2-of-2.h5") in merge
    record = json.loads((folder / "shardy.batch.json").read_text())
    assert record["job"] == str(relative) and record["python"] == sys.executable
    # Submitted from another folder, with no environment, the scripts work.
    for task in ("1", "2"):
        proc = subprocess.run(["bash", str(folder / "shardy.slurm.sh")], cwd="/",
                              capture_output=True, text=True,
                              env=_script_env(SLURM_ARRAY_TASK_ID=task))
        assert proc.returncode == 0, proc.stderr
    proc = subprocess.run(["bash", str(folder / "shardy.merge.slurm.sh")], cwd="/",
                          capture_output=True, text=True, env=_script_env())
    assert proc.returncode == 0, proc.stderr
    assert (tmp_path / "out" / "r.h5").exists()


def test_the_merge_script_runs_again_after_a_shard_is_redone(job, tmp_path):
    import h5py

    assert invoke("run", job, "-o", tmp_path / "local.h5", "--no-progress").exit_code == 0
    assert invoke("batch", job, "--tasks", "2", "--dir", tmp_path / "b",
                  "--seconds-per-point", "1").exit_code == 0
    for i in (1, 2):
        assert invoke("run", job, "--shard", f"{i}/2", "--no-progress").exit_code == 0
    merge = ["bash", str(tmp_path / "b" / "shardy.merge.slurm.sh")]
    assert subprocess.run(merge, capture_output=True, env=_script_env()).returncode == 0
    # Shard 2 redone (deleted and run again); the merge runs again over its own earlier file.
    (tmp_path / "full.shard-2-of-2.h5").unlink()
    assert invoke("run", job, "--shard", "2/2", "--no-progress").exit_code == 0
    proc = subprocess.run(merge, capture_output=True, text=True, env=_script_env())
    assert proc.returncode == 0, proc.stderr
    assert not (tmp_path / "full.h5.tmp").exists()
    with h5py.File(tmp_path / "full.h5") as f:
        assert f["shards/shard"].asstr()[()].tolist() == ["1/2", "2/2"]
    assert_same_content(tmp_path / "full.h5", tmp_path / "local.h5")


def test_merge_replace_overwrites_only_an_earlier_merge_of_the_same_job(job, tmp_path):
    for i in (1, 2):
        assert invoke("run", job, "--shard", f"{i}/2", "--no-progress").exit_code == 0
    shards = [tmp_path / f"full.shard-{i}-of-2.h5" for i in (1, 2)]
    # A run's own file at OUT (not a merge) is kept.
    assert invoke("run", job, "-o", tmp_path / "run.h5", "--no-progress").exit_code == 0
    precious = (tmp_path / "run.h5").read_bytes()
    result = invoke("merge", "--replace", tmp_path / "run.h5", *shards)
    assert result.exit_code == 2
    assert f"{tmp_path / 'run.h5'}: exists and is not a merged file (no 'shards' table" in \
        result.stderr
    assert (tmp_path / "run.h5").read_bytes() == precious
    other = tmp_path / "note.txt"
    other.write_text("not results")
    result = invoke("merge", "--replace", other, *shards)
    assert result.exit_code == 2 and "exists and is not a merged results file" in result.stderr
    assert other.read_text() == "not results"
    # Without --replace or --force an existing file is refused, naming both options.
    assert invoke("merge", tmp_path / "m.h5", *shards).exit_code == 0
    result = invoke("merge", tmp_path / "m.h5", *shards)
    assert result.exit_code == 2 and "Use --force (or --replace" in result.stderr
    assert invoke("merge", "--replace", tmp_path / "m.h5", *shards).exit_code == 0
    # The merge of another job is not replaced.
    alt = tmp_path / "alt.toml"
    alt.write_text(job.read_text().replace("[measure.chern]", "[measure.chern]\nkmesh = 30")
                   .replace("full.h5", "alt.h5"))
    for i in (1, 2):
        assert invoke("run", alt, "--shard", f"{i}/2", "--no-progress").exit_code == 0
    result = invoke("merge", "--replace", tmp_path / "m.h5",
                    *[tmp_path / f"alt.shard-{i}-of-2.h5" for i in (1, 2)])
    assert result.exit_code == 2 and "is the merge of another job" in result.stderr


def test_merged_file_keeps_the_provenance_of_every_shard(job, tmp_path):
    import h5py

    from sweepcli.store import Results

    for i in (1, 2, 3):
        assert invoke("run", job, "--shard", f"{i}/3", "--no-progress").exit_code == 0
    shards = [tmp_path / f"full.shard-{i}-of-3.h5" for i in (1, 2, 3)]
    assert invoke("merge", tmp_path / "m.h5", *shards).exit_code == 0
    table = Results.read(tmp_path / "m.h5").tables["shards"]
    for i, path in enumerate(shards):
        with h5py.File(path) as f:
            for key in ("shard", "host", "command_line", "started", "finished",
                        "sweepcli_version", "python_version", "numpy_version", "hdf5_version"):
                assert table[key][i] == f.attrs[key], key
    assert table["shard"].tolist() == ["1/3", "2/3", "3/3"]
    # `export --table shards` writes it as CSV.
    result = invoke("export", tmp_path / "m.h5", "--table", "shards", "-o", tmp_path / "s.csv")
    assert result.exit_code == 0, result.output
    assert len((tmp_path / "s.csv").read_text().splitlines()) == 4


def test_shards_lists_done_partial_and_absent_with_the_resubmission_line(job, tmp_path):
    import h5py

    folder = tmp_path / "b"
    assert invoke("batch", job, "--tasks", "5", "--dir", folder,
                  "--seconds-per-point", "1").exit_code == 0
    for i in (1, 2, 4):
        assert invoke("run", job, "--shard", f"{i}/5", "--no-progress").exit_code == 0
    # Shard 2 stopped half way: its file says so (not finished, some points not done).
    with h5py.File(tmp_path / "full.shard-2-of-5.h5", "r+") as f:
        f.attrs["finished"] = ""
        done = f["done"][()]
        done.ravel()[np.flatnonzero(done.ravel())[:2]] = 0
        f["done"][...] = done
    result = invoke("shards", folder)
    assert result.exit_code == 5, result.output
    out = result.stdout
    assert f"shard 1/5  done     6/6 points  {tmp_path}/full.shard-1-of-5.h5" in out
    assert f"shard 2/5  partial  4/6 points  {tmp_path}/full.shard-2-of-5.h5" in out
    assert f"shard 3/5  absent     {tmp_path}/full.shard-3-of-5.h5" in out
    assert "2 done, 1 partial, 2 absent" in out
    assert (f"Slurm: jid=$(sbatch --parsable --array=2-3,5 {folder}/shardy.slurm.sh) && "
            f"sbatch --dependency=afterok:$jid {folder}/shardy.merge.slurm.sh") in out
    assert f"PBS:   qsub -J 2-3 {folder}/shardy.pbs.sh" in out
    assert f"qsub -v SWEEPCLI_TASK=5 {folder}/shardy.pbs.sh" in out
    for i in (2, 3, 5):
        assert invoke("run", job, "--shard", f"{i}/5", "--resume",
                      "--no-progress").exit_code == 0
    result = invoke("shards", folder)
    assert result.exit_code == 0, result.output
    assert "5 done" in result.stdout
    assert f"every shard is done; merge: sbatch {folder}/shardy.merge.slurm.sh" in result.stdout
    # A file of another shard where shard 1 belongs is unusable, and said so.
    (tmp_path / "full.shard-1-of-5.h5").write_bytes((tmp_path / "full.shard-3-of-5.h5")
                                                     .read_bytes())
    result = invoke("shards", folder)
    assert result.exit_code == 5
    assert "unusable" in result.stdout and "holds shard '3/5', not '1/5'" in result.stdout
    assert "move the unusable files away first" in result.stdout
    # Bad input: no manifest.
    result = invoke("shards", tmp_path)
    assert result.exit_code == 2 and "holds no *.batch.json manifest" in result.stderr


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
    # 9 points per task x 600 s x 1.5 + 1 min = 2 h 16 min.
    assert "#SBATCH --time=02:16:00" in (tmp_path / "b" / "shardy.slurm.sh").read_text()
    assert "#PBS -l walltime=02:16:00" in (tmp_path / "b" / "shardy.pbs.sh").read_text()
    result = invoke("batch", job, "--tasks", "3", "--time-one", "--dir", tmp_path / "c")
    assert result.exit_code == 0, result.output
    # This small job's points take milliseconds: about the one-minute floor, not ten minutes.
    assert "#SBATCH --time=00:01:0" in (tmp_path / "c" / "shardy.slurm.sh").read_text()


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
    from sweepcli.run.batch import WALL_FACTOR, WALL_FLOOR_S, plan

    j = load_job(job)
    # A timed point far above any estimate of this small job sizes the wall time: 9 points per
    # task x 1000 s x factor + floor.
    p = plan(j, 3, 1, measured=1000.0)
    assert p.seconds_per_point == 1000.0
    assert p.walltime_s == WALL_FACTOR * 1000 * 9 + WALL_FLOOR_S
    # A given per-point time overrides both.
    assert plan(j, 3, 1, seconds_per_point=5.0, measured=1000.0).seconds_per_point == 5.0
    # A fast timed point never lowers the estimate (which is positive).
    fast = plan(j, 3, 1, measured=0.0)
    assert fast.seconds_per_point > 0 and fast.basis.startswith("the larger of the estimate")
    assert plan(j, 3, 1).basis == "estimated"


def test_batch_margins_are_proportional(job):
    # The margins grow with the request: one-second tasks get about a minute more, not ten,
    # and memory is a multiple of the estimated peak plus a small floor, not +512 MiB.
    from sweepcli.jobfile import load_job
    from sweepcli.run.batch import signal_lead
    from sweepcli.run.cost import estimate

    j = load_job(job)
    short = plan_of(j, seconds_per_point=0.5)  # 9 points per task: 4.5 s of work
    assert short.walltime_s == 67  # ceil(1.5 x 4.5 s + 60 s)
    long = plan_of(j, seconds_per_point=200.0)
    assert long.walltime_s == 2760  # 1.5 x 1800 s + 60 s
    peak_mib = estimate(j).memory_bytes / 2**20
    assert short.memory_mb == int(np.ceil(1.5 * peak_mib)) + 64
    assert plan_of(j, workers=3).memory_mb == int(np.ceil(1.5 * 3 * peak_mib)) + 64
    # SIGTERM comes early enough to save, and never before a short task could start.
    assert signal_lead(67) == 13 and signal_lead(1560) == 120 and signal_lead(20) == 10


def plan_of(j, workers=1, seconds_per_point=1.0):
    from sweepcli.run.batch import plan

    return plan(j, 3, workers, seconds_per_point=seconds_per_point)


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
