"""Report commands and CLI details: short diffs, the sample kind, help text, run -v, merge,
boundaries, empty slots, exported tables and the wording of a few errors."""

import re
import subprocess
import sys

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.jobfile import load_job
from sweepcli.report.boundaries import boundaries_csv, phase_boundaries
from sweepcli.report.sample_data import default_kind
from sweepcli.store import FILL_INT

from ..conftest import JOBS, ROOT
from .test_maps import fill, tiny_job


def invoke(*args, **kw):
    return CliRunner().invoke(app, [str(a) for a in args], **kw)


def test_diff_is_short_by_default_and_draws_maps_on_request(tmp_path):
    job = tiny_job("quickstart.toml", num=9)
    a, b = tmp_path / "a.h5", tmp_path / "b.h5"
    fill(job, [0, 1, -1]).write(a)
    other = fill(job, [0, 1, -1])
    other.data["chern"][2, 3] = 5
    other.write(b)
    short = invoke("diff", a, b)
    assert short.exit_code == 1
    assert "chern           1 of 81 points differ (1.2%); largest |B - A| " in short.stdout
    assert "m=-1.5, t=0.7188: A 0, B 5 (|B - A| = 5)" in short.stdout  # where
    assert "█" not in short.stdout and len(short.stdout.splitlines()) < 25
    full = invoke("diff", a, b, "--maps")
    assert "█" in full.stdout and len(full.stdout.splitlines()) > len(short.stdout.splitlines())


def test_sample_kind_follows_what_the_job_measures(write_job):
    assert default_kind(load_job(JOBS / "quickstart.toml"))[0] == "ribbon"  # chern: edges
    assert default_kind(load_job(JOBS / "chiral-chain.toml"))[0] == "chain"
    assert default_kind(load_job(JOBS / "driven-corners.toml"))[0] == "flake"  # line windings
    head = '[model]\nname = "qwz"\n[sweep]\nm = [1.0]\n[measure.chern]\n'
    for table, kind in (("[measure.corner_modes]\n", "flake"),
                        ("[measure.edge_modes]\n", "ribbon")):
        job = load_job(write_job(head + table))
        assert default_kind(job) == (kind, f"the job measures {table[9:].split(']')[0]}")


def test_sample_names_the_kind_it_chose(tmp_path):
    job = tmp_path / "qs.toml"
    job.write_text('[model]\nname = "qwz"\n[sweep]\nm = [1.0]\nt = [1.0]\n[measure.gap]\n'
                   f'[measure.chern]\n[output]\npath = "{tmp_path / "qs.h5"}"\n')
    assert invoke("run", job, "--no-progress").exit_code == 0
    result = invoke("sample", tmp_path / "qs.h5", "-o", tmp_path / "s.png")
    assert result.exit_code == 0, result.output
    assert result.stdout.startswith("sample kind ribbon: the job measures chern, which counts "
                                    "chiral edge modes (--kind chooses another)")
    # QWZ at m = t = 1 has |C| = 1 (Qi, Wu and Zhang, PRB 74, 085308 (2006)): one edge mode
    assert "1 chiral edge mode(s) on the low edge" in result.stdout


def test_run_takes_verbose_after_the_command(tmp_path):
    job = tmp_path / "v.toml"
    job.write_text('[model]\nname = "qwz"\n[sweep]\nm = [1.0, 3.0]\n[measure.gap]\n'
                   f'[output]\npath = "{tmp_path / "v.h5"}"\n')
    result = invoke("run", job, "-v", "--no-progress")
    assert result.exit_code == 0, result.output
    assert "0 of 2 points done, 2 to go" in result.stderr


def test_help_at_80_columns_shows_whole_option_names_and_no_bool_metavar():
    commands = ["run", "merge", "check", "batch", "shards", "show", "map", "boundaries", "sample",
                "models", "diff", "export"]
    for command in commands:
        text = subprocess.run([sys.executable, "-m", "sweepcli", command, "--help"],
                              capture_output=True, text=True, cwd=ROOT,
                              env={"COLUMNS": "80", "PATH": "", "PYTHONPATH": str(ROOT)}).stdout
        assert "…" not in text and "<bool>" not in text and "<boolean>" not in text, command
        assert max(len(line) for line in text.splitlines()) <= 80, command
    run_help = invoke("run", "--help", env={"COLUMNS": "80"}).stdout
    assert "--checkpoint-every" in run_help and "[output] path" in run_help
    assert re.search(r"--chunk-size.*\[default: \(about 8\s+tasks per worker", run_help, re.S)


def test_shard_message_says_each_thing_once(tmp_path):
    result = invoke("run", JOBS / "quickstart.toml", "--shard", "3/2", "-o", tmp_path / "x.h5")
    assert result.exit_code == 2
    assert result.stderr.strip().endswith("; got 3/2.")


def test_expression_errors_end_in_one_full_stop(write_job):
    for call, tail in (("foo(2)", "tanh, abs)."), ("sqr(2)", "Did you mean 'sqrt'?")):
        job = write_job(f'[model]\nname = "qwz"\n[params]\nt = "{call}"\n[sweep]\nm = [0, 1]\n'
                        '[measure.gap]\n')
        result = invoke("check", job)
        assert result.exit_code == 2
        assert result.stderr.strip().endswith(tail), result.stderr


def test_check_of_a_results_file_says_so(tmp_path):
    path = tmp_path / "r.h5"
    fill(tiny_job("quickstart.toml"), [0, 1]).write(path)
    for command in ("check", "run"):
        result = invoke(command, path)
        assert result.exit_code == 2
        assert result.stderr.strip() == (f"error: {path}: is an HDF5 file (a results file?), not "
                                         f"a TOML job file; `sweepcli show {path}` describes a "
                                         "results file.")


def test_boundaries_write_each_line_once_with_round_numbers():
    job = tiny_job("quickstart.toml", num=11)
    r = fill(job, [0])
    m, t = r.axes[0].values, r.axes[1].values
    M, T = np.meshgrid(m, t, indexing="ij")
    # Qi-Wu-Zhang phases (PRB 74, 085308 (2006)): C = -sign(m) for |m| < 2t, 0 outside
    r.data["chern"] = np.where(np.abs(M) < 2 * T, -np.sign(M), 0).astype(np.int32)
    var, x, y, lines = phase_boundaries(r)
    segments = [frozenset(map(tuple, np.round(b.points[i:i + 2], 9)))
                for b in lines for i in range(len(b.points) - 1)]
    assert len(segments) == len(set(segments))  # no boundary written twice
    assert {b.value for b in lines} == {1, -1}  # under the non-trivial region they outline
    text = boundaries_csv(var, x, y, lines)
    numbers = [f for row in text.splitlines()[1:] for f in row.split(",")[2:]]
    assert all(len(re.sub(r"[-.]|e.*", "", n).lstrip("0")) <= 12 for n in numbers)
    # every point lies on a grid value or midway between two, in both coordinates
    for b in lines:
        for px, py in b.points:
            for v, axis in ((px, m), (py, t)):
                mids = np.concatenate([axis, (axis[1:] + axis[:-1]) / 2])
                assert np.min(np.abs(mids - v)) < 1e-9


def test_show_and_export_leave_out_slots_the_job_never_fills(tmp_path):
    r = fill(tiny_job("driven-corners.toml"), [0, 1, -1])
    for name in r.variables:
        if name[-3:] in ("_s3", "_s4"):  # a two-sector operator: sectors 3 and 4 never filled
            r.data[name][:] = FILL_INT if r.variables[name].dtype == "int32" else np.nan
    path = tmp_path / "dc.h5"
    r.write(path)
    show = invoke("show", path).stdout
    assert "line_w0_s3 (" not in show and "line_w0_s1 (" in show
    assert ("not filled by this job (no value wherever their measurement succeeded): "
            "line_phase_s3, line_w0_s3, line_wpi_s3, line_phase_s4, line_w0_s4, line_wpi_s4"
            in show)
    header = invoke("export", path).stdout.splitlines()[0].split(",")
    assert "line_w0_s1" in header and not [h for h in header if h.endswith(("_s3", "_s4"))]
    # asked for by name, a slot is still written
    assert invoke("export", path, "--var", "line_w0_s3").stdout.splitlines()[0] == \
        "ratio,omega,line_w0_s3"


def test_export_writes_the_predicted_transitions(tmp_path):
    r = fill(tiny_job("quickstart.toml"), [0, 1])
    r.tables["transitions"] = {"axis": np.array(["m", "t"], dtype=object),
                               "m": np.array([-0.5, 2.0]), "t": np.array([0.25, 1.0]),
                               "gap": np.array(["0", "0"], dtype=object),
                               "k1": np.array([0.0, 0.5]), "k2": np.array([0.0, 0.5])}
    path = tmp_path / "t.h5"
    r.write(path)
    result = invoke("export", path, "--table", "transitions")
    assert result.exit_code == 0, result.output
    assert result.stdout.splitlines() == ["axis,m,t,gap,k1,k2", "m,-0.5,0.25,0,0.0,0.0",
                                          "t,2.0,1.0,0,0.5,0.5"]
    bad = invoke("export", path, "--table", "transit")
    assert bad.exit_code == 2 and "Did you mean 'transitions'?" in bad.stderr
    both = invoke("export", path, "--table", "transitions", "--var", "chern")
    assert both.exit_code == 2


@pytest.mark.parametrize("name", ["quickstart.toml"])
def test_map_command_names_the_grid_value_it_used(tmp_path, name):
    path = tmp_path / "q.h5"
    fill(tiny_job(name, num=5), [0, 1]).write(path)
    result = invoke("map", path, "--at", "t=0.6", "-o", tmp_path / "q.png")
    assert result.exit_code == 0, result.output
    assert "--at t=0.6 is not a grid value; drawn at the nearest, t=0.5625." in result.stderr
    result = invoke("map", path, "--at", "m=100", "-o", tmp_path / "q.png")
    assert result.exit_code == 2 and "off the swept axis of m" in result.stderr
