"""How a run cuts its points into tasks (sweepcli/run/chunking.py): a ramp of small first
chunks, then chunks sized by the measured cost per point, with short last chunks; the points
evaluated and the values stored are those of the fixed strided chunks of earlier versions.

Costs here are fake (a given number of seconds per point) and time is simulated: no test reads
a clock."""

import heapq
import math

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.jobfile import load_job
from sweepcli.run.chunking import (
    MAX_TASK_SECONDS,
    MIN_TASK_SECONDS,
    CostMeter,
    plan_chunks,
    spread_order,
)
from sweepcli.run.layout import results_for_job
from sweepcli.run.runner import chunks, default_chunk_size, point_tasks
from sweepcli.schema import POINT_SECONDS
from sweepcli.store import Results

from ..conftest import JOBS

ENV = {"COLUMNS": "300", "TQDM_DISABLE": "1"}


def van_der_corput(n: int) -> list[int]:
    """0..n-1 by the reversed binary digits of 0..2^b-1 (written out with strings)."""
    b = max(1, (n - 1).bit_length())
    seq = [int(format(i, f"0{b}b")[::-1], 2) for i in range(1 << b)]
    return [s for s in seq if s < n]


@pytest.mark.parametrize("n", [1, 2, 3, 7, 8, 9, 100, 1000])
def test_spread_order_is_van_der_corput(n):
    todo = np.arange(5, 5 + 2 * n, 2)  # pending flat indices, not 0..n-1
    order = spread_order(todo)
    if n > 2:
        assert order.tolist() == [int(todo[i]) for i in van_der_corput(n)]
    assert sorted(order.tolist()) == todo.tolist()


def simulate(todo, workers, cost, *, planned=True, fixed=None):
    """Run ``workers`` simulated workers over the chunks (each takes the next chunk when free;
    a chunk takes the sum of ``cost[index]``); the meter learns each chunk's points when the
    chunk finishes, as the runner does. Returns the chunks in the order drawn and the idle
    time of the workers after their last chunk (sum over workers of end - own finish)."""
    meter = CostMeter()
    source = (plan_chunks(todo, workers, meter, fixed=fixed) if planned else
              chunks(todo, fixed or default_chunk_size(len(todo), workers)))
    free = [(0.0, w, None) for w in range(workers)]  # (time free, worker, chunk it finished)
    heapq.heapify(free)
    drawn, finish = [], {}
    for chunk in source:
        t, w, done = heapq.heappop(free)
        if done is not None:
            for i in done:
                meter.add(cost[i])
        drawn.append(chunk)
        end = t + float(cost[chunk].sum())
        finish[w] = end
        heapq.heappush(free, (end, w, chunk))
    stop = max(finish.values())
    return drawn, sum(stop - f for f in finish.values())


@pytest.mark.parametrize("workers", [1, 2, 5])
def test_every_point_once_and_the_ramp(workers):
    n = 500
    cost = np.full(n, 0.01)
    drawn, _ = simulate(np.arange(n), workers, cost)
    flat = np.concatenate(drawn)
    assert sorted(flat.tolist()) == list(range(n))
    # Before any chunk has finished, the first chunks are of 1 point (workers each).
    assert [len(c) for c in drawn[:workers]] == [1] * workers
    # Once the cost is known (the simulation draws a chunk before it learns the finished one:
    # from chunk workers + 1 on), no chunk but the last is planned below MIN_TASK_SECONDS.
    assert all(len(c) * 0.01 >= MIN_TASK_SECONDS - 1e-12 for c in drawn[workers + 1:-1])


def test_the_ramp_before_a_cost_is_known():
    # Chunks drawn before any finishes (as the executor draws a few ahead): 1, 2, 4, ...
    # points, `workers` of each, up to the fixed size.
    meter = CostMeter()
    sizes = [len(c) for c in plan_chunks(np.arange(300), 2, meter, fixed=16)]
    assert sizes[:10] == [1, 1, 2, 2, 4, 4, 8, 8, 16, 16]
    assert sum(sizes) == 300


def test_chunks_sized_by_cost_and_short_at_the_end():
    """A grid where one region costs 20 times the rest: after the ramp each chunk is planned
    to take between MIN_TASK_SECONDS and MAX_TASK_SECONDS by the mean cost, and the workers
    idle at the end for less than a short chunk each, where the fixed chunks leave them
    waiting for a long one (32 chunks on 3 workers: two wait for the last)."""
    n, workers = 2000, 3
    cost = np.full(n, 0.02)
    cost[1500:] = 0.4  # expensive region: a quarter of the points, most of the work
    drawn, idle = simulate(np.arange(n), workers, cost)
    mean = cost.mean()
    for chunk in drawn[4 * workers:-1]:
        assert len(chunk) * mean <= 1.5 * MAX_TASK_SECONDS
    last_planned = len(drawn[-2]) * mean
    assert last_planned <= 2 * MIN_TASK_SECONDS + mean
    assert idle <= workers * (2 * MIN_TASK_SECONDS + cost.max() * 4)
    _, idle_fixed = simulate(np.arange(n), workers, cost, planned=False, fixed=64)
    assert idle < idle_fixed


def test_resume_starts_from_the_stored_cost(tmp_path):
    """Points done in the file a run resumes give the cost per point at once: after the ramp
    (1, 2, 4, 8) the fifth chunk takes MAX_TASK_SECONDS of the stored 1 s per point, where a
    fresh file ramps on to the fixed size."""
    text = (JOBS / "quickstart.toml").read_text().replace("num = 31", "num = 12")
    text = text.replace("num = 11", "num = 10")
    job_file = tmp_path / "q.toml"
    job_file.write_text(text.replace('"results/quickstart.h5"', f'"{tmp_path / "q.h5"}"'))
    job = load_job(job_file)
    assert job.size == 120
    sizes = {}
    for resumed in (False, True):
        results = results_for_job(job)
        if resumed:
            done = np.zeros(job.size, bool)
            done[::6] = True  # 20 points done, 1 s each
            results.done.reshape(-1)[done] = 1
            results.data[POINT_SECONDS].reshape(-1)[done] = 1.0
        todo = np.flatnonzero(results.done.ravel() == 0)
        tasks, _ = point_tasks(job, results, [(todo, None)], [], 1)
        sizes[resumed] = [len(t[2]) for t in tasks]
        assert sum(sizes[resumed]) == len(todo)
    assert sizes[True][:5] == [1, 2, 4, 8, round(MAX_TASK_SECONDS / 1.0)]
    assert sizes[False][:5] == [1, 2, 4, 8, default_chunk_size(120, 1)]


def test_side_tasks_spread_among_the_chunks(tmp_path):
    job = load_job(JOBS / "quickstart.toml")
    results = results_for_job(job)
    todo = np.arange(40)
    side = [("predict", None, j, None) for j in range(4)]
    tasks, _ = point_tasks(job, results, [(todo, None)], side, 2, chunk_size=5)
    kinds = [t[0] if t[0] == "points" else f"side{t[2]}" for t in tasks]
    # side task j before the chunk that starts at point 10 j (8 chunks of 5 points)
    assert kinds == ["side0", "points", "points", "side1", "points", "points", "side2",
                     "points", "points", "side3", "points", "points"]


def test_planned_chunks_store_what_fixed_chunks_store(tmp_path):
    """The same job run with the planned chunks and with fixed strided chunks of the old
    default size gives the same points and the same values (all but the compute times)."""
    text = (JOBS / "driven-chain.toml").read_text()
    text = text.replace("num = 39", "num = 6").replace("num = 21", "num = 5")
    job_file = tmp_path / "dc.toml"
    job_file.write_text(text.replace('"results/driven-chain.h5"', f'"{tmp_path / "new.h5"}"'))
    size = default_chunk_size(30, 2)
    for extra in ([], ["--chunk-size", str(size), "-o", tmp_path / "old.h5"]):
        result = CliRunner().invoke(app, [str(a) for a in ["run", job_file, "-w", "2",
                                                           "--no-progress", *extra]], env=ENV)
        assert result.exit_code == 0, result.output
    new, old = Results.read(tmp_path / "new.h5"), Results.read(tmp_path / "old.h5")
    assert new.n_done == old.n_done == 30
    np.testing.assert_array_equal(new.done, old.done)
    assert set(new.variables) == set(old.variables)
    for name in new.variables:
        if name == POINT_SECONDS:
            continue
        a, b = np.asarray(new.data[name]), np.asarray(old.data[name])
        np.testing.assert_array_equal(a, b, err_msg=name)
    assert math.isfinite(float(np.nansum(new.data[POINT_SECONDS])))
