"""In-window levels and eigenvectors of one open sample, static or driven.

``method`` is chosen by the caller (:func:`sweepcli.physics.samples.choose_method`: dense up to
300 orbitals static, 1200 driven, the measured one-core crossovers).
Static samples: dense ``eigh`` (eigenvectors of the window only), or shift-invert Lanczos
(``scipy.sparse.linalg.eigsh`` with ``sigma`` at the gap centre, one LU factorisation and a
fixed start vector), asking for more levels until the farthest one found lies outside the
window. Driven samples (:class:`FloquetSample`, one per sample, shared by its windows): dense ``U``
formed by Chebyshev steps on the identity, or the extremal eigenvalues of the Hermitian
``A = (U + U^dagger)/2`` (eigenvalue ``cos(eps T)``: near +1 is quasienergy near 0, near -1 is
near ``pi/T``) by Lanczos on a linear operator that applies ``U`` and ``U^dagger`` to vectors
by Chebyshev steps whose data are built once per sample, never forming ``U``. Both driven
paths then diagonalise ``Q^dagger U Q`` on the subspace found (invariant under ``U``, as a union
of eigenspaces of ``A``), which separates ``+eps`` from ``-eps``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
from scipy.sparse.linalg import LinearOperator, eigsh, splu

from .. import quasienergy as qe
from .. import samples
from ..drives.evolution import ChebyshevPlan
from ..lattice import TightBinding
from .windows import Window

#: Fixed seed of the Lanczos start vector, so that sparse results are reproducible.
V0_SEED = 20240601
#: Shift of the shift-invert point off the gap centre, in units of the window half-width:
#: chiral-symmetric samples with an odd number of orbitals have an exact zero mode, where the
#: factorisation of ``H - sigma`` would be singular.
SIGMA_OFFSET = 1e-3 * (math.sqrt(5) - 1)
#: Smallest Lanczos basis of the driven sparse solver.
NCV_MIN = 40


def _v0(n: int) -> np.ndarray:
    rng = np.random.default_rng(V0_SEED)
    return rng.standard_normal(n) + 1j * rng.standard_normal(n)


def _ritz(h: sp.spmatrix, vectors: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Orthonormal eigenpairs on the span of ``vectors`` (Rayleigh-Ritz).

    Shift-invert Lanczos returns the vectors of an exactly degenerate pair as eigenvectors that
    are not orthogonal to each other (measured: overlaps up to 0.16 on a 12 x 12 flake of
    bhz_corner); densities and projectors need orthonormal columns.
    """
    if vectors.shape[1] == 0:
        return np.zeros(0), vectors
    q, _ = np.linalg.qr(vectors)
    small = q.conj().T @ (h @ q)
    e, z = np.linalg.eigh(0.5 * (small + small.conj().T))
    return e, q @ z


def _deflated(apply: callable, q: np.ndarray) -> LinearOperator:
    """``P apply P`` with ``P = 1 - q q^dagger`` (``q`` orthonormal columns): the operator with
    the subspace already found removed, for a second look at what Lanczos may have missed."""
    n = q.shape[0]

    def matvec(x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=complex)
        x = x - q @ (q.conj().T @ x)
        y = apply(x)
        return y - q @ (q.conj().T @ y)

    return LinearOperator((n, n), matvec=matvec, matmat=matvec, dtype=complex)


def _invariant_span(q: np.ndarray, uq: np.ndarray, tol: float = 1e-8) -> np.ndarray:
    """Orthonormal basis of ``span(q, U q)``, dropping directions below ``tol``."""
    basis, r = np.linalg.qr(np.concatenate([q, uq], axis=1))
    keep = np.abs(np.diag(r)) > tol * max(1.0, float(np.abs(r).max()))
    return basis[:, keep]


def _complete(q: np.ndarray, apply: callable, which: str, inside: callable) -> np.ndarray:
    """Add the in-window eigenvectors a Lanczos run missed: ``q`` plus every eigenvector of the
    deflated operator (:func:`_deflated`) whose eigenvalue passes ``inside``, until none does.

    Single-vector Lanczos can return only some copies of an exactly degenerate eigenvalue (four
    corner modes related by symmetry; for a drive also ``+eps`` and ``-eps``, which share the
    eigenvalue ``cos(eps T)`` of ``(U + U^dagger)/2``): measured on a 16 x 16 flake of the
    mass-switched corner model, 2 of 4 in-window states, mixed into two wrong levels. The
    deflated operator has the missed copies as its extremal eigenvalues, so a run on it finds
    them or proves that none is left.
    """
    n = q.shape[0]
    while q.shape[1] < n - 3:
        q, _ = np.linalg.qr(q)
        vals, vecs = eigsh(_deflated(apply, q), k=2, which=which, v0=_v0(n),
                           ncv=min(n - 1, NCV_MIN))
        new = inside(vals)
        if not new.any():
            break
        q = np.concatenate([q, vecs[:, new]], axis=1)
    return q


def static_levels(h: sp.spmatrix, window: Window, method: str) -> tuple[np.ndarray, np.ndarray]:
    """Levels of a Hermitian sample matrix inside ``window``, relative to its centre.

    Parameters
    ----------
    h : (N, N) sparse Hermitian.
    window : the window.
    method : ``"dense"`` (``eigh`` of the full matrix, eigenvectors computed for the window
        only) or ``"sparse"`` (shift-invert Lanczos near the centre, doubling the number of
        levels asked for until the farthest found lies outside the window).

    Returns
    -------
    levels : (m,) float, ascending; vectors : (N, m) complex.
    """
    n = h.shape[0]
    c, hw = window.centre, window.halfwidth
    if method == "sparse":
        sigma = c + SIGMA_OFFSET * hw
        lu = splu((h - sigma * sp.identity(n, format="csc")).tocsc())
        opinv = LinearOperator((n, n), matvec=lu.solve, dtype=complex)  # factored once
        nev = 16
        while True:
            nev = min(nev, n - 2)
            e, v = eigsh(h, k=nev, sigma=sigma, which="LM", v0=_v0(n), OPinv=opinv)
            inside = np.abs(e - c) <= hw
            if not inside.all() or nev >= n - 2:
                break
            nev *= 2
        # Eigenvalues mu of (H - sigma)^-1 are levels sigma + 1 / mu.
        v = _complete(v[:, inside], lu.solve, "LM",
                      lambda mu: np.abs(sigma + 1.0 / mu.real - c) <= hw)
        e, v = _ritz(h, v)
    else:
        # Only the in-window eigenvectors are computed (MRRR), 3-4x faster than all of them.
        e, v = sla.eigh(h.toarray(), subset_by_value=(c - hw, c + hw), driver="evr")
    e = e - c
    order = np.argsort(e)
    return e[order], v[:, order]


def _wrap(x: np.ndarray, period: float) -> np.ndarray:
    """Quasienergy differences reduced to ``(-pi/T, pi/T]`` (:func:`qe.wrap_quasienergy`)."""
    return qe.wrap_quasienergy(x, period)


class FloquetSample:
    """One driven open sample, solved at any number of windows with shared work.

    Everything that depends only on the sample is built once and kept: the Chebyshev data of
    each step (:class:`~sweepcli.physics.drives.evolution.ChebyshevPlan`: bounds, scaled
    matrix, coefficients, shared by ``U`` and ``U^dagger``), the dense ``U`` of the dense path
    (formed column-block-wise by the same Chebyshev steps, far cheaper than a dense
    exponential per step), and the levels of every window already solved, so that box
    doublings and the two gaps of a count never repeat a diagonalisation.

    Parameters
    ----------
    steps : ``(duration, H)`` pairs in time order, ``H`` an ``(N, N)`` sparse sample matrix;
        ``U = exp(-i H_last t_last) ... exp(-i H_1 t_1)``.
    """

    def __init__(self, steps: Sequence[tuple[float, sp.spmatrix]]) -> None:
        self.steps = [(float(t), h) for t, h in steps]
        self.n = self.steps[0][1].shape[0]
        self._plans: list[ChebyshevPlan] | None = None
        self._u: np.ndarray | None = None
        self._solved: dict[tuple, tuple[np.ndarray, np.ndarray]] = {}
        #: Applications of ``U`` or ``U^dagger`` to single vectors so far (for benchmarks).
        self.applications = 0

    @property
    def plans(self) -> list[ChebyshevPlan]:
        if self._plans is None:
            self._plans = [ChebyshevPlan(h, t) for t, h in self.steps]
        return self._plans

    def apply_u(self, x: np.ndarray) -> np.ndarray:
        """``U @ x``."""
        x = np.asarray(x, dtype=complex)
        self.applications += 1 if x.ndim == 1 else x.shape[1]
        for plan in self.plans:
            x = plan.apply(x)
        return x

    def apply_u_adjoint(self, x: np.ndarray) -> np.ndarray:
        """``U^dagger @ x``."""
        x = np.asarray(x, dtype=complex)
        self.applications += 1 if x.ndim == 1 else x.shape[1]
        for plan in reversed(self.plans):
            x = plan.apply(x, adjoint=True)
        return x

    def apply_a(self, x: np.ndarray) -> np.ndarray:
        """``(U + U^dagger) / 2 @ x``."""
        return 0.5 * (self.apply_u(x) + self.apply_u_adjoint(x))

    def dense_u(self) -> np.ndarray:
        """The dense ``(N, N)`` Floquet operator (formed once)."""
        if self._u is None:
            eye = np.eye(self.n, dtype=complex)
            block = max(1, min(self.n, 256))
            self._u = np.concatenate([self.apply_u(eye[:, i:i + block])
                                      for i in range(0, self.n, block)], axis=1)
        return self._u

    def levels(self, window: Window, method: str) -> tuple[np.ndarray, np.ndarray]:
        """:func:`floquet_levels` of this sample (computed once per window and method)."""
        key = (window.centre, window.halfwidth, window.period, method)
        if key not in self._solved:
            self._solved[key] = self._levels(window, method)
        levels, vectors = self._solved[key]
        return levels.copy(), vectors.copy()

    def _levels(self, window: Window, method: str) -> tuple[np.ndarray, np.ndarray]:
        period = window.period
        n = self.n
        at_pi = window.centre != 0.0
        # |eps - centre| <= hw  <=>  +-cos(eps T) >= cos(hw T)
        threshold = math.cos(min(window.halfwidth * period, math.pi))
        sign = -1.0 if at_pi else 1.0
        if method == "sparse":
            op = LinearOperator((n, n), matvec=self.apply_a, matmat=self.apply_a, dtype=complex)
            # Few levels at a time: every level asked for beyond the window must converge too,
            # and those sit in the clustered part of the spectrum of A (measured: 6 levels cost
            # half the applications of U that 16 do on a 16 x 16 flake).
            nev = 6
            while True:
                nev = min(nev, n - 2)
                # A longer Lanczos basis between restarts (ncv >= NCV_MIN) converges the
                # clustered extremal levels of A in fewer applications of U (measured: ~10 %).
                a, q = eigsh(op, k=nev, which="SA" if at_pi else "LA", v0=_v0(n),
                             ncv=min(n - 1, max(2 * nev + 1, NCV_MIN)))
                inside = sign * a >= threshold
                if not inside.all() or nev >= n - 2:
                    break
                nev *= 2
            q = q[:, inside]
            if q.shape[1]:
                # +eps and -eps share their eigenvalue of A: the span of q and U q holds both
                # members of every pair of which Lanczos found a mixture.
                q = _invariant_span(q, self.apply_u(q))
            q = _complete(q, self.apply_a, "SA" if at_pi else "LA",
                          lambda a: sign * a >= threshold)
            apply_u = self.apply_u
        else:
            u = self.dense_u()
            bounds = (-np.inf, -threshold) if at_pi else (threshold, np.inf)
            _, q = sla.eigh(0.5 * (u + u.conj().T), subset_by_value=bounds, driver="evr")
            apply_u = u.__matmul__
        if q.shape[1] == 0:
            return np.zeros(0), q
        q, _ = np.linalg.qr(q)
        small = q.conj().T @ apply_u(q)
        # The subspace is invariant under U (it is a union of eigenspaces of A, which commutes
        # with U); its compression is unitary and normal, so its Schur form is diagonal.
        t, z = sla.schur(small, output="complex")
        eps = -np.angle(np.diag(t)) / period
        rel = _wrap(eps - window.centre, period)
        vecs = q @ z
        keep = np.abs(rel) <= window.halfwidth
        rel, vecs = rel[keep], vecs[:, keep]
        order = np.argsort(rel)
        return rel[order], vecs[:, order]


def floquet_levels(steps: Sequence[tuple[float, sp.spmatrix]], window: Window, method: str
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Quasienergies of a driven sample inside ``window`` (centre 0 or ``pi/T``), relative to it.

    Parameters
    ----------
    steps : ``(duration, H)`` pairs in time order, ``H`` an ``(N, N)`` sparse sample matrix;
        ``U = exp(-i H_last t_last) ... exp(-i H_1 t_1)``.
    window : from :func:`floquet_windows`.
    method : ``"dense"`` (``U`` formed by Chebyshev steps on the identity, the window's part
        of ``A = (U + U^dagger)/2`` diagonalised) or ``"sparse"`` (Lanczos for the extremal
        eigenvalues of ``A`` with ``U`` and ``U^dagger`` applied to vectors).

    Returns
    -------
    levels : (m,) quasienergies minus the centre, in ``(-pi/T, pi/T]``, ascending.
    vectors : (N, m) orthonormal eigenvectors of ``U``.

    Several windows of one sample should share one :class:`FloquetSample`.
    """
    return FloquetSample(steps).levels(window, method)


def sample_steps(factors: Sequence[tuple[float, TightBinding]], shape: Sequence[int]
                 ) -> list[tuple[float, sp.csr_matrix]]:
    """``(duration, sparse open-box Hamiltonian)`` for each step of a drive."""
    return [(float(t), samples.open_hamiltonian(f, shape)) for t, f in factors]
