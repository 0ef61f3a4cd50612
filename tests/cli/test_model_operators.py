"""Cell operators: `sweepcli models` lists each model's operators, and a custom model may give
an operator as a sum of Pauli words with coefficients, like its onsite terms."""

import numpy as np
import pytest
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.jobfile import load_job
from sweepcli.jobfile.model_table import model_operators
from sweepcli.physics.models import MODELS

SX = np.array([[0, 1], [1, 0]], complex)
SY = np.array([[0, -1j], [1j, 0]])
SZ = np.diag([1.0 + 0j, -1.0])
S0 = np.eye(2, dtype=complex)


def test_models_listing_names_every_operator_with_its_meaning():
    listing = CliRunner().invoke(app, ["models"]).stdout
    blocks = {}
    for line in listing.splitlines():
        if line.startswith("  ") and not line.startswith("   "):
            current = line.split(":")[0].strip()
            blocks[current] = []
        elif line.startswith("      ") and blocks:
            blocks[current].append(line.strip())
    for e in MODELS:
        ops = [ln for ln in blocks[e.name] if ln.startswith("operator ")]
        assert [ln.split(":")[0] for ln in ops] == [f"operator {o}" for o in
                                                  model_operators(e.name)], e.name
    mirror = next(ln for ln in blocks["bhz_corner"] if ln.startswith("operator mirror_diag"))
    assert "H(k2, k1)" in mirror and "line_winding" in mirror
    ssh_chiral = next(ln for ln in blocks["ssh"] if ln.startswith("operator chiral"))
    assert "winding" in ssh_chiral and "end_modes" in ssh_chiral
    assert "[[model.operators.NAME]]" in listing


def test_every_documented_operator_exists():
    for e in MODELS:
        docs = e.extra.get("operator_docs", {})
        assert set(docs) == set(model_operators(e.name)), e.name


CUSTOM = """
[model]
name = "custom"
lattice = "square"
orbitals = 4
[[model.onsite]]
matrix = "z0"
coeff = "m"
[[model.hopping]]
d = [1, 0]
matrix = "z0"
coeff = 0.5
OPS
[sweep]
m = [-1.0, 1.0]
[measure.gap]
"""


def test_custom_operator_as_pauli_terms(write_job):
    ops = """[[model.operators.mirror]]
matrix = "zx"
coeff = "1/sqrt(2)"
[[model.operators.mirror]]
matrix = "zy"
coeff = "-1/sqrt(2)"
[[model.operators.phase]]
matrix = "00"
coeff = "1j"
"""
    job = load_job(write_job(CUSTOM.replace("OPS", ops)))
    got = dict(job.custom.operators)
    # tau_z (sigma_x - sigma_y) / sqrt(2), the diagonal mirror of bhz_corner, written with kron
    ref = np.kron(SZ, SX - SY) / np.sqrt(2)
    np.testing.assert_allclose(got["mirror"], ref, atol=1e-15)
    np.testing.assert_allclose(got["mirror"], MODELS["bhz_corner"].func(m=1.0, delta2=0.5)
                               .operators["mirror_diag"], atol=1e-15)
    np.testing.assert_allclose(got["phase"], 1j * np.eye(4), atol=1e-15)
    # the plain forms still work, and a Pauli word equals the one-term table
    plain = load_job(write_job(CUSTOM.replace("OPS", '[model.operators]\nchiral = "xz"'), "b.toml"))
    np.testing.assert_allclose(dict(plain.custom.operators)["chiral"], np.kron(SX, SZ))


@pytest.mark.parametrize("ops, msg", [
    ('[[model.operators.s]]\nmatrix = "zx"\ncoeff = "m"\n',
     r"\[model.operators.s.0\] coeff must be a number or an expression of constants such as "
     r"\"1/sqrt\(2\)\" or \"1j\"; got 'm'\."),
    ('[[model.operators.s]]\nmatrix = "zx"\ncoef = 2\n',
     r"\[model.operators.s.0\] has an unknown key 'coef' \(allowed: matrix, coeff\)\. Did you "
     r"mean 'coeff'\?"),
    ('[[model.operators.s]]\nmatrix = "z"\n',
     r"\[model.operators.s.0\] matrix must be a Pauli word such as \"zx\" or a square matrix of "
     r"numbers of size 4; got 'a matrix of size 2'\."),
    ('[[model.operators.s]]\nmatrix = "zx"\ncoeff = "log(0)"\n',
     r"\[model.operators.s.0\] coeff must be a number or an expression of constants"),
])
def test_bad_custom_operator_terms(write_job, ops, msg):
    with pytest.raises(Exception, match=msg):
        load_job(write_job(CUSTOM.replace("OPS", ops)))
