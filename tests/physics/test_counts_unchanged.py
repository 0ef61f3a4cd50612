"""Corner counts of the demo jobs unchanged by the speed work on the open-sample solvers.

Two independent comparisons, at a few points of ``jobs/driven-corner-modes.toml`` and
``jobs/driven-corner-map.toml`` on 16 x 16 flakes:

* against the counts the project gave at commit 31300c8, before that work, stored in
  ``tests/data/counts_31300c8.json`` by ``tests/data/make_count_fixture.py`` (run on that
  commit; its docstring says how to regenerate the file);
* against the same measurement with the whole Floquet operator formed and diagonalised densely
  (``method="dense"``), which shares no code with the filtered block iteration of the sparse
  path.

Counts, per-corner counts, in-window states, flake sides and reasons must agree exactly.
"""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path

import pytest

DATA = Path(__file__).resolve().parents[1] / "data"
FIXTURE = json.loads((DATA / "counts_31300c8.json").read_text())

_spec = importlib.util.spec_from_file_location("make_count_fixture",
                                               DATA / "make_count_fixture.py")
make = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(make)


def _rows(method: str) -> list[dict]:
    return [r for r in FIXTURE["rows"] if r["method"] == method]


def test_fixture_covers_the_points():
    assert FIXTURE["commit"] == "31300c8"
    assert [(r["job"], r["at"], r["size"]) for r in _rows("sparse")] == \
        [(j, a, s) for j, a, s in make.POINTS]
    # The points hold counts, not only missing values (two modes per corner at omega = 3).
    assert any(r["counts"]["corner_modes_0"] == 8 for r in FIXTURE["rows"])


@pytest.mark.parametrize("row", _rows("sparse"), ids=lambda r: f"{Path(r['job']).stem}-"
                         + "-".join(f"{k}{v}" for k, v in r["at"].items()))
def test_sparse_counts_match_old_commit_and_dense(row):
    old_dense = next(r for r in _rows("dense") if (r["job"], r["at"]) == (row["job"], row["at"]))
    sparse = make.counts_at(row["job"], row["at"], row["size"], "sparse")
    dense = make.counts_at(row["job"], row["at"], row["size"], "dense")
    assert sparse == row["counts"]
    assert dense == old_dense["counts"]
    # The sparse and dense paths agree on everything but the solver code.
    strip = {"corner_modes_method"}
    assert {k: v for k, v in sparse.items() if k not in strip} == \
        {k: v for k, v in dense.items() if k not in strip}
