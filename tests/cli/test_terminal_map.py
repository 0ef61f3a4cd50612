"""Character phase maps (``terminal_map``), read back from the text they print."""

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.errors import ResultsError
from sweepcli.report.terminal import MISSING_GLYPH, terminal_map
from sweepcli.store import FILL_INT, Results
from sweepcli.store.results import AxisData, Variable

from ..conftest import JOBS

ENV = {"COLUMNS": "300", "TQDM_DISABLE": "1"}


@pytest.fixture(scope="module")
def qwz(tmp_path_factory):
    """Quick-start QWZ on m = -3 .. 3 (step 1) x t = 0.25, 0.875, 1.5."""
    d = tmp_path_factory.mktemp("tmap")
    text = (JOBS / "quickstart.toml").read_text()
    text = text.replace("num = 31", "num = 7").replace("num = 11", "num = 3")
    text = text.replace('path = "results/quickstart.h5"', f'path = "{d / "qs.h5"}"')
    (d / "qs.toml").write_text(text)
    result = CliRunner().invoke(app, ["run", str(d / "qs.toml"), "--no-progress"], env=ENV)
    assert result.exit_code == 0, result.output
    return d / "qs.h5"


def parse(text: str):
    """(rows {y label: cells}, legend {label: glyph}, x tick labels line) of a map's text."""
    lines = text.splitlines()
    rows, legend, order = {}, {}, []
    in_legend = False
    for i, line in enumerate(lines):
        if "┤" in line:
            label, cells = line.split("┤", 1)
            rows[label.strip()] = cells
            order.append(label.strip())
        if "└" in line:
            ticks = lines[i + 1]
        if in_legend and not line.strip():
            in_legend = False
        elif in_legend:  # "  G  label (N points)"
            legend[line[5:].rsplit(" (", 1)[0]] = line[2]
        in_legend = in_legend or line == "legend:"
    return rows, legend, ticks, order


def qwz_chern(m: float, t: float) -> int | None:
    """Chern number of the lower QWZ band in the project's sign convention (+1 for -2t < m < 0,
    -1 for 0 < m < 2t, 0 for |m| > 2t; Qi, Wu and Zhang, PRB 74, 085308 (2006) for the phase
    boundaries m = 0, +-2t); None on a boundary, where the gap closes."""
    if np.isclose(m, 0) or np.isclose(abs(m), 2 * t):
        return None
    if abs(m) > 2 * t:
        return 0
    return 1 if m < 0 else -1


def test_qwz_phase_map_has_the_expected_phase_in_every_cell(qwz):
    r = Results.read(qwz)
    text = terminal_map(r, "chern", width=100)
    rows, legend, ticks, order = parse(text)
    m, t = r.axis("m").values, r.axis("t").values
    assert order == ["1.5", "0.875", "0.25"]  # largest t on top
    assert ticks.split() == ["-3", "0", "3"]
    assert set(legend) >= {"chern = 0", "chern = 1", "chern = -1"}
    glyphs = list(legend.values())
    assert len(set(glyphs)) == len(glyphs)  # readable without colour
    seen = set()
    for tv in t:
        cells = rows[f"{tv:.4g}"]
        assert len(cells) == len(m)
        for i, mv in enumerate(m):
            c = qwz_chern(mv, tv)
            if c is None:
                # on a phase boundary the gap closes: missing, never a plausible phase
                assert cells[i] == MISSING_GLYPH, (mv, tv)
            else:
                assert cells[i] == legend[f"chern = {c}"], (mv, tv, cells)
                seen.add(c)
    assert seen == {-1, 0, 1}
    assert "\x1b[" not in text


def test_colour_only_on_request(qwz):
    r = Results.read(qwz)
    plain = terminal_map(r, "chern", width=100)
    coloured = terminal_map(r, "chern", width=100, colour=True)
    assert "\x1b[" in coloured and "\x1b[" not in plain
    # stripping the escapes gives the plain picture back
    import re

    assert re.sub(r"\x1b\[[0-9;]*m", "", coloured) == plain


def test_one_dimensional_slice_prints_runs_and_a_sparkline(qwz):
    r = Results.read(qwz)
    text = terminal_map(r, "chern", at={"t": 1.5}, width=100)
    assert "at t=1.5" in text
    runs = text.split("runs along m:")[1].strip().splitlines()
    # t = 1.5: boundaries at m = -3, 0, 3 (|m| = 2t, m = 0); +1 on -2 .. -1, -1 on 1 .. 2
    assert [line.split()[0:3] for line in runs] == [
        ["-3", "(1", "point)"], ["-2", "..", "-1"], ["0", "(1", "point)"],
        ["1", "..", "2"], ["3", "(1", "point)"]]
    assert runs[1].endswith("chern = 1") and runs[3].endswith("chern = -1")
    assert runs[0].endswith("missing (gap_closed)")

    # gap = 2 min(|m + 2t|, |m|, |m - 2t|) (see test_diff): 0, 2, 2, 0, 2, 2, 0 at t = 1.5,
    # two levels, drawn as the lowest and highest of the ramp
    text = terminal_map(r, "gap", at={"t": 1.5}, width=100)
    rows, legend, _, _ = parse(text)
    assert rows["gap"] == "▁██▁██▁"
    assert "min gap = " in text


def test_resampling_keeps_the_nearest_point_and_fits_the_width():
    x = np.linspace(0.0, 9.9, 100)
    y = np.array([0.0, 1.0, 2.0])
    v = (np.arange(100)[:, None] // 25 + 0 * y[None, :]).astype(np.int32)  # 0, 1, 2, 3 by quarter
    v[50:, 2] = FILL_INT
    r = Results([AxisData("x", x, "1", "x", "linear"), AxisData("y", y, "1", "y", "linear")],
                [Variable("n", "int32", "1", "an integer", "inv")], {"title": "synthetic"})
    r.data["n"] = v
    r.done[...] = 1
    width = 50
    text = terminal_map(r, "n", width=width)
    rows, legend, ticks, _ = parse(text)
    assert "resampled (x: 100 points in" in text
    assert all(len(line) <= width for line in text.splitlines() if "┤" in line or "└" in line)
    ncols = len(rows["0"])
    reps = np.round(np.linspace(0, 99, ncols)).astype(int)  # evenly spaced, ends included
    assert rows["0"] == "".join(legend[f"n = {i // 25}"] for i in reps)
    assert rows["2"] == "".join(legend[f"n = {i // 25}"] if i < 50 else MISSING_GLYPH for i in reps)
    assert ticks.split()[0] == "0" and legend["n = 0"] == "░"


def test_unknown_variable_and_axis_are_errors(qwz):
    r = Results.read(qwz)
    with pytest.raises(ResultsError, match="no variable 'chrn'.*Did you mean 'chern'"):
        terminal_map(r, "chrn")
    with pytest.raises(ResultsError, match="--at names 'u'"):
        terminal_map(r, "chern", at={"u": 1.0})


def test_map_command_terminal_flag(qwz):
    """Through the CLI: the same text as the library function, no colour off a terminal."""
    result = CliRunner().invoke(app, ["map", str(qwz), "--terminal", "--width", "100"], env=ENV)
    assert result.exit_code == 0, result.output
    assert result.stdout.strip() == terminal_map(Results.read(qwz), None, None, 100).strip()
    assert "\x1b[" not in result.stdout
    assert not qwz.with_name("qs-map.png").exists()  # no picture file written
