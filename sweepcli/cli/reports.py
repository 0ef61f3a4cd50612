"""The commands that read results files and the registries: show, map, boundaries, sample,
models, diff, export."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import typer

from ..errors import SweepError
from .root import EXIT_DIFFER, app, fail, note, parse_at, quiet


@app.command()
def show(ctx: typer.Context,
         results_file: Annotated[Path, typer.Argument(help="Results file.", metavar="RESULTS")],
         ) -> None:
    """Print the provenance and a per-variable summary of RESULTS."""
    from ..report.summary import format_summary, summarise
    from ..store import Results

    try:
        text = format_summary(summarise(Results.read(results_file)))
    except SweepError as exc:
        fail(ctx, exc)
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
    from ..report.map_data import at_notes
    from ..report.maps import draw_map
    from ..report.terminal import terminal_map, want_colour
    from ..store import Results

    try:
        if terminal and output is not None:
            raise SweepError("--terminal prints the map; give it or --output, not both.")
        results = Results.read(results_file)
        for line in at_notes(results, parse_at(at or [])):
            note(ctx, line)
        if terminal:
            text = terminal_map(results, var, parse_at(at or []), width, colour=want_colour())
        else:
            out = output or results_file.with_name(results_file.stem + f"-{var or 'map'}.png")
            written = draw_map(results, out, var=var, at=parse_at(at or []),
                               mark_disagree=mark_disagree)
    except SweepError as exc:
        fail(ctx, exc)
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
    from ..report.boundaries import boundaries_csv, phase_boundaries
    from ..store import Results

    try:
        name, x, y, lines = phase_boundaries(Results.read(results_file), var, parse_at(at or []))
        text = boundaries_csv(name, x, y, lines)
        if output is not None:
            output.write_text(text)
    except SweepError as exc:
        fail(ctx, exc)
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
                    "value, named in the line printed).")] = None,
           kind: Annotated[str | None, typer.Option(
               "--kind",
               help="flake, polygon, chain or ribbon (default: the job's boundary measurement, "
                    "else what "
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
           wilson: Annotated[bool, typer.Option(
               "--wilson",
               help="Draw the bulk Wilson-loop spectrum (Wannier centres against the transverse "
                    "momentum, nested loops in 2D) of the point's band group instead of an open "
                    "sample.")] = False,
           ) -> None:
    """Draw the spectrum and in-gap states of the open sample at one grid point of RESULTS (with
    --wilson: its Wilson-loop spectrum)."""
    from ..report.map_data import at_notes
    from ..store import Results

    try:
        if wilson and (kind is not None or size is not None or gap != "0"):
            given = [o for o, v in (("--kind", kind), ("--size", size),
                                    ("--gap", None if gap == "0" else gap)) if v is not None]
            raise SweepError(f"{', '.join(given)} choose an open sample; --wilson draws the bulk "
                             "Wilson loops of the band group the job's polarisation or "
                             "quadrupole measurement names (give one or the other).")
        results = Results.read(results_file)
        notes = at_notes(results, parse_at(at or []))
        if wilson:
            from ..report.wilson_plot import draw_wilson

            out = output or results_file.with_name(results_file.stem + "-wilson.png")
            written, drawn = draw_wilson(results, out, at=parse_at(at or []),
                                         label=str(results_file))
        else:
            from ..report.sample_plot import draw_sample

            out = output or results_file.with_name(results_file.stem + "-sample.png")
            written, drawn = draw_sample(results, out, at=parse_at(at or []), kind=kind,
                                         size=size, gap=gap, label=str(results_file))
    except SweepError as exc:
        fail(ctx, exc)
        return
    for line in notes:
        note(ctx, line.replace("drawn at", "sampled at"))
    if wilson:
        typer.echo(f"{drawn.describe()} -> {written}")
        return
    if drawn.chosen and not quiet(ctx):
        typer.echo(f"sample kind {drawn.chosen} (--kind chooses another)")
    typer.echo(f"{drawn.describe()} -> {written}")


@app.command()
def models(ctx: typer.Context) -> None:
    """List the built-in models with their parameters and cell operators, and the measurements
    with their parameters."""
    from ..jobfile.model_table import model_operators
    from ..physics.measurements import MEASUREMENTS
    from ..physics.models import MODELS

    def users(o: str, dim: int) -> str:
        names = [m.name for m in MEASUREMENTS if o in m.extra.get("operators", ())
                 and dim in m.extra.get("dims", (1, 2))]
        if o == "chiral":
            names.append(("end_modes" if dim == 1 else "corner_modes") + " (chiral charges)")
        if not names:
            return "give it by name as [measure.line_winding] operator"
        return "used by " + ", ".join(names)

    typer.echo("models:")
    for e in MODELS:
        typer.echo(f"  {e.name}: {e.description} ({e.extra['dim']}D, {e.extra['norb']} orbitals)")
        for p in e.params:
            default = "" if p.required else f" = {p.default}"
            typer.echo(f"      {p.name}{default}: {p.doc or p.kind}")
        docs = e.extra.get("operator_docs", {})
        for o in model_operators(e.name):
            meaning = f"{docs[o]}; " if o in docs else ""
            typer.echo(f"      operator {o}: {meaning}{users(o, e.extra['dim'])}")
        typer.echo(f"      source: {e.source}")
    typer.echo("  custom: your own lattice, orbitals, [[model.onsite]] and [[model.hopping]] "
               "terms; cell operators in [model.operators] as a Pauli word, a matrix or "
               "[[model.operators.NAME]] terms (matrix, coeff)")
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

    from ..report.diff import diff_results
    from ..report.diff_report import diff_as_dict, format_diff
    from ..report.terminal import terminal_width, want_colour
    from ..store import Results

    try:
        d = diff_results(Results.read(a), Results.read(b), labels=(str(a), str(b)), rtol=rtol,
                         atol=atol, coord_tol=coord_tol, provenance=provenance,
                         common_only=common, top=top)
    except SweepError as exc:
        fail(ctx, exc)
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
    from ..report.export import export_table, table_export, write_csv
    from ..store import Results

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
        fail(ctx, exc)
        return
    typer.echo(f"{n} rows x {len(table.columns)} columns -> {output}", err=True)
