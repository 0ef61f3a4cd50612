"""Corner modes that only a drive makes, on a polygonal flake (jobs/honeycomb-driven-corners.toml).

The model is the demo job's own: a honeycomb lattice with a Kekule texture, hexamers of six
sites (hopping t0 inside, t1 between hexamers) on a triangular lattice. Known facts used
(analytic limits, not from a paper): at t1 = 0 the flake is a set of isolated hexamers whose
levels +-2 t0, +-t0 (twice) avoid zero energy; at t0 = 0 it is a set of dimers plus the sites
whose neighbouring hexamer is missing: three consecutive such sites at each corner of the
hexagon, a three-site chain with one zero mode. References are written here: the flake built
hexamer by hexamer from Cartesian positions, diagonalised with numpy's eigh, and its Floquet
operator from the exponential of each step (numpy's eigh of the step's Hamiltonian).
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepcli.jobfile import load_job
from sweepcli.physics.measurements import MEASUREMENTS
from sweepcli.schema import Reason

from ..conftest import JOBS

JOB = JOBS / "honeycomb-driven-corners.toml"
SIZE = 8  # the job's polygon size: hexamer centres within 8 rows of the centre


def kekule_hexagon(t0: float, t1: float, size: int = SIZE) -> tuple[np.ndarray, np.ndarray]:
    """Hexagonal flake of whole hexamers (centres ``c1 a_1 + c2 a_2`` with ``|c1|, |c2|,
    |c1 + c2| <= size``), built from positions: bonds of length 1/3 inside a hexamer carry -t0,
    between hexamers -t1. Returns the Hamiltonian and the site positions."""
    a1, a2 = np.array([1.0, 0.0]), np.array([0.5, np.sqrt(3) / 2])
    ang = np.arange(6) * np.pi / 3
    ring = np.stack([np.cos(ang), np.sin(ang)], axis=1) / 3
    pos, owner = [], []
    for c1 in range(-size, size + 1):
        for c2 in range(-size, size + 1):
            if abs(c1 + c2) <= size:
                pos += list(c1 * a1 + c2 * a2 + ring)
                owner += [len(owner) // 6] * 6
    pos, owner = np.array(pos), np.array(owner)
    dist = np.linalg.norm(pos[:, None] - pos[None], axis=2)
    same = owner[:, None] == owner[None, :]
    bond = np.abs(dist - 1 / 3) < 1e-9
    h = np.where(bond & same, -t0, 0.0) + np.where(bond & ~same, -t1, 0.0)
    return h, pos


def corners(size: int = SIZE) -> np.ndarray:
    ang = np.arange(6) * np.pi / 3
    return (size + 1 / 3) * np.stack([np.cos(ang), np.sin(ang)], axis=1)


def floquet_quasienergies(a: float, omega: float) -> tuple[np.ndarray, np.ndarray, float]:
    """|eps T| in [0, pi] and eigenvectors of the flake's Floquet operator for the job's drive
    (t0 = a for half a period, then t0 = -2). Each step's exponential is built from numpy's
    eigh of its Hamiltonian (exact for a Hermitian matrix, and far cheaper than a general
    exponential at 1302 sites); the eigenphases come from eigh of the Hermitian part
    (U + U^dagger) / 2, whose eigenvalues are cos(eps T): enough here, where only |eps T| is
    tested and the states near 0 span the subspace of eigenvalues near 1."""
    period = 2 * np.pi / omega
    u = None
    for t0 in (a, -2.0):
        e, w = np.linalg.eigh(kekule_hexagon(t0, 1.0)[0])
        step = (w * np.exp(-1j * e * period / 2)) @ w.conj().T
        u = step if u is None else step @ u
    c, v = np.linalg.eigh((u + u.conj().T) / 2)
    return np.arccos(np.clip(c, -1.0, 1.0)), v, period


def measured(a: float, omega: float) -> dict:
    job = load_job(JOB)
    options = dict(job.measurements)["polygon_modes"]
    point = job.point(0, overrides={"a": a, "omega": omega})
    return MEASUREMENTS["polygon_modes"].func(point, **dict(options))


@pytest.mark.parametrize("t0", [1.5, 2.5, -2.0, 5.0])
def test_every_step_is_trivial(t0):
    # |t0| > t1: no zero-energy level on the flake (isolated-hexamer limit, levels +-2 t0, +-t0,
    # continued without closing the gap at zero energy).
    e = np.linalg.eigvalsh(kekule_hexagon(t0, 1.0)[0])
    assert np.min(np.abs(e)) > 0.2


def test_static_topological_hexagon_has_one_zero_mode_per_corner():
    # |t0| < t1 (here t0 = 0.3): six zero modes, one at each corner (t0 = 0 limit: a three-site
    # chain at each corner); neighbouring corners hold opposite chiral charges, so on a finite
    # flake they split by an amount exponentially small in the size.
    h, pos = kekule_hexagon(0.3, 1.0)
    e, v = np.linalg.eigh(h)
    zero = np.abs(e) < 1e-3
    assert zero.sum() == 6 and np.min(np.abs(e[~zero])) > 0.1
    weight = np.sum(np.abs(v[:, zero]) ** 2, axis=1)
    for c in corners():
        assert weight[np.linalg.norm(pos - c, axis=1) < 2].sum() == pytest.approx(1, abs=0.02)


def test_drive_of_trivial_steps_has_six_corner_modes_at_zero():
    a, omega = 2.5, 8.0
    out = measured(a, omega)
    assert out["reason"] == {"0": Reason.OK, "pi": Reason.OK}
    assert (out["polygon_modes_0"], out["polygon_modes_0_min"], out["polygon_modes_0_max"]) \
        == (6, 1, 1)
    assert out["polygon_modes_pi"] == 0
    # Reference: the Floquet operator of the same flake, each step exponentiated in its eigenbasis.
    phase, v, _ = floquet_quasienergies(a, omega)
    zero = np.abs(phase) < 1e-6
    assert zero.sum() == 6
    # The next eigenphase is far from 0, and none is near pi (the count there is 0).
    assert np.min(np.abs(phase[~zero])) > 0.1
    assert np.min(np.pi - phase) > 0.1
    # One mode at each corner: the zero-quasienergy subspace holds one state near every vertex.
    _, pos = kekule_hexagon(0.0, 1.0)
    q, _ = np.linalg.qr(v[:, zero])
    weight = np.sum(np.abs(q) ** 2, axis=1)
    for c in corners():
        assert weight[np.linalg.norm(pos - c, axis=1) < 2].sum() == pytest.approx(1, abs=0.05)


def test_drive_beyond_the_mean_transition_has_no_corner_mode():
    # Mean t0 = (a - 2) / 2 = 1.5 > t1 for a = 5: a fast drive is trivial.
    a, omega = 5.0, 10.0
    out = measured(a, omega)
    assert out["reason"]["0"] == Reason.OK and out["polygon_modes_0"] == 0
    phase, _, _ = floquet_quasienergies(a, omega)
    assert np.min(np.abs(phase)) > 0.1
