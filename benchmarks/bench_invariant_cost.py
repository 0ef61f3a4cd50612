"""Time per point of the invariant measurements of the demo jobs, against an earlier revision.

For each demo job with a Chern, winding or Floquet invariant, evaluates all of the job's
measurements at ``--points`` grid points spread evenly over the grid, each on a fresh point, and
prints milliseconds per point for the invariants alone and for the whole point (every
measurement of the job, gaps and boundary counts included), and how many invariant values were
stored and missing. With ``--compare REV`` the same is run on the code of git revision ``REV``
(checked out into a temporary worktree, run in a subprocess on the same job files) and the
ratios now / REV are printed; runs of the two revisions alternate job by job, so load on a
shared machine falls on both. Run by hand:

    python benchmarks/bench_invariant_cost.py [--points 24] [--jobs quickstart,...]
                                              [--compare 312cddf]

(312cddf is the last revision before the proven meshes of the Chern numbers and windings.)
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
JOBS = ("quickstart", "honeycomb-flux", "chain-ends", "chiral-chain", "harmonic-chern",
        "anomalous-five-step", "driven-chain", "bhz-spin")
INVARIANTS = ("chern", "winding", "floquet_chern", "chiral_windings", "rudner_winding",
              "line_winding", "spin_chern")


def measure(job_path: str, points: int) -> dict:
    """Milliseconds per point (invariants, whole point) and the invariant values stored and
    missing, with the ``sweepcli`` importable in this process."""
    from sweepcli.jobfile.load import load_job
    from sweepcli.physics.measurements import MEASUREMENTS

    job = load_job(job_path)
    idx = np.linspace(0, job.size - 1, points).round().astype(int)
    invariants = whole = 0.0
    stored = missing = 0
    for i in idx:
        point = job.point(int(i))
        for m, opts in job.measurements:
            t = time.perf_counter()
            out = MEASUREMENTS[m].func(point, **dict(opts))
            dt = time.perf_counter() - t
            whole += dt
            if m not in INVARIANTS:
                continue
            invariants += dt
            for q, v in out.items():
                if q == "reason" or "kmesh" in q or "flux" in q or "residue" in q:
                    continue
                if isinstance(v, (int, np.integer)) or v is None:
                    stored += v is not None
                    missing += v is None
    return {"invariants": 1e3 * invariants / points, "whole": 1e3 * whole / points,
            "stored": stored, "missing": missing}


def measure_elsewhere(tree: Path, job_path: str, points: int) -> dict:
    """:func:`measure` with the ``sweepcli`` of another source tree, in a subprocess."""
    env = dict(os.environ, PYTHONPATH=str(tree))
    out = subprocess.run([sys.executable, __file__, "--one", job_path, "--points", str(points)],
                         env=env, cwd=tree, capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def row(name: str, r: dict) -> str:
    return (f"{name:22s} invariants {r['invariants']:8.1f} ms  whole point {r['whole']:8.1f} ms"
            f"  stored {r['stored']:4d}  missing {r['missing']:4d}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--points", type=int, default=24)
    ap.add_argument("--jobs", default=",".join(JOBS))
    ap.add_argument("--compare", metavar="REV", help="an earlier git revision to compare with")
    ap.add_argument("--one", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.one:
        print(json.dumps(measure(args.one, args.points)))
        return
    with tempfile.TemporaryDirectory() as tmp:
        tree = None
        if args.compare:
            tree = Path(tmp) / "rev"
            subprocess.run(["git", "-C", str(ROOT), "worktree", "add", "--detach", "-q",
                            str(tree), args.compare], check=True)
        try:
            for name in args.jobs.split(","):
                job_path = str(ROOT / "jobs" / f"{name}.toml")
                sys.path.insert(0, str(ROOT))
                now = measure(job_path, args.points)
                print(row(name, now), flush=True)
                if tree is None:
                    continue
                before = measure_elsewhere(tree, job_path, args.points)
                print(row(f"  at {args.compare}", before), flush=True)
                print(f"{'  ratio now / ' + args.compare:22s} invariants "
                      f"{now['invariants'] / before['invariants']:8.2f}     whole point "
                      f"{now['whole'] / before['whole']:8.2f}", flush=True)
        finally:
            if tree is not None:
                subprocess.run(["git", "-C", str(ROOT), "worktree", "remove", "--force",
                                str(tree)], check=False)


if __name__ == "__main__":
    main()
