"""``sweepcli export``: CSV in long format, checked against the raw HDF5 arrays (h5py)."""

import csv
import io

import h5py
import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.report.export import export_table, write_csv
from sweepcli.store import FILL_INT, Results
from sweepcli.store.results import AxisData, Variable

from ..conftest import JOBS

ENV = {"COLUMNS": "300", "TQDM_DISABLE": "1"}


def invoke(*args):
    return CliRunner().invoke(app, [str(a) for a in args], env=ENV)


@pytest.fixture(scope="module")
def qwz(tmp_path_factory):
    d = tmp_path_factory.mktemp("export")
    text = (JOBS / "quickstart.toml").read_text()
    text = text.replace("num = 31", "num = 7").replace("num = 11", "num = 3")
    text = text.replace('path = "results/quickstart.h5"', f'path = "{d / "qs.h5"}"')
    (d / "qs.toml").write_text(text)
    assert invoke("run", d / "qs.toml", "--no-progress").exit_code == 0
    return d / "qs.h5"


def check_against_file(rows: list[dict], path, names):
    """Every field equals the file's array value at that grid point (C order)."""
    with h5py.File(path) as f:
        axes = f.attrs["axes"].split(",")
        coords = [f[a][()] for a in axes]
        shape = tuple(len(c) for c in coords)
        assert len(rows) == int(np.prod(shape))
        for flat, row in enumerate(rows):
            idx = np.unravel_index(flat, shape)
            for a, c, i in zip(axes, coords, idx):
                assert float(row[a]) == c[i]
            for n in names:
                ds = f[n]
                v = ds[()][idx]
                field = row[n]
                if ds.dtype == np.uint8:
                    assert field == ds.attrs["flag_meanings"].split()[v]
                elif ds.dtype == np.int32:
                    if v == ds.attrs["_FillValue"]:
                        assert field == ""
                    else:
                        assert field == str(int(v))  # an integer, not "1.0"
                elif np.isnan(v):
                    assert field == ""
                else:
                    assert float(field) == v  # exact: shortest round-trip text


def test_round_trip_to_stdout_and_file(qwz, tmp_path):
    result = invoke("export", qwz)
    assert result.exit_code == 0, result.output
    rows = list(csv.DictReader(io.StringIO(result.stdout)))
    with h5py.File(qwz) as f:
        names = f.attrs["variables"].split(",")
    assert list(rows[0]) == ["m", "t"] + names
    check_against_file(rows, qwz, names)
    # the quick-start grid crosses gap closings: some Chern numbers are missing
    assert any(r["chern"] == "" for r in rows) and any(r["chern_reason"] == "gap_closed"
                                                       for r in rows)

    out = tmp_path / "sub" / "qs.csv"
    result = invoke("export", qwz, "--var", "chern", "--var", "gap", "-o", out)
    assert result.exit_code == 0, result.output
    assert result.stdout == ""
    with open(out, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["m", "t", "chern", "gap"]
    check_against_file(rows, qwz, ["chern", "gap"])


def test_missing_integers_floats_and_extra_columns(tmp_path):
    x = np.array([0.1, 0.2, 0.30000000000000004])
    n = np.array([3, FILL_INT, -2], dtype=np.int32)
    g = np.array([1 / 3, np.nan, 2.0e-300])
    r = Results([AxisData("x", x, "1", "x", "list")],
                [Variable("n", "int32", "1", "n", "inv"), Variable("g", "float64", "1", "g", "gap"),
                 Variable("inv_reason", "uint8", "1", "why", "inv")], {})
    r.data["n"], r.data["g"] = n, g
    r.data["inv_reason"] = np.array([0, 2, 0], np.uint8)
    r.done[:] = [1, 1, 0]
    r.failure[1] = "boom, with a comma"
    path = tmp_path / "s.h5"
    r.write(path)
    result = invoke("export", path, "--var", "n", "--var", "g", "--var", "inv_reason",
                    "--var", "done", "--var", "failure")
    assert result.exit_code == 0, result.output
    assert result.stdout.splitlines() == [
        "x,n,g,inv_reason,done,failure",
        "0.1,3,0.3333333333333333,ok,1,",
        '0.2,,,not_converged,1,"boom, with a comma"',
        # not evaluated: missing whatever the arrays hold
        "0.30000000000000004,,,ok,0,",
    ]
    rows = list(csv.DictReader(io.StringIO(result.stdout)))
    assert float(rows[0]["g"]) == 1 / 3 and float(rows[2]["x"]) == x[2]


def test_library_table_and_unknown_variable(qwz):
    r = Results.read(qwz)
    table = export_table(r, ["chern", "chern"])
    assert table.columns == ["m", "t", "chern"] and table.n_rows == 21
    buf = io.StringIO()
    assert write_csv(table, buf) == 21
    result = invoke("export", qwz, "--var", "chrn")
    assert result.exit_code == 2
    assert result.stderr.strip().startswith("error: no variable 'chrn' in the results file")
    assert "Did you mean 'chern'?" in result.stderr


def test_transitions_table_writes_crossings_as_short_round_tripping_floats(tmp_path):
    # QWZ (Qi, Wu and Zhang, PRB 74, 085308 (2006)): the gap closes at m = -2t (Gamma), m = 0
    # (X and Y) and m = +2t (M); with t = 0.625 the outer crossings, +-1.25, lie between grid
    # values (m = -3 .. 3 in steps of 6/7), so the root finder places them.
    text = (JOBS / "quickstart.toml").read_text()
    text = text.replace("num = 31", "num = 8").replace(
        "t = { start = 0.25, stop = 1.5, num = 11 }", "t = [0.625]")
    text = text.replace('path = "results/quickstart.h5"', f'path = "{tmp_path / "t.h5"}"')
    (tmp_path / "t.toml").write_text(text)
    assert invoke("run", tmp_path / "t.toml", "--no-progress").exit_code == 0
    result = invoke("export", tmp_path / "t.h5", "--table", "transitions")
    assert result.exit_code == 0, result.output
    rows = list(csv.DictReader(io.StringIO(result.stdout)))
    assert sorted(r["m"] for r in rows) == ["-1.25", "0.0", "0.0", "1.25"]
    for r in rows:
        for key in ("m", "t", "k1", "k2"):
            assert r[key] == repr(float(r[key])), (key, r[key])  # shortest text, round trip
