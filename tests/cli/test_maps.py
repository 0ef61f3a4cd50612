"""Phase maps read back from the matplotlib figure objects: colours tied to values across files,
unfinished points with their own legend entry, nothing clipped, the job's main invariant drawn
by default, labelled axes. The results files are small synthetic ones built from the demo jobs
(a few grid points per axis, values chosen by the test), so no physics runs here."""

import tomllib

import matplotlib
import numpy as np
import pytest
import tomli_w

from sweepcli.errors import ResultsError
from sweepcli.jobfile import build_job, load_job
from sweepcli.report.map_data import at_notes, default_variable
from sweepcli.report.maps import map_figure
from sweepcli.report.terminal import terminal_map
from sweepcli.run.layout import results_for_job
from sweepcli.schema import Reason
from sweepcli.store import FILL_INT

from ..conftest import JOBS

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.collections import QuadMesh  # noqa: E402

DEMOS = sorted(p.name for p in JOBS.glob("*.toml"))
#: Float variables quantised to multiples of 1/2: a spin Chern number, a quadrupole moment q_xy.
HALF_INTEGER = ("spin_chern", "quadrupole")


def tiny_job(name: str, num: int = 4):
    """The demo job with every range axis cut to ``num`` points (list axes to their first 3)."""
    path = JOBS / name
    doc = tomllib.loads(path.read_text())
    for key, axis in doc["sweep"].items():
        if isinstance(axis, dict):
            axis["num"] = num
        else:
            doc["sweep"][key] = axis[:3]
    text = tomli_w.dumps(doc)
    return build_job(tomllib.loads(text), text=text, path=str(path))


def fill(job, values, *, done_fraction=1.0, gap_closed=()):
    """Results of ``job`` whose integer (and dimensionless half-integer) variables cycle
    through ``values`` over the grid; floats are positive ramps. The first ``done_fraction`` of
    the points (flat order) are evaluated; integer variables are missing with reason
    gap_closed at the flat indices ``gap_closed``."""
    r = results_for_job(job)
    n = r.size
    done = np.arange(n) < round(done_fraction * n)
    for name, v in r.variables.items():
        if v.is_reason:
            r.data[name] = np.where(done, Reason.OK, Reason.NOT_COMPUTED).astype(np.uint8
                                                                                 ).reshape(r.shape)
            r.data[name].ravel()[list(gap_closed)] = Reason.GAP_CLOSED
        elif v.dtype == "int32":
            data = np.resize(np.asarray(values, np.int32), n)
            data[list(gap_closed)] = FILL_INT
            r.data[name] = np.where(done, data, FILL_INT).reshape(r.shape)
        elif name in HALF_INTEGER:
            r.data[name] = np.where(done, np.resize(np.asarray(values, float) / 2, n),
                                    np.nan).reshape(r.shape)
        else:
            r.data[name] = np.where(done, np.linspace(0.1, 1.0, n), np.nan).reshape(r.shape)
    r.done = done.astype(np.uint8).reshape(r.shape)
    return r


def drawn(fig):
    fig.canvas.draw()
    return fig


def cell_colours(fig, results, var):
    """{value: set of RGBA} of the drawn cells of a 2D map (value read from the results)."""
    ax = fig.axes[0]
    mesh = next(c for c in ax.collections if isinstance(c, QuadMesh))
    colours = mesh.get_facecolor()
    data = results.data[var].astype(float)
    data = data.reshape(data.shape[0], data.shape[1], -1)[:, :, 0]  # other axes at index 0
    out = {}
    nx, ny = data.shape
    for i in range(nx):
        for j in range(ny):
            v = data[i, j]
            if results.variables[var].dtype == "int32" and v == FILL_INT:
                continue
            out.setdefault(float(v), set()).add(tuple(np.round(colours[j * nx + i], 6)))
    return out


def marker_colours(fig):
    """{value: set of RGBA} of the value markers of a 1D cut (one marker line per level)."""
    out = {}
    for line in fig.axes[0].get_lines():
        if line.get_marker() != "o" or line.get_linestyle() not in ("None", "", " "):
            continue
        for v in np.unique(np.asarray(line.get_ydata(), float)):
            out.setdefault(float(v), set()).add(
                tuple(np.round(matplotlib.colors.to_rgba(line.get_markerfacecolor()), 6)))
    return out


def legend_texts(fig):
    return [t.get_text() for leg in fig.legends for t in leg.get_texts()]


def assert_not_clipped(fig):
    """Every artist (titles, tick and axis labels, colour bar, legend) lies inside the figure."""
    renderer = fig.canvas.get_renderer()
    tight = fig.get_tightbbox(renderer)  # inches
    page = fig.bbox_inches
    eps = 1.0 / fig.dpi
    assert tight.x0 >= page.x0 - eps and tight.y0 >= page.y0 - eps, (tight, page)
    assert tight.x1 <= page.x1 + eps and tight.y1 <= page.y1 + eps, (tight, page)


@pytest.fixture(autouse=True)
def close_figures():
    yield
    plt.close("all")


@pytest.mark.parametrize("name", DEMOS)
def test_default_map_of_each_demo_ties_colours_to_values(name):
    job = tiny_job(name)
    if len(job.axes) < 2:
        job = tiny_job(name, num=6)  # room for all five values of the second file
    a = fill(job, [-1, 0, 1])
    b = fill(job, [2, 0, 1, -2, 3])
    var = default_variable(a)
    assert var == job.main and var == default_variable(b)
    fa, fb = drawn(map_figure(a)), drawn(map_figure(b))
    if len(job.axes) < 2:  # a 1D sweep is a line plot: its value markers carry the colours
        ca, cb = marker_colours(fa), marker_colours(fb)
    else:
        ca, cb = cell_colours(fa, a, var), cell_colours(fb, b, var)
    scale = 0.5 if var in HALF_INTEGER else 1.0
    assert set(ca) == {scale * v for v in (-1, 0, 1)}
    assert set(cb) == {scale * v for v in (2, 0, 1, -2, 3)}
    for colours in list(ca.values()) + list(cb.values()):
        assert len(colours) == 1  # one value, one colour
    for v in set(ca) & set(cb):
        assert ca[v] == cb[v], v  # the same colour in both files
    colour = {**{v: next(iter(c)) for v, c in cb.items()},
              **{v: next(iter(c)) for v, c in ca.items()}}
    lum = {v: 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2] for v, c in colour.items()}
    for v, c in colour.items():
        if v > 0:
            assert c[0] > c[2]  # positive values red
        elif v < 0:
            assert c[2] > c[0]  # negative values blue
    # stronger with magnitude, and the trivial phase lightest of all but white
    assert lum[0] > lum[scale] > lum[2 * scale] > lum[3 * scale] and lum[-scale] > lum[-2 * scale]
    assert_not_clipped(fa)
    assert_not_clipped(fb)
    if len(job.axes) < 2:
        return  # no colour bar: the y axis is the value
    # the colour bar has one tick per value, labelled with it
    bar = fb.axes[-1]
    labels = [t.get_text() for t in bar.get_yticklabels()]
    expected = ["-1", "0", "1/2", "1", "3/2"] if scale == 0.5 else ["-2", "0", "1", "2", "3"]
    assert labels == expected


@pytest.mark.parametrize("name", ["quickstart.toml", "driven-corners.toml"])
def test_unfinished_points_have_their_own_look_and_legend_entry(name):
    job = tiny_job(name, num=5)
    r = fill(job, [-1, 0, 1], done_fraction=0.6, gap_closed=(1, 2))
    fig = drawn(map_figure(r))
    texts = legend_texts(fig)
    n_not = int(r.size - r.done.sum())
    assert f"not computed yet ({n_not})" in texts
    assert "missing: gap closed (2)" in texts  # apart from the unfinished ones
    assert (f"unfinished run: {int(r.done.sum())} of {r.size} points computed"
            in fig.axes[0].get_title())
    # the not-computed cells are covered by a hatched collection, not the grey of missing points
    hatched = [c for c in fig.axes[0].collections if c.get_hatch()]
    assert len(hatched) == 1 and len(hatched[0].get_paths()) == n_not
    assert_not_clipped(fig)
    text = terminal_map(r, width=80)
    assert f"unfinished run: {int(r.done.sum())} of {r.size} points computed" in text
    assert f"?  not computed yet ({n_not} points)" in text


def test_a_finished_map_says_nothing_of_unfinished_points():
    r = fill(tiny_job("quickstart.toml"), [0, 1])
    fig = drawn(map_figure(r))
    assert not any("not computed" in t for t in legend_texts(fig))
    assert "unfinished" not in fig.axes[0].get_title()


def test_spin_chern_map_is_discrete_and_not_clipped():
    job = tiny_job("bhz-spin.toml", num=6)
    r = fill(job, [-1, 0, 1, 2])
    fig = drawn(map_figure(r, "spin_chern"))
    labels = [t.get_text() for t in fig.axes[-1].get_yticklabels()]
    assert labels == ["-1/2", "0", "1/2", "1"]
    assert_not_clipped(fig)
    # the terminal map gives every half-integer its own glyph: no empty range bins
    text = terminal_map(r, "spin_chern", width=80)
    legend = text.split("legend:\n")[1].splitlines()
    assert [line.split("  ")[2].split(" (")[0] for line in legend] == [
        "spin_chern = 0", "spin_chern = 1/2", "spin_chern = -1/2", "spin_chern = 1"]
    assert all("(0 points)" not in line for line in legend)


def test_one_dimensional_cut_legend_and_marks():
    job = tiny_job("quickstart.toml", num=9)
    r = fill(job, [1, 1, 0, -1], done_fraction=0.8, gap_closed=(0,))
    r.tables["transitions"] = {"axis": np.array(["m", "m", "t"], dtype=object),
                               "m": np.array([-2.0, 0.0, 1.5]), "t": np.full(3, 0.25),
                               "gap": np.array(["0", "0", "0"], dtype=object),
                               "k1": np.zeros(3), "k2": np.zeros(3)}
    fig = drawn(map_figure(r, "chern", at={"t": 0.25}))
    texts = legend_texts(fig)
    assert len(texts) == len(set(texts))  # no entry twice (three predicted closings drawn)
    assert "predicted closing at 0" in texts
    assert any(t.startswith("gap (") and "right axis" in t for t in texts)  # gap curve named
    assert "missing: gap closed (1)" in texts
    ax = fig.axes[0]
    lowest = min(ax.get_yticks())
    bottom, top = ax.get_ylim()
    # missing marks sit at 4% of the axes height, clear of the lowest value level
    assert (lowest - bottom) / (top - bottom) > 0.1
    assert_not_clipped(fig)


def test_default_variable_without_a_named_main_is_the_first_varying_invariant():
    job = tiny_job("driven-corners.toml")
    r = fill(job, [0, 1, -1])
    del r.attrs["main_variable"]
    r.data["line_sectors"][:] = 2  # constant: a count of sectors, not a phase diagram
    assert default_variable(r) == "line_w0_s1"


def test_default_variable_of_a_corner_count_is_the_count_per_corner():
    job = tiny_job("corner-modes.toml")
    r = fill(job, [1])
    del r.attrs["main_variable"]
    assert default_variable(r) == "line_sectors"  # every integer constant: the first one
    r.data["corner_modes_0"].ravel()[:] = np.resize([0, 4], r.size)
    r.data["corner_modes_0_00"].ravel()[:] = np.resize([0, 1], r.size)
    # line windings predict the modes at one corner, not the total of the four
    assert default_variable(r) == "corner_modes_0_00"


def test_every_integer_and_half_integer_has_its_own_colour():
    from matplotlib.colors import to_rgb

    from sweepcli.report.map_style import MISSING_COLOUR, value_colour

    values = [v / 2 for v in range(-48, 49)]
    colours = {tuple(np.round(value_colour(v)[:3], 3)) for v in values}
    assert len(colours) == len(values)
    assert tuple(np.round(to_rgb(MISSING_COLOUR), 3)) not in colours


def test_four_and_eight_corner_modes_differ_and_absent_values_are_named():
    job = tiny_job("corner-modes.toml")
    r = fill(job, [0, 4, 8, 4])
    fig = drawn(map_figure(r, "corner_modes_0"))
    colours = cell_colours(fig, r, "corner_modes_0")
    assert set(colours) == {0.0, 4.0, 8.0}
    assert len({next(iter(c)) for c in colours.values()}) == 3
    assert ("corner_modes_0 = 1..3, 5..7 occurs nowhere (not in the colour bar)"
            in legend_texts(fig))
    assert_not_clipped(fig)
    full = drawn(map_figure(fill(job, [0, 1, 2]), "corner_modes_0"))
    assert not any("occurs nowhere" in t for t in legend_texts(full))


def test_main_names_a_measured_quantity(write_job):
    base = ('[job]\nname = "j"\n[model]\nname = "qwz"\n[sweep]\nm = [0, 1]\n'
            '[measure.chern]\n[output]\n')
    with pytest.raises(Exception, match=r"\[output\] main must be one of the quantities the job "
                                         r"measures \(chern, chern_kmesh, chern_max_flux\); got "
                                         r"'chen'\. Did you mean 'chern'\?"):
        load_job(write_job(base + 'main = "chen"\n'))
    job = load_job(write_job(base + 'main = "chern_kmesh"\n'))
    assert results_for_job(job).attrs["main_variable"] == "chern_kmesh"
    # [output] is no part of the job's identity
    assert job.sha256 == load_job(write_job(base + 'path = "x.h5"\n', "b.toml")).sha256


@pytest.mark.parametrize("name", DEMOS)
def test_every_axis_of_every_demo_is_described(name):
    r = results_for_job(tiny_job(name))
    for a in r.axes:
        assert a.long_name != a.name and a.long_name, (name, a.name)
        assert a.units, (name, a.name)


def test_sweep_doc_and_units_label_the_axis_without_changing_the_hash(write_job):
    base = ('[job]\nname = "j"\n[model]\nname = "qwz"\n[sweep]\n'
            'm = {{ start = 0, stop = 1, num = 2{} }}\n[measure.gap]\n')
    plain = load_job(write_job(base.format("")))
    labelled = load_job(write_job(base.format(', doc = "mass", units = "eV"'), "b.toml"))
    assert plain.sha256 == labelled.sha256
    axis = results_for_job(labelled).axes[0]
    assert (axis.long_name, axis.units) == ("mass", "eV")
    with pytest.raises(Exception, match=r"\[sweep.m\] units must be a string; got 3\."):
        load_job(write_job(base.format(", units = 3"), "c.toml"))


def test_a_list_axis_takes_doc_and_units_in_a_values_table(write_job):
    base = '[job]\nname = "j"\n[model]\nname = "qwz"\n[sweep]\nm = {}\n[measure.gap]\n'
    plain = load_job(write_job(base.format("[0.5, 1, 2.5]")))
    labelled = load_job(write_job(
        base.format('{ values = [0.5, 1, 2.5], doc = "mass", units = "eV" }'), "b.toml"))
    assert labelled.axes[0].values == plain.axes[0].values == (0.5, 1.0, 2.5)
    assert labelled.axes[0].spacing == "list"
    assert plain.sha256 == labelled.sha256
    axis = results_for_job(labelled).axes[0]
    assert (axis.long_name, axis.units) == ("mass", "eV")
    for text, msg in [
            ('{ values = [], doc = "mass" }',
             r"\[sweep.m\] values must be a list of values; got \[\]\. The list is empty\."),
            ('{ values = 2.0 }', r"\[sweep.m\] values must be a list of values; got 2\.0\."),
            ('{ values = [1, 2], num = 3 }',
             r"\[sweep.m\] num must be absent when values is given \(a list or a range, not "
             r"both\); got 3\."),
            ('{ values = [1, true] }', r"\[sweep.m\] values must be a real number; got true\."),
            ('{ value = [1, 2] }', r"\[sweep.m\] has an unknown key 'value' .*Did you mean "
                                   r"'values'\?")]:
        with pytest.raises(Exception, match=msg):
            load_job(write_job(base.format(text), "c.toml"))


def test_every_model_parameter_has_a_description_and_units():
    from sweepcli.physics.models import MODELS

    for e in MODELS:
        for p in e.params:
            assert p.doc and p.units, (e.name, p.name)


def test_at_off_the_axis_is_refused_and_a_near_value_named():
    r = fill(tiny_job("quickstart.toml", num=5), [0, 1])  # t = 0.25 .. 1.5 in steps of 0.3125
    with pytest.raises(ResultsError, match=r"--at t=100 is off the swept axis of t \(5 values "
                                           r"from 0.25 to 1.5\)"):
        map_figure(r, "chern", at={"t": 100.0})
    with pytest.raises(ResultsError, match="off the swept axis"):
        terminal_map(r, "chern", at={"t": -1.0})
    assert at_notes(r, {"t": 0.6}) == ["--at t=0.6 is not a grid value; drawn at the nearest, "
                                       "t=0.5625."]
    assert at_notes(r, {"t": 0.5625}) == []
    fig = map_figure(r, "chern", at={"t": 0.6})
    assert "at t=0.5625" in fig.axes[0].get_title()


def test_the_clipping_check_sees_a_clipped_label():
    fig = drawn(map_figure(fill(tiny_job("quickstart.toml"), [0, 1])))
    fig.axes[0].set_ylabel("a label pushed off the page", labelpad=400)
    fig.set_layout_engine("none")
    fig.canvas.draw()
    with pytest.raises(AssertionError):
        assert_not_clipped(fig)
