"""A custom model's `[model.rotation]`: the C_n rotation that `corner_charge` reads, checked at
load (it must map the lattice onto itself and commute with the model), and the bulk-boundary
rule that compares the C3 corner charge with a triangle's corner counts."""

import math

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.errors import JobError
from sweepcli.jobfile import load_job
from sweepcli.physics.measurements.consistency import evaluate, rules_for
from sweepcli.physics.models import MODELS
from sweepcli.schema import Reason
from sweepcli.store import Results
from sweepcli.store.results import FILL_INT

from ..conftest import ROOT

# The breathing kagome lattice written by hand (Ezawa, PRL 120, 026801 (2018)): sites A, B, C at
# the cell origin and the midpoints of a_1, a_2; -ta inside the upward triangle, -tb inside the
# downward one (B(R)-A(R+a1), C(R)-A(R+a2), B(R)-C(R+a1-a2)).
KAGOME = """
[model]
name = "custom"
lattice = [[1.0, 0.0], [0.5, 0.8660254037844386]]
positions = [[0, 0], [0.5, 0], [0, 0.5]]
[[model.onsite]]
matrix = [[0, 1, 1], [1, 0, 1], [1, 1, 0]]
coeff = "-ta"
[[model.hopping]]
d = [1, 0]
matrix = [[0, 0, 0], [1, 0, 0], [0, 0, 0]]
coeff = "-tb"
[[model.hopping]]
d = [0, 1]
matrix = [[0, 0, 0], [0, 0, 0], [1, 0, 0]]
coeff = "-tb"
[[model.hopping]]
d = [1, -1]
matrix = [[0, 0, 0], [0, 0, 1], [0, 0, 0]]
coeff = "-tb"
EXTRA
[model.rotation]
ROTATION
[params]
tb = 1.0

[sweep]
ta = [0.3, -0.5, 1.0, 3.0]
[measure]
filling = 1
[measure.corner_charge]
"""
C3 = 'order = 3\ncentre = ["1/6", "1/6"]'  # about the centre of the upward triangle


def kagome(rotation=C3, extra=""):
    return KAGOME.replace("ROTATION", rotation).replace("EXTRA", extra)


def run(tmp_path, text, name):
    job = tmp_path / f"{name}.toml"
    out = tmp_path / f"{name}.h5"
    job.write_text(text + f'\n[output]\npath = "{out}"\n')
    result = CliRunner().invoke(app, ["run", str(job), "--workers", "1", "--no-progress"])
    assert result.exit_code == 0, result.output
    return Results.read(out)


def test_custom_kagome_reproduces_the_built_in_corner_charge(tmp_path):
    custom = run(tmp_path, kagome(), "custom")
    builtin = run(tmp_path, """
[model]
name = "breathing_kagome"
[params]
tb = 1.0
[sweep]
ta = [0.3, -0.5, 1.0, 3.0]
[measure]
filling = 1
[measure.corner_charge]
""", "builtin")
    # Ezawa (2018): the gap above the lowest band closes at ta = tb; BLH (PRB 99, 245151 (2019),
    # from memory): corner charge 1/3 in the obstructed phase -1 < ta/tb < 1/2, 0 for ta/tb > 2.
    q = custom.data["corner_charge"]
    assert np.allclose(q[[0, 1, 3]], [1 / 3, 1 / 3, 0.0]) and math.isnan(q[2])
    assert list(custom.data["corner_charge_reason"]) == [Reason.OK, Reason.OK,
                                                        Reason.GAP_CLOSED, Reason.OK]
    for name in ("corner_charge_order", "corner_charge_i1", "corner_charge_i2",
                 "corner_charge_reason"):
        assert list(custom.data[name]) == list(builtin.data[name]), name
    np.testing.assert_allclose(q, builtin.data["corner_charge"], equal_nan=True)


def test_the_rotation_comes_from_positions_and_the_orbital_matrix(write_job):
    # Qi-Wu-Zhang (two orbitals at one site): sin k1 sx + sin k2 sy + (m + cos k1 + cos k2) sz is
    # C4 symmetric with D = diag(1, i), since D sx D^+ = sy and D sy D^+ = -sx; D^4 = 1.
    qwz = """
[model]
name = "custom"
lattice = "square"
orbitals = 2
[[model.onsite]]
matrix = "z"
coeff = "m"
[[model.hopping]]
d = [1, 0]
matrix = "z"
coeff = 0.5
[[model.hopping]]
d = [1, 0]
matrix = "x"
coeff = "-0.5j"
[[model.hopping]]
d = [0, 1]
matrix = "z"
coeff = 0.5
[[model.hopping]]
d = [0, 1]
matrix = "y"
coeff = "-0.5j"
[model.rotation]
order = 4
matrix = [[1, 0], [0, "SIGN1j"]]
[sweep]
m = [-1.0, 1.0]
[measure.corner_charge]
"""
    job = load_job(write_job(qwz.replace("SIGN", "")))
    rot = job.custom.rotation
    assert rot.order == 4 and np.allclose(rot.matrix, np.diag([1, 1j]))
    assert not rot.shifts.any()
    np.testing.assert_array_equal(rot.cell_map @ rot.cell_map, -np.eye(2))
    # The other sense of rotation of the orbitals is no symmetry.
    with pytest.raises(JobError, match=r"job\.toml: \[model\.rotation\] must be a symmetry of "
                                       r"the model; at grid point 0 the 4-fold rotation"):
        load_job(write_job(qwz.replace("SIGN", "-")))


@pytest.mark.parametrize("rotation, extra, pattern", [
    ("order = 4", "", r"\[model\.rotation\] order must be an order the lattice has"),
    ("order = 5", "", r"\[model\.rotation\] order must be one of 3, 4, 6; got 5"),
    ("order = 3\ncentre = [0, 0]", "",
     r"\[model\.rotation\] centre must be a centre about which the 3-fold rotation maps every "
     r"orbital site onto a site"),
    ("order = 3\ncentre = [0, 0, 0]", "", r"\[model\.rotation\] centre must be two reduced"),
    (C3 + '\nmatrix = "x"', "", r"\[model\.rotation\] matrix must be a Pauli word .* of size 3"),
    (C3 + "\nmatrix = [[2, 0, 0], [0, 1, 0], [0, 0, 1]]", "",
     r"\[model\.rotation\] matrix must be a unitary matrix.*unitary 3 x 3"),
    (C3 + "\nmatrix = [[0, 1, 0], [1, 0, 0], [0, 0, 1]]", "",
     r"\[model\.rotation\] matrix must be a unitary matrix that mixes only orbitals at one "
     r"position"),
    (C3 + "\nangle = 120", "", r"\[model\.rotation\] has an unknown key 'angle'"),
    # An onsite energy on A alone breaks C3: the rotation maps the lattice but not H.
    (C3, '[[model.onsite]]\nmatrix = [[1, 0, 0], [0, 0, 0], [0, 0, 0]]\ncoeff = 0.2',
     r"\[model\.rotation\] must be a symmetry of the model; at grid point 0 the 3-fold rotation "
     r"is not a symmetry"),
])
def test_bad_rotations_are_refused_at_load(write_job, rotation, extra, pattern):
    with pytest.raises(JobError, match=r"job\.toml: " + pattern):
        load_job(write_job(kagome(rotation, extra)))


def test_corner_charge_needs_a_model_with_a_rotation(write_job):
    no_rotation = kagome().replace("[model.rotation]\n" + C3 + "\n", "")
    with pytest.raises(JobError, match=r"job\.toml: \[measure\.corner_charge\] needs a model that "
                                       r"provides a C3, C4 or C6 rotation; model 'custom' "
                                       r"provides none \(declare one under \[model\.rotation\]\)"):
        load_job(write_job(no_rotation))
    with pytest.raises(JobError, match=r"\[measure\.corner_charge\] needs a model .* model 'qwz' "
                                       r"provides none"):
        load_job(write_job('[model]\nname = "qwz"\n[sweep]\nm = [1.0, 3.0]\n'
                           '[measure.corner_charge]\n'))
    with pytest.raises(JobError, match=r"\[measure\.corner_charge\] order must be 0 or an order "
                                       r"of rotation the model provides \(3\); got 6"):
        load_job(write_job(kagome() + "order = 6\n"))
    # bbh provides C4 (at delta = 0), so it is accepted and stores no_symmetry where delta != 0.
    load_job(write_job('[model]\nname = "bbh"\n[sweep]\ndelta = [0.0, 0.1]\n[params]\n'
                       'gamma = 0.3\n[measure]\nfilling = 2\n[measure.corner_charge]\n'))


def test_corner_charge_triangle_rule_verdicts():
    # The rule's logic on given values: 1/3 with one mode per corner, 0 with none; a count that
    # is missing, another order or the charge 2/3 is not comparable.
    names = {"corner_charge", "corner_charge_order", "polygon_modes_0_min",
             "polygon_modes_0_max"}
    rules = rules_for(names, {"polygon_modes": {"shape": "triangle"}})
    assert [r.name for r in rules] == ["corner_charge_triangle"]
    assert rules_for(names, {"polygon_modes": {"shape": "hexagon"}}) == []

    def verdict(q, order, lo, hi):
        return evaluate(rules, {"corner_charge": q, "corner_charge_order": order,
                                "polygon_modes_0_min": lo, "polygon_modes_0_max": hi})[
            "agree_corner_charge_triangle"]

    assert verdict(1 / 3, 3, 1, 1) == 1 and verdict(0.0, 3, 0, 0) == 1
    assert verdict(1 / 3, 3, 0, 1) == 0 and verdict(0.0, 3, 1, 1) == 0
    assert verdict(1 / 3, 3, None, None) is None and verdict(math.nan, 3, 1, 1) is None
    assert verdict(2 / 3, 3, 2, 2) is None and verdict(0.5, 6, 1, 1) is None


def test_kagome_triangle_counts_agree_with_the_c3_corner_charge(tmp_path):
    # Ezawa (2018): one zero mode per corner of a triangle for ta/tb < 1/2, none for ta/tb > 2,
    # zero energy inside a band between; BLH (2019): corner charge 1/3 and 0.
    r = run(tmp_path, """
[model]
name = "breathing_kagome"
[sweep]
ta = [0.2, 0.8, 3.0]
[measure]
filling = 1
[measure.corner_charge]
[measure.polygon_modes]
shape = "triangle"
size = 12
max_size = 24
energy = 0.0
""", "kagome")
    assert np.allclose(r.data["corner_charge"], [1 / 3, 1 / 3, 0.0])
    assert list(r.data["polygon_modes_0_min"][[0, 2]]) == [1, 0]
    assert list(r.data["polygon_modes_0_max"][[0, 2]]) == [1, 0]
    assert r.data["polygon_modes_0_reason"][1] == Reason.GAP_CLOSED
    assert list(r.data["agree_corner_charge_triangle"]) == [1, FILL_INT, 1]


def test_readme_rotation_block_declares_the_kagome_c3(write_job):
    text = (ROOT / "README.md").read_text()
    block = next(b for b in text.split("```toml\n")[1:] if b.startswith("[model.rotation]"))
    block = block.split("```")[0].replace("[model.rotation]", "", 1)
    job = load_job(write_job(kagome(block.strip())))
    # A -> B -> C about the triangle's centre, no cell shifts (the built-in model's rotation).
    builtin = MODELS["breathing_kagome"].func(ta=0.3).rotations[3]
    np.testing.assert_allclose(job.custom.rotation.matrix, builtin.matrix)
    np.testing.assert_array_equal(job.custom.rotation.shifts, builtin.shifts)
