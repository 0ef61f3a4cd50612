"""A full disk at the first write (or a later checkpoint): one error line, exit 2, no
``*.tmp`` left, and the previous file (if any) untouched."""

import errno
import os
import subprocess
import sys

import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.store import results as results_module

JOB = """
[model]
name = "qwz"
[sweep]
m = { start = -3.0, stop = 3.0, num = 7 }
[measure.gap]
[output]
path = "OUT"
"""


def full_after(n_bytes):
    """A ``_write_file`` that writes ``n_bytes`` and then fails as a full disk does."""

    def write(path, data):
        with open(path, "wb") as fh:
            fh.write(data[:n_bytes])
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    return write


def test_full_disk_at_the_first_write(tmp_path, monkeypatch):
    out = tmp_path / "out.h5"
    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(out)))
    monkeypatch.setattr(results_module, "_write_file", full_after(100))
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 2, result.output
    assert result.stderr.strip() == (f"error: {out}: cannot write the results file (No space "
                                     "left on device).")
    assert "Traceback" not in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["job.toml"]  # no out, .tmp or .lock


def test_full_disk_at_a_checkpoint_keeps_the_previous_file(tmp_path, monkeypatch):
    out = tmp_path / "out.h5"
    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(out)))
    real = results_module._write_file
    calls = []

    def second_write_fails(path, data):
        calls.append(path)
        if len(calls) == 1:
            return real(path, data)
        return full_after(10)(path, data)

    monkeypatch.setattr(results_module, "_write_file", second_write_fails)
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress", "--checkpoint-every", "0"])
    assert result.exit_code == 2, result.output
    assert "No space left on device" in result.stderr and "Traceback" not in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["job.toml", "out.h5"]
    from sweepcli.store import Results

    assert Results.read(out).n_done == 0  # the first (empty) file, still readable


def test_a_real_full_tmpfs(tmp_path):
    # Where this test may mount a file system (root): a 16 KiB tmpfs, too small for the file.
    mnt = tmp_path / "tiny"
    mnt.mkdir()
    if os.geteuid() != 0 or subprocess.run(["mount", "-t", "tmpfs", "-o", "size=16k", "tmpfs",
                                            str(mnt)], capture_output=True).returncode != 0:
        pytest.skip("cannot mount a small tmpfs here (needs root)")
    try:
        job = tmp_path / "job.toml"
        job.write_text(JOB.replace("OUT", str(mnt / "out.h5")).replace("num = 7", "num = 400"))
        proc = subprocess.run([sys.executable, "-m", "sweepcli", "run", str(job), "--no-progress"],
                              capture_output=True, text=True, timeout=300)
        assert proc.returncode == 2, proc.stderr
        assert proc.stderr.strip().endswith("cannot write the results file (No space left on "
                                            "device)."), proc.stderr
        assert "Traceback" not in proc.stderr
        assert os.listdir(mnt) == []
    finally:
        subprocess.run(["umount", str(mnt)], check=False)
