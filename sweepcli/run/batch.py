"""Array-job scripts for Slurm and PBS, sized from the cost estimate and (by default) the
measured time of one grid point, and the state of their shards. No scheduler is called.

The scripts name every file by its absolute path, change to their own folder, and run the
Python interpreter ``sweepcli batch`` was run with (``PYTHON -m sweepcli``), so they work from
any directory and without the environment activated. Each task names its shard from its array
index and the shard count written in the script (``--shard $SLURM_ARRAY_TASK_ID/N``), so any
subset of tasks can be resubmitted (``sbatch --array=3,5``). A manifest
(``NAME.batch.json``) beside the scripts records the job, the shard files and the scripts for
:func:`shard_states`.
"""

from __future__ import annotations

import json
import math
import os
import shlex
import sys
from dataclasses import dataclass
from pathlib import Path

from ..errors import ResultsError, SweepError
from ..jobfile import Job
from ..store import Results
from .cost import MeasuredCost, estimate
from .shards import Shard

# Wall time = WALL_FACTOR x the work of a task + WALL_FLOOR_S (start-up, imports, checkpoints);
# memory = MEMORY_FACTOR x the estimated peak + MEMORY_FLOOR_MB.
WALL_FACTOR = 1.5
WALL_FLOOR_S = 60
MEMORY_FACTOR = 1.5
MEMORY_FLOOR_MB = 64
#: The variable naming the shard of a PBS task submitted alone (``qsub -v SWEEPCLI_TASK=3``).
PBS_TASK_VARIABLE = "SWEEPCLI_TASK"
MANIFEST_SUFFIX = ".batch.json"


@dataclass(frozen=True)
class BatchPlan:
    """An array job's shape and size.

    ``seconds_per_point`` is the time the wall time was sized with and ``basis`` says where it
    came from (given, estimated, or the larger of the estimate and one timed point). A
    ``[confirm]`` job's tasks each compute the bulk measurements on every point (the selection
    needs the whole map) and the boundary ones on about ``cells_per_task`` selected cells.
    """

    tasks: int
    workers: int
    walltime_s: int
    memory_mb: int
    points_per_task: int
    seconds_per_point: float
    basis: str
    cells_per_task: int | None = None


def plan(job: Job, tasks: int, workers: int, seconds_per_point: float | None = None,
         measured: float | None = None, previous: MeasuredCost | None = None) -> BatchPlan:
    """Size an array job of ``tasks`` shards with ``workers`` processes each.

    The per-point time is ``seconds_per_point`` if given; otherwise the estimate
    (:func:`~sweepcli.run.cost.estimate`), or the larger of the estimate and ``measured`` (the
    time of one evaluated grid point): one point may be an easy one, and the estimate is for a
    typical point. For a ``[confirm]`` job that time is split between bulk and boundary
    measurements as in the estimate, and a task is sized for the bulk on every point plus its
    share of the planned selected cells (:func:`~sweepcli.run.cost.selected_cells`).
    ``previous`` (:func:`~sweepcli.run.cost.measured_cost`, the times a previous run of the job
    stored) takes the place of the estimate and the timed point: its mean over the grid, which
    for a ``[confirm]`` job already spreads the boundary measurements over the points.
    """
    cost = estimate(job)
    if seconds_per_point is not None:
        per_point, basis = seconds_per_point, "given with --seconds-per-point"
    elif previous is not None:
        per_point = previous.mean
        basis = (f"measured: mean over the {previous.points} points of {previous.path}, "
                 f"slowest {previous.slowest:.3g} s")
    elif measured is None:
        per_point, basis = cost.seconds_per_point, "estimated"
    else:
        per_point = max(cost.seconds_per_point, measured)
        basis = (f"the larger of the estimate ({cost.seconds_per_point:.3g} s) and the timed "
                 f"middle grid point ({measured:.3g} s)")
    per_task = math.ceil(job.size / tasks)
    cells = None
    if cost.cells is None or (previous is not None and seconds_per_point is None):
        work = per_point * per_task
    else:
        scale = per_point / cost.seconds_per_point if cost.seconds_per_point > 0 else 1.0
        cells = math.ceil(cost.cells[1] / tasks)
        work = scale * (cost.bulk_seconds * job.size + cost.boundary_seconds * cells)
    seconds = WALL_FACTOR * work / workers + WALL_FLOOR_S
    memory = math.ceil(MEMORY_FACTOR * cost.memory_bytes * workers / 2**20) + MEMORY_FLOOR_MB
    return BatchPlan(tasks, workers, int(math.ceil(seconds)), memory, per_task, per_point, basis,
                     cells)


def signal_lead(walltime_s: int) -> int:
    """Seconds before the time limit at which Slurm sends SIGTERM (the run then saves its
    points and stops): 120, or a fifth of a short wall time, at least 10."""
    return max(10, min(120, walltime_s // 5))


def _hms(seconds: int) -> str:
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h:02d}:{m:02d}:{s:02d}"


def shard_outputs(job: Job, tasks: int) -> list[str]:
    """The shard files of ``tasks`` shards, as the job's ``[output] path`` names them."""
    out = Path(job.output)
    return [str(out.with_name(out.stem + Shard(i, tasks).suffix() + out.suffix))
            for i in range(1, tasks + 1)]


def _absolute(path: str | Path) -> str:
    """``path`` made absolute against the current directory, symbolic links kept (a virtual
    environment's ``bin/python`` is a link that must not be followed out of it)."""
    return os.path.abspath(os.fspath(path))


@dataclass(frozen=True)
class Manifest:
    """What ``batch`` wrote for one job: every path absolute."""

    name: str
    job: str
    tasks: int
    output: str
    shards: tuple[str, ...]
    python: str
    directory: str

    def script(self, kind: str) -> str:
        """The path of the script ``kind``: ``slurm``, ``merge.slurm``, ``pbs`` or ``merge.pbs``."""
        return str(Path(self.directory) / f"{self.name}.{kind}.sh")

    @property
    def path(self) -> str:
        return str(Path(self.directory) / (self.name + MANIFEST_SUFFIX))


def manifest(job: Job, job_path: str | Path, tasks: int, directory: str | Path,
             python: str | None = None) -> Manifest:
    """The manifest of ``tasks`` shards of ``job`` with scripts in ``directory``; relative paths
    are taken from the current directory, as a local run would; ``python`` defaults to the
    running interpreter."""
    return Manifest(job.name, _absolute(job_path), tasks, _absolute(job.output),
                    tuple(_absolute(s) for s in shard_outputs(job, tasks)),
                    _absolute(python or sys.executable), _absolute(directory))


def _task_output(m: Manifest) -> str:
    """The shell words of the shard file of task ``$task`` (zero-padded as Shard.suffix)."""
    first = Path(m.shards[0])
    head, tail = f"{first.parent}/{Path(m.output).stem}.shard-", f"-of-{m.tasks}{first.suffix}"
    return f'{shlex.quote(head)}"$index"{shlex.quote(tail)}'


def scripts(job: Job, p: BatchPlan, m: Manifest) -> dict[str, str]:
    """``{file name: text}``: array job and merge job for Slurm and for PBS, and the manifest."""
    q = shlex.quote
    # --failed-ok: a task whose points failed (stored with their reasons) still lets the merge run.
    run_args = f"--resume --workers {p.workers} --no-progress --failed-ok"
    python = f"python={q(m.python)}\n"
    merge_line = (f'exec "$python" -m sweepcli merge --replace {q(m.output)} '
                  + " ".join(q(s) for s in m.shards))
    name, n = job.name, p.tasks
    width = len(str(n))
    head = (f"# sweepcli array job for {m.job}: {job.size} grid points in {n} shards of "
            f"about {p.points_per_task} points.\n"
            f"# Wall time: {WALL_FACTOR:g} x {p.seconds_per_point:.3g} s per point ({p.basis})"
            f" + {WALL_FLOOR_S} s;\n# memory: {MEMORY_FACTOR:g} x the estimated peak + "
            f"{MEMORY_FLOOR_MB} MiB. Edit account and partition/queue below.\n"
            f"# Paths are absolute; the job runs in {m.directory} with the Python\n"
            f"# `sweepcli batch` was run with ({m.python}); to use another environment, edit "
            "python= below.\n"
            f"# Which shards are done, and how to resubmit the others: "
            f"{q(m.python)} -m sweepcli shards {q(m.directory)}\n")
    if p.cells_per_task is not None:
        head += ("# [confirm]: every task computes the bulk measurements on all "
                 f"{job.size} points (the\n# selection needs the whole bulk map) and the "
                 f"boundary measurements on its own selected\n# cells, sized for about "
                 f"{p.cells_per_task} per task; a task that runs out of time saves its work,\n"
                 "# and resubmitting it continues (--resume). Merging gives the file of one "
                 "run.\n")
    slurm_script, slurm_merge_script = q(m.script("slurm")), q(m.script("merge.slurm"))
    pbs_script, pbs_merge_script = q(m.script("pbs")), q(m.script("merge.pbs"))
    run_line = (f'exec "$python" -m sweepcli run {q(m.job)} --shard "$task/{n}" '
                f"-o {_task_output(m)} {run_args}\n")
    pad = f"printf -v index '%0{width}d' \"$task\"\n"
    submit = (f"# Submit:  jid=$(sbatch --parsable {slurm_script}) && sbatch "
              f"--dependency=afterok:$jid {slurm_merge_script}\n")
    pbs_submit = (f"# Submit:  jid=$(qsub -J 1-{n} {pbs_script}) && qsub -W depend=afterok:$jid "
                  f"{pbs_merge_script}\n")
    pbs_task = (f"task=${{PBS_ARRAY_INDEX:-${{PBS_ARRAYID:-${{{PBS_TASK_VARIABLE}:?submit with "
                f"qsub -J 1-{n} or -v {PBS_TASK_VARIABLE}=I}}}}}}\n")
    slurm = f"""#!/bin/bash
{head}{submit}# Resubmit tasks 3 and 5 only (shards 3/{n}, 5/{n}): sbatch --array=3,5 SCRIPT
#SBATCH --job-name={name}
#SBATCH --array=1-{n}
#SBATCH --cpus-per-task={p.workers}
#SBATCH --mem={p.memory_mb}M
#SBATCH --time={_hms(p.walltime_s)}
#SBATCH --signal=B:TERM@{signal_lead(p.walltime_s)}
#SBATCH --chdir={m.directory}
#SBATCH --output={m.directory}/{name}-%A_%a.log
##SBATCH --account=EDIT_ME
##SBATCH --partition=EDIT_ME
set -euo pipefail
{python}# The array index is the shard: task I of this script computes shard I/{n}, whatever array
# it was submitted with. SIGTERM at the time limit makes it save its finished points;
# resubmitting the same task continues them (--resume).
task=${{SLURM_ARRAY_TASK_ID:?submit this script as an array job: sbatch --array=1-{n}}}
{pad}{run_line}"""
    slurm_merge = f"""#!/bin/bash
{head}# Submit after the array job: sbatch --dependency=afterok:$jid {slurm_merge_script}
# Rerunning it (after resubmitting a shard) replaces the merged file it wrote before.
#SBATCH --job-name={name}-merge
#SBATCH --cpus-per-task=1
#SBATCH --mem={max(1024, p.memory_mb)}M
#SBATCH --time=01:00:00
#SBATCH --chdir={m.directory}
#SBATCH --output={m.directory}/{name}-merge-%j.log
##SBATCH --account=EDIT_ME
##SBATCH --partition=EDIT_ME
set -euo pipefail
{python}{merge_line}
"""
    pbs = f"""#!/bin/bash
{head}{pbs_submit}# (Torque: qsub -t 1-{n}.) Resubmit shards 3 to 5: qsub -J 3-5 SCRIPT;
# one shard, 3: qsub -v {PBS_TASK_VARIABLE}=3 SCRIPT
#PBS -N {name}
#PBS -l select=1:ncpus={p.workers}:mem={p.memory_mb}mb
#PBS -l walltime={_hms(p.walltime_s)}
#PBS -j oe
##PBS -A EDIT_ME
##PBS -q EDIT_ME
set -euo pipefail
cd {q(m.directory)}
{python}# The array index (PBS_ARRAY_INDEX of PBS Pro, PBS_ARRAYID of Torque) or
# {PBS_TASK_VARIABLE} is the shard: task I computes shard I/{n}.
{pbs_task}{pad}{run_line}"""
    pbs_merge = f"""#!/bin/bash
{head}# Submit after the array job: qsub -W depend=afterok:$jid {pbs_merge_script}
# Rerunning it (after resubmitting a shard) replaces the merged file it wrote before.
#PBS -N {name}-merge
#PBS -l select=1:ncpus=1:mem={max(1024, p.memory_mb)}mb
#PBS -l walltime=01:00:00
#PBS -j oe
##PBS -A EDIT_ME
##PBS -q EDIT_ME
set -euo pipefail
cd {q(m.directory)}
{python}{merge_line}
"""
    record = {"name": m.name, "job": m.job, "tasks": m.tasks, "output": m.output,
              "shards": list(m.shards), "python": m.python}
    return {f"{name}.slurm.sh": slurm, f"{name}.merge.slurm.sh": slurm_merge,
            f"{name}.pbs.sh": pbs, f"{name}.merge.pbs.sh": pbs_merge,
            name + MANIFEST_SUFFIX: json.dumps(record, indent=1) + "\n"}


def read_manifests(directory: str | Path) -> list[Manifest]:
    """The manifests ``batch`` wrote in ``directory`` (one per job), sorted by name.

    Raises
    ------
    SweepError
        If there is none, or one is not a manifest.
    """
    folder = Path(directory)
    if not folder.is_dir():
        raise SweepError(f"{folder}: is not a directory of batch scripts (written by "
                         "`sweepcli batch JOB --dir DIR`).")
    found = sorted(folder.glob("*" + MANIFEST_SUFFIX))
    if not found:
        raise SweepError(f"{folder}: holds no *{MANIFEST_SUFFIX} manifest; write the scripts "
                         "with `sweepcli batch JOB --dir DIR` first.")
    out = []
    for path in found:
        try:
            record = json.loads(path.read_text())
            out.append(Manifest(str(record["name"]), str(record["job"]), int(record["tasks"]),
                                str(record["output"]), tuple(map(str, record["shards"])),
                                str(record["python"]), _absolute(folder)))
        except (OSError, UnicodeDecodeError, ValueError, KeyError, TypeError) as exc:
            raise SweepError(f"{path}: is not a manifest written by `sweepcli batch` "
                             f"({type(exc).__name__}: {exc}).") from None
        if len(out[-1].shards) != out[-1].tasks:
            raise SweepError(f"{path}: names {len(out[-1].shards)} shard files for "
                             f"{out[-1].tasks} tasks; write the scripts again with `batch`.")
    return out


@dataclass(frozen=True)
class ShardState:
    """One shard file: ``state`` is ``done`` (finished, every point of the shard evaluated),
    ``partial`` (started, not finished: a task stopped or still running), ``absent`` or
    ``unusable`` (unreadable, or of another job or shard: ``note`` says which)."""

    index: int
    path: str
    state: str
    done: int
    total: int
    failed: int = 0
    note: str = ""


def shard_states(m: Manifest, job_sha256: str, size: int) -> list[ShardState]:
    """The state of every shard file of ``m``, for a job of hash ``job_sha256`` and ``size``
    grid points."""
    out = []
    for i, path in enumerate(m.shards, start=1):
        shard = Shard(i, m.tasks)
        total = len(shard.indices(size))
        if not Path(path).exists():
            out.append(ShardState(i, path, "absent", 0, total))
            continue
        try:
            r = Results.read(path)
        except ResultsError as exc:
            out.append(ShardState(i, path, "unusable", 0, total, note=str(exc)))
            continue
        note = ""
        if r.attrs.get("job_sha256") != job_sha256:
            note = "written by another job (sha256 differs)"
        elif r.attrs.get("shard", "") != shard.label():
            note = f"holds shard {r.attrs.get('shard') or 'none'!r}, not {shard.label()!r}"
        if note:
            out.append(ShardState(i, path, "unusable", 0, total, note=note))
            continue
        flat = shard.indices(size)
        done = int(r.done.ravel()[flat].astype(bool).sum())
        failed = int(sum(1 for k in flat if r.failure.ravel()[k]))
        state = "done" if r.attrs.get("finished") and done == total else "partial"
        out.append(ShardState(i, path, state, done, total, failed))
    return out


def array_list(indices: list[int]) -> str:
    """``[2, 3, 4, 7]`` as Slurm's ``--array`` list ``2-4,7``."""
    parts, start = [], None
    for k, i in enumerate(indices):
        if start is None:
            start = i
        if k + 1 == len(indices) or indices[k + 1] != i + 1:
            parts.append(str(start) if start == i else f"{start}-{i}")
            start = None
    return ",".join(parts)


def resubmit_commands(m: Manifest, indices: list[int]) -> dict[str, list[str]]:
    """The commands that run the shards ``indices`` again and then the merge, per scheduler."""
    q = shlex.quote
    slurm = [f"jid=$(sbatch --parsable --array={array_list(indices)} {q(m.script('slurm'))}) "
             f"&& sbatch --dependency=afterok:$jid {q(m.script('merge.slurm'))}"]
    pbs = []
    for part in array_list(indices).split(","):
        if "-" in part:
            pbs.append(f"qsub -J {part} {q(m.script('pbs'))}")
        else:
            pbs.append(f"qsub -v {PBS_TASK_VARIABLE}={part} {q(m.script('pbs'))}")
    pbs.append(f"then: qsub {q(m.script('merge.pbs'))}")
    return {"slurm": slurm, "pbs": pbs}


def merge_commands(m: Manifest) -> dict[str, str]:
    """The commands that merge the shards of ``m``: on Slurm, on PBS, and here."""
    q = shlex.quote
    return {"slurm": f"sbatch {q(m.script('merge.slurm'))}",
            "pbs": f"qsub {q(m.script('merge.pbs'))}",
            "here": f"bash {q(m.script('merge.slurm'))}"}
