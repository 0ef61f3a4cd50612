"""``sweepcli diff``: real runs of small quick-start variants, and synthetic files for the
integer / float / missing rules and misaligned grids.

References outside the code under test: the raw HDF5 arrays read with h5py, and the analytic
gap of the Qi-Wu-Zhang model (derived below).
"""

import hashlib
import json

import h5py
import numpy as np
import pytest
import tomli_w
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.report.diff import diff_results
from sweepcli.report.diff_report import difference_picture, format_diff
from sweepcli.store import FILL_INT, Results
from sweepcli.store.results import AxisData, Variable

from ..conftest import JOBS

ENV = {"COLUMNS": "300", "TQDM_DISABLE": "1"}


def invoke(*args):
    return CliRunner().invoke(app, [str(a) for a in args], env=ENV)


def base_job() -> str:
    """The quick-start job on a 7 x 3 grid: m = -3 .. 3 (step 1), t = 0.25, 0.875, 1.5."""
    text = (JOBS / "quickstart.toml").read_text()
    text = text.replace("num = 31", "num = 7").replace("num = 11", "num = 3")
    return "\n".join(line for line in text.splitlines() if not line.startswith("path ="))


VARIANTS = {
    "base": base_job(),
    # coarse, odd gap mesh without refinement: k = pi is not on a 7-point mesh
    "coarse_gap": base_job().replace("[measure.gap]", "[measure.gap]\nkmesh = 7\nrefine = false"),
    # a Chern mesh too small to converge near the transitions
    "coarse_chern": base_job().replace("[measure.chern]",
                                       "[measure.chern]\nkmesh = 4\nmax_kmesh = 6"),
    # another job: t range and gap tolerance changed
    "other": base_job().replace("stop = 1.5", "stop = 2.0").replace(
        "[measure.gap]", "[measure]\ngap_tol = 1e-5\n\n[measure.gap]"),
}


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """Results files of the variants, plus a second run of the base job."""
    d = tmp_path_factory.mktemp("diff_runs")
    out = {}
    for name, text in list(VARIANTS.items()) + [("base_again", VARIANTS["base"])]:
        job = d / f"{name}.toml"
        job.write_text(text)
        out[name] = d / f"{name}.h5"
        result = invoke("run", job, "-o", out[name], "--no-progress")
        assert result.exit_code == 0, result.output
    return out


def raw(path, name):
    with h5py.File(path) as f:
        return f[name][()], f["m"][()], f["t"][()]


# ---------------------------------------------------------------- real runs
def test_file_with_itself_agrees(runs):
    for extra in ([], ["--provenance"]):
        result = invoke("diff", runs["base"], runs["base"], *extra)
        assert result.exit_code == 0, result.output
        assert "result: the files agree" in result.stdout
    result = invoke("diff", runs["base"], runs["base"], "--json")
    assert result.exit_code == 0
    report = json.loads(result.stdout)
    assert report["agree"] is True and report["reasons"] == []
    assert all(v["differ"] == 0 for v in report["variables"])
    assert report["grid"]["same"] and report["grid"]["common_points"] == 21


def test_two_runs_of_one_job_agree_even_with_provenance(runs):
    # started/finished/command_line differ between the two runs; they never count
    result = invoke("diff", runs["base"], runs["base_again"], "--provenance")
    assert result.exit_code == 0, result.output
    assert "job: same" in result.stdout


def test_coarse_gap_mesh_names_the_points_that_changed(runs):
    a, b = runs["base"], runs["coarse_gap"]
    result = invoke("diff", a, b, "--json", "--top", "100")
    assert result.exit_code == 1, result.output
    report = json.loads(result.stdout)
    gap = next(v for v in report["variables"] if v["name"] == "gap")

    # QWZ, H = t sin k1 sx + t sin k2 sy + (m + t cos k1 + t cos k2) sz (Asboth et al. ch. 6):
    # |d|^2 = t^2 (2 - c1^2 - c2^2) + (m + t c1 + t c2)^2 is linear in each c_i = cos k_i (the
    # c_i^2 terms cancel), so its minimum sits at a corner c_i = +-1: gap = 2 min(|m + 2t|,
    # |m|, |m - 2t|). A 7-point mesh holds k = 0 but not k = pi, so the coarse run reproduces
    # the gap exactly where the minimum is at Gamma (|m + 2t| smallest) and overestimates it
    # everywhere else.
    ga, m, t = raw(a, "gap")
    gb = raw(b, "gap")[0]
    M, T = np.meshgrid(m, t, indexing="ij")
    at_gamma = np.abs(M + 2 * T) < np.minimum(np.abs(M), np.abs(M - 2 * T))
    assert np.allclose(ga, 2 * np.minimum.reduce([np.abs(M + 2 * T), np.abs(M), np.abs(M - 2 * T)]),
                       atol=1e-9)
    expected = {(float(x), float(y)) for x, y in zip(M[~at_gamma], T[~at_gamma])}
    named = {(w["params"]["m"], w["params"]["t"]) for w in gap["worst"]}
    assert gap["differ"] == len(expected) == 13
    assert named == expected
    for w in gap["worst"]:  # the listed values are the files' values
        i, j = list(m).index(w["params"]["m"]), list(t).index(w["params"]["t"])
        assert w["a"] == ga[i, j] and w["b"] == gb[i, j] and w["b"] > w["a"]
    assert report["provenance"]["job"] == [
        {"key": "measure.gap.kmesh", "old": 64, "new": 7},
        {"key": "measure.gap.refine", "old": True, "new": False}]

    text = invoke("diff", a, b).stdout
    assert "  measure.gap.kmesh: 64 -> 7" in text
    assert "gap             13 of 21 points differ (61.9%)" in text
    assert "      m=0, t=1.5: A " in text  # a gap closing at (pi, 0) the coarse mesh misses
    assert "chern           equal" in text


def test_coarse_chern_mesh_reports_missing_points(runs):
    a, b = runs["base"], runs["coarse_chern"]
    report = json.loads(invoke("diff", a, b, "--json", "--top", "100").stdout)
    ra, m, t = raw(a, "chern_reason")
    rb = raw(b, "chern_reason")[0]
    ca, cb = raw(a, "chern")[0], raw(b, "chern")[0]
    miss_a, miss_b = ca == FILL_INT, cb == FILL_INT
    with h5py.File(b) as f:
        meanings = f["chern_reason"].attrs["flag_meanings"].split()
    chern = next(v for v in report["variables"] if v["name"] == "chern")
    expected = {(float(m[i]), float(t[j])) for i, j in zip(*np.nonzero(
        (miss_a != miss_b) | (~miss_a & ~miss_b & (ca != cb))))}
    assert expected, "the coarse Chern mesh should fail to converge somewhere"
    assert {(w["params"]["m"], w["params"]["t"]) for w in chern["worst"]} == expected
    assert chern["missing_in_one"] == int((miss_a != miss_b).sum())
    for w in chern["worst"]:
        i, j = list(m).index(w["params"]["m"]), list(t).index(w["params"]["t"])
        if w["b"] is None:
            assert w["b_note"] == meanings[rb[i, j]]
    reason = next(v for v in report["variables"] if v["name"] == "chern_reason")
    assert reason["differ"] == int((ra != rb).sum())


def test_different_jobs_list_keys_with_old_and_new_values(runs):
    a, b = runs["base"], runs["other"]
    result = invoke("diff", a, b, "--provenance")
    assert result.exit_code == 1
    text = result.stdout
    assert "job: different (sha256 " in text
    assert "  sweep.t.stop: 1.5 -> 2.0" in text
    assert "  measure.gap_tol: 1e-06 -> 1e-05" in text
    # t = 0.25, 0.875, 1.5 against 0.25, 1.125, 2.0: only t = 0.25 is common
    assert "t: overlap (1 common of 3 in A and 3 in B)" in text
    assert "compared on the 7 common points" in text
    report = json.loads(invoke("diff", a, b, "--json").stdout)
    assert {c["key"]: (c["old"], c["new"]) for c in report["provenance"]["job"]} == {
        "sweep.t.stop": (1.5, 2.0), "measure.gap_tol": (1e-6, 1e-5)}


def test_unreadable_file_is_an_error(runs, tmp_path):
    bad = tmp_path / "bad.h5"
    bad.write_text("not hdf5")
    result = invoke("diff", runs["base"], bad)
    assert result.exit_code == 2
    assert result.stderr.strip().startswith(f"error: {bad}: cannot be read")
    assert len(result.stderr.strip().splitlines()) == 1


# ---------------------------------------------------------------- synthetic files
def job_doc(**sweep) -> dict:
    return {"job": {"name": "syn", "title": "synthetic"}, "model": {"name": "qwz"},
            "sweep": sweep or {"m": {"values": [0, 1, 2, 3]}}, "measure": {"gap_tol": 1e-6}}


def make(axes: dict, data: dict, job: dict | None = None, **attrs) -> Results:
    """Results with the given axes ``{name: values}`` and variables ``{name: (dtype, array,
    measurement)}``, every point done."""
    text = tomli_w.dumps(job or job_doc())
    base = {"job_normalised": text, "job_text": text,
            "job_sha256": hashlib.sha256(text.encode()).hexdigest(), "numpy_version": "2.4.6",
            "host": "alpha", "started": "2026-01-01T00:00:00+00:00", "command_line": "x",
            "job_path": "a.toml", "title": "synthetic"}
    base.update(attrs)
    r = Results([AxisData(n, np.asarray(v, float), "1", n, "linear") for n, v in axes.items()],
                [Variable(n, dt, "1", n, meas) for n, (dt, _, meas) in data.items()], base)
    for n, (dt, arr, _) in data.items():
        r.data[n] = np.asarray(arr, dtype=dt)
    r.done[...] = 1
    return r


M4, T3 = [0.0, 1.0, 2.0, 3.0], [0.0, 1.0, 2.0]


def pair():
    """A and B on a 4 x 3 grid; B changes integers, floats and missing values at known points."""
    n = np.zeros((4, 3), np.int32)
    g = np.arange(12, dtype=float).reshape(4, 3) + 1.0
    reason = np.zeros((4, 3), np.uint8)
    na, ga, ra = n.copy(), g.copy(), reason.copy()
    nb, gb, rb = n.copy(), g.copy(), reason.copy()
    nb[1, 0] = 1  # integer value differs
    nb[2, 1] = FILL_INT  # missing in B only, with a reason
    rb[2, 1] = 1  # gap_closed
    na[3, 2] = nb[3, 2] = FILL_INT  # missing in both: equal
    ra[3, 2] = rb[3, 2] = 2
    gb[0, 0] *= 1 + 1e-9  # within the default rtol 1e-6
    gb[0, 1] += 0.5
    gb[1, 1] = np.nan  # missing in B only
    ga[2, 2] = gb[2, 2] = np.nan  # missing in both: equal
    gb[3, 0] += 2.0
    a = make({"m": M4, "t": T3}, {"n": ("int32", na, "inv"), "inv_reason": ("uint8", ra, "inv"),
                                  "g": ("float64", ga, "gapm")})
    b = make({"m": M4, "t": T3}, {"n": ("int32", nb, "inv"), "inv_reason": ("uint8", rb, "inv"),
                                  "g": ("float64", gb, "gapm")})
    return a, b


def test_integer_float_and_missing_rules():
    a, b = pair()
    d = diff_results(a, b)
    v = {x.name: x for x in d.variables}
    assert (v["n"].n_differ, v["n"].n_missing_one, v["n"].max_deviation) == (2, 1, 1.0)
    assert (v["g"].n_differ, v["g"].n_missing_one, v["g"].max_deviation) == (3, 1, 2.0)
    assert v["inv_reason"].n_differ == 1
    # missing-versus-present first, then by size of the deviation
    assert [(w.params, w.a, w.b, w.deviation) for w in v["g"].worst] == [
        ({"m": 1.0, "t": 1.0}, 5.0, None, None),
        ({"m": 3.0, "t": 0.0}, 10.0, 12.0, 2.0),
        ({"m": 0.0, "t": 1.0}, 2.0, 2.5, 0.5)]
    missing = v["n"].worst[0]
    assert (missing.params, missing.a, missing.b, missing.b_note) == (
        {"m": 2.0, "t": 1.0}, 0, None, "gap_closed")
    assert v["inv_reason"].worst[0].b == "gap_closed"
    assert not d.agree and d.provenance.same_job
    text = format_diff(d)
    assert "      m=2, t=1: A 0, B missing (gap_closed)" in text
    assert "      m=3, t=0: A 10, B 12 (|B - A| = 2)" in text

    # a tolerance wide enough for the float changes leaves only the missing one
    loose = {x.name: x for x in diff_results(a, b, rtol=0.5).variables}
    assert loose["g"].n_differ == 1


def test_difference_picture_puts_cells_where_values_differ():
    a, b = pair()
    d = diff_results(a, b)
    g = next(x for x in d.variables if x.name == "g")
    rows = {}
    for line in difference_picture(d, g, width=80):
        if "┤" in line:
            label, cells = line.split("┤")
            rows[float(label)] = cells
    # columns m = 0, 1, 2, 3; top row t = 2. Differences at (0, 1), (3, 0); B missing at (1, 1).
    assert rows == {2.0: "····", 1.0: "█▒··", 0.0: "···█"}


def test_exit_codes_and_tolerance_options(tmp_path):
    a, b = pair()
    pa, pb = tmp_path / "a.h5", tmp_path / "b.h5"
    a.write(pa)
    b.write(pb)
    result = invoke("diff", pa, pb)
    assert result.exit_code == 1
    assert "result: the files differ (values): n differs at 2 of 12 points" in result.stdout
    report = json.loads(invoke("diff", pa, pb, "--json", "--rtol", "0.5").stdout)
    assert {v["name"]: v["differ"] for v in report["variables"]} == {
        "n": 2, "inv_reason": 1, "g": 1}
    assert invoke("diff", pa, pa).exit_code == 0


def test_provenance_strength_ignores_times_host_and_command_line():
    a, _ = pair()
    b = make({"m": M4, "t": T3}, {k: (a.variables[k].dtype, a.data[k], a.variables[k].measurement)
                                  for k in a.variables},
             host="beta", started="2027-01-01T00:00:00+00:00", command_line="y",
             job_path="elsewhere/b.toml")
    assert diff_results(a, b, provenance=True).agree
    newer = make({"m": M4, "t": T3}, {k: (a.variables[k].dtype, a.data[k],
                                          a.variables[k].measurement) for k in a.variables},
                 numpy_version="2.5.0")
    assert diff_results(a, newer).agree  # values only
    d = diff_results(a, newer, provenance=True)
    assert not d.agree and d.reasons == ["versions differ (numpy_version)"]
    assert "  numpy_version: \"2.4.6\" -> \"2.5.0\"" in format_diff(d)


def test_job_keys_nested_added_and_removed():
    ja = job_doc()
    jb = job_doc()
    jb["model"]["name"] = "haldane"
    jb["measure"] = {"gap_tol": 1e-6, "chern": {"kmesh": 32}}
    del jb["job"]["title"]
    d = diff_results(make({"m": M4}, {}, ja), make({"m": M4}, {}, jb))
    assert [(c.key, c.old, c.new) for c in d.provenance.job] == [
        ("job.title", "synthetic", None), ("model.name", "qwz", "haldane"),
        ("measure.chern.kmesh", None, 32)]
    assert d.agree  # values only: no variables, same grid
    text = format_diff(diff_results(make({"m": M4}, {}, ja), make({"m": M4}, {}, jb),
                                    provenance=True))
    assert '  job.title: "synthetic" -> (absent)' in text
    assert "  measure.chern.kmesh: (absent) -> 32" in text


def field_on(m, t):
    M, T = np.meshgrid(m, t, indexing="ij")
    return M + 10 * T


@pytest.mark.parametrize("mb, relation, detail", [
    (np.linspace(0, 1, 9), "a_in_b", "B refines A (5 of 9 points in common)"),
    (np.arange(9) * 0.25, "a_in_b", "B extends A (5 of 9 points in common)"),
    (np.array([0.25, 0.5, 0.75]), "b_in_a", "A extends B (3 of 5 points in common)"),
    (np.array([0.0, 0.5, 1.0]), "b_in_a", "A refines B (3 of 5 points in common)"),
])
def test_subset_and_refinement_compare_on_common_points(mb, relation, detail):
    ma, t = np.linspace(0, 1, 5), np.array([0.0, 1.0])
    a = make({"m": ma, "t": t}, {"f": ("float64", field_on(ma, t), "x")})
    fb = field_on(mb, t)
    b = make({"m": mb, "t": t}, {"f": ("float64", fb, "x")})
    d = diff_results(a, b)
    assert (d.grid.axes[0].relation, d.grid.axes[0].detail) == (relation, detail)
    common = min(len(ma), len(mb)) * 2
    assert d.grid.n_common == common and d.variables[0].compared == common
    assert d.variables[0].n_differ == 0
    assert not d.agree and d.reasons[0].startswith("grids differ")
    assert diff_results(a, b, common_only=True).agree

    # a change at a common point counts and is named; one at a point A lacks does not
    shared = int(np.argmin(np.abs(mb - 0.5)))
    b.data["f"][shared, 1] += 1.0
    lone = [i for i, x in enumerate(mb) if np.min(np.abs(ma - x)) > 1e-6]
    for i in lone:
        b.data["f"][i, 0] = np.nan
    v = diff_results(a, b, common_only=True).variables[0]
    assert v.n_differ == 1 and v.worst[0].params == {"m": 0.5, "t": 1.0}


def test_coordinates_match_within_rounding_and_axis_order_may_differ():
    ma = np.array([0.1 * i for i in range(4)])  # 0.30000000000000004 at i = 3
    mb = np.linspace(0.0, 0.3, 4)
    t = np.array([1.0, 2.0, 3.0])
    assert not np.array_equal(ma, mb)
    a = make({"m": ma, "t": t}, {"f": ("float64", field_on(ma, t), "x")})
    # B sweeps t first: its arrays are (t, m)
    b = make({"t": t, "m": mb}, {"f": ("float64", field_on(mb, t).T, "x")})
    d = diff_results(a, b)
    assert d.grid.same and d.agree, d.reasons
    b.data["f"][2, 1] = -1.0  # t = 3, m = 0.1
    w = diff_results(a, b).variables[0].worst
    assert len(w) == 1 and w[0].params == {"m": ma[1], "t": 3.0}


def test_grids_that_cannot_be_compared():
    m = np.array([0.0, 1.0])
    a = make({"m": m}, {"f": ("float64", m, "x")})
    d = diff_results(a, make({"u": m}, {"f": ("float64", m, "x")}))
    assert d.grid.problem == "different swept parameters (A: m; B: u)"
    assert not d.agree and d.variables == []
    d = diff_results(a, make({"m": m + 0.5}, {"f": ("float64", m, "x")}))
    assert "the grids have no point in common" in d.reasons
    d = diff_results(a, make({"m": m}, {"f": ("float64", m, "x"), "h": ("float64", m, "x")}))
    assert d.only_b == ["h"] and not d.agree
