"""Driven bulk-boundary flags (issue 12): Floquet Chern numbers and Rudner windings against the
signed chiral edge counts of a ribbon at quasienergy 0 and pi, with the chirality convention of
results-schema.md, on the anomalous five-step drive and on left-handed cells.

The edge counts expected here come from a ribbon Floquet operator built in this file from the
model's hoppings with scipy.linalg.expm, its levels followed in k_par by quasienergy (not by
eigenvector overlap, as the project does)."""

import math

import numpy as np
import pytest
from scipy.linalg import expm
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.physics.measurements.consistency import edge_sign, evaluate, rules_for
from sweepcli.store import Results

SX = np.array([[0, 1], [1, 0]], complex)
SY = np.array([[0, -1j], [1j, 0]])
SZ = np.diag([1.0 + 0j, -1.0])


def ribbon_bloch(onsite, hops, width, open_axis, k):
    """Ribbon H(k_par): cells m = 0..width-1 across ``open_axis``, hops {d: T_d} with
    T_d = <cell 0|H|cell d> and H(k) = onsite + sum_d (T_d e^{i k.d} + h.c.)."""
    par = 1 - open_axis
    h = np.kron(np.eye(width), onsite).astype(complex)
    for d, t in hops.items():
        shift = np.eye(width, k=d[open_axis])  # cell m -> m + d_open, dropped beyond the edges
        x = np.kron(shift, t) * np.exp(1j * k * d[par])
        h = h + x + x.conj().T
    return h


def low_edge_crossings(steps, period, width, open_axis, centre, window, nk=96):
    """Signed crossings of quasienergy ``centre`` by levels on the low edge (weight in cells
    below width/2 > 1/2) as k_par runs once around: +1 for a level going up.

    ``steps``: [(duration, onsite, hops)] in time order; U = ... expm(-i H_2 t_2) expm(-i H_1 t_1).
    Levels within ``window`` of the centre at k_j are matched to the nearest low-edge level at
    k_{j+1} (the grid is fine enough that no low-edge level moves by more than that window)."""
    low = np.arange(width * 2) < (width // 2) * 2
    ks = 2 * np.pi * (np.arange(nk) + 0.37) / nk
    edge_levels = []
    for k in ks:
        u = np.eye(2 * width, dtype=complex)
        for dt, onsite, hops in steps:
            u = expm(-1j * dt * ribbon_bloch(onsite, hops, width, open_axis, k)) @ u
        lam, vec = np.linalg.eig(u)
        weight = np.sum(np.abs(vec[low]) ** 2, axis=0) / np.sum(np.abs(vec) ** 2, axis=0)
        rel = np.angle(lam * np.exp(1j * centre * period)) * (-1 / period)
        edge_levels.append(rel[weight > 0.5])
    count = 0
    for j in range(nk):
        now, nxt = edge_levels[j], edge_levels[(j + 1) % nk]
        for x in now[np.abs(now) < window]:
            y = nxt[np.argmin(np.abs(nxt - x))]
            assert abs(y - x) < window, "k grid too coarse to follow an edge level"
            count += int(x < 0 <= y) - int(y < 0 <= x)
    return count


def run(tmp_path, name, text):
    job = tmp_path / f"{name}.toml"
    out = tmp_path / f"{name}.h5"
    job.write_text(text + f'\n[output]\npath = "{out}"\n')
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 0, result.output
    r = Results.read(out)
    return {k: np.asarray(v).ravel()[0] for k, v in r.data.items()}


# ---------------------------------------------------------------------------------------------
# Anomalous five-step drive: Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013).

J_STEP = 1.5708  # J T/5 ~ pi/2: each step moves a particle across its bond
DELTA = 0.4


def five_step_job(open_axis):
    steps = "".join(
        "[[drive.step]]\nspan = 0.2\nset = { "
        + ", ".join(f"j{m} = {J_STEP if m == i else 0}" for m in range(1, 5))
        + f", delta = {DELTA if i == 5 else 0} }}\n" for i in range(1, 6))
    return f"""
[model]
name = "bipartite_square"
[sweep]
T = [5.0]
[drive]
kind = "steps"
period = "T"
{steps}
[measure.floquet_chern]
[measure.rudner_winding]
[measure.edge_modes]
width = 8
nk = 32
open_axis = {open_axis}
"""


def five_step_ribbon_steps():
    """The five steps from the paper's geometry: A at the origin, B at +x; cell vectors
    a1 = (1, 1), a2 = (1, -1) (left-handed: a1 x a2 = -2); bond mu joins A to the B at
    A + b_mu, b = +x, +y, -x, -y, in that order, for T/5 each, then +-delta on A/B."""
    a = np.array([[1.0, 1.0], [1.0, -1.0]])
    b_site = np.array([1.0, 0.0])
    steps = []
    for b in ([1, 0], [0, 1], [-1, 0], [0, -1]):
        # B in cell R sits at R1 a1 + R2 a2 + b_site; solve for the R that puts it at A + b.
        r = np.linalg.solve(a.T, np.array(b, float) - b_site)
        d = tuple(int(x) for x in np.round(r))
        assert np.allclose(r, d)
        t = np.zeros((2, 2), complex)
        t[0, 1] = J_STEP  # <A_0|H|B_d>
        onsite, hops = (t + t.conj().T, {}) if d == (0, 0) else (np.zeros((2, 2)), {d: t})
        steps.append((1.0, onsite, hops))
    steps.append((1.0, DELTA * SZ, {}))
    return steps


@pytest.mark.parametrize("open_axis", [0, 1])
def test_anomalous_drive_edge_counts_follow_the_windings_with_the_documented_sign(
        tmp_path, open_axis):
    v = run(tmp_path, f"anomalous{open_axis}", five_step_job(open_axis))
    # Published: W = 1 in both gaps, every Floquet band Chern number 0.
    assert (v["w_0"], v["w_pi"]) == (1, 1)
    assert (v["floquet_chern_upper"], v["floquet_chern_lower"]) == (0, 0)
    s = edge_sign(open_axis)
    for g, centre in (("0", 0.0), ("pi", math.pi / 5.0)):
        expected = low_edge_crossings(five_step_ribbon_steps(), 5.0, 8, open_axis, centre,
                                      window=0.2)
        assert expected == s * v[f"w_{g}"]  # the convention of results-schema.md
        assert v[f"chiral_edge_modes_{g}"] == expected
    assert v["agree_w_0_edge"] == v["agree_w_pi_edge"] == v["agree_floquet_chern_edge"] == 1


# ---------------------------------------------------------------------------------------------
# A two-step drive of the Qi-Wu-Zhang model, H = sin kx sx + sin ky sy + (m + cos kx + cos ky) sz,
# m = 0.5 then 3.0 for T/2 each, T = 1: W_0 and W_pi differ, so the Floquet bands carry a Chern
# number of magnitude 2, C = W(above) - W(below) (Rudner et al. 2013). Written as a custom model
# on a cell whose vectors are given in either order; m is set only by the steps.

M1, M2, PERIOD = 0.5, 3.0, 1.0
# T_d of the hops along +x and +y (Cartesian), in the convention of ribbon_bloch.
HOP_X = 0.5 * (SZ - 1j * SX)
HOP_Y = 0.5 * (SZ - 1j * SY)


def qwz_job(lattice, d_x, d_y, open_axis):
    def hop(d, pauli):
        return (f'[[model.hopping]]\nd = {list(d)}\nmatrix = "z"\ncoeff = 0.5\n'
                f'[[model.hopping]]\nd = {list(d)}\nmatrix = "{pauli}"\ncoeff = "-0.5j"\n')
    return f"""
[model]
name = "custom"
lattice = {lattice}
orbitals = 2
[[model.onsite]]
matrix = "z"
coeff = "m"
{hop(d_x, "x")}{hop(d_y, "y")}
[sweep]
T = [{PERIOD}]
[drive]
kind = "steps"
period = "T"
[[drive.step]]
span = 0.5
set = {{ m = {M1} }}
[[drive.step]]
span = 0.5
set = {{ m = {M2} }}
[measure.floquet_chern]
[measure.rudner_winding]
[measure.edge_modes]
width = 16
nk = 64
open_axis = {open_axis}
"""


def qwz_ribbon_steps(d_x, d_y):
    hops = {tuple(d_x): HOP_X, tuple(d_y): HOP_Y}
    return [(PERIOD / 2, M1 * SZ, hops), (PERIOD / 2, M2 * SZ, hops)]


def test_left_handed_cell_flips_the_invariants_and_keeps_the_edge_relation(tmp_path):
    # a1 = +y, a2 = +x: a1 x a2 = -1. The same physical drive on the right-handed cell
    # (a1 = +x, a2 = +y) for comparison.
    left = run(tmp_path, "left", qwz_job("[[0.0, 1.0], [1.0, 0.0]]", (0, 1), (1, 0), 1))
    right = run(tmp_path, "right", qwz_job("[[1.0, 0.0], [0.0, 1.0]]", (1, 0), (0, 1), 0))
    # Reduced-momentum invariants are minus the Cartesian ones on a left-handed cell.
    for q in ("w_0", "w_pi", "floquet_chern_upper", "floquet_chern_lower"):
        assert left[q] == -right[q], q
    assert abs(right["w_0"] - right["w_pi"]) == 2
    assert right["floquet_chern_upper"] == right["w_pi"] - right["w_0"]  # C = W(above) - W(below)
    # Both ribbons are cut along x (a2 of the left cell, a1 of the right one): the same physical
    # ribbon, so the same independent edge count, with the sign of each cell's row.
    for g, centre in (("0", 0.0), ("pi", math.pi / PERIOD)):
        expected = low_edge_crossings(qwz_ribbon_steps((0, 1), (1, 0)), PERIOD, 16, 1, centre,
                                      window=0.15)
        assert expected != 0
        assert expected == low_edge_crossings(qwz_ribbon_steps((1, 0), (0, 1)), PERIOD, 16, 0,
                                              centre, window=0.15)
        assert left[f"chiral_edge_modes_{g}"] == right[f"chiral_edge_modes_{g}"] == expected
        assert expected == edge_sign(1) * left[f"w_{g}"] == edge_sign(0) * right[f"w_{g}"]
    for v in (left, right):
        assert v["agree_w_0_edge"] == v["agree_w_pi_edge"] == v["agree_floquet_chern_edge"] == 1


def test_edge_rules_flag_a_count_of_the_wrong_sign():
    names = {"w_0", "w_pi", "floquet_chern_upper", "floquet_chern_lower", "chern",
             "chiral_edge_modes_0", "chiral_edge_modes_pi"}
    values = {"w_0": -1, "w_pi": 1, "floquet_chern_upper": 2, "floquet_chern_lower": -2,
              "chern": -1, "chiral_edge_modes_0": -1, "chiral_edge_modes_pi": 1}
    cut_a1 = evaluate(rules_for(names, {"edge_modes": {"open_axis": 0}}), values)
    cut_a2 = evaluate(rules_for(names, {"edge_modes": {"open_axis": 1}}), values)
    flags = ("agree_chern_edge", "agree_w_0_edge", "agree_w_pi_edge", "agree_floquet_chern_edge")
    assert [cut_a1[f] for f in flags] == [1, 1, 1, 1]
    assert [cut_a2[f] for f in flags] == [0, 0, 0, 0]
    assert evaluate(rules_for(names), values) == cut_a2  # open_axis defaults to 1
