"""End to end through typer's CliRunner and a real subprocess, on the quick-start job."""

import os
import re
import subprocess
import sys

import h5py
import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app

from ..conftest import JOBS

TIME_KEYS = {"started", "finished", "command_line"}


@pytest.fixture
def small_quickstart(tmp_path):
    """The quick-start job on a coarser grid, writing into tmp_path."""
    text = (JOBS / "quickstart.toml").read_text()
    text = text.replace("num = 31", "num = 7").replace("num = 11", "num = 3")
    text = text.replace('path = "results/quickstart.h5"', f'path = "{tmp_path / "qs.h5"}"')
    job = tmp_path / "quickstart.toml"
    job.write_text(text)
    return job


def sweepcli(*args, cwd=None):
    env = dict(os.environ, COLUMNS="300", TQDM_DISABLE="1")
    return subprocess.run([sys.executable, "-m", "sweepcli", *map(str, args)], capture_output=True,
                          text=True, cwd=cwd, env=env, timeout=300)


def test_run_open_map_show_in_a_subprocess(small_quickstart, tmp_path):
    out = tmp_path / "qs.h5"
    proc = sweepcli("run", small_quickstart, "--workers", "2")
    assert proc.returncode == 0, proc.stderr
    assert out.exists()

    xr = pytest.importorskip("xarray")
    ds = xr.open_dataset(out, engine="h5netcdf")
    assert set(ds.coords) >= {"m", "t"}
    assert ds["chern"].dims == ("m", "t")
    assert ds.attrs["Conventions"] == "CF-1.10"
    # an energy in units of the model's hopping is a pure number; the scale is in long_name
    assert ds["gap"].attrs["units"] == "1"
    assert "in units of the model's energy scale" in ds["gap"].attrs["long_name"]
    assert ds["chern"].attrs["ancillary_variables"] == "chern_reason"
    assert int(ds["done"].sum()) == 21
    ds.close()

    png = tmp_path / "map.png"
    proc = sweepcli("map", out, "-o", png)
    assert proc.returncode == 0, proc.stderr
    assert png.stat().st_size > 10_000
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"

    proc = sweepcli("show", out)
    assert proc.returncode == 0, proc.stderr
    for key in ("job_sha256", "sweepcli_version", "numpy_version", "host", "completion: 21/21"):
        assert key in proc.stdout


def test_check_prints_grid_and_cost(small_quickstart):
    result = CliRunner().invoke(app, ["check", str(small_quickstart)])
    assert result.exit_code == 0, result.output
    assert "grid: 7 x 3 = 21 points" in result.stdout
    assert "measure chern" in result.stdout
    assert "cost estimate:" in result.stdout


def test_existing_file_is_not_overwritten(small_quickstart, tmp_path):
    out = tmp_path / "qs.h5"
    out.write_bytes(b"precious")
    result = CliRunner().invoke(app, ["run", str(small_quickstart), "--no-progress"])
    assert result.exit_code == 2
    assert result.stderr.strip() == (f"error: {out}: exists; refusing to overwrite it. Use --force "
                                     "to start afresh or --resume to continue it.")
    assert out.read_bytes() == b"precious"


def file_content(path):
    """Every dataset and attribute of a results file, apart from times, the command line and
    the provenance of the shards of a merged file (its ``shards`` table)."""
    content = {}
    with h5py.File(path) as f:
        for k, v in f.attrs.items():
            if k not in TIME_KEYS:
                content[f"@{k}"] = v
        def visit(name, obj):
            if name.split("/")[0] == "shards":
                return
            if isinstance(obj, h5py.Dataset):
                content[name] = obj[()]
            for k, v in obj.attrs.items():
                if k not in ("DIMENSION_LIST", "REFERENCE_LIST"):
                    content[f"{name}@{k}"] = v

        f.visititems(visit)
    return content


def assert_same_content(a, b):
    ca, cb = file_content(a), file_content(b)
    assert ca.keys() == cb.keys()
    for k in ca:
        va, vb = ca[k], cb[k]
        if isinstance(va, np.ndarray):
            assert va.dtype == vb.dtype, k
            if k == "point_seconds":  # compute times differ run to run; where they exist not
                assert np.array_equal(np.isnan(va), np.isnan(vb)), k
                continue
            assert np.array_equal(va, vb, equal_nan=va.dtype.kind == "f"), k
        else:
            assert va == vb if not isinstance(va, np.ndarray) else np.array_equal(va, vb), k


def test_one_and_two_workers_give_identical_files(small_quickstart, tmp_path):
    one, two = tmp_path / "one.h5", tmp_path / "two.h5"
    for out, workers in ((one, "1"), (two, "2")):
        result = CliRunner().invoke(app, ["run", str(small_quickstart), "-o", str(out),
                                          "--workers", workers, "--chunk-size", "2",
                                          "--no-progress"])
        assert result.exit_code == 0, result.output
    assert_same_content(one, two)


def test_show_and_map_refuse_bad_files(tmp_path, small_quickstart):
    runner = CliRunner()
    not_ours = tmp_path / "other.h5"
    with h5py.File(not_ours, "w") as f:
        f["x"] = np.arange(3)
    text_file = tmp_path / "notes.h5"
    text_file.write_text("not hdf5")
    out = tmp_path / "qs.h5"
    assert runner.invoke(app, ["run", str(small_quickstart), "--no-progress"]).exit_code == 0
    truncated = tmp_path / "truncated.h5"
    truncated.write_bytes(out.read_bytes()[: out.stat().st_size // 2])

    cases = [
        (["show", str(not_ours)], f"error: {not_ours}: not a sweepcli results file (no "
                                  "'sweepcli_schema' attribute)."),
        (["map", str(not_ours)], f"error: {not_ours}: not a sweepcli results file (no "
                                 "'sweepcli_schema' attribute)."),
        (["show", str(text_file)],
         f"error: {text_file}: cannot be read as a sweepcli results file"),
        (["show", str(truncated)],
         f"error: {truncated}: cannot be read as a sweepcli results file"),
        (["map", str(truncated)], f"error: {truncated}: cannot be read as a sweepcli results file"),
        (["map", str(out), "--var", "chrn"], "error: no variable 'chrn' in the results file"),
        (["show", str(tmp_path / "missing.h5")], f"error: {tmp_path / 'missing.h5'}: no such "
                                                 "results file."),
    ]
    for args, expected in cases:
        result = runner.invoke(app, args)
        assert result.exit_code == 2, (args, result.output)
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith(expected), (args, result.stderr)
        assert "Traceback" not in result.output


@pytest.mark.parametrize("suffix", [".svg", ".pdf"])
def test_map_format_follows_suffix(small_quickstart, tmp_path, suffix):
    runner = CliRunner()
    assert runner.invoke(app, ["run", str(small_quickstart), "--no-progress"]).exit_code == 0
    pic = tmp_path / f"map{suffix}"
    result = runner.invoke(app, ["map", str(tmp_path / "qs.h5"), "--var", "gap", "-o", str(pic)])
    assert result.exit_code == 0, result.output
    data = pic.read_bytes()
    if suffix == ".pdf":
        assert data[:5] == b"%PDF-"
    else:  # an XML document whose root element is svg
        import xml.etree.ElementTree as ET

        assert ET.fromstring(data).tag == "{http://www.w3.org/2000/svg}svg"
    assert len(data) > 1000


def test_version_and_models_listing():
    runner = CliRunner()
    assert runner.invoke(app, ["--version"]).stdout.startswith("sweepcli ")
    listing = runner.invoke(app, ["models"]).stdout
    for name in ("ssh", "qwz", "haldane", "bhz", "bbh", "chern", "gap"):
        assert name in listing


def test_verbose_run_says_what_it_will_compute(small_quickstart, tmp_path):
    result = CliRunner().invoke(app, ["--verbose", "run", str(small_quickstart), "--no-progress"])
    assert result.exit_code == 0, result.output
    assert "0 of 21 points done, 21 to go; 1 worker(s); measurements: gap, chern" in result.stderr


def test_quiet_run_prints_only_its_final_line(small_quickstart, tmp_path):
    # CliRunner's stderr is not a terminal, so a plain run writes progress log lines there
    loud = CliRunner().invoke(app, ["run", str(small_quickstart)])
    assert loud.exit_code == 0, loud.output
    assert "points/s" in loud.stderr
    quiet = CliRunner().invoke(app, ["--quiet", "run", str(small_quickstart), "--force", "-v"])
    assert quiet.exit_code == 2
    assert quiet.stderr.strip() == "error: give --quiet or --verbose, not both."
    quiet = CliRunner().invoke(app, ["-q", "run", str(small_quickstart), "--force"])
    assert quiet.exit_code == 0, quiet.output
    assert quiet.stderr == ""
    lines = quiet.stdout.splitlines()
    assert len(lines) == 1 and re.fullmatch(r"21/21 points in [0-9.]+ s -> .*qs\.h5", lines[0])
    out = tmp_path / "qs.h5"
    # a note about the values used goes too; errors stay
    args = ["map", str(out), "--at", "t=0.3", "--terminal"]
    assert "is not a grid value" in CliRunner().invoke(app, args).stderr
    noted = CliRunner().invoke(app, ["-q", *args])
    assert noted.exit_code == 0 and noted.stderr == ""
    bad = CliRunner().invoke(app, ["-q", "map", str(tmp_path / "none.h5")])
    assert bad.exit_code == 2 and bad.stderr.startswith("error: ")


def test_shell_completion_is_available():
    help_text = CliRunner().invoke(app, ["--help"]).stdout
    assert "--install-completion" in help_text
    env = dict(os.environ, COMP_WORDS="sweepcli map --a", COMP_CWORD="2",
               _SWEEPCLI_COMPLETE="complete_bash")
    proc = subprocess.run([sys.executable, "-m", "sweepcli"], capture_output=True, text=True,
                          env=env, timeout=120)
    assert proc.stdout.split() == ["--at"]
