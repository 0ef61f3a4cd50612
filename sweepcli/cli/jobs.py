"""The commands that check, run and plan a job: check, run, merge, batch, shards."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ..errors import SweepError
from .root import (
    EXIT_ERROR,
    EXIT_INTERRUPTED,
    EXIT_POINTS_FAILED,
    EXIT_SHARDS_UNFINISHED,
    app,
    fail,
    note,
    quiet,
)


@app.command()
def run(ctx: typer.Context,
        job_file: Annotated[Path, typer.Argument(help="TOML job file.", metavar="JOB")],
        output: Annotated[Path | None, typer.Option(
            "--output", "-o",
            help="Results file (default: [output] path of the job, with a shard suffix for a "
                 "shard).")] = None,
        workers: Annotated[int, typer.Option(
            "--workers", "-w", min=1, help="Worker processes.")] = 1,
        force: Annotated[bool, typer.Option(
            "--force", help="Overwrite an existing results file.")] = False,
        resume: Annotated[bool, typer.Option(
            "--resume",
            help="Continue the results file if it exists (same job only); start it "
                 "otherwise.")] = False,
        shard: Annotated[str | None, typer.Option(
            "--shard",
            help="Evaluate one shard: I/N, auto (Slurm array task) or auto/N (Slurm or "
                 "PBS).")] = None,
        chunk_size: Annotated[int | None, typer.Option(
            "--chunk-size", min=1,
            show_default="about 8 tasks per worker, 1 point first, then sized by the measured "
                         "cost per point",
            help="Grid points per task.")] = None,
        checkpoint_every: Annotated[float, typer.Option(
            "--checkpoint-every", min=0.0, help="Seconds between checkpoints.")] = 60.0,
        progress: Annotated[bool, typer.Option(
            "--progress/--no-progress", help="Progress bar or log lines.")] = True,
        scheduler: Annotated[str | None, typer.Option(
            "--scheduler", help="Address of a running dask scheduler to run on.")] = None,
        dask_cluster: Annotated[str | None, typer.Option(
            "--dask-cluster",
            help="Start dask workers: local:N, slurm:N or pbs:N (needs the cluster "
                 "extra).")] = None,
        verbose: Annotated[bool, typer.Option(
            "--verbose", "-v",
            help="Say what is about to be computed (as `sweepcli -v run`).")] = False,
        heartbeat: Annotated[float, typer.Option(
            "--heartbeat", min=0.0,
            help="Seconds between log lines (points done, rate, ETA) when there is no progress "
                 "bar (--no-progress or not a terminal); 0: none.")] = 60.0,
        dask_lost_timeout: Annotated[float, typer.Option(
            "--dask-lost-timeout", min=0.0,
            help="Seconds a dask run waits with no worker before it saves the finished points "
                 "and stops (exit 3).")] = 60.0,
        failed_ok: Annotated[bool, typer.Option(
            "--failed-ok",
            help="Exit 0 when the run finished but some points failed (default: exit 4; the "
                 "file holds every point either way).")] = False,
        ) -> None:
    """Evaluate every grid point of JOB (or one shard of them) into one HDF5 results file.

    Exit codes: 0 done, 2 bad input, 3 interrupted (Ctrl-C, SIGTERM, all dask workers lost;
    resume with --resume), 4 done but some points failed (see `sweepcli show`)."""
    if verbose and quiet(ctx):
        typer.echo("error: give --quiet or --verbose, not both.", err=True)
        raise typer.Exit(EXIT_ERROR)
    import time

    from ..run.executors import JoblibExecutor, WorkersLost

    started = time.monotonic()  # the reported time counts from here (pool start included)
    # The worker pool starts before the sweep code is imported here (about a second).
    pool = (JoblibExecutor(workers).warm() if workers > 1 and not (scheduler or dask_cluster)
            and not (force and resume) else None)
    from ..run.session import RunSession

    session = RunSession(job_file, output=output, workers=workers, force=force, resume=resume,
                         shard=shard, chunk_size=chunk_size, checkpoint_every=checkpoint_every,
                         progress=progress and not quiet(ctx), scheduler=scheduler,
                         dask_cluster=dask_cluster, lost_timeout=dask_lost_timeout,
                         heartbeat=0.0 if quiet(ctx) else heartbeat, executor=pool,
                         started=started)
    loud = verbose or (ctx.obj is not None and ctx.obj.verbose)
    say = (lambda line: typer.echo(line, err=True)) if loud else None
    try:
        done = session.run(say)
    except WorkersLost as exc:
        if ctx.obj is not None and ctx.obj.debug:
            raise
        typer.echo(f"interrupted: {exc}", err=True)
        raise typer.Exit(EXIT_INTERRUPTED) from None
    except SweepError as exc:
        fail(ctx, exc)
        return
    summary, out = done.run, done.output
    failed = f", {summary.failed} failed (see `sweepcli show {out}`)" if summary.failed else ""
    if summary.interrupted:
        when = f" {summary.reason}" if summary.reason else ""
        saved = (f"{summary.done}/{summary.total} points saved in {out}{failed}" if done.saved
                 else f"{out} was not written")
        typer.echo(f"interrupted{when}: {saved}. Resume with: {done.resume_command}", err=True)
        raise typer.Exit(EXIT_INTERRUPTED)
    if summary.chosen is not None and not quiet(ctx):
        typer.echo(f"boundary measurements: {summary.chosen} cells selected, computed on "
                   f"{summary.confirmed}, not requested on {summary.total - summary.confirmed} "
                   "(time and points cover both passes)")
    typer.echo(f"{summary.done}/{summary.total} points in {summary.seconds:.1f} s -> {out}{failed}")
    if summary.failed and not failed_ok:
        raise typer.Exit(EXIT_POINTS_FAILED)


@app.command()
def merge(ctx: typer.Context,
          output: Annotated[Path, typer.Argument(help="Merged results file.", metavar="OUT")],
          shards: Annotated[list[Path], typer.Argument(
              help="Shard results files.", metavar="SHARD...")],
          partial: Annotated[bool, typer.Option(
              "--partial", help="Write the merged file even if points are missing.")] = False,
          force: Annotated[bool, typer.Option("--force", help="Overwrite OUT.")] = False,
          replace: Annotated[bool, typer.Option(
              "--replace",
              help="Overwrite OUT only if it is an earlier merge of the same job (the batch "
                   "merge scripts use it, so they can be run again after a shard is "
                   "redone).")] = False,
          ) -> None:
    """Merge the shard files of one job into OUT, checking that they belong together.

    OUT is written whole and renamed into place, and records every shard's provenance (its
    `shards` table)."""
    from ..run.session import merge_shards

    try:
        report, warnings = merge_shards(shards, output, partial=partial, force=force,
                                        replace=replace)
    except SweepError as exc:
        fail(ctx, exc)
        return
    for line in warnings:
        note(ctx, line)
    typer.echo(f"merged {report.files} shards: {report.done}/{report.total} points -> {output}")


@app.command()
def check(ctx: typer.Context,
          job_file: Annotated[Path, typer.Argument(help="TOML job file.", metavar="JOB")],
          time_one: Annotated[bool, typer.Option(
              "--time-one",
              help="Also evaluate the middle grid point once and report its time (this runs one "
                   "point).")] = False,
          probe_seconds: Annotated[float, typer.Option(
              "--probe-seconds", min=0.1,
              help="Time budget of the open-sample probes of the cost estimate; a probe still "
                   "running then is stopped and the estimate is a lower bound.")] = 3.0,
          ) -> None:
    """Validate JOB and print its grid, measurements and a cost estimate (runs no grid point)."""
    from ..jobfile import load_job
    from ..run.cost import estimate, measured_cost, time_one_point

    try:
        job = load_job(job_file)
        cost = estimate(job, probe_seconds)
        previous = measured_cost(job)
        measured = time_one_point(job) if time_one else None
    except SweepError as exc:
        fail(ctx, exc)
        return
    typer.echo(f"{job_file}: ok ({job.title})")
    typer.echo(f"model: {job.model} ({job.dim}D, {job.norb} orbitals per cell); "
               f"drive: {job.drive.kind}")
    typer.echo(f"grid: {' x '.join(str(n) for n in job.shape)} = {job.size} points")
    for a in job.axes:
        typer.echo(f"  {a.name}: {len(a.values)} values, {a.values[0]:g} .. {a.values[-1]:g} "
                   f"({a.spacing})")
    for name, options in job.measurements:
        opts = ", ".join(f"{k}={v}" for k, v in options if v is not None)
        typer.echo(f"measure {name}" + (f" ({opts})" if opts else ""))
    typer.echo(f"cost estimate: {cost.format()}")
    if previous is not None:
        typer.echo(f"measured in the previous run: {previous.format(job.size)}")
    if measured is not None:
        typer.echo(f"measured: {measured:.3g} s for the middle grid point; about "
                   f"{measured * job.size / 3600:.2g} core-hours for the grid "
                   "(use it with `sweepcli batch --seconds-per-point`)")
    typer.echo(f"output: {job.output}")


@app.command()
def batch(ctx: typer.Context,
          job_file: Annotated[Path, typer.Argument(help="TOML job file.", metavar="JOB")],
          tasks: Annotated[int, typer.Option(
              "--tasks", "-n", min=1, help="Array tasks (shards).")] = 10,
          workers: Annotated[int, typer.Option(
              "--workers", "-w", min=1, help="Worker processes per task.")] = 1,
          directory: Annotated[Path, typer.Option(
              "--dir", help="Where to write the scripts.")] = Path("."),
          force: Annotated[bool, typer.Option(
              "--force", help="Overwrite existing scripts.")] = False,
          seconds_per_point: Annotated[float | None, typer.Option(
              "--seconds-per-point", min=0.0,
              help="Per-point time to size the wall time with (default: the mean time stored in "
                   "a previous results file of the job, else the estimate of `sweepcli check`, "
                   "or the timed point if longer).")] = None,
          time_one: Annotated[bool, typer.Option(
              "--time-one/--no-time-one",
              help="Evaluate the middle grid point once here and size the wall time by the longer "
                   "of its time and the estimate (not needed when a previous results file of "
                   "the job holds measured times).")] = True,
          ) -> None:
    """Write Slurm and PBS array-job scripts (and their merge steps) for JOB.

    The scripts use absolute paths, run in DIR and run the Python this command was run with;
    task I computes shard I/N, so `sbatch --array=3,5 SCRIPT` redoes shards 3 and 5 only.
    `sweepcli shards DIR` says which shards are done and how to resubmit the others."""
    from ..jobfile import load_job
    from ..run.batch import manifest, plan, scripts
    from ..run.cost import measured_cost, time_one_point

    try:
        job = load_job(job_file)
        if tasks > job.size:
            raise SweepError(f"--tasks {tasks} exceeds the {job.size} grid points of {job_file}.")
        previous = measured_cost(job) if seconds_per_point is None else None
        measured = (time_one_point(job) if time_one and seconds_per_point is None
                    and previous is None else None)
        p = plan(job, tasks, workers, seconds_per_point, measured, previous)
        texts = scripts(job, p, manifest(job, job_file, tasks, directory))
        directory.mkdir(parents=True, exist_ok=True)
        for name in texts:
            if (directory / name).exists() and not force:
                raise SweepError(f"{directory / name}: exists; refusing to overwrite it. "
                                 "Use --force.")
        for name, text in texts.items():
            (directory / name).write_text(text)
            (directory / name).chmod(0o755 if name.endswith(".sh") else 0o644)
    except SweepError as exc:
        fail(ctx, exc)
        return
    if measured is not None:
        typer.echo(f"timed the middle grid point: {measured:.3g} s")
    typer.echo(f"{p.seconds_per_point:.3g} s per point ({p.basis})")
    typer.echo(f"{tasks} tasks of about {p.points_per_task} points, {p.workers} workers, "
               f"wall time {p.walltime_s // 60} min {p.walltime_s % 60} s, memory "
               f"{p.memory_mb} MiB per task")
    for name in texts:
        typer.echo(f"  wrote {directory / name}")


@app.command()
def shards(ctx: typer.Context,
           directory: Annotated[Path, typer.Argument(
               help="The folder `sweepcli batch --dir` wrote the scripts to.", metavar="DIR")],
           ) -> None:
    """List the shards of the array jobs in DIR (done, partial, absent) with the commands that
    resubmit the unfinished ones and merge.

    Exit codes: 0 every shard done (merge now), 2 bad input, 5 some shards not done."""
    from ..jobfile import load_job
    from ..run.batch import merge_commands, read_manifests, resubmit_commands, shard_states

    try:
        found = []
        for m in read_manifests(directory):
            job = load_job(m.job)
            found.append((m, shard_states(m, job.sha256, job.size)))
    except SweepError as exc:
        fail(ctx, exc)
        return
    unfinished = False
    for m, states in found:
        merged = "exists" if Path(m.output).exists() else "not written yet"
        typer.echo(f"{m.job}: {m.tasks} shards; merged file {m.output} ({merged})")
        for st in states:
            count = f"{st.done}/{st.total} points" if st.state != "absent" else ""
            failed = f", {st.failed} failed" if st.failed else ""
            note_ = f" ({st.note})" if st.note else ""
            typer.echo(f"  shard {st.index}/{m.tasks}  {st.state:<8} {count}{failed}  "
                       f"{st.path}{note_}")
        todo = [st.index for st in states if st.state != "done"]
        counts = {k: sum(st.state == k for st in states)
                  for k in ("done", "partial", "absent", "unusable")}
        typer.echo("  " + ", ".join(f"{v} {k}" for k, v in counts.items() if v))
        merge = merge_commands(m)
        if todo:
            unfinished = True
            cmds = resubmit_commands(m, todo)
            if counts["unusable"]:
                typer.echo("  move the unusable files away first, then")
            typer.echo("  resubmit the unfinished shards and merge after them:")
            typer.echo(f"    Slurm: {cmds['slurm'][0]}")
            typer.echo("    PBS:   " + "\n           ".join(cmds["pbs"]))
            typer.echo("  (a shard whose task is still running shows as partial: see squeue or "
                       "qstat)")
        else:
            typer.echo(f"  every shard is done; merge: {merge['slurm']} (PBS: {merge['pbs']}; "
                       f"here: {merge['here']})")
    if unfinished:
        raise typer.Exit(EXIT_SHARDS_UNFINISHED)
