"""`sweepcli sample`: the open sample behind one grid point's count, rebuilt from the file's
provenance, solved again and drawn; its counts are the stored ones and its states sit where the
published phase diagrams put them."""

import h5py
import numpy as np
import pytest
import scipy.linalg as sla
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.physics import samples
from sweepcli.physics.models import MODELS
from sweepcli.report.sample_plot import draw_sample
from sweepcli.schema import Reason
from sweepcli.store import Results

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"

CORNER_JOB = """
[job]
name = "corner"
title = "Second-order BHZ flake"
[model]
name = "bhz_corner"
[params]
delta2 = 0.6
[sweep]
m = [-1.0, 2.6]
[measure.corner_modes]
size = 12
"""

CHAIN_JOB = """
[job]
name = "dchain"
title = "Two-step driven chain"
[model]
name = "ssh"
[sweep]
T = [2.0, 7.55]
[drive]
kind = "steps"
period = "T"
[[drive.step]]
span = 0.5
set = { v = 1.0, w = 0.37 }
[[drive.step]]
span = 0.5
set = { v = -0.8, w = 1.4 }
[measure.end_modes]
"""


def invoke(*args):
    return CliRunner().invoke(app, [str(a) for a in args], env={"COLUMNS": "300"})


def _run(tmp, name, text):
    job, out = tmp / f"{name}.toml", tmp / f"{name}.h5"
    job.write_text(text + f'[output]\npath = "{out}"\n')
    result = invoke("run", job, "--no-progress")
    assert result.exit_code == 0, result.output
    return out


@pytest.fixture(scope="module")
def corner_file(tmp_path_factory):
    return _run(tmp_path_factory.mktemp("corner"), "corner", CORNER_JOB)


@pytest.fixture(scope="module")
def chain_file(tmp_path_factory):
    return _run(tmp_path_factory.mktemp("chain"), "chain", CHAIN_JOB)


def _stored(results, prefix, keys, index):
    return {k: int(results.data[f"{prefix}{suffix}"][index]) for k, suffix in keys.items()}


def test_corner_flake_at_a_topological_point(corner_file, tmp_path):
    # Schindler et al., Science Advances 4, eaat0346 (2018): one zero mode at each corner of a
    # flake for |m| < 2|t| (delta2 != 0), none for |m| > 2|t|.
    png = tmp_path / "flake.png"
    result = invoke("sample", corner_file, "--at", "m=-0.9", "-o", png)
    assert result.exit_code == 0, result.output
    r = Results.read(corner_file)
    side = int(r.data["corner_modes_0_size"][0])  # the flake the count settled on
    assert side >= 12
    assert f"flake of {side} x {side} cells at m=-1: 4 corner mode(s)" in result.stdout
    assert png.read_bytes()[:8] == PNG_MAGIC and png.stat().st_size > 10_000

    written, d = draw_sample(r, tmp_path / "flake.svg", at={"m": -1.0})
    assert written.stat().st_size > 0 and d.kind == "flake" and d.shape == (side, side)
    keys = {"total": "", "00": "_00", "10": "_10", "01": "_01", "11": "_11"}
    assert d.counts["0"] == _stored(r, "corner_modes_0", keys, (0,))
    assert d.counts["0"] == {"total": 4, "00": 1, "10": 1, "01": 1, "11": 1}
    assert d.stored["0"] == d.counts["0"]
    assert d.stored_reasons == {"0": "ok"} == d.reasons  # through corner_modes_0's link
    assert d.full_spectrum and d.levels.size == side * side * 4
    assert len(d.mode_indices) == 4

    # The drawn levels and density against plain numpy: eigh of the dense open flake (built
    # from the same model) and the diagonal of the projector on the in-window eigenvectors.
    tb = MODELS["bhz_corner"].func(m=-1.0, delta2=0.6)
    e, v = np.linalg.eigh(samples.open_hamiltonian(tb, (side, side)).toarray())
    assert np.allclose(d.levels, e, atol=1e-9)
    inside = np.isin(np.arange(e.size), d.window_indices)
    ref = (np.abs(v[:, inside]) ** 2).sum(axis=1).reshape(side, side, 4).sum(axis=2)
    assert np.allclose(d.density, ref, atol=1e-8)
    assert d.density.sum() == pytest.approx(len(d.window_indices))

    # Corner modes: at least 95 % of their weight lies in the r x r corner regions the count
    # settled on (r <= L/4), so a mode spread along an edge (at most 2r/L = 1/2 in the
    # corners) would fail this by far.
    rr = d.region
    assert 1 <= rr <= side // 4
    corners = sum(d.density[sx, sy].sum() for sx in (slice(0, rr), slice(-rr, None))
                  for sy in (slice(0, rr), slice(-rr, None)))
    assert corners / d.density.sum() >= 0.95
    assert np.allclose(d.corner_weight, d.corner_weight.mean(), rtol=0.05)


def test_corner_flake_at_a_trivial_point_has_no_in_gap_states(corner_file, tmp_path):
    # Same source: |m| > 2|t| is trivial; the window in the gap holds no level at all.
    r = Results.read(corner_file)
    _, d = draw_sample(r, tmp_path / "t.png", at={"m": 2.6})
    assert d.counts["0"]["total"] == 0 == int(r.data["corner_modes_0"][1])
    assert d.window_indices.size == 0 and d.density.sum() == 0


def test_driven_chain_end_modes_at_zero_and_pi(chain_file, tmp_path):
    # Asboth and Obuse, PRB 88, 121406 (2013): |nu_0| modes at 0 and |nu_pi| at pi per end;
    # at T = 7.55 this drive has two pi modes at each end (tests/cli/test_bulk_boundary.py).
    png = tmp_path / "chain.png"
    result = invoke("sample", chain_file, "--at", "T=7.55", "--gap", "pi", "-o", png)
    assert result.exit_code == 0, result.output
    assert png.read_bytes()[:8] == PNG_MAGIC

    r = Results.read(chain_file)
    _, d = draw_sample(r, tmp_path / "chain.pdf", at={"T": 7.55}, gap="pi")
    assert d.kind == "chain" and d.shape == (40,) and d.index == (1,)
    keys = {"total": "", "left": "_left", "right": "_right"}
    for g in ("0", "pi"):
        assert d.counts[g] == _stored(r, f"end_modes_{g}", keys, (1,))
        assert d.stored_reasons[g] == d.reasons[g]
        assert r.data[f"end_modes_{g}_reason"][1] == Reason[d.reasons[g].upper()]
    assert max(d.counts["pi"]["left"], d.counts["0"]["left"]) == 2

    # The whole quasienergy spectrum against scipy.linalg.expm of the two dense steps.
    T = 7.55
    ssh = MODELS["ssh"].func
    h1 = samples.open_hamiltonian(ssh(v=1.0, w=0.37), (40,)).toarray()
    h2 = samples.open_hamiltonian(ssh(v=-0.8, w=1.4), (40,)).toarray()
    u = sla.expm(-0.5j * T * h2) @ sla.expm(-0.5j * T * h1)
    eps = np.sort(-np.angle(np.linalg.eigvals(u)) / T)
    # Levels at +-pi/T are the same quasienergy: compare on the circle, both ways.
    period = 2 * np.pi / T
    dist = np.abs(d.levels[:, None] - eps[None, :]) % period
    dist = np.minimum(dist, period - dist)
    assert d.levels.size == eps.size
    assert dist.min(axis=0).max() < 1e-8 and dist.min(axis=1).max() < 1e-8
    # Every in-window pi state is counted as an end mode, so by the counting rule
    # (boundary/counts.py: at least 0.95 of each cluster's weight within the end regions the
    # count settled on) and the density drawn being that of the same states, at least 0.95 of
    # it lies in those regions.
    assert len(d.mode_indices) == len(d.window_indices) == 4
    assert d.density.sum() == pytest.approx(4)
    assert d.corner_weight.sum() >= 0.95 * d.density.sum()


def test_a_ribbon_of_the_flake_job(corner_file, tmp_path):
    r = Results.read(corner_file)
    _, d = draw_sample(r, tmp_path / "ribbon.png", at={"m": -1.0}, kind="ribbon", size=12)
    # Second-order phase: the edges are gapped (Schindler et al. 2018), no chiral mode.
    assert d.kind == "ribbon" and d.counts["0"] == {"chiral": 0}
    assert d.levels.shape[1] == 12 * 4 and d.window_indices.size == 0


@pytest.mark.parametrize("case", ["unknown axis", "no job", "invalid job", "static pi"])
def test_bad_requests_exit_2_with_one_line(corner_file, tmp_path, case):
    target = corner_file
    args = []
    if case == "unknown axis":
        args = ["--at", "mass=1"]
        expected = "--at names 'mass', which is not a swept parameter (swept: m)."
    elif case == "static pi":
        args = ["--gap", "pi"]
        expected = "--gap pi needs a driven job"
    else:
        target = tmp_path / "copy.h5"
        target.write_bytes(corner_file.read_bytes())
        with h5py.File(target, "a") as f:
            if case == "no job":
                del f.attrs["job_text"]
                expected = f"{target}: holds no job file"
            else:
                f.attrs["job_text"] = f.attrs["job_text"] + "\n[nonsense]\nx = 1\n"
                expected = f"{target}: the job stored in it is not valid in sweepcli"
    result = invoke("sample", target, *args, "-o", tmp_path / "x.png")
    assert result.exit_code == 2
    assert result.stderr.startswith("error: " + expected), result.stderr
    assert len(result.stderr.strip().splitlines()) == 1
    assert not (tmp_path / "x.png").exists()


def test_sample_names_the_value_of_every_axis_and_which_were_not_given(tmp_path):
    out = _run(tmp_path, "ssh2", '[job]\nname = "ssh2"\n[model]\nname = "ssh"\n[sweep]\n'
                                 'w = [1.0, 2.0]\nv = [0.5, 1.5, 3.0]\n[measure.winding]\n')
    result = invoke("sample", out, "--at", "v=0.6", "-o", tmp_path / "a.png")
    assert result.exit_code == 0, result.output
    # w was not given: the line says it was taken at its first value. SSH (Asboth et al., A
    # Short Course on Topological Insulators, ch. 1): one mode per end for |v| < |w|.
    line = result.stdout.strip().splitlines()[-1]
    assert " at w=1, v=0.5 (w: first value, not given by --at): " in line, line
    assert "2 end mode(s) (left 1, right 1)" in line
    assert "--at v=0.6 is not a grid value; sampled at the nearest, v=0.5." in result.stderr
    both = invoke("sample", out, "--at", "v=3", "--at", "w=2", "-o", tmp_path / "b.png")
    assert both.exit_code == 0, both.output
    assert " at w=2, v=3: 0 end mode(s)" in both.stdout and "first value" not in both.stdout


POLYGON_JOB = """
[job]
name = "kagome"
title = "Breathing kagome triangle"
[model]
name = "breathing_kagome"
[sweep]
ta = [0.2, 3.0]
[measure.polygon_modes]
shape = "triangle"
size = 12
max_size = 24
energy = 0.0
"""


@pytest.fixture(scope="module")
def polygon_file(tmp_path_factory):
    return _run(tmp_path_factory.mktemp("polygon"), "kagome", POLYGON_JOB)


def test_sample_draws_a_polygon_with_its_corner_modes(polygon_file, tmp_path):
    # Ezawa, PRL 120, 026801 (2018) (from memory): a triangular flake of whole upward
    # triangles of the breathing kagome lattice has one zero-energy state at each corner for
    # 0 < ta/tb < 1/2, none for ta/tb > 2.
    out = tmp_path / "tri.png"
    result = invoke("sample", polygon_file, "--at", "ta=0.2", "-o", out)
    assert result.exit_code == 0, result.output
    assert "polygon of size" in result.output and "(v0 1, v1 1, v2 1)" in result.output
    assert out.read_bytes()[:8] == PNG_MAGIC
    _, d = draw_sample(Results.read(polygon_file), tmp_path / "again.png", at={"ta": 0.2})
    assert d.kind == "polygon" and d.counts["0"]["total"] == 3
    assert d.stored["0"] == {"total": 3, "min": 1, "max": 1}
    # The triangle of size L on the triangular lattice holds the L (L + 1) / 2 cells
    # c_1 + c_2 < L, three sites each (counted here, not by the code).
    size = d.shape[0]
    cells = sum(1 for c1 in range(size) for c2 in range(size) if c1 + c2 < size)
    assert d.positions.shape == (3 * cells, 2) and d.density.shape == (3 * cells,)
    assert np.allclose(d.vertices, size * np.array([[0, 0], [1, 0], [0.5, np.sqrt(3) / 2]]))
    # The three in-window states' weight (it sums to 3) sits at the vertices: nearly all of it
    # within 2.5 lattice constants of one, and each corner region holds about one state.
    assert d.density.sum() == pytest.approx(3.0)
    near = np.min(np.linalg.norm(d.positions[:, None] - d.vertices[None], axis=2), axis=1) < 2.5
    assert d.density[near].sum() > 2.95
    assert np.all(d.corner_weight > 0.95)
    # The trivial side: no in-window state, nothing at the vertices.
    _, t = draw_sample(Results.read(polygon_file), tmp_path / "trivial.png", at={"ta": 3.0})
    assert t.counts["0"]["total"] == 0 and t.density.sum() == pytest.approx(0.0)
