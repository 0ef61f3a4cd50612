"""Topological invariants of 2D drives: Chern numbers of the Floquet band groups and the
Rudner winding of the periodised evolution.

Conventions
-----------
* Floquet bands are grouped *between the gaps*: the "upper" group has ``eps`` in ``(0, pi/T)``,
  the "lower" group ``(-pi/T, 0)``; when both gaps are open the size of each group is the same
  at every k and each group is a smooth vector bundle.
* Chern numbers are the proven FHS sums of :func:`sweepcli.physics.certify.certified_chern`
  (sign of :func:`sweepcli.physics.chern.fhs_chern`: the lower band of ``d.sigma`` has the
  degree of ``d_hat``).

Published method
----------------
Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013): winding ``W_eps`` of the periodised
evolution; ``C_band = W(gap above) - W(gap below)``; the anomalous five-step drive.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..schema import Reason
from .certify import certified_chern, hermitian_norm, mesh_hopping_bounds
from .chern import START_CAP, WORK
from .drives.base import Drive
from .drives.evolution import Slicing, evolve, hermitian_exponential
from .invariant_base import (
    CHERN_KMESH,
    CHERN_MAX_KMESH,
    FLUX_TOL,
    GROWTH,
    gap_rule_kmesh,
)
from .lattice import TightBinding, kmesh
from .quasienergy import FloquetGaps, dagger, quasienergies

#: Largest accepted distance of the raw Rudner winding integral from an integer.
RESIDUE_TOL = 0.05
#: (k-mesh, Gauss nodes per factor) levels of the Rudner winding integral.
RUDNER_LEVELS = ((16, 6), (24, 8), (32, 10), (48, 12), (64, 16), (96, 20), (128, 24))


def band_groups(eps: np.ndarray, vectors: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """Eigenvectors grouped between the gaps: ``(lower, upper)``.

    ``lower`` spans the quasienergies in ``(-pi/T, 0)``, ``upper`` those in ``(0, pi/T)``
    (columns, ``(..., n, m)``). Returns ``None`` if the group sizes vary over the mesh (a gap
    is closed).
    """
    nlow = np.sum(eps < 0, axis=-1)
    if nlow.min() != nlow.max():
        return None
    m = int(nlow.flat[0])
    return vectors[..., :m], vectors[..., m:]


@dataclass(frozen=True)
class FloquetChern:
    """Chern numbers of the Floquet band groups.

    Attributes
    ----------
    upper, lower : int or None
        Chern numbers of the bands with quasienergy in ``(0, pi/T)`` and ``(-pi/T, 0)``
        (sign of :func:`sweepcli.physics.chern.fhs_chern`); ``None`` if missing. A group
        with no bands has Chern number 0.
    kmesh : base mesh of the proven adaptive mesh (points per direction), or None.
    max_flux : largest plaquette flux on that mesh (rad), nan if missing.
    reason : Reason.
    """

    upper: int | None
    lower: int | None
    kmesh: int | None
    max_flux: float
    reason: Reason


def drive_jet(factors: Sequence[tuple[float, TightBinding]]
              ) -> Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """``jet(k)``: the product ``U = U_F ... U_1`` of the factors ``U_f = exp(-i d_f H_f(k))``
    and its exact derivatives ``(dU/dk_1, dU/dk_2)`` at reduced momenta ``k`` ``(..., 2)``.

    Returns ``(U, dU, steps)`` of shapes ``(..., n, n)``, ``(..., 2, n, n)`` and ``(...)``,
    ``steps = sum_f d_f sqrt(||dH_f/dk_1||^2 + ||dH_f/dk_2||^2)`` (Duhamel: a second bound on
    ``||dU/dk_u||``, which changes by at most ``sum_f d_f L2_f`` per unit of ``k``; tighter than
    the exact slope's bound where the factors share ``dH/dk``, e.g. a modulated mass). In the
    eigenbasis of ``H_f = V diag(E) V^+`` the derivative of one factor is the divided difference
    ``(V^+ dU_f V)_ab = (V^+ dH_f V)_ab (e^{-i E_a d} - e^{-i E_b d}) / (E_a - E_b)``, written
    ``-i d e^{-i (E_a + E_b) d / 2} sinc((E_a - E_b) d / 2)`` so that it tends to the limit
    ``-i d e^{-i E_a d}`` smoothly at ``E_a = E_b``; the product rule
    ``dU <- dU_f U + U_f dU`` runs along with the product. A factor without hoppings has
    ``dU_f = 0``.
    """
    n = factors[0][1].norb
    mm = _matmul2 if n == 2 else np.matmul

    def jet(k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        k = np.asarray(k, float)
        shape = k.shape[:-1]
        u = np.broadcast_to(np.eye(n, dtype=complex), shape + (n, n)).copy()
        du = np.zeros(shape + (2, n, n), complex)
        steps = np.zeros(shape)
        # Step drives repeat a few TightBinding objects, and the slices of a smooth drive whose
        # modulated parameters enter the onsite terms only share their hoppings: the hopping
        # part of H(k), dH/dk and its norm are computed once per distinct set of hoppings
        # (H_f = onsite_f + the shared part).
        seen: dict[object, tuple[np.ndarray, np.ndarray | None, object, float]] = {}
        for d, tb in factors:
            key = tuple((r, t.tobytes()) for r, t in tb.hoppings.items())
            hit = seen.get(key)
            if hit is None:
                dh = np.stack([tb.bloch_derivative(k, i) for i in range(2)], axis=-3) \
                    if tb.hoppings else None
                hop = tb.bloch(k) - tb.onsite
                norm = np.sqrt(np.sum(hermitian_norm(dh) ** 2, axis=-1)) \
                    if dh is not None else 0.0
                hit = (hop, dh, _split2(dh) if (n == 2 and dh is not None) else dh, norm)
                seen[key] = hit
            hop, dh, dpre, norm = hit
            h = hop + tb.onsite
            if dh is not None:
                steps = steps + d * norm
            uf, duf = _factor_jet2(h, dpre, d) if n == 2 else _factor_jet(h, dh, d)
            if duf is None:
                du = mm(uf[..., None, :, :], du)
            else:
                du = mm(duf, u[..., None, :, :]) + mm(uf[..., None, :, :], du)
            u = mm(uf, u)
        return u, du, steps
    return jet


def _split2(dh: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(dh0, da00, da01)`` of 2x2 derivatives ``dh = dh0 + dA`` (:func:`_factor_jet2`)."""
    dh0 = (dh[..., 0, 0].real + dh[..., 1, 1].real) / 2
    return dh0, dh[..., 0, 0].real - dh0, dh[..., 0, 1]


def _matmul2(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``a @ b`` for stacks of 2x2 matrices, entry by entry (several times faster than
    ``numpy.matmul`` on large stacks of small matrices)."""
    a, b = np.broadcast_arrays(a, b)
    out = np.empty(a.shape, np.result_type(a, b))
    for i in range(2):
        for j in range(2):
            out[..., i, j] = a[..., i, 0] * b[..., 0, j] + a[..., i, 1] * b[..., 1, j]
    return out


def _factor_jet(h: np.ndarray, dh: np.ndarray | None, d: float
                ) -> tuple[np.ndarray, np.ndarray | None]:
    """``exp(-i d h)`` and its derivatives along ``dh`` ``(..., 2, n, n)``, from the
    eigen-decomposition of ``h`` (divided differences, :func:`drive_jet`)."""
    e, v = np.linalg.eigh(h)
    vh = dagger(v)
    uf = (v * np.exp(-1j * d * e)[..., None, :]) @ vh
    if dh is None:
        return uf, None
    dd = vh[..., None, :, :] @ dh @ v[..., None, :, :]
    diff = (e[..., :, None] - e[..., None, :]) * (d / 2)
    mean = (e[..., :, None] + e[..., None, :]) * (d / 2)
    phi = (-1j * d) * np.exp(-1j * mean) * np.sinc(diff / np.pi)
    return uf, v[..., None, :, :] @ (dd * phi[..., None, :, :]) @ vh[..., None, :, :]


def _factor_jet2(h: np.ndarray,
                 dh: np.ndarray | tuple[np.ndarray, np.ndarray, np.ndarray] | None, d: float
                 ) -> tuple[np.ndarray, np.ndarray | None]:
    """:func:`_factor_jet` for 2x2 ``h`` in closed form: with ``h = h0 + A``, ``A^2 = r^2``,
    ``exp(-i d h) = e^{-i h0 d} (cos(r d) - i s A)``, ``s = sin(r d) / r``, and along
    ``dh = dh0 + dA`` (``r dr = tr(A dA) / 2 =: q``):
    ``d exp = -i d dh0 exp + e^{-i h0 d} (-d s q - i s' q A - i s dA)`` with
    ``s' = d (cos(r d) - sin(r d) / (r d)) / r^2`` (its series ``-d^3 (1/3 - x^2/30)``,
    ``x = r d``, near ``r = 0``). ``dh`` may be given split by :func:`_split2`."""
    h0 = (h[..., 0, 0].real + h[..., 1, 1].real) / 2
    a00 = h[..., 0, 0].real - h0
    a01 = h[..., 0, 1]
    r = np.sqrt(a00 ** 2 + np.abs(a01) ** 2)
    x = r * d
    c = np.cos(x)
    s = d * np.sinc(x / np.pi)
    ph = np.exp(-1j * h0 * d)
    uf = np.empty(h.shape, complex)
    uf[..., 0, 0] = ph * (c - 1j * s * a00)
    uf[..., 1, 1] = ph * (c + 1j * s * a00)
    uf[..., 0, 1] = ph * (-1j * s) * a01
    uf[..., 1, 0] = ph * (-1j * s) * np.conj(a01)
    if dh is None:
        return uf, None
    small = np.abs(x) < 1e-2
    xs = np.where(small, 1.0, x)
    sp = np.where(small, -d ** 3 * (1 / 3 - x * x / 30),
                  d ** 3 * (np.cos(xs) - np.sin(xs) / xs) / (xs * xs))
    dh0, da00, da01 = _split2(dh) if isinstance(dh, np.ndarray) else dh
    q = a00[..., None] * da00 + np.real(np.conj(a01)[..., None] * da01)
    c1, s1, ph1, a00_, a01_ = (z[..., None] for z in (c, s, ph, a00, a01))
    lead = -1j * d * dh0
    scal = ph1 * (-d * s1 * q)
    sa = ph1 * (-1j) * sp[..., None] * q
    ss = ph1 * (-1j) * s1
    duf = np.empty(da01.shape + (2, 2), complex)
    ufe = uf[..., None, :, :]
    duf[..., 0, 0] = lead * ufe[..., 0, 0] + scal + sa * a00_ + ss * da00
    duf[..., 1, 1] = lead * ufe[..., 1, 1] + scal - sa * a00_ - ss * da00
    duf[..., 0, 1] = lead * ufe[..., 0, 1] + sa * a01_ + ss * da01
    duf[..., 1, 0] = lead * ufe[..., 1, 0] + sa * np.conj(a01_) + ss * np.conj(da01)
    return uf, duf


def drive_curvature_bound(factors: Sequence[tuple[float, TightBinding]],
                          bounds: Sequence[tuple[float, float]] | None = None) -> float:
    """A bound on ``||d^2 U / dk_u dk_w||`` for all unit directions ``u``, ``w`` and every k:
    ``(sum_f d_f L1_f)^2 + sum_f d_f L2_f`` with ``(L1_f, L2_f)`` bounds on the first and
    second derivatives of ``H_f`` at every k (``bounds``; by default
    :func:`~sweepcli.physics.certify.mesh_hopping_bounds` of each factor).

    Proof: by Duhamel's formula ``||dU_f|| <= d_f L1_f =: a_f`` and ``||d^2 U_f|| <= a_f^2 +
    d_f L2_f`` (the second derivative of ``exp(-i d H)`` is two nested Duhamel integrals of
    ``dH`` and one of ``d^2 H``, the first two with weights ``int (d - s) ds + int s ds = d^2``);
    the product rule for ``U_F ... U_1`` then gives ``sum_f (a_f^2 + d_f L2_f) + 2 sum_{f > g}
    a_f a_g``.
    """
    a = b = 0.0
    if bounds is None:
        bounds = _hopping_bounds(factors)
    for (d, _), (l1, l2) in zip(factors, bounds):
        a += d * l1
        b += d * l2
    return a * a + b


def floquet_subspace(factors: Sequence[tuple[float, TightBinding]], period: float, m: int,
                     upper: bool
                     ) -> tuple[Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]],
                                tuple[float, float]]:
    """``data(k)`` of :func:`~sweepcli.physics.certify.certified_chern` for one Floquet band
    group of the drive ``U = U_F ... U_1`` of ``factors``, and its ``lip2``.

    The group is a spectral subspace of the Hermitian ``Y = i (U - U^+) / 2`` (module docstring
    of :mod:`sweepcli.physics.certify`). ``data(k)`` returns the group's eigenvectors (the
    ``m`` lowest quasienergies, or the others if ``upper``), the gap ``min_lower
    sin(|eps| T) + min_upper sin(|eps| T)`` of ``Y`` around 0 (0 where the lower group does not
    hold ``m`` bands), and two slopes, shape ``(..., 2)``: ``sqrt(||dY/dk_1||^2 +
    ||dY/dk_2||^2)`` from the exact derivatives of :func:`drive_jet` (a bound on ``||dY/dk_u||``
    for every unit ``u``), and the factors' ``steps`` bound on ``||dU/dk_u|| >= ||dY/dk_u||``
    (:func:`drive_jet`); ``lip2`` holds their Lipschitz constants,
    ``drive_curvature_bound(factors)`` (a bound on the second derivatives of ``U``, hence of
    ``Y``) and ``sum_f d_f L2_f``. Each bound is proven; a cell uses the smaller
    (:func:`~sweepcli.physics.certify.cell_lambda`)."""
    jet = drive_jet(factors)
    bounds = _hopping_bounds(factors)
    lip2 = (drive_curvature_bound(factors, bounds),
            float(sum(d * b[1] for (d, _), b in zip(factors, bounds))))

    def data(k: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        u, du, steps = jet(k)
        eps, v = quasienergies(u, period)
        width = np.sin(np.abs(eps) * period)
        low = eps < 0
        sep = np.min(np.where(low, width, np.inf), axis=-1) + \
            np.min(np.where(low, np.inf, width), axis=-1)
        sep = np.where(np.sum(low, axis=-1) == m, sep, 0.0)
        dy = 0.5j * (du - dagger(du))
        slope = np.stack([np.sqrt(np.sum(hermitian_norm(dy) ** 2, axis=-1)), steps], axis=-1)
        return (v[..., m:] if upper else v[..., :m]), sep, slope
    return data, lip2


def _hopping_bounds(factors: Sequence[tuple[float, TightBinding]]) -> list[tuple[float, float]]:
    """:func:`~sweepcli.physics.certify.mesh_hopping_bounds` of each factor, computed once per
    distinct set of hoppings (the slices of a modulated mass share theirs)."""
    seen: dict[object, tuple[float, float]] = {}
    out = []
    for _, tb in factors:
        key = tuple((r, t.tobytes()) for r, t in tb.hoppings.items())
        if key not in seen:
            seen[key] = mesh_hopping_bounds(tb.hoppings)
        out.append(seen[key])
    return out


def floquet_chern(drive: Drive, gaps: FloquetGaps, *, gap_tol: float = 1e-6,
                  kmesh_n: int = CHERN_KMESH, max_kmesh: int = CHERN_MAX_KMESH,
                  flux_tol: float = FLUX_TOL, slicing: Slicing | None = None) -> FloquetChern:
    """Chern numbers of both Floquet band groups of a 2D drive, proven on an adaptive mesh.

    Both gaps must be open (``>= gap_tol``). The smaller group's Chern number is computed as
    the static one is (:func:`~sweepcli.physics.chern.chern_number`): a base mesh of
    ``max(kmesh_n, min(gap_rule_kmesh(min(gap_0, gap_pi)), START_CAP))`` points per direction
    (raised by 1.5 while more than half its plaquettes fail, up to ``max_kmesh``), every
    plaquette whose bound does not prove it subdivided
    (:func:`~sweepcli.physics.certify.certified_chern` for the group as a spectral subspace of
    the Hermitian ``Y = i (U - U^+) / 2``; separation and slopes from
    :func:`floquet_subspace`: the gap of ``Y`` around 0 and the exact ``||dY/dk||`` at the
    corners, the second-derivative bound :func:`drive_curvature_bound` of the drive's
    factors), up to
    ``WORK * max_kmesh**2`` points, else ``NOT_CONVERGED``; the base mesh starts no coarser
    than that bound alone allows (``sep_max = 2``). The other group's number is its negative
    (the two groups span every band, whose bundle is trivial). ``kmesh`` of the result is the
    base mesh.

    Proven: the stored number is the Chern number of the group of the operator ``U(k)`` that
    the factors define (the cell bound of :mod:`sweepcli.physics.certify`, with ``||Y(k) -
    Y(k_c)|| <= g_c r + lip2 r^2 / 2`` and ``||dY/dk_u(k)|| <= g_c + lip2 r`` within ``r`` of a
    corner ``k_c``, ``g_c`` exact at ``k_c`` and ``lip2`` the proven bound of
    :func:`drive_curvature_bound` on ``||d^2 U|| >= ||d^2 Y||``). Assumed: the
    eigen-decompositions and derivatives at the mesh points are exact to rounding, and the
    operator is that of the time slicing ``slicing`` (default: the one the gap search used,
    ``gaps.slices``); the slicing error is not part of the bound.
    """
    if not gaps.converged:
        return FloquetChern(None, None, None, math.nan, Reason.NOT_CONVERGED)
    if not (gaps.gap_0 >= gap_tol and gaps.gap_pi >= gap_tol):
        return FloquetChern(None, None, None, math.nan, Reason.GAP_CLOSED)
    if slicing is None and not drive.exact:
        slicing = Slicing(gaps.slices, 0.0, gaps.converged)
    n = min(max(kmesh_n, min(gap_rule_kmesh(min(gaps.gap_0, gaps.gap_pi)), START_CAP)),
            max_kmesh)
    factors = list(drive.factors(slices=None if drive.exact else slicing.slices))
    # The size of the lower group, from the quasienergies at k = 0 (the same at every k while
    # both gaps are open).
    u = drive_jet(factors)(np.zeros((1, 2)))[0]
    m = int(np.sum(quasienergies(u, drive.period)[0][0] < 0))
    norb = drive.norb
    if m in (0, norb):
        return FloquetChern(0, 0, None, 0.0, Reason.OK)
    upper = norb - m < m
    data, lip2 = floquet_subspace(factors, drive.period, m, upper)
    c, flux, _, n = certified_chern(data, n, min(m, norb - m), lip2, flux_tol=flux_tol,
                                    budget=WORK * max_kmesh * max_kmesh, max_n=max_kmesh,
                                    growth=GROWTH, sep_max=2.0)
    if c is None:
        return FloquetChern(None, None, n, flux, Reason.NOT_CONVERGED)
    return FloquetChern(c if upper else -c, -c if upper else c, n, flux, Reason.OK)


def _spectral_derivative(x: np.ndarray, axis: int) -> np.ndarray:
    """d/dk along a periodic mesh axis by FFT (exponentially accurate for smooth ``x``)."""
    n = x.shape[axis]
    m = np.fft.fftfreq(n, d=1.0 / n)
    if n % 2 == 0:
        m[n // 2] = 0.0
    shape = [1] * x.ndim
    shape[axis] = n
    return np.fft.ifft(1j * m.reshape(shape) * np.fft.fft(x, axis=axis), axis=axis)


def rudner_integral(drive: Drive, n: int, nodes: int, *, slices: int | None = None
                    ) -> tuple[float, float]:
    """Raw winding numbers ``(W_0, W_pi)`` of the periodised evolution on an ``n x n`` mesh.

    ``W[U_e] = -(1/8 pi^2) int dt dk1 dk2 Tr(U_e^-1 d_t U_e [U_e^-1 d_k1 U_e, U_e^-1 d_k2 U_e])``
    (Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013)) with
    ``U_e(k, t) = U(k, t) exp(i H_e(k) T s(t))``, ``s`` running from 0 to 1 over the evolution,
    and ``H_e = (i/T) log_e U(k, T)`` with its branch cut at quasienergy ``e`` (``e = pi/T``:
    quasienergies in ``(-pi/T, pi/T]``; ``e = 0``: ``(-2 pi/T, 0]``). ``U_e`` is 1 at both ends,
    so ``W`` is the degree of a map ``T^3 -> U(n)``, an integer; the time parametrisation (a
    kick is a factor of unit length) is a homotopy and does not change it.

    Sign: the overall minus sign makes ``C = W(gap above) - W(gap below)`` hold for every
    Floquet band with this project's Chern sign (:func:`~sweepcli.physics.chern.fhs_chern`,
    which is minus the ``(1/2 pi i) int Tr P [d_1 P, d_2 P]`` convention), so that in the
    high-frequency limit ``W_0`` equals the static Chern number of the bands below zero and
    ``W_pi = 0``. Both statements are checked by the tests.

    Why it is quantised on practical meshes: while the gap at ``e`` is open, ``U_e`` is smooth
    and periodic in k, so the k-derivatives are taken by FFT and the k-sums (trapezoid rule)
    converge exponentially; in time, each factor's ``exp(-i H_j t)`` is entire, so
    Gauss-Legendre quadrature per factor converges exponentially too. The raw value approaches
    an integer fast, and its distance from the nearest integer is a faithful convergence
    measure (it grows only when the gap is nearly closed and ``H_e(k)`` varies sharply). This
    replaces counting the charges of phase-band degeneracies (Hoeckendorf, Alvermann and Fehske,
    J. Phys. A 50, 295301 (2017)), which needs a search for isolated points in (k, t).

    Returns
    -------
    (raw W_0, raw W_pi) as floats (the real part; the imaginary part vanishes analytically).
    """
    T = drive.period
    k = kmesh(n, 2)
    fs = drive.factors(slices=slices)
    mats = [(d, tb) for d, tb in fs]
    tau_total = sum(d for d, _ in mats)
    # U(k, T) and its spectral decomposition set H_e.
    u_final = evolve((d, tb.bloch(k)) for d, tb in mats)
    eps, vf = quasienergies(u_final, T)
    alpha = {0: np.where(eps > 0, eps - 2 * np.pi / T, eps) * T, 1: eps * T}
    heff = {g: vf @ (a[..., :, None] * dagger(vf)) / T for g, a in alpha.items()}
    total = {0: 0.0 + 0j, 1: 0.0 + 0j}
    # A slice of a sliced drive is short: three Gauss nodes integrate over it. Longer factors
    # (steps, kicks, the plateaus of ramped steps) get nodes growing with their phase range.
    slice_length = 0.0 if drive.exact else drive.period / (slices or drive.min_slices)
    u_start = np.broadcast_to(np.eye(drive.norb, dtype=complex), k.shape[:-1] + (drive.norb,) * 2)
    tau = 0.0
    for d, tb in mats:
        h = tb.bloch(k)
        e, v = np.linalg.eigh(h)
        emax = float(np.max(np.abs(e)))
        q = 3 if d <= slice_length else \
            nodes + int(math.ceil(d * emax + 2 * np.pi * d / tau_total))
        x, wq = np.polynomial.legendre.leggauss(q)
        x, wq = (x + 1) / 2, wq / 2
        vh = dagger(v)
        for xi, wi in zip(x, wq):
            ut = (v * np.exp(-1j * e * xi * d)[..., None, :]) @ vh @ u_start
            s = (tau + xi * d) / tau_total
            gen = dagger(ut) @ (-1j * h) @ ut
            for g in (0, 1):
                es = vf @ (np.exp(1j * alpha[g] * s)[..., :, None] * dagger(vf))
                ue = ut @ es
                ueh = dagger(ue)
                a_t = dagger(es) @ gen @ es + 1j * heff[g] * T / tau_total
                a_1 = ueh @ _spectral_derivative(ue, 0)
                a_2 = ueh @ _spectral_derivative(ue, 1)
                integrand = np.trace(a_t @ (a_1 @ a_2 - a_2 @ a_1), axis1=-2, axis2=-1)
                total[g] += wi * d * integrand.mean() * (2 * np.pi) ** 2
        u_start = hermitian_exponential(h, d) @ u_start
        tau += d
    return (-float(np.real(total[0])) / (8 * np.pi ** 2),
            -float(np.real(total[1])) / (8 * np.pi ** 2))


@dataclass(frozen=True)
class RudnerWinding:
    """Windings of the periodised evolution in the 0 and pi gaps.

    Attributes
    ----------
    w_0, w_pi : int or None (both missing unless both gaps are open and a level matched the
        proven Chern number, :func:`rudner_winding`).
    raw_0, raw_pi : the raw integrals on the last level (nan if not computed).
    residue : largest distance of a computed raw value from its integer (nan if none).
    kmesh : last k-mesh used (None if no level was computed).
    reason : Reason (GAP_CLOSED if either gap is closed, NOT_CONVERGED if no level settled
        the pair or the Chern number was not proven).
    reason_0, reason_pi : the reason of each winding alone (OK where it is given).
    """

    w_0: int | None
    w_pi: int | None
    raw_0: float
    raw_pi: float
    residue: float
    kmesh: int | None
    reason: Reason
    reason_0: Reason = Reason.OK
    reason_pi: Reason = Reason.OK


def rudner_winding(drive: Drive, gaps: FloquetGaps, *, gap_tol: float = 1e-6,
                   kmesh_n: int = 16, max_kmesh: int = 128, residue_tol: float = RESIDUE_TOL,
                   chern: FloquetChern | None = None) -> RudnerWinding:
    """``W_0`` and ``W_pi`` of a 2D drive (see :func:`rudner_integral`), raised until settled.

    Stored only when both gaps are open: then the windings' difference is a Floquet band's
    Chern number, ``W_pi - W_0 = C_upper`` (Rudner et al. 2013), which :func:`floquet_chern`
    proves (``chern``, computed when not given). Levels ``RUDNER_LEVELS`` with k-mesh
    ``>= kmesh_n`` and ``<= max_kmesh`` are tried in turn (every one of them: a single level
    may settle the value); a level is accepted when both raw integrals are within
    ``residue_tol`` of integers whose difference is that proven number. A proven difference
    that no level matches leaves both windings missing (``NOT_CONVERGED``). Where one gap is
    closed, or the Chern number could not be proven within its budget, nothing anchors the
    integral: the open gaps' windings are missing (``NOT_CONVERGED``; the closed gap's
    ``GAP_CLOSED``) rather than accepted because two levels agree.

    Proven and assumed: the difference ``W_pi - W_0`` of a stored pair is proven (the bound of
    :mod:`sweepcli.physics.certify`); their common part rests on the quadrature of
    :func:`rudner_integral` (spectral in k and t, its distance from an integer the measure of
    convergence, checked against the proven difference at the same level), for which no
    a-priori bound is computed.
    """
    if not gaps.converged:
        return RudnerWinding(None, None, math.nan, math.nan, math.nan, None,
                             Reason.NOT_CONVERGED, Reason.NOT_CONVERGED, Reason.NOT_CONVERGED)
    open_ = (gaps.gap_0 >= gap_tol, gaps.gap_pi >= gap_tol)
    if not any(open_):
        return RudnerWinding(None, None, math.nan, math.nan, math.nan, None, Reason.GAP_CLOSED,
                             Reason.GAP_CLOSED, Reason.GAP_CLOSED)
    # The slice count at which the mesh evolution converged (sliced drives).
    slices = None if drive.exact else gaps.slices
    difference = None
    if all(open_):
        if chern is None:
            chern = floquet_chern(drive, gaps, gap_tol=gap_tol,
                                  slicing=None if drive.exact else
                                  Slicing(gaps.slices, 0.0, gaps.converged))
        difference = chern.upper
    levels = [lv for lv in RUDNER_LEVELS if kmesh_n <= lv[0] <= max_kmesh] or \
        [(max(kmesh_n, 4), RUDNER_LEVELS[0][1])]
    raw = (math.nan, math.nan)
    n_used = None
    settled = False
    for n, q in levels if difference is not None else ():
        raw = rudner_integral(drive, n, q, slices=slices)
        n_used = n
        rounded = tuple(int(round(r)) for r in raw)
        res = [abs(r - i) for r, i in zip(raw, rounded)]
        settled = res[0] < residue_tol and res[1] < residue_tol and \
            rounded[1] - rounded[0] == difference
        if settled:
            break
    vals = [int(round(raw[g])) if settled else None for g in (0, 1)]
    residues = [abs(raw[g] - round(raw[g])) for g in (0, 1) if not math.isnan(raw[g])]
    if not all(open_):
        reason = Reason.GAP_CLOSED
    elif not settled:
        reason = Reason.NOT_CONVERGED
    else:
        reason = Reason.OK
    raw_out = [raw[g] if open_[g] else math.nan for g in (0, 1)]
    each = [Reason.GAP_CLOSED if not open_[g] else
            Reason.NOT_CONVERGED if vals[g] is None else Reason.OK for g in (0, 1)]
    return RudnerWinding(vals[0], vals[1], raw_out[0], raw_out[1],
                         max(residues) if residues else math.nan, n_used, reason, *each)
