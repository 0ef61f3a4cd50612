"""The shared gap search (static and driven), the Floquet windows built on it, the quasienergy
convention, driven ribbons in degenerate clusters and the once-per-point time slicing.

References are computed here with plain numpy/scipy (dense grids, scipy.linalg.expm,
scipy.optimize), never with the project's gap or window code.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import expm
from scipy.optimize import minimize, minimize_scalar

from sweepcli.physics import boundary as bd
from sweepcli.physics import quasienergy as qe
from sweepcli.physics.drives.harmonic import HarmonicDrive
from sweepcli.physics.drives.steps import StepDrive
from sweepcli.physics.lattice import assemble, fourier_term, pauli
from sweepcli.physics.measurements import MEASUREMENTS
from sweepcli.physics.measurements import driven as md
from sweepcli.physics.models import MODELS
from sweepcli.physics.point import Point
from sweepcli.physics.spectrum import band_gap

SX, SY, SZ = (pauli(c) for c in "xyz")


def model(name: str, **kw):
    return MODELS[name].func(**kw)


# ------------------------------------------------------------------------------------------
# Static: a closing in the fifth basin

A = 0.3
MESH = 47  # prime, so the ten zeros of sin(5k), at j pi / 5, sit at ten different mesh offsets


def ten_basins():
    """``H(k) = sin(5k) s_z + A (1 + cos k) / 2 s_x``: gap ``2 |d(k)|``.

    ``sin 5k`` vanishes at ``k_j = j pi / 5``; there the gap is ``A (1 + cos k_j)``, which is 0
    only at ``k_5 = pi`` (a Dirac point). On the 47-point mesh ``k_5`` lies half a spacing from
    the nearest mesh points, so its basin looks shallower on the mesh than those of
    ``k_3, k_4, k_6, k_7`` (small ``d_x``, mesh points close to ``k_j``).
    """
    return assemble(np.eye(1), np.zeros((2, 1)), A / 2 * SX,
                    [fourier_term((5,), sin=SZ), fourier_term((1,), cos=A / 2 * SX)])


def gap_formula(k):
    return 2 * np.hypot(np.sin(5 * k), A * (1 + np.cos(k)) / 2)


def test_closing_in_the_fifth_basin_is_found():
    # The situation the test needs, checked with the formula alone: local minima of the mesh
    # gap, ranked by value; the one next to k = pi is not among the four lowest.
    k = 2 * np.pi * np.arange(MESH) / MESH
    g = gap_formula(k)
    minima = [i for i in range(MESH) if g[i] <= g[i - 1] and g[i] <= g[(i + 1) % MESH]]
    ranked = sorted(minima, key=lambda i: g[i])
    assert len(ranked) >= 5
    rank_pi = next(r for r, i in enumerate(ranked) if abs(k[i] - np.pi) < 2 * np.pi / MESH)
    assert rank_pi >= 4
    # Brute force: a 2e5-point grid, then scipy's bounded scalar minimiser around its best.
    fine = np.linspace(0, 2 * np.pi, 200_001)
    j = np.argmin(gap_formula(fine))
    ref = minimize_scalar(gap_formula, bounds=(fine[j] - 1e-4, fine[j] + 1e-4), method="bounded",
                          options={"xatol": 1e-13})
    assert ref.fun < 1e-8 and abs(ref.x - np.pi) < 1e-6
    tb = ten_basins()
    np.testing.assert_allclose(np.linalg.eigvalsh(tb.bloch(k[:, None]))[:, 1] * 2, g, atol=1e-12)
    r = band_gap(tb, 1, MESH)
    assert r.gap == pytest.approx(ref.fun, abs=1e-8)
    assert abs(abs(r.k[0]) - np.pi) < 1e-6



@pytest.mark.parametrize("name, params", [("qwz", dict(m=1.3, t=0.8)),
                                          ("qwz", dict(m=-1.6, t=0.8)),
                                          ("haldane", dict(t2=0.15, phi=1.0, M=0.2))])
def test_batched_polish_reaches_the_brute_force_minimum(name, params):
    # Every chosen mesh minimum is polished in one batch; the gap must be the minimum over
    # the zone found here by brute force: numpy eigvalsh on a 720 x 720 grid (the Haldane K
    # points, at thirds of the zone, sit off the 64-point mesh the search starts from), then
    # scipy's Nelder-Mead from the best fine-grid points.
    tb = model(name, **params)
    got = band_gap(tb, 1, 64)
    n = 720
    k = 2 * np.pi * np.stack(np.meshgrid(np.arange(n) / n, np.arange(n) / n, indexing="ij"), -1)

    def gap(kk):
        e = np.linalg.eigvalsh(tb.bloch(kk))
        return e[..., 1] - e[..., 0]

    fine = gap(k)
    starts = k.reshape(-1, 2)[np.argsort(fine.ravel())[:12]]
    ref = min(minimize(lambda x: float(gap(x)), s, method="Nelder-Mead",
                       options={"xatol": 1e-10, "fatol": 1e-13, "maxiter": 4000}).fun
              for s in starts)
    assert ref <= fine.min()
    assert abs(got.gap - ref) <= 1e-8 * max(1.0, ref)
    assert abs(gap(got.k) - got.gap) <= 1e-12  # the momentum returned holds the gap reported


# ------------------------------------------------------------------------------------------
# Driven: windows from the shared layer against a dense expm reference


def qwz_steps(period=1.3):
    """Two non-commuting QWZ steps (masses 1.2 and -0.4, 40 % and 60 % of the period)."""
    return StepDrive(period, ((0.4 * period, model("qwz", m=1.2)),
                              (0.6 * period, model("qwz", m=-0.4))))


def test_floquet_windows_match_a_dense_expm_reference():
    drive = qwz_steps()
    T = drive.period
    (t1, h1), (t2, h2) = drive.segments
    windows = bd.floquet_windows(drive)

    def eps_at(k):
        u = expm(-1j * t2 * h2.bloch(k)) @ expm(-1j * t1 * h1.bloch(k))
        return -np.angle(np.linalg.eigvals(u)) / T

    def distances(k):
        e = np.abs(eps_at(np.atleast_2d(k)))
        return np.min(e, axis=-1), np.min(np.pi / T - e, axis=-1)

    n = 160
    ax = 2 * np.pi * np.arange(n) / n
    mesh = np.stack(np.meshgrid(ax, ax, indexing="ij"), axis=-1).reshape(-1, 2)
    dist = distances(mesh)
    for which, name in ((0, "0"), (1, "pi")):
        start = mesh[np.argmin(dist[which])]
        res = minimize(lambda x, which=which: float(distances(x)[which][0]), start,
                       method="Nelder-Mead",
                       options={"xatol": 1e-12, "fatol": 1e-14, "maxiter": 4000})
        ref = 2 * min(res.fun, float(dist[which].min()))
        w = windows[name]
        assert w.gap == pytest.approx(ref, abs=1e-7)
        assert w.centre == (0.0 if name == "0" else pytest.approx(np.pi / T))
        assert w.halfwidth == pytest.approx(bd.WINDOW_FRACTION * w.gap / 2)
        assert w.period == T


# ------------------------------------------------------------------------------------------
# One quasienergy convention: (-pi/T, pi/T]


def test_quasienergy_at_exactly_pi_over_t_is_plus_pi_over_t():
    T = 0.7
    # A constant onsite energy pi/T for one period: U = exp(-i pi) = -1 exactly.
    tb = assemble(np.eye(1), np.zeros((2, 1)), np.pi / T * np.eye(2), [])
    u = expm(-1j * T * tb.bloch(np.zeros((1, 1))))
    eps, _ = qe.quasienergies(u, T)
    np.testing.assert_array_equal(eps, np.pi / T)
    np.testing.assert_array_equal(qe.quasienergy_values(-np.eye(2)[None], T), np.pi / T)
    assert qe.wrap_quasienergy(-np.pi / T, T) == np.pi / T
    assert qe.wrap_quasienergy(np.pi / T, T) == np.pi / T
    assert bd.solvers._wrap(np.array([-np.pi / T]), T)[0] == np.pi / T
    x = np.linspace(-3 * np.pi / T, 3 * np.pi / T, 1001)
    w = qe.wrap_quasienergy(x, T)
    assert np.all((w > -np.pi / T) & (w <= np.pi / T))
    np.testing.assert_allclose(np.exp(-1j * w * T), np.exp(-1j * x * T), atol=1e-12)


# ------------------------------------------------------------------------------------------
# Driven ribbon with degenerate clusters


def doubled_qwz(m):
    """Two identical, uncoupled QWZ copies: every ribbon level is exactly doubly degenerate."""
    one = model("qwz", m=m)
    eye = np.eye(2)
    return assemble(one.lattice_vectors, np.vstack([one.orbital_positions] * 2),
                    np.kron(eye, one.onsite),
                    [(r, np.kron(eye, t)) for r, t in one.hoppings.items()])


def test_driven_ribbon_in_degenerate_clusters(monkeypatch):
    # Static limit of a drive (two identical steps, bands well inside (-pi/T, pi/T)) of the
    # doubled model: twice the chiral edge modes of one copy. The reference count is the
    # static ribbon of a single copy (Hermitian eigh), and the ribbon eigenvectors the count
    # is built on must be orthonormal although every level is doubly degenerate.
    tb = doubled_qwz(1.0)
    drive = StepDrive(0.6, ((0.3, tb), (0.3, tb)))
    seen = []
    original = bd.ribbons._edge_modes

    def recording(spectrum, levels_at, low, window, nk, nk_max):
        _, v = spectrum(bd.ribbon_kgrid(nk))
        seen.append(v)
        return original(spectrum, levels_at, low, window, nk, nk_max)

    monkeypatch.setattr(bd.ribbons, "_edge_modes", recording)
    res = bd.floquet_ribbon_modes(drive.factors(), 12, bd.floquet_windows(drive))
    single = model("qwz", m=1.0)
    reference = bd.ribbon_modes(single, 12, bd.static_window(single)).chiral
    assert reference != 0
    assert res["0"].chiral == 2 * reference
    assert res["pi"].chiral == 0
    assert seen
    for v in seen:
        gram = np.einsum("kia,kib->kab", v.conj(), v)
        np.testing.assert_allclose(gram, np.broadcast_to(np.eye(v.shape[-1]), gram.shape),
                                   atol=1e-10)


# ------------------------------------------------------------------------------------------
# Harmonic slicing: decided once per point


def test_harmonic_slicing_is_decided_once_per_point(monkeypatch):
    calls = []
    original = md.decide_slicing

    def counting(drive):
        calls.append(drive)
        return original(drive)

    monkeypatch.setattr(md, "decide_slicing", counting)
    T = 0.5
    drive = HarmonicDrive(T, lambda t: model("qwz", m=1.0 + 0.6 * np.cos(2 * np.pi * t / T)),
                          tol=1e-7)
    pt = Point(params={}, build=lambda p: model("qwz", m=1.0), drive=drive)
    for name, opts in (("quasienergy_gaps", {}), ("floquet_chern", {}),
                       ("rudner_winding", {"max_kmesh": 24}), ("edge_modes", {"width": 8}),
                       ("corner_modes", {"size": 8, "max_size": 8})):
        MEASUREMENTS[name].func(pt, **opts)
    assert len(calls) == 1
    slicing = md.point_slicing(pt)
    assert slicing.converged and slicing.slices > drive.min_slices
    # Every bulk mesh of the point was evolved at that slicing.
    meshes = [v for key, v in pt.cache.items() if key[0] == "floquet_mesh"]
    assert meshes and all(m.slices == slicing.slices for m in meshes)


HARMONIC_JOB = """
[model]
name = "qwz"
[params]
m0 = 1.0
m = "m0"
[sweep]
A = { start = 0.5, stop = 1.5, num = 2 }
omega = { start = 6.0, stop = 10.0, num = 3 }
[drive]
kind = "harmonic"
omega = "omega"
tol = 1e-6
[[drive.term]]
param = "m"
amplitude = "A"
harmonic = 1
[measure.quasienergy_gaps]
[predict]
[output]
path = "OUT"
"""


def test_predict_decides_the_slicing_once_per_grid_point(monkeypatch, tmp_path):
    from sweepcli.jobfile import load_job
    from sweepcli.run.predict import predict_transitions

    calls = []
    original = md.decide_slicing
    monkeypatch.setattr(md, "decide_slicing", lambda d: calls.append(d) or original(d))
    path = tmp_path / "job.toml"
    path.write_text(HARMONIC_JOB.replace("OUT", str(tmp_path / "out.h5")))
    job = load_job(path)
    predict_transitions(job)
    # Every grid point lies on two lines (one per axis) but is decided once.
    assert len(calls) == job.size == 6
