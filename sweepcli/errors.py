"""The one error family the command line catches and prints as a single line."""

from __future__ import annotations

import difflib
from collections.abc import Iterable


class SweepError(Exception):
    """Any error caused by the user's input or files; the CLI prints it and exits with code 2."""


class JobError(SweepError):
    """A job file is malformed or inconsistent."""


class ResultsError(SweepError):
    """A results file is missing, unreadable, not ours or does not hold what was asked."""


def suggest(word: str, candidates: Iterable[str]) -> str:
    """`` Did you mean 'x'?`` for the closest candidate, or an empty string."""
    close = difflib.get_close_matches(word, list(candidates), n=1, cutoff=0.6)
    return f" Did you mean {close[0]!r}?" if close else ""


def sentence(text: object) -> str:
    """``text`` ending in one full stop (none added after ``.``, ``?`` or ``!``)."""
    text = str(text).rstrip()
    return text if text.endswith((".", "?", "!")) else text + "."


SHOWN_LENGTH = 200  # a longer string is shown by its beginning and its length


def shown(value: object) -> str:
    """A value as it should appear after ``got`` in an error message."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        if len(value) > SHOWN_LENGTH:
            return f"{value[:SHOWN_LENGTH // 2]!r}... ({len(value):,} characters)"
        return repr(value)
    if isinstance(value, dict):
        return "a table"
    return repr(value)
