"""Command-line wiring only: parse options, call library functions, format their results.

Exit codes: 0 success; 1 a comparison found differences; 2 bad input or an unreadable file (one
line on stderr, ``--debug`` shows the traceback); 3 a run was interrupted (finished points are
saved; rerun with ``--resume``).
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated

import typer

from . import __version__
from .errors import SweepError

EXIT_ERROR = 2
EXIT_INTERRUPTED = 3

# Plain (click) help: rich panels cut long option names at 80 columns, print <bool> after flags
# and read "[output]" in a help text as markup.
app = typer.Typer(no_args_is_help=True, add_completion=False, pretty_exceptions_enable=False,
                  rich_markup_mode=None,
                  help="Phase-diagram sweeps of static and periodically driven lattice models.")


@dataclass
class State:
    verbose: bool = False
    debug: bool = False


def _version(value: bool) -> None:
    if value:
        typer.echo(f"sweepcli {__version__}")
        raise typer.Exit()


@app.callback()
def main(ctx: typer.Context,
         verbose: Annotated[bool, typer.Option(
             "--verbose", "-v", help="Say more (run: what is about to be computed).")] = False,
         debug: Annotated[bool, typer.Option(
             "--debug", help="Show tracebacks of errors.")] = False,
         version: Annotated[bool | None, typer.Option(
             "--version", callback=_version, is_eager=True, help="Print the version.")] = None,
         ) -> None:
    ctx.obj = State(verbose=verbose, debug=debug)


def _fail(ctx: typer.Context, exc: SweepError) -> None:
    if ctx.obj is not None and ctx.obj.debug:
        raise exc
    typer.echo(f"error: {exc}", err=True)
    raise typer.Exit(EXIT_ERROR)


def _parse_at(items: list[str]) -> dict[str, float]:
    out = {}
    for item in items:
        name, sep, value = item.partition("=")
        try:
            if not sep:
                raise ValueError
            out[name.strip()] = float(value)
        except ValueError:
            raise SweepError(f"--at must be NAME=VALUE with a number; got {item!r}.") from None
    return out


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
            "--chunk-size", min=1, show_default="about 8 tasks per worker, at most 64 points each",
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
        ) -> None:
    """Evaluate every grid point of JOB (or one shard of them) into one HDF5 results file."""
    from .run.session import RunSession

    session = RunSession(job_file, output=output, workers=workers, force=force, resume=resume,
                         shard=shard, chunk_size=chunk_size, checkpoint_every=checkpoint_every,
                         progress=progress, scheduler=scheduler, dask_cluster=dask_cluster)
    loud = verbose or (ctx.obj is not None and ctx.obj.verbose)
    say = (lambda line: typer.echo(line, err=True)) if loud else None
    try:
        done = session.run(say)
    except SweepError as exc:
        _fail(ctx, exc)
        return
    summary, out = done.run, done.output
    failed = f", {summary.failed} failed (see `sweepcli show {out}`)" if summary.failed else ""
    if summary.interrupted:
        typer.echo(f"interrupted: {summary.done}/{summary.total} points saved in {out}{failed}. "
                   f"Resume with: {done.resume_command}", err=True)
        raise typer.Exit(EXIT_INTERRUPTED)
    typer.echo(f"{summary.done}/{summary.total} points in {summary.seconds:.1f} s -> {out}{failed}")


@app.command()
def merge(ctx: typer.Context,
          output: Annotated[Path, typer.Argument(help="Merged results file.", metavar="OUT")],
          shards: Annotated[list[Path], typer.Argument(
              help="Shard results files.", metavar="SHARD...")],
          partial: Annotated[bool, typer.Option(
              "--partial", help="Write the merged file even if points are missing.")] = False,
          force: Annotated[bool, typer.Option("--force", help="Overwrite OUT.")] = False,
          ) -> None:
    """Merge the shard files of one job into OUT, checking that they belong together."""
    from .run.session import merge_shards

    try:
        report, warnings = merge_shards(shards, output, partial=partial, force=force)
    except SweepError as exc:
        _fail(ctx, exc)
        return
    for line in warnings:
        typer.echo(line, err=True)
    typer.echo(f"merged {report.files} shards: {report.done}/{report.total} points -> {output}")


@app.command()
def check(ctx: typer.Context,
          job_file: Annotated[Path, typer.Argument(help="TOML job file.", metavar="JOB")],
          time_one: Annotated[bool, typer.Option(
              "--time-one",
              help="Also evaluate the middle grid point once and report its time (this runs one "
                   "point).")] = False,
          ) -> None:
    """Validate JOB and print its grid, measurements and a cost estimate (runs no grid point)."""
    from .jobfile import load_job
    from .run.cost import estimate, time_one_point

    try:
        job = load_job(job_file)
        cost = estimate(job)
        measured = time_one_point(job) if time_one else None
    except SweepError as exc:
        _fail(ctx, exc)
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
              help="Per-point time to size the wall time with (default: the estimate of `sweepcli "
                   "check`, or the timed point if longer).")] = None,
          time_one: Annotated[bool, typer.Option(
              "--time-one/--no-time-one",
              help="Evaluate the middle grid point once here and size the wall time by the longer "
                   "of its time and the estimate.")] = True,
          ) -> None:
    """Write Slurm and PBS array-job scripts (and their merge steps) for JOB."""
    from .jobfile import load_job
    from .run.batch import plan, scripts
    from .run.cost import time_one_point

    try:
        job = load_job(job_file)
        if tasks > job.size:
            raise SweepError(f"--tasks {tasks} exceeds the {job.size} grid points of {job_file}.")
        measured = time_one_point(job) if time_one and seconds_per_point is None else None
        p = plan(job, tasks, workers, seconds_per_point, measured)
        texts = scripts(job, str(job_file), p)
        directory.mkdir(parents=True, exist_ok=True)
        for name in texts:
            if (directory / name).exists() and not force:
                raise SweepError(f"{directory / name}: exists; refusing to overwrite it. "
                                 "Use --force.")
        for name, text in texts.items():
            (directory / name).write_text(text)
            (directory / name).chmod(0o755)
    except SweepError as exc:
        _fail(ctx, exc)
        return
    if measured is not None:
        typer.echo(f"timed the middle grid point: {measured:.3g} s")
    typer.echo(f"{p.seconds_per_point:.3g} s per point ({p.basis})")
    typer.echo(f"{tasks} tasks of about {p.points_per_task} points, {p.workers} workers, "
               f"wall time {p.walltime_s // 60} min, memory {p.memory_mb} MiB per task")
    for name in texts:
        typer.echo(f"  wrote {directory / name}")


@app.command()
def show(ctx: typer.Context,
         results_file: Annotated[Path, typer.Argument(help="Results file.", metavar="RESULTS")],
         ) -> None:
    """Print the provenance and a per-variable summary of RESULTS."""
    from .report.summary import format_summary, summarise
    from .store import Results

    try:
        text = format_summary(summarise(Results.read(results_file)))
    except SweepError as exc:
        _fail(ctx, exc)
        return
    typer.echo(text)


@app.command("map")
def map_(ctx: typer.Context,
         results_file: Annotated[Path, typer.Argument(help="Results file.", metavar="RESULTS")],
         var: Annotated[str | None, typer.Option(
             "--var", help="Variable to draw (default: the job's main invariant).")] = None,
         output: Annotated[Path | None, typer.Option(
             "--output", "-o",
             help="Picture file; format from the suffix (png, svg, pdf).")] = None,
         at: Annotated[list[str] | None, typer.Option(
             "--at",
             help="Fix a swept parameter: NAME=VALUE (the nearest grid value, which is named; a "
                  "value off the axis is refused).")] = None,
         terminal: Annotated[bool, typer.Option(
             "--terminal",
             help="Print the map as characters (readable over SSH) instead of writing a "
                  "picture.")] = False,
         width: Annotated[int | None, typer.Option(
             "--width", min=20,
             help="Width of the --terminal map in characters (default: the terminal's).")] = None,
         mark_disagree: Annotated[bool, typer.Option(
             "--mark-disagree",
             help="Circle the points where bulk invariant and boundary modes disagree.")] = False,
         ) -> None:
    """Draw a phase map (2D) or a line plot (1D) of one variable of RESULTS."""
    from .report.map_data import at_notes
    from .report.maps import draw_map
    from .report.terminal import terminal_map, want_colour
    from .store import Results

    try:
        if terminal and output is not None:
            raise SweepError("--terminal prints the map; give it or --output, not both.")
        results = Results.read(results_file)
        for note in at_notes(results, _parse_at(at or [])):
            typer.echo(note, err=True)
        if terminal:
            text = terminal_map(results, var, _parse_at(at or []), width, colour=want_colour())
        else:
            out = output or results_file.with_name(results_file.stem + f"-{var or 'map'}.png")
            written = draw_map(results, out, var=var, at=_parse_at(at or []),
                               mark_disagree=mark_disagree)
    except SweepError as exc:
        _fail(ctx, exc)
        return
    if terminal:
        typer.echo(text)
        return
    typer.echo(f"map -> {written}")


@app.command()
def boundaries(ctx: typer.Context,
               results_file: Annotated[Path, typer.Argument(
                   help="Results file.", metavar="RESULTS")],
               var: Annotated[str | None, typer.Option(
                   "--var", help="Integer variable (default: the first invariant).")] = None,
               output: Annotated[Path | None, typer.Option(
                   "--output", "-o", help="CSV file (default: stdout).")] = None,
               at: Annotated[list[str] | None, typer.Option(
                   "--at", help="Fix a swept parameter: NAME=VALUE.")] = None,
               ) -> None:
    """Phase boundaries of a two-parameter map as polylines in CSV (value, line, x, y)."""
    from .report.boundaries import boundaries_csv, phase_boundaries
    from .store import Results

    try:
        name, x, y, lines = phase_boundaries(Results.read(results_file), var, _parse_at(at or []))
        text = boundaries_csv(name, x, y, lines)
        if output is not None:
            output.write_text(text)
    except SweepError as exc:
        _fail(ctx, exc)
        return
    if output is None:
        typer.echo(text, nl=False)
    else:
        typer.echo(f"{len(lines)} boundary lines -> {output}")


@app.command()
def sample(ctx: typer.Context,
           results_file: Annotated[Path, typer.Argument(help="Results file.", metavar="RESULTS")],
           at: Annotated[list[str] | None, typer.Option(
               "--at",
               help="The grid point: NAME=VALUE (nearest grid value; other axes their first "
                    "value).")] = None,
           kind: Annotated[str | None, typer.Option(
               "--kind",
               help="flake, chain or ribbon (default: the job's boundary measurement, else what "
                    "its invariants predict: ribbon for Chern-type, flake for line windings, chain "
                    "in 1D).")] = None,
           size: Annotated[int | None, typer.Option(
               "--size", min=1,
               help="Cells: flake side, chain length or ribbon width (default: the "
                    "job's).")] = None,
           gap: Annotated[str, typer.Option(
               "--gap", help="Gap whose in-gap states are drawn: 0, or pi for a drive.")] = "0",
           output: Annotated[Path | None, typer.Option(
               "--output", "-o",
               help="Picture file; format from the suffix (png, svg, pdf).")] = None,
           ) -> None:
    """Draw the spectrum and in-gap states of the open sample at one grid point of RESULTS."""
    from .report.sample_plot import draw_sample
    from .store import Results

    try:
        results = Results.read(results_file)
        out = output or results_file.with_name(results_file.stem + "-sample.png")
        written, drawn = draw_sample(results, out, at=_parse_at(at or []), kind=kind, size=size,
                                     gap=gap, label=str(results_file))
    except SweepError as exc:
        _fail(ctx, exc)
        return
    if drawn.chosen:
        typer.echo(f"sample kind {drawn.chosen} (--kind chooses another)")
    typer.echo(f"{drawn.describe()} -> {written}")


@app.command()
def models(ctx: typer.Context) -> None:
    """List the built-in models and the measurements with their parameters."""
    from .physics.measurements import MEASUREMENTS
    from .physics.models import MODELS

    typer.echo("models:")
    for e in MODELS:
        typer.echo(f"  {e.name}: {e.description} ({e.extra['dim']}D, {e.extra['norb']} orbitals)")
        for p in e.params:
            default = "" if p.required else f" = {p.default}"
            typer.echo(f"      {p.name}{default}: {p.doc or p.kind}")
        typer.echo(f"      source: {e.source}")
    typer.echo("measurements:")
    for e in MEASUREMENTS:
        applies = {None: "static and driven jobs", True: "driven jobs", False: "static jobs"}
        dims = "/".join(f"{d}D" for d in e.extra.get("dims", (1, 2)))
        needs = ", needs a " + " and ".join(repr(o) for o in e.extra["operators"]) + " operator" \
            if e.extra.get("operators") else ""
        typer.echo(f"  {e.name}: {e.description} ({dims}, {applies[e.extra.get('driven')]}{needs})")
        for p in e.params:
            default = "" if p.required else f" = {p.default}"
            typer.echo(f"      {p.name}{default}: {p.doc or p.kind}")
        typer.echo(f"      source: {e.source}")


# --- report commands (diff, terminal maps, export) below this line ---

EXIT_DIFFER = 1


@app.command("diff")
def diff_(ctx: typer.Context,
          a: Annotated[Path, typer.Argument(help="First results file.", metavar="A")],
          b: Annotated[Path, typer.Argument(help="Second results file.", metavar="B")],
          rtol: Annotated[float, typer.Option(
              "--rtol", min=0.0,
              help="Relative tolerance for floats: |a - b| <= atol + rtol * max(|a|, "
                   "|b|).")] = 1e-6,
          atol: Annotated[float, typer.Option(
              "--atol", min=0.0, help="Absolute tolerance for floats.")] = 1e-12,
          coord_tol: Annotated[float, typer.Option(
              "--coord-tol", min=0.0,
              help="Relative tolerance for matching coordinate values of the two grids.")] = 1e-9,
          provenance: Annotated[bool, typer.Option(
              "--provenance",
              help="Also count a different job, versions or provenance (not times, host, command "
                   "line) as a difference.")] = False,
          common: Annotated[bool, typer.Option(
              "--common",
              help="Judge only the common grid points: a subset or refinement is then no "
                   "difference.")] = False,
          top: Annotated[int, typer.Option(
              "--top", min=0, help="Largest deviations listed per variable.")] = 5,
          as_json: Annotated[bool, typer.Option("--json", help="Machine-readable output.")] = False,
          maps: Annotated[bool, typer.Option(
              "--maps",
              help="Also draw, per differing variable, a character map of where it "
                   "differs.")] = False,
          ) -> None:
    """Compare two results files (job, grids, values); exit 0 if they agree, 1 if they differ."""
    import json

    from .report.diff import diff_results
    from .report.diff_report import diff_as_dict, format_diff
    from .report.terminal import terminal_width, want_colour
    from .store import Results

    try:
        d = diff_results(Results.read(a), Results.read(b), labels=(str(a), str(b)), rtol=rtol,
                         atol=atol, coord_tol=coord_tol, provenance=provenance,
                         common_only=common, top=top)
    except SweepError as exc:
        _fail(ctx, exc)
        return
    if as_json:
        typer.echo(json.dumps(diff_as_dict(d), indent=2))
    else:
        typer.echo(format_diff(d, width=terminal_width(), colour=want_colour(), maps=maps))
    if not d.agree:
        raise typer.Exit(EXIT_DIFFER)


@app.command()
def export(ctx: typer.Context,
           results_file: Annotated[Path, typer.Argument(help="Results file.", metavar="RESULTS")],
           var: Annotated[list[str] | None, typer.Option(
               "--var",
               help="Variable to export (repeatable; default all; done and failure on "
                    "request).")] = None,
           output: Annotated[Path | None, typer.Option(
               "--output", "-o", help="CSV file (default: stdout).")] = None,
           table_name: Annotated[str | None, typer.Option(
               "--table",
               help="Write a table stored beside the grid instead, one row per entry: transitions "
                    "(the predicted gap closings).")] = None,
           ) -> None:
    """Write variables of RESULTS as CSV, one row per grid point (missing values empty)."""
    from .report.export import export_table, table_export, write_csv
    from .store import Results

    try:
        if table_name is not None and var:
            raise SweepError("--table writes a stored table; give it or --var, not both.")
        results = Results.read(results_file)
        table = (table_export(results, table_name) if table_name is not None
                 else export_table(results, var))
        if output is None:
            write_csv(table, sys.stdout)
            return
        try:
            output.parent.mkdir(parents=True, exist_ok=True)
            with open(output, "w", newline="", encoding="utf-8") as fh:
                n = write_csv(table, fh)
        except OSError as exc:
            raise SweepError(f"{output}: cannot write the CSV file "
                             f"({exc.strerror or exc}).") from None
    except SweepError as exc:
        _fail(ctx, exc)
        return
    typer.echo(f"{n} rows x {len(table.columns)} columns -> {output}", err=True)
