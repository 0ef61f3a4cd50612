"""One reason per gap: what the store writes (per-gap reason variables, the
``ancillary_variables`` link), what the worker records (a failure in every gap, no chiral frame),
and how reports find a variable's reason through the link (and without it, in older files)."""

from __future__ import annotations

import h5py
import numpy as np
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.jobfile import load_job
from sweepcli.physics.measurements import MEASUREMENTS
from sweepcli.physics.registry import Entry
from sweepcli.report.diff import diff_results
from sweepcli.report.export import export_table
from sweepcli.report.map_data import missing_reasons
from sweepcli.report.summary import empty_slots
from sweepcli.run.worker import evaluate_point
from sweepcli.schema import Reason
from sweepcli.store import FILL_INT, Results, Variable
from sweepcli.store.results import AxisData

# A chiral chain driven through three steps with three different intra-cell hoppings: the
# cyclic step sequence (a, b, c) is no palindrome, so no time is a mirror point and no frame is
# chiral symmetric (Asboth and Obuse, PRB 88, 121406 (2013)); nu_0 and nu_pi are undefined.
THREE_STEPS = """
[model]
name = "ssh"
[params]
w = 1.0
[sweep]
omega = { start = 2.0, stop = 3.0, num = 2 }
[drive]
kind = "steps"
omega = "omega"
[[drive.step]]
span = 0.3
set = { v = 0.2 }
[[drive.step]]
span = 0.3
set = { v = 0.9 }
[[drive.step]]
span = 0.4
set = { v = 1.6 }
[measure.chiral_windings]
[measure.end_modes]
cells = 16
max_cells = 16
"""

# The same with two steps v = 0.2, 1.6 (each step its own mirror point).
TWO_STEPS = THREE_STEPS.replace("""[[drive.step]]
span = 0.3
set = { v = 0.9 }
""", "").replace("span = 0.3", "span = 0.6")


def job_file(tmp_path, text, name="job"):
    path = tmp_path / f"{name}.toml"
    out = tmp_path / f"{name}.h5"
    path.write_text(text + f'\n[output]\npath = "{out}"\n')
    return path, out


def test_a_drive_without_a_chiral_frame_gives_no_chiral_frame_not_failed(tmp_path):
    path, out = job_file(tmp_path, THREE_STEPS)
    result = CliRunner().invoke(app, ["run", str(path), "--no-progress"])
    assert result.exit_code == 0, result.output
    r = Results.read(out)
    assert r.n_done == 2
    for g in ("0", "pi"):
        assert np.all(r.data[f"chiral_windings_{g}_reason"] == Reason.NO_CHIRAL_FRAME)
        assert np.all(r.data[f"nu_{g}"] == FILL_INT)
    assert "chiral_windings_reason" not in r.variables
    assert list(r.failure.ravel()) == ["", ""]
    # End modes need no chiral frame: counted without chiral charges, with their own reasons.
    assert set(np.unique(r.data["end_modes_0_reason"])) <= {Reason.OK, Reason.GAP_CLOSED,
                                                             Reason.FINITE_SIZE}
    shown = CliRunner().invoke(app, ["show", str(out)]).stdout
    assert "chiral_windings_pi_reason: no_chiral_frame: 2" in shown

    # Two steps: a mirror point exists and the invariants are there (reason ok per gap).
    path, out = job_file(tmp_path, TWO_STEPS, "two")
    job = load_job(path)
    _, values, failure = evaluate_point(job, 0)
    assert failure == ""
    assert values["chiral_windings_0_reason"] == values["chiral_windings_pi_reason"] == 0
    assert isinstance(values["nu_0"], int) and isinstance(values["nu_pi"], int)


def test_reason_variables_and_links_in_the_file(tmp_path):
    path, out = job_file(tmp_path, TWO_STEPS)
    result = CliRunner().invoke(app, ["run", str(path), "--no-progress"])
    assert result.exit_code == 0, result.output
    with h5py.File(out) as f:
        def link(name):
            return f[name].attrs["ancillary_variables"]

        assert link("nu_0") == "chiral_windings_0_reason"
        assert link("nu_pi") == "chiral_windings_pi_reason"
        assert link("nu_kmesh") == "chiral_windings_0_reason chiral_windings_pi_reason"
        assert link("end_modes_pi_left") == "end_modes_pi_reason"
        assert link("end_modes_method") == "end_modes_0_reason end_modes_pi_reason"
        assert link("agree_nu_pi_end") == "chiral_windings_pi_reason end_modes_pi_reason"
        assert "ancillary_variables" not in f["end_modes_0_reason"].attrs
        meanings = f["end_modes_0_reason"].attrs["flag_meanings"].split()
        assert meanings[Reason.NO_CHIRAL_FRAME] == "no_chiral_frame"
        for name in f.attrs["variables"].split(","):
            # point_seconds is a compute time, missing only where the point was not run
            if not name.endswith("_reason") and name != "point_seconds":
                assert all(r in f for r in link(name).split()), name
    r = Results.read(out)
    assert r.variables["nu_pi"].ancillary == ("chiral_windings_pi_reason",)
    assert r.reason_variables("nu_kmesh") == ("chiral_windings_0_reason",
                                              "chiral_windings_pi_reason")


def test_a_failing_measurement_is_failed_in_every_gap(tmp_path, monkeypatch):
    entry = MEASUREMENTS["end_modes"]

    def fail(point, **options):
        raise RuntimeError("deliberate failure")

    monkeypatch.setitem(MEASUREMENTS._entries, "end_modes", Entry(
        entry.name, fail, entry.description, entry.source, entry.params, entry.extra))
    path, _ = job_file(tmp_path, TWO_STEPS)
    _, values, failure = evaluate_point(load_job(path), 1)
    assert values["end_modes_0_reason"] == values["end_modes_pi_reason"] == Reason.FAILED
    assert values["end_modes_pi"] is None and values["end_modes_method"] is None
    assert values["chiral_windings_0_reason"] == Reason.OK
    assert failure == "end_modes: RuntimeError: deliberate failure"


def test_a_measurement_that_forgets_a_gap_is_recorded_as_failed(tmp_path, monkeypatch):
    entry = MEASUREMENTS["chiral_windings"]

    def one_reason(point, **options):
        out = entry.func(point, **options)
        out["reason"] = Reason.OK  # one reason for a measurement with two gaps
        return out

    monkeypatch.setitem(MEASUREMENTS._entries, "chiral_windings", Entry(
        entry.name, one_reason, entry.description, entry.source, entry.params, entry.extra))
    path, _ = job_file(tmp_path, TWO_STEPS)
    _, values, failure = evaluate_point(load_job(path), 0)
    assert values["chiral_windings_0_reason"] == values["chiral_windings_pi_reason"] == 4
    assert values["nu_0"] is None
    assert "must return one reason per group ('0', 'pi')" in failure


def per_gap_results(pi_reason: int, method_missing: bool = True) -> Results:
    """Three points of a measurement ``inv`` with one reason per gap; at the middle point the
    pi count is missing with ``pi_reason`` while the 0 count is there (reason ok)."""
    axes = [AxisData("x", np.array([0.0, 1.0, 2.0]), "1", "x", "linear")]
    both = ("inv_0_reason", "inv_pi_reason")
    r = Results(axes, [Variable("n_0", "int32", "1", "count at 0", "inv", ("inv_0_reason",)),
                       Variable("n_pi", "int32", "1", "count at pi", "inv", ("inv_pi_reason",)),
                       Variable("inv_method", "int32", "1", "solver", "inv", both),
                       Variable("inv_0_reason", "uint8", "1", "why", "inv"),
                       Variable("inv_pi_reason", "uint8", "1", "why", "inv")], {})
    r.data["n_0"] = np.array([1, 2, 1], np.int32)
    r.data["n_pi"] = np.array([0, FILL_INT, 0], np.int32)
    r.data["inv_method"] = np.array([0, FILL_INT if method_missing else 0, 0], np.int32)
    r.data["inv_0_reason"] = np.zeros(3, np.uint8)
    r.data["inv_pi_reason"] = np.array([0, pi_reason, 0], np.uint8)
    r.done[:] = 1
    return r


def test_reports_read_the_reason_of_the_variable_s_own_gap(tmp_path):
    r = per_gap_results(Reason.FINITE_SIZE)
    path = tmp_path / "r.h5"
    r.write(path)
    r = Results.read(path)
    assert r.variables["n_pi"].ancillary == ("inv_pi_reason",)
    ill = np.array([False, True, False])
    assert missing_reasons(r, "n_pi", (slice(None),), ill) == {"finite_size": 1}
    # a variable of no gap: the first reason that is not ok, 0 before pi
    assert missing_reasons(r, "inv_method", (slice(None),), ill) == {"finite_size": 1}
    assert list(r.reason_codes("n_0")) == [0, 0, 0]
    assert empty_slots(r) == []
    rows = list(export_table(r, ["n_pi", "inv_pi_reason"]).rows)
    assert rows[1] == [1.0, None, "finite_size"]

    other = per_gap_results(Reason.GAP_CLOSED)
    other.data["n_pi"][1] = 3
    other.data["inv_pi_reason"][1] = Reason.OK
    d = diff_results(r, other)
    worst = next(v for v in d.variables if v.name == "n_pi").worst[0]
    assert (worst.a, worst.b, worst.a_note, worst.b_note) == (None, 3, "finite_size", "")
    # the 0 count's reason is ok at that point: the pi reason does not leak into it
    assert next(v for v in d.variables if v.name == "n_0").n_differ == 0


def test_files_without_the_link_fall_back_to_the_measurement_reason(tmp_path):
    # A file written before per-gap reasons: one inv_reason, no ancillary_variables.
    axes = [AxisData("x", np.array([0.0, 1.0]), "1", "x", "linear")]
    r = Results(axes, [Variable("n_0", "int32", "1", "count", "inv"),
                       Variable("inv_reason", "uint8", "1", "why", "inv")], {})
    r.data["n_0"] = np.array([1, FILL_INT], np.int32)
    r.data["inv_reason"] = np.array([0, Reason.GAP_CLOSED], np.uint8)
    r.done[:] = 1
    path = tmp_path / "old.h5"
    r.write(path)
    with h5py.File(path) as f:
        assert "ancillary_variables" not in f["n_0"].attrs
    r = Results.read(path)
    assert r.reason_variables("n_0") == ("inv_reason",)
    assert missing_reasons(r, "n_0", (slice(None),), np.array([False, True])) == {
        "gap_closed": 1}
    assert r.reason_variables("inv_reason") == ()
