"""Open samples built from the bulk description: chains, ribbons, flakes, sites and sizing.

References used here: the SSH real-space Hamiltonian of Asboth, Oroszlany and Palyi, A Short
Course on Topological Insulators (Springer 2016), eq. 1.1; the Qi-Wu-Zhang H(k) (Qi, Wu and
Zhang, PRB 74, 085308 (2006)) turned into real space by hand with the rules derived in
``_qwz_by_hand``; and scipy's SuperLU for the size of a real factorisation.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from sweepcli.physics import samples
from sweepcli.physics.lattice import kmesh
from sweepcli.physics.models import MODELS


def model(name: str, **kw):
    return MODELS[name].func(**kw)


def test_ssh_chain_equals_hand_written_matrix():
    # Asboth et al. eq. 1.1: H = v sum_m (|m,B><m,A| + h.c.) + w sum_m (|m+1,A><m,B| + h.c.),
    # basis |m,A> = 2m, |m,B> = 2m+1.
    v, w, n = 0.3, 1.1, 7
    ref = np.zeros((2 * n, 2 * n))
    for m in range(n):
        ref[2 * m + 1, 2 * m] = ref[2 * m, 2 * m + 1] = v
    for m in range(n - 1):
        ref[2 * (m + 1), 2 * m + 1] = ref[2 * m + 1, 2 * (m + 1)] = w
    h = samples.chain(model("ssh", v=v, w=w), n)
    assert sp.issparse(h) and h.format == "csr"
    np.testing.assert_allclose(h.toarray(), ref, atol=1e-14)


def _qwz_by_hand(m: float, lx: int, ly: int, open_y: bool = True) -> np.ndarray:
    """Open QWZ flake from H(k) = sin k1 sx + sin k2 sy + (m + cos k1 + cos k2) sz.

    With ``S[c, c+1] = 1`` (hop to the next cell), a Bloch factor ``e^{ik}`` becomes ``S``, so
    ``cos k -> (S + S^T)/2`` and ``sin k -> (S - S^T)/(2i)``; cells ordered x-major.
    """
    sx = np.array([[0, 1], [1, 0]], complex)
    sy = np.array([[0, -1j], [1j, 0]])
    sz = np.diag([1.0 + 0j, -1.0])

    def shift(n):
        return np.eye(n, k=1)

    ix, iy = np.eye(lx), np.eye(ly)
    cx = np.kron((shift(lx) + shift(lx).T) / 2, iy)
    snx = np.kron((shift(lx) - shift(lx).T) / 2j, iy)
    cy = np.kron(ix, (shift(ly) + shift(ly).T) / 2)
    sny = np.kron(ix, (shift(ly) - shift(ly).T) / 2j)
    return (np.kron(snx, sx) + np.kron(sny, sy) + np.kron(m * np.eye(lx * ly) + cx + cy, sz))


def test_qwz_flake_equals_hand_written_matrix():
    m = 0.7
    h = samples.flake(model("qwz", m=m), 4, 3)
    assert h.shape == (24, 24)
    np.testing.assert_allclose(h.toarray(), _qwz_by_hand(m, 4, 3), atol=1e-14)


def test_qwz_ribbon_equals_hand_written_bloch_matrix():
    # Ribbon open along a_2 (W cells), periodic along a_1 with momentum k:
    # H(k) = 1_W (x) [sin k sx + (m + cos k) sz] + (the a_2 bonds of a hand-written 1 x W flake).
    m, width = -0.4, 5
    rb = samples.ribbon(model("qwz", m=m), width, open_axis=1)
    k = np.linspace(-np.pi, np.pi, 7)
    sx = np.array([[0, 1], [1, 0]], complex)
    sz = np.diag([1.0 + 0j, -1.0])
    open_part = _qwz_by_hand(0.0, 1, width)  # one cell along a_1: only the a_2 bonds remain
    ref = np.array([np.kron(np.eye(width), np.sin(q) * sx + (m + np.cos(q)) * sz) + open_part
                    for q in k])
    np.testing.assert_allclose(rb.bloch(k[:, None]), ref, atol=1e-14)
    assert rb.dim == 1 and rb.norb == 2 * width


@pytest.mark.parametrize("name, kw", [("haldane", dict(t2=0.15, phi=0.7, M=0.2)),
                                      ("bhz_corner", dict(m=0.8, delta2=0.4)),
                                      ("bbh", dict(gamma=0.3))])
@pytest.mark.parametrize("open_axis", [0, 1])
def test_ribbon_and_torus_spectra_agree_with_bulk(name, kw, open_axis):
    # A box periodic in both directions has exactly the bulk eigenvalues on the commensurate
    # mesh (numpy.linalg.eigh on H(k)); a box open along one direction has exactly the ribbon
    # eigenvalues at k_par = 2 pi j / L_par.
    tb = model(name, **kw)
    torus = samples.open_hamiltonian(tb, (4, 3), periodic=(True, True)).toarray()
    bulk = np.linalg.eigvalsh(tb.bloch(kmesh((4, 3), 2))).ravel()
    np.testing.assert_allclose(np.linalg.eigvalsh(torus), np.sort(bulk), atol=1e-12)
    width, lpar = 4, 5
    shape = [lpar, lpar]
    shape[open_axis] = width
    per = [True, True]
    per[open_axis] = False
    cyl = samples.open_hamiltonian(tb, shape, periodic=per).toarray()
    kp = 2 * np.pi * np.arange(lpar) / lpar
    rib = np.linalg.eigvalsh(samples.ribbon(tb, width, open_axis).bloch(kp[:, None])).ravel()
    np.testing.assert_allclose(np.linalg.eigvalsh(cyl), np.sort(rib), atol=1e-12)


def test_open_samples_are_hermitian_and_drop_outgoing_bonds():
    tb = model("haldane", t2=0.1, phi=0.5, M=0.1)
    h = samples.flake(tb, 5)
    assert abs(h - h.conj().T).max() < 1e-14
    # An open box loses the bonds that leave it, so it has fewer entries than the torus.
    assert h.nnz < samples.open_hamiltonian(tb, (5, 5), periodic=(True, True)).nnz


def test_sample_sites_honeycomb_bond_lengths():
    # Haldane's honeycomb (t2 = 0): every nearest-neighbour bond joins an A and a B site at
    # distance 1/sqrt(3) (lattice constant 1), a property of the geometry alone.
    tb = model("haldane", t2=0.0, phi=0.0, M=0.0)
    h = samples.flake(tb, 4).tocoo()
    cells, pos = samples.sample_sites(tb, (4, 4))
    nz = np.abs(h.data) > 1e-12
    d = np.linalg.norm(pos[h.row[nz]] - pos[h.col[nz]], axis=1)
    np.testing.assert_allclose(d, 1 / np.sqrt(3), atol=1e-12)
    assert cells.shape == (32, 2) and cells.max() == 3
    # Orbital order: I = c * n + o with the last direction fastest.
    np.testing.assert_array_equal(cells[:6], [[0, 0], [0, 0], [0, 1], [0, 1], [0, 2], [0, 2]])


def test_sparse_estimate_bounds_a_real_factorisation():
    # The sparse estimate must not undershoot the LU factors SuperLU actually makes for the
    # shift-invert step (complex entries, 16 bytes each, plus a 4-byte index).
    tb = model("bhz_corner", m=1.0, delta2=0.5)
    h = samples.flake(tb, 24).tocsc()
    lu = splu((h - 1e-3 * sp.identity(h.shape[0])).tocsc())
    factors = 20.0 * (lu.L.nnz + lu.U.nnz)
    assert samples.memory_estimate(tb, (24, 24), "sparse") > factors
    # The dense estimate covers at least the matrix and its eigenvectors.
    n = h.shape[0]
    assert samples.memory_estimate(tb, (24, 24), "dense") >= 2 * 16 * n**2


def test_too_large_sample_fails_before_any_matrix_is_built(monkeypatch):
    def no_build(*args, **kwargs):
        raise AssertionError("the sample was built before its size was checked")

    monkeypatch.setattr(samples, "open_hamiltonian", no_build)
    tb = model("bbh", gamma=0.5)
    with pytest.raises(ValueError) as err:
        samples.choose_method(tb, (3000, 3000), "auto", limit=24 * 2**30)
    msg = str(err.value)
    assert "3000 x 3000 cells x 4 orbitals (36,000,000 orbitals)" in msg
    assert "GiB with the sparse method" in msg and "limit is 24 GiB" in msg
    with pytest.raises(ValueError, match="GiB with the dense method"):
        samples.choose_method(tb, (300, 300), "dense", limit=24 * 2**30)


def test_auto_method_by_size():
    tb = model("bbh", gamma=0.5)
    assert samples.choose_method(tb, (8, 8)) == "dense"
    assert samples.choose_method(tb, (40, 40)) == "sparse"
    # Forming U densely stays competitive for larger driven samples (measured crossovers).
    assert samples.choose_method(tb, (16, 16)) == "sparse"
    assert samples.choose_method(tb, (16, 16), driven=True) == "dense"
    with pytest.raises(ValueError, match="method must be"):
        samples.choose_method(tb, (8, 8), "lanczos")


def test_bad_shapes():
    tb = model("ssh", v=0.5)
    with pytest.raises(ValueError, match="needs 1 sizes"):
        samples.open_hamiltonian(tb, (3, 3))
    with pytest.raises(ValueError, match="needs a 2D model"):
        samples.ribbon(tb, 4)


@pytest.mark.parametrize("name, params", [("bhz_corner", dict(m=3.0, delta2=0.8)),
                                          ("haldane", dict(t2=0.3, phi=0.5, M=0.2)),
                                          ("ssh", dict(v=0.5))])
def test_spectral_bounds_hold_open_boxes_and_are_tight(name, params):
    """Every open box's levels (numpy eigvalsh written here) lie inside the bulk band range
    (the box is a compression of the infinite lattice), and the bound is within its mesh slack
    of the true band edges (bulk bands on a fine mesh), far tighter than Gershgorin."""
    tb = MODELS[name].func(**params)
    lo, hi = samples.spectral_bounds(tb)
    shape = (9,) * tb.dim
    h = samples.open_hamiltonian(tb, shape).toarray()
    e = np.linalg.eigvalsh(h)
    assert lo <= e.min() and e.max() <= hi
    bands = np.linalg.eigvalsh(tb.bloch(kmesh(256, tb.dim).reshape(-1, tb.dim))) if tb.dim == 1 \
        else np.linalg.eigvalsh(tb.bloch(kmesh(128, tb.dim).reshape(-1, tb.dim)))
    assert lo <= bands.min() and bands.max() <= hi
    slope = sum(2 * np.abs(r).sum() * np.linalg.norm(t, 2) for r, t in tb.hoppings.items())
    slack = slope * np.pi / samples.BOUNDS_KMESH + 1e-9
    assert bands.min() - lo <= slack and hi - bands.max() <= slack
