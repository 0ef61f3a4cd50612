"""Time per point of the invariant measurements of the demo jobs, and their stored values.

For each demo job with a Chern, winding or Floquet invariant, evaluates that job's invariant
measurements (with the job's options) at ``--points`` grid points spread evenly over the grid,
each on a fresh point, after the point's gaps have been computed (shared with the gap
measurements). Prints milliseconds per point per job (the invariants alone, and with the gaps
they need) and
how many values were stored, so that two versions of the code can be compared. Run by hand:

    python benchmarks/bench_invariant_cost.py [--points 12] [--jobs quickstart,...]
"""

from __future__ import annotations

import argparse
import os
import time

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402

from sweepcli.jobfile.load import load_job  # noqa: E402
from sweepcli.physics.measurements import MEASUREMENTS  # noqa: E402

JOBS = ("quickstart", "honeycomb-flux", "chain-ends", "chiral-chain", "harmonic-chern",
        "anomalous-five-step", "driven-chain", "bhz-spin")
INVARIANTS = ("chern", "winding", "floquet_chern", "chiral_windings", "rudner_winding",
              "line_winding", "spin_chern")
GAPS = ("gap", "quasienergy_gaps")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--points", type=int, default=12)
    ap.add_argument("--jobs", default=",".join(JOBS))
    args = ap.parse_args()
    for name in args.jobs.split(","):
        job = load_job(f"jobs/{name}.toml")
        idx = np.linspace(0, job.size - 1, args.points).round().astype(int)
        total, whole, stored, missing = 0.0, 0.0, 0, 0
        for i in idx:
            point = job.point(int(i))
            t = time.perf_counter()
            for m, opts in job.measurements:
                if m in GAPS:
                    MEASUREMENTS[m].func(point, **dict(opts))
            whole += time.perf_counter() - t
            for m, opts in job.measurements:
                if m not in INVARIANTS:
                    continue
                t = time.perf_counter()
                out = MEASUREMENTS[m].func(point, **dict(opts))
                total += time.perf_counter() - t
                whole += time.perf_counter() - t
                for q, v in out.items():
                    if q == "reason" or "kmesh" in q or "flux" in q or "residue" in q:
                        continue
                    if isinstance(v, (int, np.integer)) or v is None:
                        stored += v is not None
                        missing += v is None
        print(f"{name:22s} invariants {1e3 * total / len(idx):9.1f} ms/point, with gaps "
              f"{1e3 * whole / len(idx):9.1f} ms/point  "
              f"stored {stored:4d}  missing {missing:4d}", flush=True)


if __name__ == "__main__":
    main()
