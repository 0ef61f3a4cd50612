import os

# One BLAS thread: with several threads this machine's OpenBLAS is up to 100x slower on the
# small dense matrices of the suite (measured: a 576x576 eigh 13.6 s vs 0.1 s), and CI has 2 cores.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

from pathlib import Path  # noqa: E402

import pytest  # noqa: E402

# Rich error panels wrap long paths; a wide terminal keeps messages on one line for matching.
os.environ.setdefault("COLUMNS", "300")
os.environ.setdefault("TQDM_DISABLE", "1")

ROOT = Path(__file__).resolve().parents[1]
JOBS = ROOT / "jobs"

# Our own mass-switched corner model (bhz_corner, delta2 = 1: m = -0.5 for 0.4 T, then m = 3),
# without its [sweep] and [measure] tables, which each test adds.
MASS_DRIVE = """
[model]
name = "bhz_corner"
[params]
delta2 = 1.0
[drive]
kind = "steps"
omega = "omega"
[[drive.step]]
span = 0.4
set = { m = -0.5 }
[[drive.step]]
span = 0.6
set = { m = 3.0 }
"""


@pytest.fixture
def write_job(tmp_path):
    """Write a job file from text into tmp_path and return its path."""

    def write(text: str, name: str = "job.toml") -> Path:
        path = tmp_path / name
        path.write_text(text)
        return path

    return write
