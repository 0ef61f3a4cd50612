"""Command-line wiring only: parse options, call library functions, format their results.

``app`` (:mod:`.root`, with the root options and the exit codes) carries every command; each
command group registers its commands on it when imported, in the order ``sweepcli --help`` lists
them: :mod:`.jobs` (check, run, merge, batch, shards), then :mod:`.reports` (show, map, boundaries,
sample, models, diff, export).
"""

from . import jobs, reports  # noqa: F401  (importing a group registers its commands)
from .root import app

__all__ = ["app"]
