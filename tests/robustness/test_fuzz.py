"""Fuzzing the command line with mutated demo jobs and damaged results files (hypothesis).

Every outcome must be exit 2 with one ``error:`` line naming the file (0 where the mutation is
harmless, 4 where a run finished with failed points, 1 where diff found differences), never a
traceback, and a refused run leaves no file. The mutations are those of ``fuzz_tally.py``,
which runs many more of them and prints the tally.
"""

import shutil
import tempfile
import tracemalloc
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from . import fuzz_tally as fz

FUZZ = settings(deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.function_scoped_fixture,
                                       HealthCheck.too_slow])

# Peak memory traced while one case runs (numpy registers its buffers with tracemalloc): a
# mutation that allocates the grid before refusing it (10^9 points took 7.45 GiB) would show.
# Traced per case, not the process's peak, which other tests in the same session set.
MEMORY_BOUND = 3 * 2**30


def assert_clean(run_case):
    tracemalloc.start()
    try:
        case = run_case()
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert not case.fault, f"{case.command} [{case.mutation}]: {case.fault}"
    assert peak < MEMORY_BOUND, f"{case.command} [{case.mutation}]: {peak / 2**30:.2f} GiB"


@settings(FUZZ, max_examples=40)
@given(job=st.sampled_from(fz.JOBS), seed=st.integers(0, 2**32 - 1))
def test_check_of_a_mutated_demo_job(job, seed):
    with tempfile.TemporaryDirectory() as d:
        assert_clean(lambda: fz.job_case(job, "check", seed, Path(d)))


@settings(FUZZ, max_examples=25)
@given(job=st.sampled_from(sorted(j for j in fz.JOBS if j.stem in fz.RUNNABLE)),
       seed=st.integers(0, 2**32 - 1))
def test_run_of_a_mutated_demo_job(job, seed):
    with tempfile.TemporaryDirectory() as d:
        assert_clean(lambda: fz.job_case(job, "run", seed, Path(d)))


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    return fz.reference_results(tmp_path_factory.mktemp("ref"))


@settings(FUZZ, max_examples=50)
@given(how=st.sampled_from(fz.DAMAGES), command=st.sampled_from(fz.RESULTS_COMMANDS),
       seed=st.integers(0, 2**32 - 1))
def test_damaged_results_file(reference, how, command, seed):
    d = Path(tempfile.mkdtemp())
    try:
        assert_clean(lambda: fz.results_case(reference, how, command, seed, d))
    finally:
        shutil.rmtree(d)


@pytest.mark.parametrize("text, key", [
    # The cases of the issue, one each: each was a traceback or a run that exited 0.
    ('[sweep]\nm = { start = -1.0, stop = 1.0, num = 1000000000 }', "[sweep.m] num"),
    ("[params]\nt = " + "[" * 3000 + "]" * 3000, "invalid TOML: arrays or tables must be nested"),
    ('[params]\nt = "' + "1+" * 5000 + '1"', "[params] t"),
    ("[params]\nt = 1e308", "[params] t"),
    ('[params]\nt = "a\\u0000b"', "[params] t"),
], ids=["grid 1e9", "3000-deep", "10000 characters", "1e308", "NUL"])
def test_the_issue_cases_exit_2_naming_file_and_key(tmp_path, text, key):
    base = "[model]\nname = \"qwz\"\n[measure.gap]\n[output]\npath = \"out.h5\"\n"
    if "[sweep]" not in text:
        base += "[sweep]\nm = [0.5, 1.5]\n"
    job = tmp_path / "job.toml"
    job.write_text(base + text + "\n")
    from typer.testing import CliRunner

    from sweepcli.cli import app

    for args in (["check", str(job)], ["run", str(job), "-o", str(tmp_path / "out.h5")]):
        result = CliRunner().invoke(app, args)
        assert result.exit_code == 2, result.output
        assert result.stderr.startswith(f"error: {job}: {key} ") or (
            result.stderr.startswith(f"error: {job}:") and key in result.stderr), result.stderr
        assert "Traceback" not in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["job.toml"]
