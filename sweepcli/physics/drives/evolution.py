"""The one time-evolution routine that serves every drive, and the decision of its slicing.

Conventions are those of :mod:`sweepcli.physics.drives.base`: ``U = T exp(-i int H dt)`` as
the time-ordered product of a drive's factors, batched Bloch matrices ``(..., n, n)`` or the
sparse matrix of an open sample acting on a block of vectors.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.special import jv

from ..lattice import TightBinding, kmesh
from .base import Drive, Factor

Matrix = np.ndarray | sp.spmatrix | sp.sparray

#: Relative tolerance of the Dirac-type test ``(H - tr H / n)^2 = |d|^2 1``.
DIRAC_RTOL = 1e-10
#: Open samples up to this many orbitals may be evolved densely when no vectors are given.
DENSE_LIMIT = 2000
#: Points per direction of the bulk mesh on which the time slicing of a sliced drive is decided.
SLICING_KMESH = 8
#: Chebyshev terms are kept until the Bessel coefficients fall below this (absolute).
CHEBYSHEV_TOL = 1e-15


class ChebyshevPlan:
    """What :func:`chebyshev_propagate` needs for one sparse ``h`` and one time ``t``, built once.

    The spectral bounds, the scaled matrix ``g = (h - a) / b`` and the Bessel coefficients
    depend only on ``h`` and ``t``; a Lanczos run applies the same few steps thousands of times,
    so they are computed here once and :meth:`apply` only runs the recurrence. The adjoint
    ``exp(+i t h)`` shares ``g`` and uses the complex-conjugate coefficients (``J_k`` is real).

    The number of terms is the first ``k > b |t|`` with ``|J_k(b t)| <= CHEBYSHEV_TOL``
    (beyond ``b |t|`` the Bessel functions fall monotonically and super-exponentially, so the
    neglected tail is below the last kept term), and ``b`` is the half-width of the interval
    that holds the spectrum: Gershgorin discs, or the tighter ``bounds`` when the caller knows
    them (an open sample's spectrum lies inside the range of its bulk bands,
    :func:`sweepcli.physics.samples.spectral_bounds`); fewer terms, same accuracy.

    Parameters
    ----------
    h : (N, N) sparse Hermitian; t : time (any real).
    bounds : optional ``(lo, hi)`` known to contain the spectrum of ``h`` (intersected with the
        Gershgorin interval).
    """

    def __init__(self, h: sp.spmatrix, t: float,
                 bounds: tuple[float, float] | None = None) -> None:
        h = sp.csr_matrix(h)
        self.n = h.shape[0]
        self.trivial = t == 0 or h.nnz == 0
        if self.trivial:
            return
        diag = h.diagonal().real
        radius = np.asarray(abs(h).sum(axis=1)).ravel() - np.abs(diag)
        lo, hi = float(np.min(diag - radius)), float(np.max(diag + radius))
        if bounds is not None:
            lo, hi = max(lo, float(bounds[0])), min(hi, float(bounds[1]))
            if not hi >= lo:
                raise ValueError(f"spectral bounds {bounds} miss the Gershgorin interval")
        a, b = 0.5 * (hi + lo), max(0.5 * (hi - lo), 1e-300)
        x = b * abs(t)
        kmax = int(x) + 1
        while abs(jv(kmax, x)) > CHEBYSHEV_TOL:
            kmax += 1
        coeff = jv(np.arange(kmax + 1), x) * (-1j * np.sign(t)) ** np.arange(kmax + 1)
        coeff[1:] *= 2
        self.coeff = coeff
        self.coeff_adjoint = coeff.conj()
        self.phase = np.exp(-1j * a * t)
        self.g = sp.csr_matrix((h - a * sp.identity(self.n, format="csr")) / b)
        self.g.sort_indices()

    @property
    def terms(self) -> int:
        """Sparse products per application (0 for a trivial step)."""
        return 0 if self.trivial else self.coeff.size - 1

    def apply(self, vectors: np.ndarray, adjoint: bool = False) -> np.ndarray:
        """``exp(-i t h) @ vectors`` (``exp(+i t h) @ vectors`` when ``adjoint``)."""
        psi = np.asarray(vectors, dtype=complex)
        if self.trivial:
            return psi.copy()
        coeff = self.coeff_adjoint if adjoint else self.coeff
        g = self.g
        prev, cur = psi, g @ psi
        out = coeff[0] * prev + coeff[1] * cur
        for c in coeff[2:]:
            nxt = g @ cur
            nxt *= 2
            nxt -= prev
            prev, cur = cur, nxt
            out += c * cur
        out *= np.conj(self.phase) if adjoint else self.phase
        return out


def chebyshev_propagate(h: sp.spmatrix, t: float, vectors: np.ndarray) -> np.ndarray:
    """``exp(-i t h) @ vectors`` for a sparse Hermitian ``h`` by a Chebyshev expansion.

    Tal-Ezer and Kosloff, J. Chem. Phys. 81, 3967 (1984): with the spectrum of ``h`` inside
    ``[a - b, a + b]`` (Gershgorin discs, so no estimate can fail) and ``g = (h - a) / b``,
    ``exp(-i t h) = exp(-i a t) sum_k (2 - delta_k0) (-i)^k J_k(b t) T_k(g)``, summed by the
    three-term recurrence ``T_{k+1}(g) v = 2 g T_k(g) v - T_{k-1}(g) v``. The Bessel functions
    fall off super-exponentially for ``k > b t``, so about ``b t + 20`` sparse products with
    the whole block of vectors give machine precision, with no per-call norm estimates (which
    dominated ``scipy.sparse.linalg.expm_multiply`` on the repeated applications of a
    Lanczos run). Repeated applications of one step should build its :class:`ChebyshevPlan`
    once.

    Parameters
    ----------
    h : (N, N) sparse Hermitian; t : time (any real); vectors : (N,) or (N, m).
    """
    return ChebyshevPlan(h, t).apply(vectors)


def _dirac_exponential(h: np.ndarray, t: float | np.ndarray, rtol: float) -> np.ndarray | None:
    """``exp(-i t h)`` in closed form if ``(h - tr h / n)^2 = |d|^2 1`` over the whole batch.

    For ``h = d0 + d.Gamma`` with anticommuting ``Gamma`` (every 2x2 Hermitian matrix, BHZ-type
    4x4 models): ``exp(-i t h) = exp(-i d0 t) [cos(|d| t) - i sin(|d| t) d.Gamma / |d|]``.
    Returns ``None`` when the test fails anywhere in the batch. ``t`` is a scalar or an array
    broadcasting against the batch shape ``h.shape[:-2]``.
    """
    n = h.shape[-1]
    eye = np.eye(n)
    d0 = np.trace(h, axis1=-2, axis2=-1) / n
    a = h - d0[..., None, None] * eye
    a2 = a @ a
    s = np.real(np.trace(a2, axis1=-2, axis2=-1)) / n
    scale = 1.0 + float(np.max(np.abs(s), initial=0.0))
    if np.max(np.abs(a2 - s[..., None, None] * eye), initial=0.0) > rtol * scale:
        return None
    r = np.sqrt(np.maximum(s, 0.0))
    t = np.asarray(t, dtype=float)
    c = np.cos(r * t)
    sinc = t * np.sinc(r * t / np.pi)  # sin(r t) / r, finite at r = 0
    return np.exp(-1j * d0 * t)[..., None, None] * (c[..., None, None] * eye
                                                     - 1j * sinc[..., None, None] * a)


def hermitian_exponential(h: np.ndarray, t: float | np.ndarray, *, closed_form: bool = True,
                          rtol: float = DIRAC_RTOL) -> np.ndarray:
    """``exp(-i t h)`` for a batch ``h`` of Hermitian matrices ``(..., n, n)``.

    ``t`` is a scalar or an array broadcasting against ``h.shape[:-2]``. The closed form of
    :func:`_dirac_exponential` is used when ``closed_form`` and the whole batch is of Dirac
    type; otherwise ``numpy.linalg.eigh``.
    """
    h = np.asarray(h, dtype=complex)
    if closed_form:
        u = _dirac_exponential(h, t, rtol)
        if u is not None:
            return u
    w, v = np.linalg.eigh(h)
    t = np.asarray(t, dtype=float)[..., None]
    return (v * np.exp(-1j * t * w)[..., None, :]) @ np.conj(np.swapaxes(v, -1, -2))


def evolve(factors: Iterable[tuple[float, Matrix]], vectors: np.ndarray | None = None, *,
           closed_form: bool = True, dense_limit: int = DENSE_LIMIT) -> np.ndarray:
    """Time-ordered product ``U = U_last ... U_first``, ``U_j = exp(-i d_j H_j)``.

    Parameters
    ----------
    factors : iterable of (duration, matrix) in time order
        Either dense Hermitian arrays ``(..., n, n)`` (batch axes broadcast, e.g. a k-mesh) or
        scipy.sparse ``(N, N)`` matrices of an open sample. Consumed lazily, so a generator
        keeps only one factor's matrices in memory.
    vectors : optional ``(..., n, m)`` or ``(N, m)``
        If given, return ``U @ vectors`` (for sparse matrices by
        :func:`chebyshev_propagate`, never forming ``U``).
    closed_form : use the Dirac-type closed form where a factor's whole batch allows it.
    dense_limit : sparse matrices up to this size are evolved densely when ``vectors`` is
        ``None``; larger ones require ``vectors``.

    Returns
    -------
    ``U`` of shape ``(..., n, n)``, or ``U @ vectors``.
    """
    it = iter(factors)
    first = next(it, None)
    if first is None:
        raise ValueError("no factors to evolve")
    chain = itertools.chain([first], it)
    if sp.issparse(first[1]):
        n = first[1].shape[-1]
        if vectors is None:
            if n > dense_limit:
                raise ValueError(f"an open sample of {n} orbitals is too large to form U; pass "
                                 f"a block of vectors")
            dense = ((d, m.toarray() if sp.issparse(m) else np.asarray(m)) for d, m in chain)
            return evolve(dense, closed_form=closed_form)
        psi = np.asarray(vectors, dtype=complex)
        for d, m in chain:
            psi = chebyshev_propagate(m, d, psi)
        return psi
    if vectors is not None:
        psi = np.asarray(vectors, dtype=complex)
        for d, m in chain:
            m = m.toarray() if sp.issparse(m) else m
            psi = hermitian_exponential(m, d, closed_form=closed_form) @ psi
        return psi
    u = None
    for d, m in chain:
        m = m.toarray() if sp.issparse(m) else m
        step = hermitian_exponential(m, d, closed_form=closed_form)
        u = step if u is None else step @ u
    return u


class FactorStack:
    """All factors of a drive stacked, for many evaluations at a few momenta.

    Root finders and minimisers call ``U(k)`` at one k hundreds of times; for a harmonic drive
    with hundreds of factors a Python loop over the factors would dominate. Here the Bloch
    matrices of all factors are built with one ``einsum``, exponentiated as one batch and
    multiplied by pairwise (tree) reduction in time order. Memory grows as
    ``batch x factors x n^2``, so use it for small k batches only.

    Parameters
    ----------
    factors : list of (duration, TightBinding) in time order.
    """

    def __init__(self, factors: Sequence[Factor]) -> None:
        if not factors:
            raise ValueError("no factors to stack")
        self.durations = np.array([d for d, _ in factors], dtype=float)
        keys = sorted(set().union(*(tb.hoppings for _, tb in factors)))
        n = factors[0][1].norb
        dim = factors[0][1].dim
        self.onsite = np.stack([tb.onsite for _, tb in factors])
        self.disp = np.array(keys, dtype=float).reshape(len(keys), dim)
        zero = np.zeros((n, n), complex)
        self.hops = np.array([[tb.hoppings.get(r, zero) for r in keys] for _, tb in factors],
                             dtype=complex).reshape(len(factors), len(keys), n, n)

    def bloch(self, k: np.ndarray) -> np.ndarray:
        """``(..., F, n, n)`` Bloch matrices of all factors at momenta ``(..., d)``."""
        k = np.asarray(k, dtype=float)
        phase = np.exp(1j * (k @ self.disp.T))
        h = np.einsum("...m,fmij->...fij", phase, self.hops)
        return self.onsite + h + np.conj(np.swapaxes(h, -1, -2))

    def operator(self, k: np.ndarray, *, closed_form: bool = True) -> np.ndarray:
        """``U(k) = U_F ... U_1`` of shape ``(..., n, n)``."""
        u = hermitian_exponential(self.bloch(k), self.durations, closed_form=closed_form)
        while u.shape[-3] > 1:
            if u.shape[-3] % 2:
                eye = np.broadcast_to(np.eye(u.shape[-1], dtype=complex),
                                      u.shape[:-3] + (1,) + u.shape[-2:])
                u = np.concatenate([u, eye], axis=-3)
            u = u[..., 1::2, :, :] @ u[..., 0::2, :, :]  # later @ earlier
        return u[..., 0, :, :]


@dataclass(frozen=True)
class Evolution:
    """Result of :func:`floquet_evolution`.

    Attributes
    ----------
    u : ``(..., n, n)`` evolution operator (or ``U @ vectors``).
    error : float
        0 for exact drives; for a sliced drive the largest absolute entry change between the
        last two slice counts (an estimate of the error of the coarser).
    slices : int
        Slices per period used (1 for exact drives).
    converged : bool
        ``error <= drive.tol`` (always true for exact drives).
    """

    u: np.ndarray
    error: float
    slices: int
    converged: bool


def _bloch_of(k: np.ndarray) -> Callable[[TightBinding], np.ndarray]:
    cache: dict[int, tuple[TightBinding, np.ndarray]] = {}

    def matrix(tb: TightBinding) -> np.ndarray:
        # Step drives reuse the same few TightBinding objects across frames.
        hit = cache.get(id(tb))
        if hit is None or hit[0] is not tb:
            hit = (tb, tb.bloch(k))
            cache[id(tb)] = hit
        return hit[1]

    return matrix


@dataclass(frozen=True)
class Slicing:
    """The time slicing of a drive, decided once (:func:`decide_slicing`) and then reused.

    Attributes
    ----------
    slices : slices per period (1 for step and kick drives, whose factors are exact).
    error : largest entry change of the bulk ``U(k)`` between the last two slice counts (0 for
        exact drives).
    converged : ``error < drive.tol`` (always true for step and kick drives).
    """

    slices: int
    error: float
    converged: bool


def floquet_evolution(drive: Drive, k: np.ndarray | None = None, *, start: float = 0.0,
                      stop: float | None = None,
                      matrix_of: Callable[[TightBinding], Matrix] | None = None,
                      vectors: np.ndarray | None = None, closed_form: bool = True,
                      slicing: Slicing | None = None) -> Evolution:
    """Evolution of ``drive`` from ``start`` to ``stop`` (default one period).

    Parameters
    ----------
    drive : any :class:`~sweepcli.physics.drives.base.Drive`.
    k : ``(..., d)`` reduced momenta; the factors become ``tb.bloch(k)``.
    matrix_of : alternatively, a map ``TightBinding -> matrix`` (e.g. an open-sample builder
        returning scipy.sparse); then ``vectors`` may be given.
    vectors : see :func:`evolve`.
    slicing : a slicing already decided (:func:`decide_slicing`): a sliced drive is
        then evolved once at ``slicing.slices`` and the result carries that decision's error
        and convergence.

    Returns
    -------
    Evolution
        For a sliced drive without ``slicing`` the slices are doubled from
        ``min_slices`` until the result on this batch changes by less than ``drive.tol`` or
        ``max_slices`` is reached.
    """
    if matrix_of is None:
        if k is None:
            raise ValueError("give the momenta k or a matrix_of map")
        k = np.asarray(k, dtype=float)
        # Exact drives reuse a few TightBinding objects; slices are all distinct.
        matrix_of = _bloch_of(k) if drive.exact else (lambda tb: tb.bloch(k))

    def run(slices: int | None) -> np.ndarray:
        fs = drive.factors(start, stop, slices=slices)
        return evolve(((d, matrix_of(tb)) for d, tb in fs), vectors, closed_form=closed_form)

    if drive.exact:
        return Evolution(run(None), 0.0, 1, True)
    if slicing is not None:
        return Evolution(run(slicing.slices), slicing.error, slicing.slices, slicing.converged)
    n = drive.min_slices
    prev = run(n)
    err = math.inf
    while 2 * n <= drive.max_slices:
        n *= 2
        cur = run(n)
        err = float(np.max(np.abs(cur - prev)))
        prev = cur
        if err < drive.tol:
            break
    return Evolution(prev, err, n, err < drive.tol)


def decide_slicing(drive: Drive) -> Slicing:
    """The time slicing of ``drive``, decided on the bulk ``U(k)`` of a coarse mesh.

    The mesh has ``SLICING_KMESH`` points per direction.

    Exact drives (steps, kicks) need one slice. For a sliced drive the slices are
    doubled (:func:`floquet_evolution`) until ``U(k)`` on the mesh changes by less than
    ``drive.tol``. The coarse mesh suffices: the stepping error is a smooth function of k that
    varies on the scale of the hopping range (the mesh holds the zone centre and the zone-edge
    points), and the operator kept is the finer of the last two, whose error is ~16 times below
    the change measured (fourth-order scheme). Grid points and the transition prediction decide
    once and pass the result to every evolution (bulk meshes, lines, frames, open samples).
    """
    if drive.exact:
        return Slicing(1, 0.0, True)
    ev = floquet_evolution(drive, kmesh(SLICING_KMESH, drive.dim))
    return Slicing(ev.slices, ev.error, ev.converged)


def floquet_operator(drive: Drive, k: np.ndarray, *, start: float = 0.0,
                     slicing: Slicing | None = None) -> np.ndarray:
    """``U(k) = U(start + T, start)`` for reduced momenta ``k`` of shape ``(..., d)``.

    Returns ``(..., n, n)``. For a sliced drive use :func:`floquet_evolution` to see
    whether the time slicing converged.
    """
    return floquet_evolution(drive, k, start=start, slicing=slicing).u
