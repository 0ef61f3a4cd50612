"""``sweepcli export``: variables of a results file as CSV in long format.

One row per grid point in grid order (the first axis varies slowest), the swept parameters'
columns first and then one column per variable. A missing value is an empty field; integers are
written as integers, floats with the shortest text that reads back to the same float, reason
codes by name (``ok``, ``gap_closed``, ...). ``done`` and ``failure`` may be asked for by name.
"""

from __future__ import annotations

import csv
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import IO, Any

import numpy as np

from ..errors import ResultsError, suggest
from ..schema import Reason
from ..store import FILL_INT, Results
from .summary import empty_slots

EXTRA_COLUMNS = ("done", "failure")


@dataclass
class ExportTable:
    """``columns`` = ``params`` + ``variables``; ``rows`` yields one list per grid point with
    ``None`` for a missing value."""

    params: list[str]
    variables: list[str]
    n_rows: int
    rows: Iterator[list[Any]]

    @property
    def columns(self) -> list[str]:
        return self.params + self.variables


def _column(results: Results, name: str) -> list[Any]:
    if name == "done":
        return results.done.ravel().astype(int).tolist()
    if name == "failure":
        return [str(s) for s in results.failure.ravel()]
    meta = results.variables[name]
    data = results.data[name].ravel()
    done = results.done.ravel().astype(bool)
    if meta.dtype == "uint8":
        names = {int(r): r.name.lower() for r in Reason}
        return [names.get(int(v), str(int(v))) for v in data]
    if meta.dtype == "int32":
        missing = (data == FILL_INT) | ~done
        return [None if m else v for v, m in zip(data.astype(int).tolist(), missing.tolist())]
    missing = np.isnan(data) | ~done
    return [None if m else v for v, m in zip(data.astype(float).tolist(), missing.tolist())]


def export_table(results: Results, variables: Sequence[str] | None = None) -> ExportTable:
    """The long-format table of ``variables`` (default: every data variable, reason codes
    included, in file order, except the slots this job never fills, see
    :func:`~sweepcli.report.summary.empty_slots`).

    Raises
    ------
    ResultsError
        A name that is neither a variable nor ``done``/``failure``.
    """
    if variables:
        names = list(variables)
    else:
        empty = set(empty_slots(results))
        names = [n for n in results.variables if n not in empty]
    known = list(results.variables) + list(EXTRA_COLUMNS)
    for n in names:
        if n not in known:
            raise ResultsError(f"no variable {n!r} in the results file (available: "
                               f"{', '.join(known)}).{suggest(n, known)}")
    names = list(dict.fromkeys(names))  # asked twice, written once
    if results.axes:
        grids = np.meshgrid(*[a.values for a in results.axes], indexing="ij")
        params = [g.ravel().astype(float).tolist() for g in grids]
    else:
        params = []
    columns = params + [_column(results, n) for n in names]
    return ExportTable([a.name for a in results.axes], names, results.size,
                       (list(row) for row in zip(*columns)))


def table_export(results: Results, name: str) -> ExportTable:
    """A table stored beside the grid (``transitions``: the predicted gap closings, see
    results-schema.md), one row per entry.

    Raises
    ------
    ResultsError
        The file holds no table of that name.
    """
    if name not in results.tables:
        have = ", ".join(results.tables) or "none"
        raise ResultsError(f"no table {name!r} in the results file (tables: {have}; a job with "
                           f"[predict] writes 'transitions').{suggest(name, list(results.tables))}")
    cols = results.tables[name]
    columns = list(cols)
    n = len(cols[columns[0]]) if columns else 0
    values = [[x if isinstance(x, str) else x.item() if hasattr(x, "item") else x
               for x in cols[c]] for c in columns]
    return ExportTable([], columns, n, (list(row) for row in zip(*values)))


def write_csv(table: ExportTable, stream: IO[str]) -> int:
    """Write the header and rows to ``stream``; returns the number of data rows."""
    w = csv.writer(stream, lineterminator="\n")
    w.writerow(table.columns)
    n = 0
    for row in table.rows:
        # repr of a Python float is the shortest text that reads back to the same float
        w.writerow(["" if x is None else repr(x) if isinstance(x, float) else x for x in row])
        n += 1
    return n
