"""Runner benchmarks (run by hand, not by CI): parallel efficiency, runner + store overhead, and
peak memory against the number of grid points.

    python benchmarks/bench_runner.py

Prints
* the speed-up of 2 workers over 1 on a 200-point sweep (aim >= 1.8 on 2 cores);
* the overhead of the runner and store over the bare loop of measurements (aim <= 5 %);
* peak RSS of `sweepcli run` for 1k and 10k points of the same job, beside the size of the
  result arrays, so that growth beyond the arrays themselves shows.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from sweepcli.jobfile import load_job
from sweepcli.run.layout import results_for_job
from sweepcli.run.runner import run_sweep
from sweepcli.run.worker import evaluate_point

# About 0.1 s per point.
HEAVY = """
[model]
name = "bhz"
[sweep]
M = {{ start = -1.0, stop = 9.0, num = {n} }}
[measure.gap]
[measure.spin_chern]
kmesh = 48
[output]
path = "{out}"
"""

LIGHT = """
[model]
name = "qwz"
[sweep]
m = {{ start = -3.0, stop = 3.0, num = {n} }}
[measure.gap]
kmesh = 8
refine = false
[output]
path = "{out}"
"""


def timed_run(job, workers):
    results = results_for_job(job)
    t0 = time.perf_counter()
    run_sweep(job, results, workers=workers, progress=False)
    return time.perf_counter() - t0


def main() -> None:
    tmp = Path(tempfile.mkdtemp())
    path = tmp / "heavy.toml"
    path.write_text(HEAVY.format(n=200, out=tmp / "h.h5"))
    job = load_job(path)

    def bare_loop():
        from threadpoolctl import threadpool_limits

        # One BLAS thread, as the runner's workers have: the same arithmetic, no orchestration.
        with threadpool_limits(limits=1, user_api="blas"):
            t0 = time.perf_counter()
            for i in range(job.size):
                evaluate_point(job, i)
            return time.perf_counter() - t0

    def with_store():
        results = results_for_job(job)
        t0 = time.perf_counter()
        run_sweep(job, results, workers=1, progress=False,
                  checkpoint=lambda r: r.write(tmp / "c.h5"), checkpoint_every=0)
        return time.perf_counter() - t0

    # Interleaved repeats, best of three: the machine is shared and noisy.
    bare, t1, t1_store = (min(ts) for ts in zip(*[(bare_loop(), timed_run(job, 1), with_store())
                                                  for _ in range(3)]))
    t2_cold = timed_run(job, 2)  # includes starting the worker processes
    t2 = timed_run(job, 2)  # loky reuses its workers: the steady state of a long sweep
    print(f"200 points of bhz gap + spin_chern: bare loop {bare:.2f} s")
    print(f"  runner, 1 worker:            {t1:.2f} s   overhead {100 * (t1 / bare - 1):+.1f} %")
    print(f"  runner + checkpoint each chunk: {t1_store:.2f} s   "
          f"overhead {100 * (t1_store / bare - 1):+.1f} %")
    print(f"  runner, 2 workers, cold:     {t2_cold:.2f} s   speed-up {t1 / t2_cold:.2f}x")
    print(f"  runner, 2 workers, warm:     {t2:.2f} s   speed-up {t1 / t2:.2f}x (aim >= 1.8x)")

    for n in (1_000, 10_000):
        p = tmp / f"light{n}.toml"
        out = tmp / f"light{n}.h5"
        p.write_text(LIGHT.format(n=n, out=out))
        code = ("import resource, sys; from sweepcli.cli import app; "
                "sys.argv=['sweepcli','run',sys.argv[1],'--no-progress','--force'];\n"
                "try:\n    app()\nexcept SystemExit:\n    pass\n"
                "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)")
        proc = subprocess.run([sys.executable, "-c", code, str(p)], capture_output=True, text=True,
                              env=dict(os.environ, TQDM_DISABLE="1"))
        rss_kib = int(proc.stdout.strip().splitlines()[-1])
        arrays = n * (8 * 3 + 1 + 1 + 8)  # gap, gap_k1, gap_k2, reason, done, failure pointer
        print(f"{n:>6} points: peak RSS {rss_kib / 1024:.1f} MiB; "
              f"result arrays {arrays / 2**20:.2f} MiB")


if __name__ == "__main__":
    main()
