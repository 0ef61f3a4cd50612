"""The one typer ``app`` every command group registers on, its root options and the error
handling all commands share.

Exit codes: 0 success; 1 a comparison found differences; 2 bad input or an unreadable file (one
line on stderr, ``--debug`` shows the traceback); 3 a run was interrupted (Ctrl-C, SIGTERM, also
while writing the results, or every dask worker lost; finished points are saved; rerun with
``--resume``); 4 a run finished but some points failed (the results file holds
every point, the failed ones missing with their reason; ``run --failed-ok`` exits 0 instead);
5 ``shards``: some shards of an array job are not done (it prints how to resubmit them).
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from typing import Annotated

import typer

from .. import __version__
from ..errors import SweepError

EXIT_DIFFER = 1
EXIT_ERROR = 2
EXIT_INTERRUPTED = 3
EXIT_POINTS_FAILED = 4
EXIT_SHARDS_UNFINISHED = 5

class _App(typer.Typer):
    """The typer app, exiting quietly with 0 when stdout is a pipe its reader closed
    (``sweepcli models | head -1``): click exits 1 there, after wrapping ``sys.stdout`` so that
    nothing more is written to the closed pipe."""

    def __call__(self, *args, **kwargs):
        try:
            return super().__call__(*args, **kwargs)
        except SystemExit as exc:
            # click's wrapper (typer ships its own copy of click, so it is known by name).
            if exc.code == 1 and type(sys.stdout).__name__ == "PacifyFlushWrapper":
                raise SystemExit(0) from None
            raise


# Plain (click) help: rich panels cut long option names at 80 columns, print <bool> after flags
# and read "[output]" in a help text as markup.
# Shell completion: `sweepcli --install-completion` (bash, zsh, fish, PowerShell).
app = _App(no_args_is_help=True, add_completion=True, pretty_exceptions_enable=False,
           rich_markup_mode=None,
           help="Phase-diagram sweeps of static and periodically driven lattice models.")


@dataclass
class State:
    verbose: bool = False
    debug: bool = False
    quiet: bool = False


def _version(value: bool) -> None:
    if value:
        typer.echo(f"sweepcli {__version__}")
        raise typer.Exit()


@app.callback()
def main(ctx: typer.Context,
         verbose: Annotated[bool, typer.Option(
             "--verbose", "-v", help="Say more (run: what is about to be computed).")] = False,
         quiet: Annotated[bool, typer.Option(
             "--quiet", "-q",
             help="Print only errors and each command's final line: no progress bar, log lines "
                  "or notes.")] = False,
         debug: Annotated[bool, typer.Option(
             "--debug", help="Show tracebacks of errors.")] = False,
         version: Annotated[bool | None, typer.Option(
             "--version", callback=_version, is_eager=True, help="Print the version.")] = None,
         ) -> None:
    if quiet and verbose:
        typer.echo("error: give --quiet or --verbose, not both.", err=True)
        raise typer.Exit(EXIT_ERROR)
    ctx.obj = State(verbose=verbose, debug=debug, quiet=quiet)


def quiet(ctx: typer.Context) -> bool:
    """Whether the root ``--quiet`` was given."""
    return ctx.obj is not None and ctx.obj.quiet


def note(ctx: typer.Context, line: str) -> None:
    """An informational line on stderr (a warning, a note on the values used); none with
    ``--quiet``."""
    if not quiet(ctx):
        typer.echo(line, err=True)


def fail(ctx: typer.Context, exc: SweepError) -> None:
    """Exit with ``EXIT_ERROR`` and the one-line message of ``exc`` (re-raise it with --debug)."""
    if ctx.obj is not None and ctx.obj.debug:
        raise exc
    typer.echo(f"error: {exc}", err=True)
    raise typer.Exit(EXIT_ERROR)


def parse_at(items: list[str]) -> dict[str, float]:
    """The ``--at NAME=VALUE`` options as ``{name: value}``."""
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
