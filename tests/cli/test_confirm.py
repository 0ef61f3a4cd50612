"""[confirm]: bulk measurements on every point, boundary ones on the cells chosen from the bulk
map; not-requested cells, resume with a larger selection, shards, errors, cost and maps.

The model is the SSH chain (Su, Schrieffer and Heeger, PRL 42, 1698 (1979)): winding 1 for
|v| < |w| and 0 for |v| > |w|, with one zero mode at each end in the winding phase (Asboth,
Oroszlany and Palyi 2016, ch. 1); no grid point below has |v| = |w|.
"""

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.run.confirm import select_cells
from sweepcli.schema import Reason
from sweepcli.store import Results

V = np.linspace(0.1, 2.0, 6)
W = np.linspace(0.3, 1.9, 5)
JOB = """[job]
name = "ends"
[model]
name = "ssh"
[sweep]
v = { start = 0.1, stop = 2.0, num = 6 }
w = { start = 0.3, stop = 1.9, num = 5 }
[measure.winding]
[measure.end_modes]
"""
BOUNDARY = ("end_modes_0", "end_modes_0_left", "end_modes_0_right", "end_modes_0_states",
            "end_modes_0_weight", "end_modes_0_cells", "end_modes_method", "end_modes_0_reason",
            "agree_winding_end")


def write(tmp_path, confirm, name):
    path = tmp_path / f"{name}.toml"
    path.write_text(JOB + confirm + f'\n[output]\npath = "{tmp_path / name}.h5"\n')
    return path


def run(*args):
    result = CliRunner().invoke(app, ["run", *map(str, args), "--no-progress"])
    assert result.exit_code == 0, result.output
    return result


def winding_map():
    v, w = np.meshgrid(V, W, indexing="ij")
    return (np.abs(v) < np.abs(w)).astype(int)


def same(a, b):
    for name in a.variables:
        if name == "point_seconds":  # compute times differ run to run; where they exist not
            assert np.array_equal(np.isnan(a.data[name]), np.isnan(b.data[name]))
            continue
        assert np.array_equal(a.data[name], b.data[name], equal_nan=True), name
    assert np.array_equal(a.done, b.done)
    assert list(a.failure.ravel()) == list(b.failure.ravel())


def test_boundary_only_on_chosen_cells_and_not_requested_elsewhere(tmp_path):
    full = write(tmp_path, "", "full")
    run(full)
    job = write(tmp_path, '[confirm]\nacross = ["winding"]\nper_region = 1\n', "sel")
    out = run(job).stdout
    r, f = Results.read(tmp_path / "sel.h5"), Results.read(tmp_path / "full.h5")
    assert np.array_equal(r.data["winding"], winding_map())
    chosen = select_cells([winding_map()], np.ones(r.shape, bool), per_region=1)
    assert 0 < chosen.sum() < r.size
    assert f"{int(chosen.sum())} cells selected, computed on {int(chosen.sum())}" in out
    assert r.done.all() and r.attrs["confirm_measurements"] == "end_modes"
    reason = r.data["end_modes_0_reason"]
    assert (reason[~chosen] == Reason.NOT_REQUESTED).all()
    assert (reason[chosen] == Reason.OK).all()
    assert (r.data["end_modes_0_left"][chosen] == winding_map()[chosen]).all()
    assert (r.data["agree_winding_end"][chosen] == 1).all()
    for name in BOUNDARY:  # computed cells as in a run without [confirm]
        assert np.array_equal(r.data[name][chosen], f.data[name][chosen], equal_nan=True), name
    assert np.isnan(r.data["end_modes_0_weight"][~chosen]).all()
    assert r.attrs["job_sha256"] == f.attrs["job_sha256"]  # [confirm] is no part of it


def test_resume_with_a_larger_selection_keeps_and_adds(tmp_path):
    small = write(tmp_path, '[confirm]\nacross = ["winding"]\nper_region = 1\n', "small")
    run(small)
    first = Results.read(tmp_path / "small.h5")
    kept = first.data["end_modes_0_reason"] == Reason.OK
    # Mark a computed cell so that recomputing it would show.
    i = tuple(np.argwhere(kept)[0])
    first.data["end_modes_0_cells"][i] = 12345
    first.write(tmp_path / "small.h5")
    larger = '[confirm]\nacross = ["winding"]\nper_region = 3\nstride = 2\n'
    big = write(tmp_path, larger, "big")
    run(big, "-o", tmp_path / "small.h5", "--resume")
    run(big)
    resumed, fresh = Results.read(tmp_path / "small.h5"), Results.read(tmp_path / "big.h5")
    assert resumed.data["end_modes_0_cells"][i] == 12345  # kept, not recomputed
    resumed.data["end_modes_0_cells"][i] = fresh.data["end_modes_0_cells"][i]
    same(resumed, fresh)
    now = resumed.data["end_modes_0_reason"] == Reason.OK
    assert (now & kept).sum() == kept.sum() and now.sum() > kept.sum()
    assert "stride = 2" in resumed.attrs["confirm"]


def test_resume_after_the_bulk_pass_computes_the_pending_cells(tmp_path):
    job = write(tmp_path, '[confirm]\nacross = ["winding"]\n', "job")
    run(job)
    fresh = Results.read(tmp_path / "job.h5")
    cut = Results.read(tmp_path / "job.h5")  # as if stopped in pass 2
    todo = cut.data["end_modes_0_reason"] == Reason.OK
    for name in BOUNDARY:
        var = cut.variables[name]
        cut.data[name][todo] = var.missing()
    cut.done[todo] = 0
    cut.write(tmp_path / "job.h5")
    run(job, "--resume")
    same(Results.read(tmp_path / "job.h5"), fresh)


def test_without_confirm_a_resumed_run_computes_every_cell(tmp_path):
    job = write(tmp_path, '[confirm]\nper_region = 1\n', "job")
    run(job)
    run(write(tmp_path, "", "job"), "--resume")
    r = Results.read(tmp_path / "job.h5")
    assert (r.data["end_modes_0_reason"] == Reason.OK).all() and r.done.all()
    assert r.attrs["confirm"] == ""


def test_shards_merged_equal_one_run(tmp_path):
    job = write(tmp_path, '[confirm]\nacross = ["winding"]\nper_region = 2\n', "job")
    run(job)
    parts = []
    for i in (1, 2, 3):
        parts.append(tmp_path / f"s{i}.h5")
        run(job, "--shard", f"{i}/3", "-o", parts[-1])
    shard = Results.read(parts[0])
    assert shard.done.sum() == 10 and (shard.data["winding_reason"] != Reason.NOT_COMPUTED).all()
    result = CliRunner().invoke(app, ["merge", str(tmp_path / "m.h5"), *map(str, parts)])
    assert result.exit_code == 0, result.output
    same(Results.read(tmp_path / "m.h5"), Results.read(tmp_path / "job.h5"))


@pytest.mark.parametrize("table, message", [
    ('across = ["windng"]', "[confirm] across must be a list of invariants the job stores on "
                            "every point (integer or dimensionless quantities of its other "
                            "measurements: winding, winding_kmesh); got 'windng'. Did you mean"),
    ('across = ["end_modes_0"]', "end_modes_0 is measured only on the selected cells."),
    ('measurements = ["winding"]', "[confirm] measurements must be a non-empty list of the "
                                   "job's boundary measurements (end_modes); got 'winding'."),
    ("per_region = -1", "[confirm] per_region must be an integer in [0, inf); got -1."),
    ("stride = 1.5", "[confirm] stride must be an integer in [1, inf); got 1.5."),
    ("per_region = 0", "[confirm] must select cells: give across = [invariants], per_region >= 1"
                       " or stride; got per_region = 0 and no across or stride."),
    ("acros = []", "[confirm] has an unknown key 'acros'"),
])
def test_bad_confirm_tables_give_one_line(tmp_path, table, message):
    job = write(tmp_path, "[confirm]\n" + table + "\n", "bad")
    result = CliRunner().invoke(app, ["check", str(job)])
    assert result.exit_code == 2
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and message in lines[0], result.output


def test_confirm_needs_a_boundary_measurement_and_no_refine(tmp_path):
    job = tmp_path / "a.toml"
    job.write_text('[model]\nname = "ssh"\n[sweep]\nv = [0.5, 1.5]\n[measure.winding]\n'
                   '[confirm]\nper_region = 1\n')
    result = CliRunner().invoke(app, ["check", str(job)])
    assert result.exit_code == 2 and "[confirm] needs a boundary measurement" in result.output
    job.write_text('[model]\nname = "ssh"\n[sweep]\nv = { start = 0.5, stop = 1.5, num = 3 }\n'
                   '[measure.winding]\n[measure.end_modes]\n[refine]\nby = "winding"\n'
                   '[confirm]\nper_region = 1\n')
    result = CliRunner().invoke(app, ["check", str(job)])
    assert result.exit_code == 2 and "[confirm] and [refine] exclude each other" in result.output


def test_check_states_the_range_of_cells(tmp_path):
    job = write(tmp_path, '[confirm]\nacross = ["winding"]\nper_region = 1\nstride = 2\n', "job")
    result = CliRunner().invoke(app, ["check", str(job)])
    assert result.exit_code == 0, result.output
    # stride 2 on 6 x 5: 3 x 3 = 9 cells at least; at most every one of the 30 points.
    assert "bulk measurements on all 30 points" in result.output
    assert "selected cells: at least 9," in result.output
    assert "at most 30 (every cell)" in result.output


def test_maps_tell_not_requested_from_missing_and_mark_confirmed(tmp_path):
    job = write(tmp_path, '[confirm]\nacross = ["winding"]\nper_region = 1\n', "job")
    run(job)
    r = Results.read(tmp_path / "job.h5")
    n_ok = int((r.data["end_modes_0_reason"] == Reason.OK).sum())
    text = CliRunner().invoke(app, ["map", str(tmp_path / "job.h5"), "--var", "end_modes_0",
                                    "--terminal"]).stdout
    assert f"-  not requested ([confirm] did not select it) ({30 - n_ok} points)" in text
    assert f"+  boundary measured here (confirmed) ({n_ok} points)" in text
    assert "missing" not in text
    from sweepcli.report.maps import map_figure

    fig = map_figure(r, "end_modes_0")
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert f"not requested: [confirm] did not select the cell ({30 - n_ok})" in labels
    assert f"boundary measured here ([confirm]: {n_ok} cells)" in labels
    fig = map_figure(r, "winding")
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert f"boundary measured here ([confirm]: {n_ok} cells)" in labels
