"""Array-job scripts for Slurm and PBS, sized from the cost estimate and (by default) the
measured time of one grid point. No scheduler is called."""

from __future__ import annotations

import math
import shlex
from dataclasses import dataclass
from pathlib import Path

from ..jobfile import Job
from .cost import MeasuredCost, estimate
from .shards import Shard

SAFETY = 2.0  # wall time = SAFETY x estimate + MARGIN; the estimate is rough
MARGIN_S = 600


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
    seconds = SAFETY * work / workers + MARGIN_S
    memory = math.ceil((cost.memory_bytes * workers) / 2**20) + 512
    return BatchPlan(tasks, workers, int(math.ceil(seconds)), memory, per_task, per_point, basis,
                     cells)


def _hms(seconds: int) -> str:
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h:02d}:{m:02d}:{s:02d}"


def shard_outputs(job: Job, tasks: int) -> list[str]:
    out = Path(job.output)
    return [str(out.with_name(out.stem + Shard(i, tasks).suffix() + out.suffix))
            for i in range(1, tasks + 1)]


def scripts(job: Job, job_path: str, p: BatchPlan) -> dict[str, str]:
    """``{file name: script text}``: array job and merge job for Slurm and for PBS."""
    q = shlex.quote
    # --failed-ok: a task whose points failed (stored with their reasons) still lets the merge run.
    run_args = f"--resume --workers {p.workers} --no-progress --failed-ok"
    merge_line = (f"sweepcli merge {q(job.output)} "
                  + " ".join(q(s) for s in shard_outputs(job, p.tasks)))
    name = job.name
    head = (f"# sweepcli array job for {job_path}: {job.size} grid points in {p.tasks} shards of "
            f"about {p.points_per_task} points.\n"
            f"# Wall time: {SAFETY:g} x {p.seconds_per_point:.3g} s "
            f"per point ({p.basis}) + {MARGIN_S // 60} min;\n# memory from the estimate. Edit "
            "account and partition/queue below.\n")
    if p.cells_per_task is not None:
        head += ("# [confirm]: every task computes the bulk measurements on all "
                 f"{job.size} points (the\n# selection needs the whole bulk map) and the "
                 f"boundary measurements on its own selected\n# cells, sized for about "
                 f"{p.cells_per_task} per task; a task that runs out of time saves its work,\n"
                 "# and resubmitting it continues (--resume). Merging gives the file of one "
                 "run.\n")
    submit = (f"# Submit:  jid=$(sbatch --parsable {name}.slurm.sh) && "
              f"sbatch --dependency=afterok:$jid {name}.merge.slurm.sh\n")
    slurm = f"""#!/bin/bash
{head}{submit}#SBATCH --job-name={name}
#SBATCH --array=1-{p.tasks}
#SBATCH --cpus-per-task={p.workers}
#SBATCH --mem={p.memory_mb}M
#SBATCH --time={_hms(p.walltime_s)}
#SBATCH --signal=B:TERM@120
#SBATCH --output={name}-%A_%a.log
##SBATCH --account=EDIT_ME
##SBATCH --partition=EDIT_ME
set -euo pipefail
# sweepcli reads SLURM_ARRAY_TASK_ID, SLURM_ARRAY_TASK_MIN, SLURM_ARRAY_TASK_STEP and
# SLURM_ARRAY_TASK_COUNT (--shard auto). SIGTERM at the time limit makes it save its finished
# points; resubmitting the same task continues them (--resume).
exec sweepcli run {q(job_path)} --shard auto {run_args}
"""
    slurm_merge = f"""#!/bin/bash
{head}# Submit after the array job: sbatch --dependency=afterok:$jid {name}.merge.slurm.sh
#SBATCH --job-name={name}-merge
#SBATCH --cpus-per-task=1
#SBATCH --mem={max(1024, p.memory_mb)}M
#SBATCH --time=01:00:00
#SBATCH --output={name}-merge-%j.log
##SBATCH --account=EDIT_ME
##SBATCH --partition=EDIT_ME
set -euo pipefail
{merge_line}
"""
    pbs = f"""#!/bin/bash
{head}# Submit:  jid=$(qsub {name}.pbs.sh) && qsub -W depend=afterok:$jid {name}.merge.pbs.sh
#PBS -N {name}
#PBS -J 1-{p.tasks}
#PBS -l select=1:ncpus={p.workers}:mem={p.memory_mb}mb
#PBS -l walltime={_hms(p.walltime_s)}
#PBS -j oe
##PBS -A EDIT_ME
##PBS -q EDIT_ME
set -euo pipefail
cd "${{PBS_O_WORKDIR:-.}}"
# sweepcli reads PBS_ARRAY_INDEX (PBS Pro) or PBS_ARRAYID (Torque, submit with -t 1-{p.tasks}
# instead of -J); PBS exports no array size, so it is given here (--shard auto/{p.tasks}).
exec sweepcli run {q(job_path)} --shard auto/{p.tasks} {run_args}
"""
    pbs_merge = f"""#!/bin/bash
{head}# Submit after the array job: qsub -W depend=afterok:$jid {name}.merge.pbs.sh
#PBS -N {name}-merge
#PBS -l select=1:ncpus=1:mem={max(1024, p.memory_mb)}mb
#PBS -l walltime=01:00:00
#PBS -j oe
##PBS -A EDIT_ME
##PBS -q EDIT_ME
set -euo pipefail
cd "${{PBS_O_WORKDIR:-.}}"
{merge_line}
"""
    return {f"{name}.slurm.sh": slurm, f"{name}.merge.slurm.sh": slurm_merge,
            f"{name}.pbs.sh": pbs, f"{name}.merge.pbs.sh": pbs_merge}
