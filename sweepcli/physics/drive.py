"""Periodic drives compiled per grid point, and the one time-evolution routine that serves them.

Conventions
-----------
* ``hbar = 1``; the one-period evolution is ``U = T exp(-i int_0^T H(t) dt)`` (time-ordered,
  later times to the left). Quasienergies ``eps`` in ``(-pi/T, pi/T]`` label the eigenvalues
  ``exp(-i eps T)`` of ``U`` (see :mod:`sweepcli.physics.floquet`).
* Every drive reduces to a list of *factors* ``(duration, TightBinding)`` in time order, each
  contributing ``exp(-i duration H)``. A delta kick ``exp(-i K)`` is a factor of duration 1 with
  ``H = K``. :func:`evolve` multiplies the factors of any drive, for batched Bloch matrices
  ``(..., n, n)`` or for the sparse matrix of an open sample acting on a block of vectors.
* A *frame* is the choice of the starting time ``t0``: ``U(t0) = U(t0 + T, t0)``. Frames are
  unitarily equivalent (same quasienergies) but the chiral invariants of 1D drives need the two
  time-reversal-symmetric ones (Asboth and Obuse, PRB 88, 121406 (2013)); see
  :meth:`StepDrive.symmetric_times`.

Drives
------
* :class:`StepDrive`: piecewise-constant Hamiltonians.
* :class:`HarmonicDrive`: a smooth ``H(t)`` integrated with the fourth-order commutator-free
  Magnus scheme of Blanes and Moan (J. Comput. Phys. 227, 4566 (2008)) or the exponential
  midpoint rule, with the number of time slices doubled until ``U`` stops changing.
* :class:`KickDrive`: a static Hamiltonian interrupted by delta kicks.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import expm_multiply

from .lattice import TightBinding, kmesh

Factor = tuple[float, TightBinding]
Matrix = np.ndarray | sp.spmatrix | sp.sparray

#: Relative tolerance for "durations sum to the period" and for matching times.
TIME_RTOL = 1e-9
#: Relative tolerance of the Dirac-type test ``(H - tr H / n)^2 = |d|^2 1``.
DIRAC_RTOL = 1e-10
#: Open samples up to this many orbitals may be evolved densely when no vectors are given.
DENSE_LIMIT = 2000
#: Points per direction of the bulk mesh on which the time slicing of a smooth drive is decided.
SLICING_KMESH = 8


# --------------------------------------------------------------------------------------------
# Helpers on TightBinding objects


def combine(terms: Sequence[tuple[float, TightBinding]]) -> TightBinding:
    """The linear combination ``sum_i w_i tb_i`` of models on the same lattice (real weights).

    Geometry and operators are taken from the first model.
    """
    w0, first = terms[0]
    onsite = sum(w * tb.onsite for w, tb in terms)
    hops: dict[tuple[int, ...], np.ndarray] = {}
    for w, tb in terms:
        for r, t in tb.hoppings.items():
            hops[r] = hops.get(r, 0) + w * t
    return TightBinding(first.lattice_vectors, first.orbital_positions, onsite, hops,
                        first.operators)


def _related(a: TightBinding, b: TightBinding, chiral: np.ndarray | None, atol: float) -> bool:
    """``a == b`` (``chiral is None``) or ``chiral a chiral == -b`` entry by entry."""
    ha, hb = a.hoppings, b.hoppings
    keys = set(ha) | set(hb)
    n = a.norb
    zero = np.zeros((n, n), complex)

    def image(m: np.ndarray) -> np.ndarray:
        return m if chiral is None else -(chiral @ m @ chiral)

    if not np.allclose(image(a.onsite), b.onsite, atol=atol, rtol=0):
        return False
    return all(np.allclose(image(ha.get(r, zero)), hb.get(r, zero), atol=atol, rtol=0)
               for r in keys)


def _scale(tb: TightBinding) -> float:
    vals = [np.max(np.abs(tb.onsite), initial=0.0)]
    vals += [np.max(np.abs(t), initial=0.0) for t in tb.hoppings.values()]
    return float(max(vals))


# --------------------------------------------------------------------------------------------
# Drives


def _check_period(period: float) -> float:
    period = float(period)
    if not (math.isfinite(period) and period > 0):
        raise ValueError(f"the drive period must be a positive finite number; got {period}")
    return period


def _check_compatible(tbs: Sequence[TightBinding], what: str) -> None:
    ref = tbs[0]
    for i, tb in enumerate(tbs[1:], start=1):
        if tb.norb != ref.norb or tb.dim != ref.dim:
            raise ValueError(f"{what} {i} has {tb.norb} orbitals in {tb.dim}D, but {what} 0 has "
                             f"{ref.norb} in {ref.dim}D; all parts of a drive must share the "
                             f"lattice")


@dataclass(frozen=True, eq=False)
class StepDrive:
    """Piecewise-constant drive: ``H(t) = H_j`` on the ``j``-th span of the period.

    Parameters
    ----------
    period : float
        ``T > 0`` (time units, inverse energy).
    segments : tuple of (duration, TightBinding)
        In time order from ``t = 0``; durations ``>= 0`` summing to ``period`` (relative
        tolerance ``TIME_RTOL``).
    """

    period: float
    segments: tuple[Factor, ...]

    def __post_init__(self) -> None:
        period = _check_period(self.period)
        segs = tuple((float(d), tb) for d, tb in self.segments)
        if not segs:
            raise ValueError("a step drive needs at least one segment")
        for i, (d, _) in enumerate(segs):
            if not (math.isfinite(d) and d >= 0):
                raise ValueError(f"segment {i} has duration {d}; durations must be >= 0")
        total = sum(d for d, _ in segs)
        if abs(total - period) > TIME_RTOL * period:
            raise ValueError(f"the segment durations sum to {total:.12g} but the period is "
                             f"{period:.12g}; they must be equal")
        _check_compatible([tb for _, tb in segs], "segment")
        object.__setattr__(self, "period", period)
        object.__setattr__(self, "segments", segs)

    @property
    def norb(self) -> int:
        return self.segments[0][1].norb

    @property
    def dim(self) -> int:
        return self.segments[0][1].dim

    def _boundaries(self) -> np.ndarray:
        b = np.concatenate([[0.0], np.cumsum([d for d, _ in self.segments])])
        b[-1] = self.period
        return b

    def hamiltonian_index(self, t: float) -> int:
        """Index of the segment active at time ``t`` (taken modulo the period)."""
        b = self._boundaries()
        t = float(t) % self.period
        j = int(np.searchsorted(b, t, side="right")) - 1
        j = min(max(j, 0), len(self.segments) - 1)
        while self.segments[j][0] == 0 and j + 1 < len(self.segments):
            j += 1
        return j

    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors of the evolution from ``start`` to ``stop`` (default ``start + T``).

        The drive is continued periodically; zero-length pieces are dropped. ``slices`` is
        accepted for a uniform interface and ignored.
        """
        stop = start + self.period if stop is None else stop
        b = self._boundaries()
        eps = TIME_RTOL * self.period
        out: list[Factor] = []
        t = float(start)
        while t < stop - eps:
            cycle = math.floor((t + eps) / self.period)
            local = t - cycle * self.period
            j = int(np.searchsorted(b, local + eps, side="right")) - 1
            j = min(max(j, 0), len(self.segments) - 1)
            end = min(cycle * self.period + b[j + 1], stop)
            if end - t > eps:
                out.append((end - t, self.segments[j][1]))
            t = max(end, t + eps) if end <= t else end
        return out

    def symmetric_times(self, chiral: np.ndarray | None = None, atol: float = 1e-10
                        ) -> tuple[float, float]:
        """The two inequivalent time-reversal-symmetric starting times ``t1, t2 = t1 + T/2``.

        A time ``t*`` is symmetric when ``H(t* + s) = H(t* - s)`` for all ``s`` (or, with
        ``chiral`` given, ``chiral H(t* + s) chiral = -H(t* - s)``, the condition under which
        the frame at ``t*`` is chiral symmetric, ``chiral U chiral = U^dagger``; Asboth and
        Obuse, PRB 88, 121406 (2013)). The reflection ``t -> 2 t* - t`` on the circle of
        length ``T`` has exactly two fixed points, ``t*`` and ``t* + T/2``; a symmetric point
        is a segment centre or a segment boundary, so these candidates are tried in time order
        and the first symmetric one is returned with its partner.

        Returns
        -------
        (t1, t2) : floats in ``[0, T)``.

        Raises
        ------
        ValueError
            If no segment centre or boundary is a symmetry point.
        """
        T = self.period
        b = self._boundaries()
        g = None if chiral is None else np.asarray(chiral, complex)
        rel: dict[tuple[int, int], bool] = {}

        def related(i: int, j: int) -> bool:
            if (i, j) not in rel:
                rel[(i, j)] = _related(self.segments[i][1], self.segments[j][1], g, atol)
            return rel[(i, j)]

        cands = sorted({float(x % T) for x in list(b[:-1]) + list((b[:-1] + b[1:]) / 2)})
        for ts in cands:
            cuts = np.sort(np.concatenate([b % T, (2 * ts - b) % T, [0.0, T]]))
            cuts = cuts[np.concatenate([[True], np.diff(cuts) > TIME_RTOL * T])]
            mids = (cuts[:-1] + cuts[1:]) / 2
            if all(related(self.hamiltonian_index(m), self.hamiltonian_index(2 * ts - m))
                   for m in mids):
                return ts, (ts + T / 2) % T
        what = "chiral-symmetric" if g is not None else "time-reversal-symmetric"
        raise ValueError(f"this step drive has no {what} starting time: no segment centre or "
                         f"boundary is a mirror point of the sequence of steps")


_CF4_C = (0.5 - math.sqrt(3) / 6, 0.5 + math.sqrt(3) / 6)
_CF4_A = ((3 - 2 * math.sqrt(3)) / 12, (3 + 2 * math.sqrt(3)) / 12)


@dataclass(frozen=True, eq=False)
class HarmonicDrive:
    """Smooth drive ``H(t)``, evaluated on demand and integrated time-ordered.

    Parameters
    ----------
    period : float
        ``T > 0``.
    hamiltonian_at : callable ``t -> TightBinding``
        The Hamiltonian at time ``t`` (e.g. a model factory with ``cos(omega t)`` terms).
    tol : float
        Accept ``U`` when doubling the number of slices changes it by less than ``tol``
        (largest absolute entry difference over the whole k batch).
    max_slices : int
        Largest number of slices per period; beyond it the evolution is reported unconverged.
    scheme : ``"magnus4"`` or ``"midpoint"``
        ``magnus4``: per slice ``exp(-i dt (a1 H(c1) + a2 H(c2))) exp(-i dt (a2 H(c1) +
        a1 H(c2)))`` with Gauss nodes ``c = 1/2 -+ sqrt(3)/6`` and ``a = (3 -+ 2 sqrt 3)/12``
        (Blanes and Moan 2008), error ``O(dt^4)``; ``midpoint``: ``exp(-i dt H(t + dt/2))``,
        ``O(dt^2)``.
    min_slices : int
        First number of slices.
    """

    period: float
    hamiltonian_at: Callable[[float], TightBinding]
    tol: float = 1e-8
    max_slices: int = 4096
    scheme: str = "magnus4"
    min_slices: int = 8

    def __post_init__(self) -> None:
        object.__setattr__(self, "period", _check_period(self.period))
        if not self.tol > 0:
            raise ValueError(f"the harmonic-drive tolerance must be > 0; got {self.tol}")
        if self.scheme not in ("magnus4", "midpoint"):
            raise ValueError(f"scheme must be 'magnus4' or 'midpoint'; got {self.scheme!r}")
        if not 1 <= self.min_slices <= self.max_slices:
            raise ValueError("need 1 <= min_slices <= max_slices")

    @property
    def norb(self) -> int:
        return self.hamiltonian_at(0.0).norb

    @property
    def dim(self) -> int:
        return self.hamiltonian_at(0.0).dim

    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors for ``slices`` equal slices of ``[start, stop]`` (default ``min_slices``)."""
        stop = start + self.period if stop is None else stop
        n = self.min_slices if slices is None else int(slices)
        length = stop - start
        if length <= 0:
            return []
        dt = length / n
        out: list[Factor] = []
        for j in range(n):
            t0 = start + j * dt
            if self.scheme == "midpoint":
                out.append((dt, self.hamiltonian_at(t0 + dt / 2)))
                continue
            h1 = self.hamiltonian_at(t0 + _CF4_C[0] * dt)
            h2 = self.hamiltonian_at(t0 + _CF4_C[1] * dt)
            # a1 + a2 = 1/2: each exponential is half a slice of a weighted mean Hamiltonian.
            a1, a2 = _CF4_A
            out.append((dt / 2, combine([(2 * a2, h1), (2 * a1, h2)])))
            out.append((dt / 2, combine([(2 * a1, h1), (2 * a2, h2)])))
        return out


@dataclass(frozen=True, eq=False)
class KickDrive:
    """A static Hamiltonian interrupted by delta kicks ``exp(-i K_j)`` at times ``t_j``.

    Parameters
    ----------
    period : float
        ``T > 0``.
    base : TightBinding
        Evolves the system between kicks.
    kicks : tuple of (time, TightBinding)
        Kick times in ``[0, T)``; a kick at ``t`` acts at the instant ``t`` (a window
        ``[start, stop)`` contains the kicks with ``start <= t < stop``). ``K`` is
        dimensionless (the kick strength times its duration).
    """

    period: float
    base: TightBinding
    kicks: tuple[tuple[float, TightBinding], ...] = field(default=())

    def __post_init__(self) -> None:
        period = _check_period(self.period)
        kicks = tuple(sorted(((float(t), k) for t, k in self.kicks), key=lambda x: x[0]))
        for t, _ in kicks:
            if not (0 <= t < period):
                raise ValueError(f"kick time {t} is outside [0, {period})")
        _check_compatible([self.base] + [k for _, k in kicks], "drive part")
        object.__setattr__(self, "period", period)
        object.__setattr__(self, "kicks", kicks)

    @property
    def norb(self) -> int:
        return self.base.norb

    @property
    def dim(self) -> int:
        return self.base.dim

    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors from ``start`` to ``stop`` (default ``start + T``); kicks have duration 1."""
        stop = start + self.period if stop is None else stop
        T = self.period
        eps = TIME_RTOL * T
        events = []
        m0, m1 = math.floor(start / T) - 1, math.ceil(stop / T) + 1
        for m in range(m0, m1 + 1):
            for t, k in self.kicks:
                tt = t + m * T
                if start - eps <= tt < stop - eps:
                    events.append((tt, k))
        events.sort(key=lambda x: x[0])
        out: list[Factor] = []
        t = start
        for tt, k in events:
            if tt - t > eps:
                out.append((tt - t, self.base))
            out.append((1.0, k))
            t = max(t, tt)
        if stop - t > eps:
            out.append((stop - t, self.base))
        return out


Drive = StepDrive | HarmonicDrive | KickDrive


# --------------------------------------------------------------------------------------------
# Evolution


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
        If given, return ``U @ vectors`` (for sparse matrices via
        :func:`scipy.sparse.linalg.expm_multiply`, never forming ``U``).
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
            a = sp.csr_matrix(m) if not sp.issparse(m) else m.tocsr()
            psi = expm_multiply((-1j * d) * a, psi)
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
        0 for exact step and kick drives; for :class:`HarmonicDrive` the largest absolute entry
        change between the last two slice counts (an estimate of the error of the coarser).
    slices : int
        Slices per period used (1 for step and kick drives).
    converged : bool
        ``error <= drive.tol`` (always true for step and kick drives).
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
    drive : StepDrive, HarmonicDrive or KickDrive.
    k : ``(..., d)`` reduced momenta; the factors become ``tb.bloch(k)``.
    matrix_of : alternatively, a map ``TightBinding -> matrix`` (e.g. an open-sample builder
        returning scipy.sparse); then ``vectors`` may be given.
    vectors : see :func:`evolve`.
    slicing : a slicing already decided (:func:`decide_slicing`): a :class:`HarmonicDrive` is
        then evolved once at ``slicing.slices`` and the result carries that decision's error
        and convergence.

    Returns
    -------
    Evolution
        For a :class:`HarmonicDrive` without ``slicing`` the slices are doubled from
        ``min_slices`` until the result on this batch changes by less than ``drive.tol`` or
        ``max_slices`` is reached.
    """
    if matrix_of is None:
        if k is None:
            raise ValueError("give the momenta k or a matrix_of map")
        k = np.asarray(k, dtype=float)
        harmonic = isinstance(drive, HarmonicDrive)
        matrix_of = (lambda tb: tb.bloch(k)) if harmonic else _bloch_of(k)

    def run(slices: int | None) -> np.ndarray:
        fs = drive.factors(start, stop, slices=slices)
        return evolve(((d, matrix_of(tb)) for d, tb in fs), vectors, closed_form=closed_form)

    if not isinstance(drive, HarmonicDrive):
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

    Step and kick drives are exact (one slice). For a :class:`HarmonicDrive` the slices are
    doubled (:func:`floquet_evolution`) until ``U(k)`` on the mesh changes by less than
    ``drive.tol``. The coarse mesh suffices: the stepping error is a smooth function of k that
    varies on the scale of the hopping range (the mesh holds the zone centre and the zone-edge
    points), and the operator kept is the finer of the last two, whose error is ~16 times below
    the change measured (fourth-order scheme). Grid points and the transition prediction decide
    once and pass the result to every evolution (bulk meshes, lines, frames, open samples).
    """
    if not isinstance(drive, HarmonicDrive):
        return Slicing(1, 0.0, True)
    ev = floquet_evolution(drive, kmesh(SLICING_KMESH, drive.dim))
    return Slicing(ev.slices, ev.error, ev.converged)


def floquet_operator(drive: Drive, k: np.ndarray, *, start: float = 0.0,
                     slicing: Slicing | None = None) -> np.ndarray:
    """``U(k) = U(start + T, start)`` for reduced momenta ``k`` of shape ``(..., d)``.

    Returns ``(..., n, n)``. For a :class:`HarmonicDrive` use :func:`floquet_evolution` to see
    whether the time slicing converged.
    """
    return floquet_evolution(drive, k, start=start, slicing=slicing).u
