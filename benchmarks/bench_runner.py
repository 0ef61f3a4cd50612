"""Runner benchmarks (run by hand, not by CI): scaling with workers, the share of wall time that
is overhead, and peak memory against the number of grid points.

    python benchmarks/bench_runner.py [--grid 50x20] [--workers 1,2] [--repeat 2]
                                      [--job jobs/a.toml,jobs/b.toml] [--compare] [--memory]
                                      [--startup-job JOB] [--no-startup] [--no-scaling]

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
  alone; the first run on the most workers, which starts the pool, is shown apart; with
  ``--compare``, each count above 1 worker is run before (chunks of a ramp of 1, 2, 4, ...
  points whatever they cost) and after (once a cost is measured, no chunk shorter than
  ``MIN_TASK_SECONDS``), alternating; several comma-separated ``--job`` files end with one
  line of their speed-ups from 1 to the second worker count (before -> after with
  ``--compare``); with ``--split``, the bare loop split over N processes that start together
  (no runner; a static split, so its own wall time may suffer from imbalance): where all cores
  compute, each runs slower than one alone (6-15 % more CPU for the same points was measured on
  a shared 2-core machine), so ``bare wall x slowdown / N`` (slowdown = split CPU / bare CPU),
  not ``bare wall / N``, is what N workers can reach, and ``1 - reachable / N-worker wall`` is
  the runner's own share;
* (unless ``--no-startup``) one ``sweepcli run`` as the command line does it, in a fresh interpreter
  each, before (the pool started by the first task, fixed strided chunks) and after (the pool
  started in the background while the parent imports and reads the job, chunks of 1, 2, 4, ...
  points first, then sized by the measured cost per point): the time from the start of the
  process to the first stored result and to the end, the tail idle share (worker time idle
  after each worker's last result, ``sum(end - t_last) / (N x sweep wall)``), the workers' and
  the parent's CPU time (the run of least total of ``--repeat``; before and after alternate);
  of a 12 x 8 cut of ``jobs/driven-chain.toml`` (``--startup-job`` for another job);
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


# The bare loop split over N processes that start together (argv = job, i, N, start time):
# points i::N and predicted lines i::N, no runner. Wall time of the slowest is what N workers
# could reach on this machine, where two busy cores each run slower than one alone.
SPLIT = """
import os, sys, time, json
for v in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(v, "1")
from sweepcli.jobfile import load_job
from sweepcli.run.predict import predict_lines, prediction_lines
from sweepcli.run.worker import evaluate_point
job = load_job(sys.argv[1])
i, n, start = int(sys.argv[2]), int(sys.argv[3]), float(sys.argv[4])
lines = prediction_lines(job)[i::n] if job.predict is not None else []
evaluate_point(job, i)  # first-use imports and caches, before the clock
time.sleep(max(0.0, start - time.time()))
w0, c0 = time.perf_counter(), time.process_time()
for k in range(i, job.size, n):
    evaluate_point(job, k)
if lines:
    predict_lines(job, lines)
print(json.dumps([time.perf_counter() - w0, time.process_time() - c0]))
"""


def split_bare(job, n: int) -> tuple[float, float]:
    """Wall time (the slowest) and summed CPU of the bare loop split over ``n`` processes."""
    import json

    start = time.time() + 3.0  # after every process has imported and read the job
    procs = [subprocess.Popen([sys.executable, "-c", SPLIT, job.path, str(i), str(n),
                               str(start)], stdout=subprocess.PIPE, text=True)
             for i in range(n)]
    out = [json.loads(p.communicate()[0].strip().splitlines()[-1]) for p in procs]
    return max(w for w, _ in out), sum(c for _, c in out)


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


def chunk_size_before(k: int, left: int, workers: int, per_point: float | None,
                      fixed: int) -> int:
    """The chunk sizes of the version before the floor (d42b73c): the ramp 1, 2, 4, ... points
    whatever they cost, capped by the guided size once a cost is known."""
    from sweepcli.run.chunking import MAX_TASK_SECONDS, MIN_TASK_SECONDS

    ramp = 1 << min(k // max(1, workers), 30)
    if per_point is None or per_point <= 0:
        size = fixed
    else:
        target = min(max(left * per_point / (4 * workers), MIN_TASK_SECONDS), MAX_TASK_SECONDS)
        size = max(1, round(target / per_point))
    return max(1, min(ramp, size, left))


def timed_mode(job, workers: int, mode: str) -> tuple[float, float, float]:
    """:func:`timed_run` with the chunking of ``mode``: "after" (this version: once a cost is
    known, no chunk shorter than MIN_TASK_SECONDS) or "before" (:func:`chunk_size_before`,
    put in place of the runner's own for the run)."""
    from sweepcli.run import chunking

    own = chunking.chunk_size
    if mode == "before":
        chunking.chunk_size = chunk_size_before
    try:
        return timed_run(job, workers)
    finally:
        chunking.chunk_size = own


def scaling(job, label: str, counts: list[int], repeat: int, compare: bool = False,
            split: bool = False) -> dict[tuple[int, str], float]:
    """Print the scaling table of ``job``; returns the best wall time per (worker count, mode);
    with ``compare``, each count above 1 runs before and after (alternating), else after; with
    ``split``, also the bare loop split over that many processes (:func:`split_bare`)."""
    from threadpoolctl import threadpool_limits

    rows = [(n, m) for n in counts for m in (("before", "after") if compare and n > 1
                                             else ("after",))]
    runs: dict = {"bare": []}
    cold = timed_run(job, max(counts)) if max(counts) > 1 else None  # starts the pool
    for _ in range(repeat):
        with threadpool_limits(limits=1, user_api="blas"):
            runs["bare"].append(bare(job))
        for row in rows:
            runs.setdefault(row, []).append(timed_mode(job, *row))
        for n in counts:
            if split and n > 1:
                runs.setdefault(("split", n), []).append(split_bare(job, n))
    b_wall, b_cpu = min(runs["bare"])
    print(f"{label}: {job.size} points"
          + (f" + {Predictions(job).total} predicted lines" if job.predict is not None else "")
          + f"; best of {repeat}")
    print(f"  bare loop (no runner): wall {b_wall:.2f} s, CPU {b_cpu:.2f} s")
    print("  workers           wall   speed-up  efficiency  worker CPU  CPU ratio  parent CPU  "
          "overhead (wall, CPU)")
    base_wall, base_cpu = min(runs[rows[0]])[:2] if counts[0] == 1 else (None, None)
    for n, mode in rows:
        wall, cpu, parent = min(runs[n, mode])
        speed = f"{base_wall / wall:6.2f}x" if base_wall else "     -"
        eff = f"{base_wall / wall / n:9.0%}" if base_wall else "        -"
        ratio = f"{cpu / base_cpu:8.2f}" if base_cpu else "       -"
        name = f"{n} {mode}" if compare and n > 1 else str(n)
        print(f"  {name:>14} {wall:7.2f} s {speed}   {eff}  {cpu:8.2f} s  {ratio}   "
              f"{parent:7.2f} s  {1 - b_wall / (n * wall):7.1%} {1 - b_cpu / (cpu + parent):7.1%}")
    for n in counts:
        if split and n > 1:
            s_wall, s_cpu = min(runs["split", n])
            best = min(runs[rows[-1]] if rows[-1][0] == n else runs[n, "after"])[0]
            slow = s_cpu / b_cpu
            print(f"  bare loop split over {n} processes started together: wall {s_wall:.2f} s, "
                  f"CPU {s_cpu:.2f} s = {slow:.2f} x the bare CPU (each core's slowdown when "
                  f"{n} compute); reachable wall {b_wall * slow / n:.2f} s, speed-up "
                  f"{n / slow:.2f}x; the runner's own share of {n}-worker wall "
                  f"{1 - b_wall * slow / (n * best):.1%}")
    if cold is not None:
        print(f"  first run on {max(counts)} workers, starting the pool: wall {cold[0]:.2f} s "
              f"(best warm {min(runs[rows[-1]])[0]:.2f} s)")
    return {row: min(runs[row])[0] for row in rows}


DRIVEN_CHAIN = Path(__file__).resolve().parent.parent / "jobs" / "driven-chain.toml"

# One run in a fresh interpreter, timed from its first line: argv = job, output, workers, mode.
STARTUP = """
import time
t0 = time.perf_counter()
import json, os, sys
from pathlib import Path
from sweepcli.run.executors import JoblibExecutor
job_file, out, workers, mode = sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4]
pool = JoblibExecutor(workers)
if mode == "after":
    pool.warm()  # as `sweepcli run -w N` does, before the sweep code is imported
from sweepcli.jobfile import load_job
from sweepcli.run.runner import default_chunk_size
from sweepcli.run.session import RunSession

class Timed:
    workers = workers
    def __init__(self):
        self.arrivals, self.start = [], None
    def close(self):
        pool.close()
    def imap(self, func, tasks):
        self.start = time.perf_counter()
        for result in pool.imap(func, tasks):
            if result[0] == "points":
                self.arrivals.append(time.perf_counter())
            yield result

timed = Timed()
size = None
if mode == "before":
    size = default_chunk_size(load_job(job_file).size, workers)
RunSession(Path(job_file), output=Path(out), workers=workers, force=True, progress=False,
           heartbeat=0, chunk_size=size, executor=timed, argv=["bench"]).run()
end = time.perf_counter()
import psutil
kids = sum(c.cpu_times().user + c.cpu_times().system
           for c in psutil.Process().children(recursive=True))
last = sorted(timed.arrivals)[-workers:]
idle = sum(last[-1] - t for t in last) / (workers * (last[-1] - timed.start))
print(json.dumps(dict(sweep=timed.start - t0, first=timed.arrivals[0] - t0, total=end - t0,
                      tasks=len(timed.arrivals), idle=idle, workers_cpu=kids,
                      parent_cpu=time.process_time())))
"""


def startup(job_file: Path, tmp: Path, workers: int, repeat: int) -> None:
    """Before/after figures of one command-line run, interleaved, best of ``repeat``."""
    import json

    from sweepcli.jobfile import load_job

    job = load_job(job_file)
    runs: dict[str, list[dict]] = {"before": [], "after": []}
    for _ in range(repeat):
        for mode in runs:
            proc = subprocess.run([sys.executable, "-c", STARTUP, str(job_file),
                                   str(tmp / f"startup-{mode}.h5"), str(workers), mode],
                                  capture_output=True, text=True)
            if proc.returncode:
                raise SystemExit(proc.stderr)
            runs[mode].append(json.loads(proc.stdout.strip().splitlines()[-1]))
    print(f"start-up and tail, {job_file} ({job.size} points) on {workers} workers, "
          f"fresh process each; the run of least total of {repeat}")
    print("  chunking   sweep starts  first result   total   point tasks  tail idle  worker CPU"
          "  parent CPU")
    for mode, rs in runs.items():
        best = min(rs, key=lambda r: r["total"])
        print(f"  {mode:<9} {best['sweep']:9.2f} s {best['first']:9.2f} s {best['total']:7.2f} s "
              f"{best['tasks']:9d}   {best['idle']:8.1%}  {best['workers_cpu']:8.2f} s  "
              f"{best['parent_cpu']:8.2f} s")


def cut_down(job_file: Path, tmp: Path, sizes: tuple[int, int] = (12, 8)) -> Path:
    """The driven chain job on a ``sizes`` grid (T x a), writing under ``tmp``."""
    text = job_file.read_text()
    text = text.replace("num = 39", f"num = {sizes[0]}").replace("num = 21", f"num = {sizes[1]}")
    path = tmp / "driven-chain-small.toml"
    path.write_text(text.replace('"results/driven-chain.h5"', f'"{tmp / "dc.h5"}"'))
    return path


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
    ap.add_argument("--job", help="job files to time instead of the QWZ sweep, comma-separated "
                    "(several: a summary line of their speed-ups at the end)")
    ap.add_argument("--workers", default="1,2", help="worker counts, comma-separated")
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--memory", action="store_true", help="also the peak-memory figures")
    ap.add_argument("--no-startup", action="store_true",
                    help="skip the start-up and tail figures (before and after)")
    ap.add_argument("--startup-job", type=Path,
                    help="job of the start-up figures (default: a 12 x 8 driven chain)")
    ap.add_argument("--no-scaling", action="store_true", help="skip the scaling table")
    ap.add_argument("--split", action="store_true",
                    help="scaling table: also the bare loop split over N processes at once")
    ap.add_argument("--compare", action="store_true",
                    help="scaling table: each count above 1 worker before and after the "
                         "chunk floor (alternating)")
    args = ap.parse_args()
    tmp = Path(tempfile.mkdtemp())
    counts = [int(c) for c in args.workers.split(",")]
    if args.job is not None:
        jobs = [(load_job(Path(f)), f) for f in args.job.split(",") if f]
    else:
        nm, nt = (int(x) for x in args.grid.lower().split("x"))
        path = tmp / "qwz.toml"
        path.write_text(QWZ.format(nm=nm, nt=nt, out=tmp / "q.h5"))
        jobs = [(load_job(path), f"QWZ gap + chern + [predict], {nm} x {nt}")]
    if not args.no_scaling:
        walls = {label: scaling(job, label, counts, args.repeat, args.compare, args.split)
                 for job, label in jobs}
        if len(jobs) > 1 and counts[0] == 1 and len(counts) > 1:
            n = counts[1]

            def speed(w: dict) -> str:
                after = f"{w[1, 'after'] / w[n, 'after']:.2f}x"
                return f"{w[1, 'after'] / w[n, 'before']:.2f}x -> {after}" if args.compare \
                    else after

            print(f"speed-up 1 -> {n} workers{' (before -> after)' if args.compare else ''}: "
                  + "; ".join(f"{Path(label).stem} {speed(w)}" for label, w in walls.items()))
    if not args.no_startup:
        startup(args.startup_job or cut_down(DRIVEN_CHAIN, tmp), tmp, max(max(counts), 2),
                args.repeat)
    if args.memory:
        memory(tmp)


if __name__ == "__main__":
    main()
