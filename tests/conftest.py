import os
from pathlib import Path

import pytest

# Rich error panels wrap long paths; a wide terminal keeps messages on one line for matching.
os.environ.setdefault("COLUMNS", "300")
os.environ.setdefault("TQDM_DISABLE", "1")

ROOT = Path(__file__).resolve().parents[1]
JOBS = ROOT / "jobs"


@pytest.fixture
def write_job(tmp_path):
    """Write a job file from text into tmp_path and return its path."""

    def write(text: str, name: str = "job.toml") -> Path:
        path = tmp_path / name
        path.write_text(text)
        return path

    return write
