"""A reader that closes stdout early (``sweepcli models | head -1``) ends the command quietly
with exit code 0, as other command-line tools do."""

import os
import subprocess
import sys


def test_closed_stdout_pipe_exits_quietly(tmp_path):
    r, w = os.pipe()
    os.close(r)  # the reader is gone before anything is written: the first write fails (EPIPE)
    try:
        proc = subprocess.run([sys.executable, "-m", "sweepcli", "models"], stdout=w,
                              stderr=subprocess.PIPE, text=True, timeout=120)
    finally:
        os.close(w)
    assert proc.returncode == 0 and proc.stderr == ""


def test_other_failures_keep_their_exit_code(tmp_path):
    r, w = os.pipe()
    os.close(r)
    try:
        proc = subprocess.run([sys.executable, "-m", "sweepcli", "show", str(tmp_path / "no.h5")],
                              stdout=w, stderr=subprocess.PIPE, text=True, timeout=120)
    finally:
        os.close(w)
    assert proc.returncode == 2 and proc.stderr.startswith("error: ")
