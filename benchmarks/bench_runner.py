"""Runner benchmarks (run by hand, not by CI): scaling with workers, the share of wall time that
is overhead, and peak memory against the number of grid points.

    python benchmarks/bench_runner.py [--grid 50x20] [--workers 1,2] [--repeat 2]
                                      [--job jobs/driven-corners.toml] [--memory]

Prints
* for a static Qi-Wu-Zhang sweep with ``[predict]`` (``--grid MxT`` points, 1000 by default; the
  200 x 200 grid of the issue is ``--grid 200x200``, about 40,000 points), or for ``--job``:
  the bare serial work (every point and every predicted line in one loop, no runner), then for
  each worker count the wall time, the speed-up and efficiency over 1 worker, the CPU time of
  the workers (summed over processes, from psutil) and its ratio to 1 worker's (ideally 1.0:
  the same points cost the same CPU however many workers share them), and the overhead share
  of wall time ``1 - bare / (N x wall)`` (what the runner, store, process start and idle
  workers cost; on a machine with fewer free cores than N workers it also holds the waiting),
  and of CPU time ``1 - bare CPU / (workers' + parent's CPU)``, which a loaded machine leaves
  alone; the first run on the most workers, which starts the pool, is shown apart;
* with ``--memory``, peak RSS of ``sweepcli run`` for 1k and 10k points beside the size of the
  result arrays, so that growth beyond the arrays themselves shows.

Runs are interleaved (bare, 1 worker, 2 workers, ... in each of ``--repeat`` rounds) and the
best of the rounds is kept: the machine may be shared and noisy.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")  # one BLAS thread, as every worker of a sweep has

from sweepcli.jobfile import load_job  # noqa: E402
from sweepcli.run.layout import results_for_job  # noqa: E402
from sweepcli.run.predict import Predictions, predict_transitions  # noqa: E402
from sweepcli.run.runner import run_job  # noqa: E402
from sweepcli.run.worker import evaluate_point  # noqa: E402

QWZ = """
[model]
name = "qwz"
[sweep]
m = {{ start = -3.0, stop = 3.0, num = {nm} }}
t = {{ start = 0.25, stop = 1.5, num = {nt} }}
[measure.gap]
[measure.chern]
[predict]
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


def cpu_of_children() -> float:
    """User + system CPU seconds of the live child processes (the pool's workers)."""
    import psutil

    total = 0.0
    for child in psutil.Process().children(recursive=True):
        try:
            t = child.cpu_times()
        except psutil.Error:
            continue
        total += t.user + t.system
    return total


def bare(job) -> tuple[float, float]:
    """Wall and CPU time of the same work in one loop: every point, then the predictions."""
    w0, c0 = time.perf_counter(), time.process_time()
    for i in range(job.size):
        evaluate_point(job, i)
    if job.predict is not None:
        predict_transitions(job)
    return time.perf_counter() - w0, time.process_time() - c0


def timed_run(job, workers: int) -> tuple[float, float, float]:
    """Wall time, workers' CPU and the parent's CPU of a run (points and predictions)."""
    results = results_for_job(job)
    predictions = Predictions(job) if job.predict is not None else None
    k0, c0 = cpu_of_children(), time.process_time()
    w0 = time.perf_counter()
    summary = run_job(job, results, workers=workers, progress=False, predictions=predictions)
    wall = time.perf_counter() - w0
    parent = time.process_time() - c0
    assert summary.done == job.size and (predictions is None or predictions.complete)
    if workers == 1:  # the serial executor computes in this process
        return wall, parent, 0.0
    return wall, cpu_of_children() - k0, parent


def scaling(job, label: str, counts: list[int], repeat: int) -> None:
    from threadpoolctl import threadpool_limits

    runs: dict[str, list] = {"bare": []}
    cold = timed_run(job, max(counts)) if max(counts) > 1 else None  # starts the pool
    for _ in range(repeat):
        with threadpool_limits(limits=1, user_api="blas"):
            runs["bare"].append(bare(job))
        for n in counts:
            runs.setdefault(n, []).append(timed_run(job, n))
    b_wall, b_cpu = min(runs["bare"])
    print(f"{label}: {job.size} points"
          + (f" + {Predictions(job).total} predicted lines" if job.predict is not None else "")
          + f"; best of {repeat}")
    print(f"  bare loop (no runner): wall {b_wall:.2f} s, CPU {b_cpu:.2f} s")
    print("  workers    wall   speed-up  efficiency  worker CPU  CPU ratio  parent CPU  "
          "overhead (wall, CPU)")
    base_wall, base_cpu = min(runs[counts[0]])[:2] if counts[0] == 1 else (None, None)
    for n in counts:
        wall, cpu, parent = min(runs[n])
        speed = f"{base_wall / wall:6.2f}x" if base_wall else "     -"
        eff = f"{base_wall / wall / n:9.0%}" if base_wall else "        -"
        ratio = f"{cpu / base_cpu:8.2f}" if base_cpu else "       -"
        print(f"  {n:>7} {wall:7.2f} s {speed}   {eff}  {cpu:8.2f} s  {ratio}   "
              f"{parent:7.2f} s  {1 - b_wall / (n * wall):7.1%} {1 - b_cpu / (cpu + parent):7.1%}")
    if cold is not None:
        print(f"  first run on {max(counts)} workers, starting the pool: wall {cold[0]:.2f} s "
              f"(best warm {min(runs[max(counts)])[0]:.2f} s)")


def memory(tmp: Path) -> None:
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


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--grid", default="50x20", help="m x t points of the QWZ sweep")
    ap.add_argument("--job", type=Path, help="a job file to time instead of the QWZ sweep")
    ap.add_argument("--workers", default="1,2", help="worker counts, comma-separated")
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--memory", action="store_true", help="also the peak-memory figures")
    args = ap.parse_args()
    tmp = Path(tempfile.mkdtemp())
    counts = [int(c) for c in args.workers.split(",")]
    if args.job is not None:
        job, label = load_job(args.job), str(args.job)
    else:
        nm, nt = (int(x) for x in args.grid.lower().split("x"))
        path = tmp / "qwz.toml"
        path.write_text(QWZ.format(nm=nm, nt=nt, out=tmp / "q.h5"))
        job, label = load_job(path), f"QWZ gap + chern + [predict], {nm} x {nt}"
    scaling(job, label, counts, args.repeat)
    if args.memory:
        memory(tmp)


if __name__ == "__main__":
    main()
