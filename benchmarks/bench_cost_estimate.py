"""Cost-estimate error (run by hand, not by CI): for every demo job in jobs/, the estimate of
`sweepcli check` per grid point against the measured mean time of a few grid points.

    OPENBLAS_NUM_THREADS=1 python benchmarks/bench_cost_estimate.py [--points 6]

Prints one row per job: the estimated and the measured seconds per point and their ratio
(aim: every ratio between 0.5 and 2). The measured points are spread evenly over the grid
(fractions 1/(2p), 3/(2p), ...), evaluated in this process with one BLAS thread. Three small
jobs of our own with end and corner modes (dense and Lanczos) follow the demo jobs (rows marked
"sample:"), beside the demo jobs that measure open samples.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

from threadpoolctl import threadpool_limits

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from sweepcli.jobfile import load_job  # noqa: E402
from sweepcli.run.cost import estimate  # noqa: E402
from sweepcli.run.worker import evaluate_point  # noqa: E402

SAMPLE_JOBS = {
    "sample: chain end modes": """
[model]
name = "ssh"
[sweep]
v = { start = 0.2, stop = 1.6, num = 8 }
[measure.gap]
[measure.winding]
[measure.end_modes]
""",
    "sample: 16x16 flake, dense": """
[model]
name = "bbh"
[sweep]
gamma = { start = 0.2, stop = 0.6, num = 5 }
[measure.gap]
[measure.corner_modes]
""",
    "sample: 40x40 flake, Lanczos": """
[model]
name = "bbh"
[sweep]
gamma = { start = 0.2, stop = 0.6, num = 5 }
[measure.gap]
[measure.corner_modes]
size = 40
""",
}


def measured_per_point(job, points: int) -> float:
    indices = sorted({int((2 * i + 1) * job.size / (2 * points)) for i in range(points)})
    t0 = time.perf_counter()
    for i in indices:
        evaluate_point(job, i)
    return (time.perf_counter() - t0) / len(indices)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=6, help="grid points timed per job")
    parser.add_argument("jobs", nargs="*", help="job files (default: every jobs/*.toml)")
    args = parser.parse_args()
    paths = [Path(p) for p in args.jobs] or sorted((ROOT / "jobs").glob("*.toml"))
    rows = [(p.stem, p) for p in paths]
    tmp = Path(tempfile.mkdtemp())
    if not args.jobs:
        for i, (label, text) in enumerate(SAMPLE_JOBS.items()):
            path = tmp / f"sample{i}.toml"
            path.write_text(text + f'[output]\npath = "{tmp / f"sample{i}.h5"}"\n')
            rows.append((label, path))
    print(f"{'job':<30} {'estimate s/pt':>13} {'measured s/pt':>13} {'ratio':>7}")
    worst = 1.0
    with threadpool_limits(limits=1, user_api="blas"):
        for label, path in rows:
            job = load_job(path)
            t0 = time.perf_counter()
            est = estimate(job).seconds_per_point
            t_est = time.perf_counter() - t0
            meas = measured_per_point(job, args.points)
            ratio = est / meas
            worst = max(worst, ratio, 1 / ratio)
            print(f"{label:<30} {est:>13.3g} {meas:>13.3g} {ratio:>7.2f}"
                  f"   (estimate took {t_est:.2f} s)")
    print(f"worst factor: {worst:.2f} (aim <= 2)")


if __name__ == "__main__":
    main()
