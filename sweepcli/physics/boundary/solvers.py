"""In-window levels and eigenvectors of one open sample, static or driven.

``method`` is chosen by the caller (:func:`sweepcli.physics.samples.choose_method`: dense up to
300 orbitals static, 1600 driven, the measured one-core crossovers).
Static samples: dense ``eigh`` (eigenvectors of the window only), or shift-invert Lanczos
(``scipy.sparse.linalg.eigsh`` with ``sigma`` at the gap centre, one LU factorisation and a
fixed start vector), asking for more levels until the farthest one found lies outside the
window. Driven samples (:class:`FloquetSample`, one per sample, shared by its windows): dense ``U``
formed by Chebyshev steps on the identity, or the extremal eigenvalues of the Hermitian
``A = (U + U^dagger)/2`` (eigenvalue ``cos(eps T)``: near +1 is quasienergy near 0, near -1 is
near ``pi/T``) by a Chebyshev-filtered block subspace iteration (both gaps in one block; see
:meth:`FloquetSample._filtered_levels` for the derivation and what is guaranteed) on blocks of
vectors to which ``U`` and ``U^dagger`` are applied by Chebyshev steps whose data are built once
per sample, never forming ``U``. Both driven paths then diagonalise ``Q^dagger U Q`` on the
subspace found (invariant under ``U``, as a union of eigenspaces of ``A``), which separates
``+eps`` from ``-eps``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
from scipy.sparse.linalg import ArpackNoConvergence, LinearOperator, eigsh, splu

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
#: Smallest Lanczos basis of the deflation check of the static sparse solver, the relative
#: residual to which its first run converges, and the relative slack within which a value
#: found by that run counts as possibly inside the window (then converged fully).
NCV_MIN = 40
COMPLETE_TOL = 1e-8
COMPLETE_SLACK = 1e-6
#: Filtered block iteration of the driven sparse solver (:meth:`FloquetSample._filtered_levels`):
#: start columns per window, columns beyond the in-window states that must stand below the
#: window edges, cut of the filter in units of the window half-width, e-folds of the filter at
#: the centre of the slower window per iteration, largest degree, largest number of
#: iterations, and the residual ``||U v - v (v^dagger U v)||`` of the in-window states.
BLOCK_START = 8
BLOCK_MARGIN = 2
CUT_FACTOR = 2.0
FILTER_GAIN = 12.0
#: After the first iteration the degree is set from the residual reached: the e-folds still
#: needed to reach :data:`FILTER_TOL` plus :data:`FILTER_SAFETY`, at :data:`FILTER_EFFICIENCY`
#: times the rate ``g_in - g_p`` per degree (``g = arccosh |x(a)|`` of the slowest in-window
#: Ritz value and of the least amplified one of the block), at most :data:`FILTER_STRETCH`
#: times the degree of :data:`FILTER_GAIN` e-folds. Only the cost depends on these: the stop
#: test is the same whatever the degree (measured on the driven corner benchmark at L = 32,
#: omega = 6: 229 applications of the block instead of 264).
FILTER_SAFETY = 2.0
FILTER_EFFICIENCY = 1.0
FILTER_STRETCH = 3.0
FILTER_DEGREE_MAX = 2000
FILTER_ITER_MAX = 30
FILTER_TOL = 1e-10


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
        op = _deflated(apply, q)
        ncv = min(n - 1, NCV_MIN)
        # A first run to COMPLETE_TOL decides (for a Hermitian operator each Ritz value lies
        # within its residual, COMPLETE_TOL |value|, of an eigenvalue); only when a value may
        # be inside the window is the run repeated to machine precision for the vectors.
        vals, vecs = eigsh(op, k=2, which=which, v0=_v0(n), ncv=ncv, tol=COMPLETE_TOL)
        near = inside(vals * (1 + COMPLETE_SLACK)) | inside(vals * (1 - COMPLETE_SLACK))
        if not near.any():
            break
        vals, vecs = eigsh(op, k=2, which=which, v0=_v0(n), ncv=ncv)
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
    windows : the windows the sample will be asked for (optional): the sparse path then
        solves the windows at 0 and ``pi/T`` in one filtered block iteration.
    bounds : optional ``(lo, hi)`` per step holding that step's spectrum
        (:func:`sweepcli.physics.samples.spectral_bounds`): fewer Chebyshev terms per step.
    """

    def __init__(self, steps: Sequence[tuple[float, sp.spmatrix]],
                 windows: Sequence[Window] = (),
                 bounds: Sequence[tuple[float, float]] | None = None) -> None:
        self.steps = [(float(t), h) for t, h in steps]
        self.windows = list(windows)
        self.bounds = [None] * len(self.steps) if bounds is None else list(bounds)
        self.n = self.steps[0][1].shape[0]
        self._plans: list[ChebyshevPlan] | None = None
        self._u: np.ndarray | None = None
        self._solved: dict[tuple, tuple[np.ndarray, np.ndarray]] = {}
        #: Applications of ``U`` or ``U^dagger`` to single vectors so far (for benchmarks).
        self.applications = 0

    @property
    def plans(self) -> list[ChebyshevPlan]:
        if self._plans is None:
            self._plans = [ChebyshevPlan(h, t, bounds=b)
                           for (t, h), b in zip(self.steps, self.bounds)]
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
        """:func:`floquet_levels` of this sample (computed once per window and method).

        The sparse path solves ``window`` together with the unsolved windows of ``windows``
        (given at construction) at the other end of the spectrum, sharing every application
        of ``U``.
        """
        def key_of(w: Window) -> tuple:
            return (w.centre, w.halfwidth, w.period, method)

        key = key_of(window)
        if key not in self._solved:
            if method == "sparse":
                group = [window]
                for w in self.windows:
                    if (key_of(w) not in self._solved and w.period == window.period
                            and w.centre != window.centre
                            and all(x.centre != w.centre for x in group)
                            and 0 < w.halfwidth < math.inf):
                        group.append(w)
                for w, solved in zip(group, self._filtered_levels(group)):
                    self._solved[key_of(w)] = solved
            else:
                self._solved[key] = self._levels(window, method)
        levels, vectors = self._solved[key]
        return levels.copy(), vectors.copy()

    def _levels(self, window: Window, method: str) -> tuple[np.ndarray, np.ndarray]:
        if method == "sparse":
            return self._filtered_levels([window])[0]
        period = window.period
        at_pi = window.centre != 0.0
        # |eps - centre| <= hw  <=>  +-cos(eps T) >= cos(hw T)
        threshold = math.cos(min(window.halfwidth * period, math.pi))
        u = self.dense_u()
        bounds = (-np.inf, -threshold) if at_pi else (threshold, np.inf)
        _, q = sla.eigh(0.5 * (u + u.conj().T), subset_by_value=bounds, driver="evr")
        return _select(q, u.__matmul__, window)

    def _filtered_levels(self, windows: list[Window]
                         ) -> list[tuple[np.ndarray, np.ndarray]]:
        """The sparse path for one or two windows (centres 0 and ``pi/T``) at once.

        Chebyshev-filtered block subspace iteration on ``A = (U + U^dagger)/2``.

        *The filter.* The eigenvalue of ``A`` of a state at quasienergy ``eps`` is
        ``a = cos(eps T)``; the window at 0 is ``a >= tau_0 = cos(hw_0 T)``, the one at ``pi/T``
        is ``a <= -tau_pi``. Choose cuts ``c_0 < tau_0`` and ``c_pi < tau_pi`` and the damped
        interval ``[lo, hi] = [-c_pi, c_0]`` (``lo = -1`` when the ``pi`` window is not asked
        for, ``hi = 1`` when the 0 window is not; ``|a| <= 1`` always, ``U`` being unitary).
        With ``x(a) = (2a - hi - lo) / (hi - lo)``, which maps ``[lo, hi]`` onto ``[-1, 1]``,
        the filter is ``F = T_d(x(A))``, ``T_d`` the Chebyshev polynomial of degree ``d``,
        applied to a block by ``T_{k+1} = 2 x(A) T_k - T_{k-1}`` (each step one application
        of ``A``, i.e. one of ``U`` and one of ``U^dagger``). Its eigenvalues are ``T_d(x(a))``:
        ``|T_d| <= 1`` on the damped interval and ``|T_d(x)| = cosh(d arccosh|x|)`` beyond,
        increasing with ``|x|``. Near the ends ``a = cos(theta)`` with small ``theta``, and
        ``arccosh(x(a)) ~ sqrt(theta_c^2 - theta^2)`` (``c = cos(theta_c)``): a state at the
        window centre is amplified by ``~exp(d theta_c)`` against at most 1 for every state
        beyond the cut. The spectrum of ``A`` is clustered at ``+-1`` (``1 - a ~ theta^2/2``:
        states 1e-3 and 1e-2 apart in quasienergy differ by ~1e-4 in ``a``), but the filter
        separates them by ``theta`` itself, exponentially in ``d``. Both gaps share every
        application of ``A``: one block holds the states of both ends.

        *The iteration.* A block ``X`` of ``p`` columns (fixed random start) is replaced by
        the orthonormalised ``F X``, then Rayleigh-Ritz with ``A`` on its span gives Ritz
        pairs. Subspace iteration converges to the dominant ``p``-dimensional invariant
        subspace of ``F``; the component of an eigenvector ``i`` of rank ``<= p`` outside the
        block falls like ``|F_{p+1} / F_i|^k`` after ``k`` iterations (Saad, *Numerical
        Methods for Large Eigenvalue Problems*, 2nd ed., SIAM 2011, sec. 5.2; the Chebyshev
        acceleration of the same iteration: Zhou and Saad, J. Comput. Phys. 219, 172 (2006)).
        It stops when (i) the in-window Ritz vectors span a subspace invariant under ``U``
        to :data:`FILTER_TOL` (``||U V - V (V^dagger U V)||`` per column; this is what makes
        levels and projectors exact to that order; an eigenvector at ``eps`` and ``-eps``
        share their ``a``, and both are in the block) and (ii) at least :data:`BLOCK_MARGIN`
        further Ritz values of the block are less amplified by ``F`` than the window edges,
        ``|T_d(x(theta))| < min_end |T_d(x(+-tau))|``. When (ii) fails the block grows.

        *What is guaranteed.* Every in-window state is amplified by ``F`` at least as much as
        the window edges (monotonicity of ``|T_d|`` beyond the cut, the cuts lying outside
        the windows), so in the ordering by ``|F|`` all in-window states come before every
        state of the margin. A converged block that holds margin states therefore holds every
        in-window state, exactly degenerate copies included: the block has more columns than
        in-window states, so a degenerate eigenspace is never short of directions (single-
        vector Krylov methods see one direction per exactly degenerate eigenspace and recover
        the others only through rounding, which is how copies were missed before). Returned
        states are eigenvectors of ``U`` to :data:`FILTER_TOL`.

        *What is assumed.* As for every iterative eigensolver: the random start block has a
        non-negligible component on every in-window eigenvector (true with probability one; a
        component that is exactly zero is restored by rounding at the first application of
        ``F``, and then grows like the others), and the margin Ritz values, which converge
        more slowly than the in-window ones, already stand below the window edges in the
        ``|F|`` ordering when the in-window states have converged (they are Ritz values of
        ``A`` on a block that contains the in-window invariant subspace, so each lies within
        the spectrum outside it).
        """
        period = windows[0].period
        n = self.n
        ends = []  # (sign, tau, theta_window, window)
        for w in windows:
            at_pi = w.centre != 0.0
            theta_w = min(w.halfwidth * period, math.pi / 2)
            ends.append((-1.0 if at_pi else 1.0, math.cos(theta_w), theta_w, w))
        if n <= 2 * BLOCK_START:
            # Too small for a block iteration with a margin: the dense path.
            u = self.dense_u()
            out = []
            for sign, tau, _, w in ends:
                bounds = (-np.inf, -tau) if sign < 0 else (tau, np.inf)
                _, q = sla.eigh(0.5 * (u + u.conj().T), subset_by_value=bounds, driver="evr")
                out.append(_select(q, u.__matmul__, w))
            return out
        # Cuts, as angles theta_c (c = cos theta_c) at each end: first CUT_FACTOR times the
        # window (the edge continuum of a flake starts near twice the window half-width,
        # :func:`edge_window`), then the nearest Ritz value outside the window at that end
        # (the first state to damp), at most doubling per iteration. With both ends, the
        # damped interval is centred so that both window edges get the same |x|: every state
        # outside either window is then less amplified than every state inside both.
        angle = {sign: CUT_FACTOR * th for sign, _, th, _ in ends}
        cap = {sign: 0.5 * (th + math.pi / 2) for sign, _, th, _ in ends}
        tau = {sign: t for sign, t, _, _ in ends}
        rng = np.random.default_rng(V0_SEED)

        def random_block(m):
            return rng.standard_normal((n, m)) + 1j * rng.standard_normal((n, m))

        x = random_block(BLOCK_START * len(ends))
        last = None  # (residual, in-window Ritz values, all Ritz values) of the last iteration
        for _ in range(FILTER_ITER_MAX):
            cut = {sign: math.cos(min(angle[sign], cap[sign])) for sign in angle}
            if len(cut) == 2:
                mid = 0.5 * (tau[1.0] - tau[-1.0])
                half = max(cut[1.0] - mid, cut[-1.0] + mid)
            elif 1.0 in cut:
                mid, half = 0.5 * (cut[1.0] - 1.0), 0.5 * (cut[1.0] + 1.0)
            else:
                mid, half = 0.5 * (1.0 - cut[-1.0]), 0.5 * (1.0 + cut[-1.0])

            def log_gain(a, mid=mid, half=half):
                """``arccosh |x(a)|`` (0 on the damped interval): ``|T_d| ~ exp(d log_gain)``."""
                return np.arccosh(np.maximum(np.abs((np.asarray(a) - mid) / half), 1.0))

            edge_gain = min(float(log_gain(sign * tau[sign])) for sign in tau)
            slow_gain = min(float(log_gain(sign)) for sign in tau)
            # Degree: FILTER_GAIN e-folds per iteration at the centre of the slower window.
            degree = int(min(FILTER_DEGREE_MAX, max(4, math.ceil(FILTER_GAIN / slow_gain))))
            if last is not None:
                # Enough e-folds to reach the tolerance from the residual of the last block.
                res_last, theta_in, theta_all = last
                rate = FILTER_EFFICIENCY * float(np.min(log_gain(theta_in))
                                                 - np.min(log_gain(theta_all)))
                need = math.log(max(res_last, FILTER_TOL) / FILTER_TOL) + FILTER_SAFETY
                if rate > 0:
                    degree = int(min(FILTER_DEGREE_MAX, FILTER_STRETCH * degree,
                                     max(4, math.ceil(need / rate))))
            # F X by the three-term recurrence.
            prev, cur = x, (self.apply_a(x) - mid * x) / half
            for _k in range(2, degree + 1):
                nxt = (self.apply_a(cur) - mid * cur) * (2.0 / half) - prev
                prev, cur = cur, nxt
            q, _ = np.linalg.qr(cur)
            uq = self.apply_u(q)
            udq = self.apply_u_adjoint(q)
            small = q.conj().T @ (0.5 * (uq + udq))
            theta, z = np.linalg.eigh(0.5 * (small + small.conj().T))
            vq, uvq = q @ z, uq @ z
            inside = [sign * theta >= tau for sign, tau, _, _ in ends]
            wanted = np.logical_or.reduce(inside)
            margin = int(np.sum(log_gain(theta[~wanted]) < edge_gain))
            v = vq[:, wanted]
            if v.shape[1]:
                s = v.conj().T @ uvq[:, wanted]
                res = float(np.max(np.linalg.norm(uvq[:, wanted] - v @ s, axis=0)))
            else:
                res = 0.0
            if res <= FILTER_TOL and margin >= BLOCK_MARGIN:
                break
            last = (res, theta[wanted], theta) if margin >= BLOCK_MARGIN and res > 0 else None
            for sign, _, th, _ in ends:
                out = theta[~wanted & (sign * theta > 0)]
                if out.size:
                    near = float(np.arccos(np.clip(np.max(sign * out), -1.0, 1.0)))
                    angle[sign] = min(max(near, CUT_FACTOR * th), 2 * angle[sign])
            x = vq
            if margin < BLOCK_MARGIN:
                # Grow the block: the margin must hold states less amplified than the windows.
                extra = random_block(max(BLOCK_MARGIN, x.shape[1] // 2))
                extra -= x @ (x.conj().T @ extra)
                x = np.concatenate([x, extra], axis=1)
                if x.shape[1] > n // 2:
                    raise ArpackNoConvergence(
                        "filtered block iteration: the window holds too many states", [], [])
        else:
            raise ArpackNoConvergence(
                f"filtered block iteration did not converge in {FILTER_ITER_MAX} iterations",
                [], [])
        return [_select(vq[:, ins], self.apply_u, w) for ins, (_, _, _, w) in zip(inside, ends)]


def _select(q: np.ndarray, apply_u: callable, window: Window) -> tuple[np.ndarray, np.ndarray]:
    """Levels and eigenvectors of ``U`` in ``window`` from a ``U``-invariant subspace ``q``."""
    period = window.period
    if q.shape[1] == 0:
        return np.zeros(0), np.zeros((q.shape[0], 0), dtype=complex)
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
