"""The states behind a boundary-mode count: eigenvectors, densities and whole spectra of samples.

:mod:`sweepcli.physics.boundary` counts modes and keeps only the levels; a picture of one grid
point also needs the in-gap eigenvectors (where the modes sit), the whole spectrum of the
sample (where the window lies in it) and the ribbon bands with their weight on the low edge.
Everything here is composed from the functions that produce the counts --
:func:`~sweepcli.physics.samples.open_hamiltonian`,
:func:`~sweepcli.physics.boundary.static_levels`,
:func:`~sweepcli.physics.boundary.floquet_levels`, :func:`~sweepcli.physics.boundary.classify`,
:func:`~sweepcli.physics.samples.ribbon`, :func:`~sweepcli.physics.drive.evolve` -- with the same
arguments, so a count found here is the count a run stores (no second model or solver).

Conventions are those of :mod:`sweepcli.physics.boundary` and :mod:`sweepcli.physics.samples`:
sample orbital ``I = c * n + o`` (C order over cells), levels relative to the window centre,
quasienergies ``eps = -arg(lambda) / T``, reduced momentum ``k_par = k . a_p`` in radians.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from scipy.sparse.linalg import ArpackNoConvergence

from . import boundary as bd
from . import samples
from .drive import evolve
from .lattice import TightBinding
from .point import Reason


@dataclass(frozen=True)
class BoxStates:
    """In-window states of a box sample (chain or flake) at one gap.

    Attributes
    ----------
    levels : (m,) float
        In-window levels relative to the window centre (energy), ascending.
    vectors : (N, m) complex
        Their eigenvectors (columns, sample orbital order), orthonormal: for a static sample
        the Rayleigh-Ritz vectors of the solver's span (see :func:`box_states`).
    kinds : (m,) int
        Class of each level's cluster: 0 bulk, 1 edge, 2 corner (end).
    per_corner : (2**d,) int or ``None``
        Modes credited to each corner (end), numbered as in :mod:`sweepcli.physics.boundary`.
    total : ``per_corner.sum()`` or ``None``.
    window : the window; method : ``"dense"`` or ``"sparse"``; reason : why counts are missing.
    """

    levels: np.ndarray
    vectors: np.ndarray
    kinds: np.ndarray
    per_corner: np.ndarray | None
    total: int | None
    window: bd.Window
    method: str
    reason: Reason = Reason.OK

    @classmethod
    def missing(cls, n: int, window: bd.Window, method: str, reason: Reason) -> BoxStates:
        return cls(np.zeros(0), np.zeros((n, 0), complex), np.zeros(0, int), None, None,
                   window, method, reason)


def _classified(levels: np.ndarray, vectors: np.ndarray, kind: np.ndarray, corner: np.ndarray,
                ncorner: int, window: bd.Window, method: str) -> BoxStates:
    per_corner, kinds = bd.classify(levels, vectors, kind, corner, ncorner, window.halfwidth)
    return BoxStates(levels, vectors, kinds, per_corner, int(per_corner.sum()), window, method)


def box_states(tb: TightBinding, shape: Sequence[int], window: bd.Window, *,
               corner_size: int = bd.CORNER_SIZE, method: str = "auto",
               gap_tol: float = 1e-6) -> BoxStates:
    """:func:`~sweepcli.physics.boundary.box_modes` keeping the in-window eigenvectors.

    Parameters
    ----------
    tb : the static model; shape : box size in cells, one entry per lattice direction.
    window : from :func:`~sweepcli.physics.boundary.static_window`.
    corner_size, method, gap_tol : as for :func:`~sweepcli.physics.boundary.box_modes`.

    Returns
    -------
    BoxStates; ``levels``, ``kinds``, ``per_corner`` and ``total`` are those of ``box_modes``
    with the same arguments (computed from the solver's vectors); ``vectors`` are orthonormal
    eigenvectors of the same span, ascending with ``levels``.

    Raises
    ------
    ValueError for a sample too small for its corner regions or too large for memory.
    """
    shape = tuple(int(x) for x in shape)
    bd.check_region_size(shape, corner_size)
    method = samples.choose_method(tb, shape, method)
    kind, corner = bd.regions(samples.sample_sites(tb, shape)[0], shape, corner_size)
    n = kind.size
    if window.closed(gap_tol):
        return BoxStates.missing(n, window, method, Reason.GAP_CLOSED)
    h = samples.open_hamiltonian(tb, shape)
    try:
        levels, vectors = bd.static_levels(h, window, method)
    except ArpackNoConvergence:
        return BoxStates.missing(n, window, method, Reason.NOT_CONVERGED)
    # Counted from the solver's own vectors, exactly as box_modes counts them.
    out = _classified(levels, vectors, kind, corner, 2 ** len(shape), window, method)
    return replace(out, vectors=_ritz_vectors(h, vectors))


def _ritz_vectors(h, vectors: np.ndarray) -> np.ndarray:
    """Orthonormal eigenvectors spanning the same space (Rayleigh-Ritz), ascending in energy.

    Shift-invert Lanczos returns the vectors of an exactly degenerate pair as eigenvectors that
    are not orthogonal to each other (measured: overlaps up to 0.16 on a 12 x 12 flake of
    bhz_corner); :func:`~sweepcli.physics.boundary.classify` orthonormalises inside each cluster
    and is unaffected, but a density ``sum |psi|^2`` needs orthonormal columns.
    """
    if vectors.shape[1] == 0:
        return vectors
    q, _ = np.linalg.qr(vectors)
    small = q.conj().T @ (h @ q)
    _, z = np.linalg.eigh(0.5 * (small + small.conj().T))
    return q @ z


def floquet_box_states(factors: Sequence[tuple[float, TightBinding]], shape: Sequence[int],
                       windows: dict[str, bd.Window], *, corner_size: int = bd.CORNER_SIZE,
                       method: str = "auto", gap_tol: float = 1e-6) -> dict[str, BoxStates]:
    """:func:`~sweepcli.physics.boundary.floquet_box_modes` keeping the in-window eigenvectors.

    ``factors`` are ``(duration, TightBinding)`` steps in time order, ``windows`` from
    :func:`~sweepcli.physics.boundary.floquet_windows`; returns ``{"0": ..., "pi": ...}`` with
    levels relative to each window's centre (``0`` or ``pi/T``), wrapped to ``[-pi/T, pi/T)``.
    """
    tb0 = factors[0][1]
    shape = tuple(int(x) for x in shape)
    bd.check_region_size(shape, corner_size)
    method = samples.choose_method(tb0, shape, method, driven=True)
    kind, corner = bd.regions(samples.sample_sites(tb0, shape)[0], shape, corner_size)
    steps = None
    out = {}
    for name, window in windows.items():
        if window.closed(gap_tol):
            out[name] = BoxStates.missing(kind.size, window, method, Reason.GAP_CLOSED)
            continue
        steps = bd.sample_steps(factors, shape) if steps is None else steps
        try:
            levels, vectors = bd.floquet_levels(steps, window, method)
        except ArpackNoConvergence:
            out[name] = BoxStates.missing(kind.size, window, method, Reason.NOT_CONVERGED)
            continue
        out[name] = _classified(levels, vectors, kind, corner, 2 ** len(shape), window, method)
    return out


def cell_density(vectors: np.ndarray, norb: int) -> np.ndarray:
    """Density ``sum_a |psi_a(I)|^2`` of a set of states, summed over the orbitals of each cell.

    Parameters
    ----------
    vectors : (N, m) states as columns, ``N = ncell * norb``, sample orbital order.
    norb : orbitals per cell.

    Returns
    -------
    (ncell,) float, in the C order of the cells; its sum is ``sum_a |psi_a|^2`` (``m`` for
    orthonormal states). For states spanning whole degenerate clusters it is the diagonal of
    their projector, hence independent of the basis chosen inside a cluster.
    """
    w = np.sum(np.abs(np.asarray(vectors)) ** 2, axis=1)
    return w.reshape(-1, norb).sum(axis=1)


def box_spectrum(tb: TightBinding, shape: Sequence[int]) -> np.ndarray:
    """All levels (energy, ascending) of the open box sample: dense ``eigvalsh``, ``(N,)``."""
    return np.linalg.eigvalsh(samples.open_hamiltonian(tb, shape).toarray())


def floquet_box_spectrum(factors: Sequence[tuple[float, TightBinding]], shape: Sequence[int]
                         ) -> np.ndarray:
    """All quasienergies of the driven open box sample, ascending in ``[-pi/T, pi/T]``.

    ``U = exp(-i H_last t_last) ... exp(-i H_1 t_1)`` formed densely by
    :func:`~sweepcli.physics.drive.evolve`; ``eps = -arg(lambda) / T``. Returns ``(N,)``.
    """
    period = float(sum(t for t, _ in factors))
    u = evolve([(t, h.toarray()) for t, h in bd.sample_steps(factors, shape)])
    return np.sort(-np.angle(np.linalg.eigvals(u)) / period)


def low_edge_mask(width: int, norb: int) -> np.ndarray:
    """``(width * norb,)`` bool: the orbitals of the low half of a ribbon (cells ``< width // 2``),
    the half whose weight marks a state of the low edge in
    :func:`~sweepcli.physics.boundary.signed_crossings`."""
    mask = np.zeros(width * norb, dtype=bool)
    mask[: (width // 2) * norb] = True
    return mask


@dataclass(frozen=True)
class RibbonBands:
    """Bands of a ribbon against the momentum along the edge.

    Attributes
    ----------
    k : (nk,) reduced momentum ``k_par = k . a_p`` (rad).
    levels : (nk, M) energies (static, ascending per k) or quasienergies in ``[-pi/T, pi/T]``.
    low_weight : (nk, M) weight of each state in the low half of the ribbon (0 .. 1; about 1/2
        for a bulk state, near 1 for a state on the low edge, near 0 on the high edge).
    period : drive period, ``None`` for a static ribbon.
    """

    k: np.ndarray
    levels: np.ndarray
    low_weight: np.ndarray
    period: float | None = None


def ribbon_bands(tb: TightBinding, width: int, k: np.ndarray, open_axis: int = 1) -> RibbonBands:
    """Bands of a static ribbon (:func:`~sweepcli.physics.samples.ribbon`) at ``k (nk,)``.

    Batched ``eigh`` of ``ribbon(tb, width).bloch(k[:, None])`` of shape ``(nk, M, M)``,
    ``M = width * tb.norb``.
    """
    k = np.asarray(k, dtype=float)
    rb = samples.ribbon(tb, width, open_axis)
    e, v = np.linalg.eigh(rb.bloch(k[:, None]))
    low = low_edge_mask(width, tb.norb)
    return RibbonBands(k, e, np.sum(np.abs(v[:, low, :]) ** 2, axis=1))


def floquet_ribbon_bands(factors: Sequence[tuple[float, TightBinding]], width: int,
                         k: np.ndarray, open_axis: int = 1) -> RibbonBands:
    """Quasienergy bands of a driven ribbon at ``k (nk,)``.

    ``U(k_par)`` is the time-ordered product of the steps' ribbon Bloch Hamiltonians, batched
    over ``k`` (as in :func:`~sweepcli.physics.boundary.floquet_ribbon_modes`); its eigenvalues
    give ``eps = -arg(lambda) / T`` (sorted per k) and its normalised eigenvectors the low-edge
    weight.
    """
    k = np.asarray(k, dtype=float)
    period = float(sum(t for t, _ in factors))
    ribbons = [(float(t), samples.ribbon(f, width, open_axis)) for t, f in factors]
    lam, v = np.linalg.eig(evolve([(t, r.bloch(k[:, None])) for t, r in ribbons]))
    v = v / np.linalg.norm(v, axis=-2, keepdims=True)
    eps = -np.angle(lam) / period
    order = np.argsort(eps, axis=-1)
    low = low_edge_mask(width, factors[0][1].norb)
    weight = np.sum(np.abs(v[:, low, :]) ** 2, axis=1)
    return RibbonBands(k, np.take_along_axis(eps, order, axis=-1),
                       np.take_along_axis(weight, order, axis=-1), period)
