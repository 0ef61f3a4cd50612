"""Boundary modes of open samples against published phase diagrams and plain references.

Sources: Su, Schrieffer and Heeger, PRL 42, 1698 (1979) and Asboth, Oroszlany and Palyi, A Short
Course on Topological Insulators (Springer 2016), ch. 1 (SSH end states for |v| < |w|);
Kitaev, Physics-Uspekhi 44, 131 (2001) (Majorana end modes for |mu| < 2|t|); Hatsugai, PRL 71,
3697 (1993) (chiral edge modes = Chern number); Schindler et al., Science Advances 4, eaat0346
(2018) (one corner mode per corner of the C4- and T-breaking BHZ model for |m| < 2|t|);
Benalcazar, Bernevig and Hughes, Science 357, 61 (2017) (corner modes for |gamma/lambda| < 1).
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepcli.physics import boundary as bd
from sweepcli.physics import samples
from sweepcli.physics.boundary import counts
from sweepcli.physics.chern import chern_number
from sweepcli.physics.chiral_winding import winding_number
from sweepcli.physics.measurements import MEASUREMENTS, quantities_of
from sweepcli.physics.models import MODELS
from sweepcli.physics.point import Point
from sweepcli.schema import Reason


def model(name: str, **kw):
    return MODELS[name].func(**kw)


def chain_ends(name: str, cells: int = 30, max_side: int = 160, **kw) -> bd.ModeCount:
    tb = model(name, **kw)
    return bd.box_modes(tb, (cells,), bd.static_window(tb), max_side=max_side,
                        chiral=tb.operators.get("chiral"))


def flake_corners(name: str, size: int = 12, method: str = "auto", max_side: int = 48,
                  **kw) -> bd.ModeCount:
    tb = model(name, **kw)
    w = bd.static_window(tb)
    if w.gap > 0:
        w = bd.edge_window(w, bd.static_boundary_gap(tb, w.centre, size)[0])
    return bd.box_modes(tb, (size, size), w, method=method, max_side=max_side)


# Points at least 0.2 from the transitions; chains are doubled from 30 cells up to 160 until
# the modes fit into their end regions.
@pytest.mark.parametrize("v", [-1.8, -1.25, -0.75, -0.3, 0.0, 0.4, 0.8, 1.2, 2.0])
def test_ssh_one_end_mode_per_end_exactly_where_winding_is_one(v):
    # Su, Schrieffer and Heeger (1979); Asboth et al. (2016) ch. 1: one zero-energy state at
    # each end for |v| < |w|, none for |v| > |w| (w = 1); bulk winding from the invariants.
    tb = model("ssh", v=v)
    nu = winding_number(tb, tb.operators["chiral"]).value
    r = chain_ends("ssh", v=v)
    assert r.reason == Reason.OK
    expected = [1, 1] if abs(nu) == 1 else [0, 0]
    assert r.per_corner.tolist() == expected
    assert (abs(nu) == 1) == (abs(v) < 1)
    if abs(nu) == 1:
        # The two end states sit at +-delta with delta ~ |v|^N -> 0 (Asboth et al. eq. 1.27).
        assert np.max(np.abs(r.levels)) < 1e-3


@pytest.mark.parametrize("mu", [-3.0, -2.4, -1.5, -0.5, 0.0, 1.0, 1.6, 2.5])
def test_kitaev_majorana_end_modes_for_mu_inside_band(mu):
    # Kitaev (2001): one Majorana mode at each end for |mu| < 2|t| (t = delta = 1); in BdG form
    # each shows up as one state of the +-delta pair localised at that end.
    r = chain_ends("kitaev", mu=mu)
    assert r.per_corner.tolist() == ([1, 1] if abs(mu) < 2 else [0, 0])


def test_gapless_bulk_gives_missing_counts_not_errors():
    for r in (chain_ends("ssh", v=1.0), chain_ends("kitaev", mu=2.0),
              flake_corners("bbh", gamma=1.0)):
        assert r.reason == Reason.GAP_CLOSED and r.per_corner is None and r.total is None
    tb = model("qwz", m=2.0)
    e = bd.ribbon_modes(tb, 12, bd.static_window(tb))
    assert e.reason == Reason.GAP_CLOSED and e.chiral is None and np.isnan(e.edge_gap)


@pytest.mark.parametrize("name, kw", [("qwz", dict(m=1.0)), ("qwz", dict(m=-1.2)),
                                      ("qwz", dict(m=3.0)), ("qwz", dict(m=-2.6)),
                                      ("haldane", dict(t2=0.2, phi=np.pi / 2, M=0.0)),
                                      ("haldane", dict(t2=0.25, phi=-np.pi / 3, M=0.3)),
                                      ("haldane", dict(t2=0.2, phi=np.pi / 2, M=1.5))])
def test_ribbon_chiral_edge_modes_equal_chern_number(name, kw):
    # Hatsugai (1993): the net number of chiral modes on one edge is the Chern number of the
    # bands below the gap. The orientation sign depends only on the geometry: for the low edge
    # of a ribbon cut along a_1 (k_par along a_2) it is +C; cut along a_2 (k_par along a_1) -C,
    # one circulation sense around a sample seen from two of its edges. The same signs must
    # hold on the square (QWZ) and the triangular-Bravais honeycomb (Haldane) lattices.
    tb = model(name, **kw)
    c = chern_number(tb, 1).value
    w = bd.static_window(tb)
    across_a1 = bd.ribbon_modes(tb, 20, w, open_axis=0)
    across_a2 = bd.ribbon_modes(tb, 20, w, open_axis=1)
    assert across_a1.reason == across_a2.reason == Reason.OK
    assert across_a1.chiral == c and across_a2.chiral == -c
    if c != 0:
        assert abs(c) == 1
        assert across_a2.edge_gap < 1e-6  # a chiral edge crosses the gap
    else:
        assert across_a2.edge_gap > 0.5 * w.gap


def test_second_order_edges_gapped_while_first_order_edges_are_not():
    # bhz_corner with delta2 = 0 is a quantum spin Hall insulator: helical edges cross the gap
    # (edge gap ~ 0) with no net chirality. delta2 != 0 gaps the edges (corner phase), while
    # the bulk gap, 2 min |d(k)| = 2 (2 - |m|) for t = 1 here, is the same in both.
    gaps = {}
    for d2 in (0.0, 0.6):
        tb = model("bhz_corner", m=1.0, delta2=d2)
        w = bd.static_window(tb)
        r = bd.ribbon_modes(tb, 16, w)
        assert r.chiral == 0
        assert w.gap == pytest.approx(2.0, abs=1e-6)
        gaps[d2] = r.edge_gap
    assert gaps[0.0] < 1e-6 < 0.2 < gaps[0.6]


@pytest.mark.parametrize("m", [-3.0, -2.4, -1.2, -0.5, 0.0, 0.6, 1.3, 2.5])
def test_bhz_corner_one_mode_per_corner_in_topological_range(m):
    # Schindler et al. (2018): one zero mode at each of the four corners for |m| < 2|t| with
    # the C4- and T-breaking mass on, none for |m| > 2|t|.
    r = flake_corners("bhz_corner", m=m, delta2=1.0)
    assert r.reason == Reason.OK
    assert r.per_corner.tolist() == ([1, 1, 1, 1] if abs(m) < 2 else [0, 0, 0, 0])
    assert r.total == (4 if abs(m) < 2 else 0)


@pytest.mark.parametrize("gamma", [-1.6, -0.6, 0.0, 0.5, 1.4])
def test_bbh_corner_modes_for_gamma_below_lambda(gamma):
    # Benalcazar, Bernevig and Hughes (2017): zero-energy corner modes for |gamma/lambda| < 1.
    r = flake_corners("bbh", gamma=gamma)
    assert r.per_corner.tolist() == ([1, 1, 1, 1] if abs(gamma) < 1 else [0, 0, 0, 0])


@pytest.mark.parametrize("name, kw", [("bhz_corner", dict(m=0.9, delta2=0.7)),
                                      ("bbh", dict(gamma=0.4))])
def test_sparse_and_dense_paths_agree(name, kw):
    # Shift-invert Lanczos and full eigh on one 16 x 16 flake: the same in-window levels, so the
    # same counts.
    dense = flake_corners(name, size=16, method="dense", max_side=16, **kw)
    sparse = flake_corners(name, size=16, method="sparse", max_side=16, **kw)
    assert dense.method == "dense" and sparse.method == "sparse"
    assert dense.reason == sparse.reason == Reason.OK
    assert dense.per_corner.tolist() == sparse.per_corner.tolist() == [1, 1, 1, 1]
    np.testing.assert_allclose(sparse.levels, dense.levels, atol=1e-8)
    assert sparse.kinds.tolist() == dense.kinds.tolist()


def test_chiral_edge_states_in_the_window_are_not_corner_modes():
    # A QWZ flake (Chern insulator) has chiral edge states inside the bulk gap: with the bulk
    # window they are found by both solvers, classed as edge states, and the corner count is
    # missing rather than 0; the edge gap of a ribbon is zero, which closes the corner window.
    tb = model("qwz", m=1.0)
    w = bd.static_window(tb)
    for method in ("dense", "sparse"):
        r = bd.box_modes(tb, (16, 16), w, method=method, xi=1.0)  # as if the edges were gapped
        assert r.reason == Reason.FINITE_SIZE and r.total is None
        assert r.states > 0 and set(r.kinds) == {1}
    assert bd.static_boundary_gap(tb, w.centre, 16)[0] < 1e-6


def test_per_corner_counts_do_not_depend_on_the_basis_of_a_degenerate_subspace():
    # Rotating the in-window eigenvectors by a random unitary inside the near-degenerate
    # cluster changes individual states, not projectors, so the counts stay.
    tb = model("bbh", gamma=0.3)
    shape = (12, 12)
    w = bd.static_window(tb)
    levels, vectors = bd.static_levels(samples.flake(tb, 12), w, "dense")
    cells = samples.sample_sites(tb, shape)[0]
    gap, xi = bd.static_boundary_gap(tb, w.centre, 12)
    pin = counts.pin_bound(gap, xi, 12)
    rng = np.random.default_rng(1)
    q, _ = np.linalg.qr(rng.standard_normal((4, 4)) + 1j * rng.standard_normal((4, 4)))
    assert levels.size == 4  # the four corner modes, split by less than the tolerance
    for chiral in (None, tb.operators["chiral"]):  # pinning, and chiral charges
        base = counts.count(levels, vectors, cells, shape, w.halfwidth, pin=pin, chiral=chiral)
        rotated = counts.count(levels, vectors @ q, cells, shape, w.halfwidth, pin=pin,
                               chiral=chiral)
        assert base.per_corner.tolist() == rotated.per_corner.tolist() == [1, 1, 1, 1]
        assert base.weight == pytest.approx(rotated.weight)


def test_sample_too_small():
    tb = model("bbh", gamma=0.3)
    with pytest.raises(ValueError, match=r"sample of 6 x 6 cells is too small: each side needs "
                                         r"at least 8 cells"):
        bd.box_modes(tb, (6, 6), bd.static_window(tb))


def test_too_large_flake_fails_before_work(monkeypatch):
    def no_build(*args, **kwargs):
        raise AssertionError("built before the size check")

    monkeypatch.setattr(samples, "open_hamiltonian", no_build)
    tb = model("bhz_corner", m=1.0, delta2=0.5)
    w = bd.Window(0.0, 0.5, 2.0)
    with pytest.raises(ValueError, match=r"flake of 2500 x 2500 cells x 4 orbitals "
                                         r"\(25,000,000 orbitals\) needs about .* GiB"):
        bd.box_modes(tb, (2500, 2500), w, memory_limit=24 * 2**30)


# ----------------------------------------------------------------------------------------------
# Through the measurement registry


def point(name: str, **params) -> Point:
    return Point(params=params, build=lambda p: MODELS[name].func(**p))


def measure(name: str, pt: Point, **options):
    out = MEASUREMENTS[name].func(pt, **options)
    assert set(out) == {q.name for q in quantities_of(name, pt.tb.dim)} | {"reason"}
    return out


def test_end_modes_measurement():
    out = measure("end_modes", point("ssh", v=0.5, w=1.0), cells=24)
    assert (out["end_modes_0"], out["end_modes_0_left"], out["end_modes_0_right"]) == (2, 1, 1)
    assert out["end_modes_method"] == 0 and out["reason"] == {"0": Reason.OK}
    out = measure("end_modes", point("ssh", v=1.0, w=1.0), cells=24)
    assert out["end_modes_0"] is None and out["reason"] == {"0": Reason.GAP_CLOSED}


def test_corner_and_edge_measurements():
    out = measure("corner_modes", point("bbh", gamma=0.4), size=12, method="sparse")
    assert out["corner_modes_0"] == 4 and out["corner_modes_method"] == 1
    assert [out[f"corner_modes_0_{c}"] for c in ("00", "10", "01", "11")] == [1, 1, 1, 1]
    out = measure("edge_modes", point("qwz", m=-1.0), width=16)
    assert abs(out["chiral_edge_modes_0"]) == 1 and out["edge_gap_0"] < 1e-6
    with pytest.raises(ValueError, match="is too small: each side needs at least 8 cells"):
        measure("corner_modes", point("bbh", gamma=0.4), size=6)


def test_too_large_flake_measurement_fails_before_bulk_work(monkeypatch):
    def no_work(*args, **kwargs):
        raise AssertionError("bulk work done before the size check")

    monkeypatch.setattr(bd, "static_window", no_work)
    with pytest.raises(ValueError, match=r"flake of 4000 x 4000 cells x 4 orbitals .* needs "
                                         r"about .* GiB with the sparse method; the machine's "
                                         r"memory is"):
        measure("corner_modes", point("bbh", gamma=0.4), size=4000)


# ----------------------------------------------------------------------------------------------
# Driven samples

from scipy.linalg import expm  # noqa: E402

from sweepcli.physics.drives.steps import StepDrive  # noqa: E402
from sweepcli.physics.lattice import assemble  # noqa: E402


def two_step(name: str, first: dict, second: dict, period: float = 2.0) -> StepDrive:
    """Half a period of ``first``, then half of ``second``."""
    return StepDrive(period, ((period / 2, model(name, **first)),
                              (period / 2, model(name, **second))))


def ssh_drive(theta1: float, theta2: float, period: float = 2.0) -> StepDrive:
    # Intra-cell hopping alone for T/2, then inter-cell alone: theta = hopping * T/2.
    return two_step("ssh", dict(v=2 * theta1 / period, w=0.0),
                    dict(v=0.0, w=2 * theta2 / period), period)


# Phase diagram of the two-step SSH drive, derived here: in the cell basis
# U(k) = exp(-i theta2 (cos k sx + sin k sy)) exp(-i theta1 sx); a product of two rotations is
# +-1 only where the axes are parallel, at k = 0 (U = exp(-i (theta1 + theta2) sx)) and k = pi
# (U = exp(-i (theta1 - theta2) sx)). In (0, pi)^2 the 0 gap therefore closes only on
# theta1 = theta2 and the pi gap only on theta1 + theta2 = pi. The counts can change only
# there; at theta1 -> 0 the end sites decouple (a 0 mode at each end, no pi mode: Asboth and
# Obuse, PRB 88, 121406 (2013)), and for theta1 > theta2 small the drive is the trivial static
# chain. Crossing theta1 + theta2 = pi adds one pi mode per end.
@pytest.mark.parametrize("theta1, theta2", [(0.3, 1.2), (1.2, 0.3), (2.4, 1.2), (1.2, 2.4)])
def test_step_driven_ssh_end_modes_at_zero_and_pi(theta1, theta2):
    drive = ssh_drive(theta1, theta2)
    factors = drive.factors()
    windows = bd.floquet_windows(drive)
    # The gaps from the closed form: 2|theta1 - theta2|/T at 0 and 2(pi - theta1 - theta2)/T
    # ... folded into (0, 2 pi/T) at pi (T = 2).
    assert windows["0"].gap == pytest.approx(abs(theta1 - theta2), abs=1e-6)
    assert windows["pi"].gap == pytest.approx(abs(np.pi - theta1 - theta2), abs=1e-6)
    r = bd.floquet_box_modes(factors, (30,), windows, max_side=120)
    zero = theta1 < theta2
    pi = theta1 + theta2 > np.pi
    assert r["0"].per_corner.tolist() == ([1, 1] if zero else [0, 0])
    assert r["pi"].per_corner.tolist() == ([1, 1] if pi else [0, 0])


def test_driven_chain_levels_match_a_plain_reference():
    # scipy.linalg.expm of the two dense chain matrices, eigenvalues by numpy: the levels near
    # pi/T that both solver paths report must be exactly these.
    period, cells = 2.0, 40
    drive = ssh_drive(1.2, 2.4, period)
    factors = drive.factors()
    windows = bd.floquet_windows(drive)
    u = np.eye(2 * cells, dtype=complex)
    for t, tb in factors:
        u = expm(-1j * t * samples.chain(tb, cells).toarray()) @ u
    eps = -np.angle(np.linalg.eigvals(u)) / period
    rel = (eps - np.pi / period + np.pi / period) % (2 * np.pi / period) - np.pi / period
    ref = np.sort(rel[np.abs(rel) <= windows["pi"].halfwidth])
    for method in ("dense", "sparse"):
        got = bd.floquet_box_modes(factors, (cells,), windows, method=method)["pi"]
        assert got.method == method
        np.testing.assert_allclose(got.levels, ref, atol=1e-8)


def test_driven_flake_sparse_and_dense_agree():
    # Two-step BBH drive (intra-cell bonds, then inter-cell bonds), the 2D analogue of the SSH
    # drive above; Lanczos on (U + U^dagger)/2 against the dense U on a 12 x 12 flake, at the
    # 0 gap only (the pi path of both solvers is checked on the chain above).
    drive = two_step("bbh", dict(gamma=0.5, lam=0.0), dict(gamma=0.0, lam=1.2))
    factors = drive.factors()
    windows = {"0": bd.floquet_windows(drive)["0"]}
    dense = bd.floquet_box_modes(factors, (12, 12), windows, method="dense")["0"]
    sparse = bd.floquet_box_modes(factors, (12, 12), windows, method="sparse")["0"]
    assert dense.per_corner.tolist() == sparse.per_corner.tolist() == [1, 1, 1, 1]
    np.testing.assert_allclose(sparse.levels, dense.levels, atol=1e-8)


def test_static_limit_of_a_drive():
    # Two identical steps: U = exp(-i H T), so with T small enough that the bands stay inside
    # (-pi/T, pi/T) the 0-gap results are the static ones and nothing sits at pi.
    tb = model("qwz", m=1.0)
    drive = StepDrive(0.6, ((0.3, tb), (0.3, tb)))
    factors = drive.factors()
    windows = bd.floquet_windows(drive)
    assert windows["0"].gap == pytest.approx(bd.static_window(tb).gap, abs=1e-6)
    rib = bd.floquet_ribbon_modes(factors, 16, windows)
    assert rib["0"].chiral == bd.ribbon_modes(tb, 16, bd.static_window(tb)).chiral != 0
    assert rib["pi"].chiral == 0 and rib["pi"].edge_gap > 4.0


def rlbl(j_hop: float, delta: float, period: float = 5.0) -> StepDrive:
    """Five-step drive of Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013), built by hand.

    Square lattice, A at (0, 0) and B at (1/2, 1/2) of each cell; step s (duration T/5) couples
    each A to one B neighbour, in the order of the cells (0, 0), (-1, 0), (-1, -1), (0, -1)
    (north-east, north-west, south-west, south-east); step 5 is a sublattice potential.
    """
    pos = [[0.0, 0.0], [0.5, 0.5]]
    steps = []
    for cell in ((0, 0), (-1, 0), (-1, -1), (0, -1)):
        if cell == (0, 0):
            steps.append(assemble(np.eye(2), pos, j_hop * np.array([[0, 1], [1, 0]]), []))
        else:
            t = np.zeros((2, 2), complex)
            t[0, 1] = j_hop
            steps.append(assemble(np.eye(2), pos, np.zeros((2, 2)), [(cell, t)]))
    steps.append(assemble(np.eye(2), pos, delta * np.diag([1.0, -1.0]), []))
    return StepDrive(period, tuple((period / 5, s) for s in steps))


def test_anomalous_drive_has_chiral_edge_modes_in_both_gaps():
    # Rudner et al. (2013): near J T/5 = pi/2 both bands have Chern number 0 but every gap
    # carries one chiral edge mode; the band between the gaps has C = n_pi - n_0 = 0.
    drive = rlbl(0.9 * np.pi / 2, 0.3)
    factors = drive.factors()
    windows = bd.floquet_windows(drive)
    a1 = bd.floquet_ribbon_modes(factors, 10, windows, open_axis=0)
    a2 = bd.floquet_ribbon_modes(factors, 10, windows, open_axis=1)
    for g in ("0", "pi"):
        assert abs(a1[g].chiral) == 1 and a2[g].chiral == -a1[g].chiral
        assert a1[g].edge_gap < 1e-6
    assert a1["0"].chiral == a1["pi"].chiral
    # Weak driving with no potential: the bands touch at quasienergy 0.
    weak = bd.floquet_windows(rlbl(0.3, 0.0))
    r = bd.floquet_ribbon_modes(rlbl(0.3, 0.0).factors(), 10, weak)
    assert r["0"].reason == Reason.GAP_CLOSED and r["pi"].chiral == 0


def test_driven_measurements_through_a_point():
    pt = Point(params={"v": 0.0}, build=lambda p: model("ssh", v=0.5), drive=ssh_drive(1.2, 2.4))
    out = MEASUREMENTS["end_modes"].func(pt, cells=24)
    names = {q.name for q in MEASUREMENTS["end_modes"].extra["quantities"](1, True)}
    assert set(out) == names | {"reason"}
    assert (out["end_modes_0"], out["end_modes_pi"]) == (2, 2)
    assert out["end_modes_pi_left"] == out["end_modes_pi_right"] == 1
    pt = Point(params={}, build=lambda p: model("bbh", gamma=0.5),
               drive=two_step("bbh", dict(gamma=0.5, lam=0.0), dict(gamma=0.0, lam=1.2)))
    out = MEASUREMENTS["corner_modes"].func(pt, size=12)
    assert out["corner_modes_0"] == 4 and out["corner_modes_pi"] == 0
    assert out["reason"] == {"0": Reason.OK, "pi": Reason.OK}


def test_driven_edge_modes_through_a_point():
    pt = Point(params={}, build=lambda p: model("qwz", m=1.0), drive=rlbl(0.9 * np.pi / 2, 0.3))
    out = MEASUREMENTS["edge_modes"].func(pt, width=10)
    names = {q.name for q in MEASUREMENTS["edge_modes"].extra["quantities"](2, True)}
    assert set(out) == names | {"reason"} and out["reason"] == {"0": Reason.OK, "pi": Reason.OK}
    assert abs(out["chiral_edge_modes_pi"]) == 1 == abs(out["chiral_edge_modes_0"])
