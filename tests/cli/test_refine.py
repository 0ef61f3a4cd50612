"""Adaptive refinement places the Haldane phase boundary M = +-3 sqrt(3) t2 sin(phi)
(Haldane, PRL 61, 2015 (1988)) within the finest cell size, with at most a third of the points of
the uniform grid of the same resolution."""

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.run.refine import MISSING, _as_int
from sweepcli.store import Results

JOB = """
[job]
name = "refined-haldane"
[model]
name = "haldane"
[params]
t2 = 0.3
M = "mass_ratio * 3*sqrt(3)*t2"
[sweep]
phi = { start = "-pi", stop = "pi", num = 7 }
mass_ratio = { start = -1.5, stop = 1.5, num = 7 }
[refine]
by = "chern"
depth = 3
[measure.gap]
kmesh = 16
[measure.chern]
kmesh = 12
max_kmesh = 48
[output]
path = "OUT"
"""


@pytest.fixture(scope="module")
def refined(tmp_path_factory):
    d = tmp_path_factory.mktemp("refine")
    job = d / "job.toml"
    out = d / "refined.h5"
    job.write_text(JOB.replace("OUT", str(out)))
    result = CliRunner().invoke(app, ["run", str(job), "--workers", "2", "--no-progress"])
    assert result.exit_code == 0, result.output
    return Results.read(out), d


def test_refined_boundary_cells_lie_on_the_analytic_curve(refined):
    r, _ = refined
    assert r.shape == (49, 49)
    assert r.n_done <= r.size / 3
    phi, ratio = r.axis("phi").values, r.axis("mass_ratio").values
    hp, hr = phi[1] - phi[0], ratio[1] - ratio[0]
    c = _as_int(r.data["chern"])
    done = r.done.astype(bool)
    # Finest cells whose four corners were all evaluated and disagree (missing counts as a value).
    corners = [c[:-1, :-1], c[1:, :-1], c[:-1, 1:], c[1:, 1:]]
    dones = [done[:-1, :-1], done[1:, :-1], done[:-1, 1:], done[1:, 1:]]
    all_done = np.logical_and.reduce(dones)
    disagree = np.max(corners, axis=0) != np.min(corners, axis=0)
    cells = np.argwhere(all_done & disagree)
    assert len(cells) > 50
    fine_phi = np.linspace(-np.pi - hp, np.pi + hp, 20001)
    for i, j in cells:
        near = (fine_phi >= phi[i] - hp) & (fine_phi <= phi[i + 1] + hp)
        curve = np.concatenate([np.sin(fine_phi[near]), -np.sin(fine_phi[near])])
        assert np.any((curve >= ratio[j] - hr) & (curve <= ratio[j + 1] + hr)), (phi[i], ratio[j])
    # Inside the lobes the Chern number is +-1, far outside 0 (checked on evaluated points).
    P, R = np.meshgrid(phi, ratio, indexing="ij")
    valid = done & (c != MISSING)
    inside = valid & (np.abs(R) < np.abs(np.sin(P)) - 2 * hr)
    outside = valid & (np.abs(R) > np.abs(np.sin(P)) + 2 * hr)
    assert set(np.abs(c[inside])) == {1} and set(c[outside]) == {0}


def test_boundaries_export_as_polylines(refined):
    r, d = refined
    out = d / "b.csv"
    result = CliRunner().invoke(app, ["boundaries", str(d / "refined.h5"), "-o", str(out)])
    assert result.exit_code == 0, result.output
    rows = np.loadtxt(out, delimiter=",", skiprows=1)
    assert out.read_text().splitlines()[0] == "chern,line,phi,mass_ratio"
    lobe = rows[rows[:, 0] != 0]
    # Points of the +-1 region outlines lie within a finest cell of |mass_ratio| = |sin(phi)|.
    h = r.axis("mass_ratio").values[1] - r.axis("mass_ratio").values[0]
    assert np.max(np.abs(np.abs(lobe[:, 3]) - np.abs(np.sin(lobe[:, 2])))) < 2 * h
