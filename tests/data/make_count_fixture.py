"""Write ``counts_31300c8.json``: corner counts of a few points of the demo jobs, as computed by
the project at commit 31300c8 (before the speed work of the open-sample solvers).

``tests/physics/test_counts_unchanged.py`` recomputes the same counts with the current code and
requires them to be equal, counts and reasons. The file in the repository was produced by that
commit; to regenerate it, run this script with the package of that commit on the path (from the
repository root)::

    mkdir -p /tmp/sweepcli-31300c8 && git archive 31300c8 | tar -x -C /tmp/sweepcli-31300c8
    PYTHONPATH=/tmp/sweepcli-31300c8 python3 tests/data/make_count_fixture.py

It only uses what both versions share (``load_job``, ``Job.point`` and the ``corner_modes``
measurement), so it can also be run on the current code to see what the test compares.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
OUT = Path(__file__).resolve().with_name("counts_31300c8.json")

#: (job file, swept values, flake side): the side is small so that the test stays short; both
#: Lanczos (forced) and dense diagonalisation are recorded.
POINTS = [
    ("jobs/driven-corner-modes.toml", {"omega": 3.0}, 16),
    ("jobs/driven-corner-modes.toml", {"omega": 6.0}, 16),
    ("jobs/driven-corner-map.toml", {"m1": -2.0, "omega": 3.0}, 16),
    ("jobs/driven-corner-map.toml", {"m1": -0.5, "omega": 6.0}, 16),
]
METHODS = ("sparse", "dense")


def counts_at(job_path: str, at: dict[str, float], size: int, method: str) -> dict:
    """The ``corner_modes`` counts and reasons at one point (no floats: exact comparison)."""
    from sweepcli.jobfile.load import load_job
    from sweepcli.physics.measurements import MEASUREMENTS

    point = load_job(ROOT / job_path).point(0, at)
    out = MEASUREMENTS["corner_modes"].func(point, size=size, max_size=size, method=method)
    keep = {}
    for key, value in out.items():
        if key == "reason":
            keep[key] = {g: r.name for g, r in value.items()}
        elif key.endswith(("_weight", "_edge_gap")):
            continue  # floats: not part of the count
        else:
            keep[key] = value
    return keep


def main() -> None:
    rows = []
    for job_path, at, size in POINTS:
        for method in METHODS:
            rows.append({"job": job_path, "at": at, "size": size, "method": method,
                         "counts": counts_at(job_path, at, size, method)})
            print(rows[-1], file=sys.stderr, flush=True)
    OUT.write_text(json.dumps({"commit": "31300c8", "rows": rows}, indent=1) + "\n")


if __name__ == "__main__":
    main()
