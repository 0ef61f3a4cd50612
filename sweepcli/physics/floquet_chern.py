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
from .certify import certified_chern, hermitian_norm, hopping_bounds
from .chern import START_CAP, WORK
from .drives.base import Drive
from .drives.evolution import Slicing, evolve, floquet_evolution, hermitian_exponential
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
    kmesh : mesh used last, or None.
    max_flux : largest plaquette flux on that mesh (rad), nan if missing.
    reason : Reason.
    """

    upper: int | None
    lower: int | None
    kmesh: int | None
    max_flux: float
    reason: Reason


def drive_slope_bounds(factors: Sequence[tuple[float, TightBinding]]
                       ) -> Callable[[np.ndarray], np.ndarray]:
    """``slope(k)``: a bound on ``||dU/dk_u||`` at reduced momenta ``k`` ``(..., 2)`` for every
    unit direction ``u``, ``sum_f d_f sqrt(||dH_f/dk_1||^2 + ||dH_f/dk_2||^2)`` over the
    factors ``(d_f, H_f)`` of ``U = U_F ... U_1`` (Duhamel: ``||d e^{-i d H}|| <= d ||dH||``);
    the factors' hoppings are stacked so that the sum is one batched contraction per chunk."""
    keys = sorted(set().union(*(tb.hoppings for _, tb in factors)))
    durations = np.array([d for d, _ in factors], float)
    if not keys:
        return lambda k: np.zeros(np.shape(k)[:-1])
    n = factors[0][1].norb
    zero = np.zeros((n, n), complex)
    disp = np.array(keys, float).reshape(len(keys), -1)
    hops = np.array([[tb.hoppings.get(r, zero) for r in keys] for _, tb in factors], complex)
    # Chunks of factors keep the (points, factors, n, n) derivatives near 2**21 entries.
    chunk_entries = 2 ** 21

    def slope(k: np.ndarray) -> np.ndarray:
        k = np.asarray(k, float)
        phase = np.exp(1j * (k @ disp.T))
        points = int(np.prod(k.shape[:-1], dtype=int))
        step = max(1, chunk_entries // max(points * n * n, 1))
        total = np.zeros(k.shape[:-1])
        for lo in range(0, len(factors), step):
            s2 = 0.0
            for i in range(2):
                d = np.einsum("...m,fmij->...fij", 1j * disp[:, i] * phase, hops[lo:lo + step])
                s2 = s2 + hermitian_norm(d + np.conj(np.swapaxes(d, -1, -2))) ** 2
            total = total + np.sqrt(s2) @ durations[lo:lo + step]
        return total
    return slope


def floquet_subspace(drive: Drive, slicing: Slicing | None, m: int, upper: bool
                     ) -> tuple[Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]],
                                float]:
    """``data(k)`` of :func:`~sweepcli.physics.certify.certified_chern` for one Floquet band
    group of a 2D drive, and its ``lip2``.

    ``data(k)`` returns the group's eigenvectors (the ``m`` lowest quasienergies, or the
    others if ``upper``), the width ``min_lower sin(|eps| T) + min_upper sin(|eps| T)`` of the
    strip along the real axis between the eigenvalues of the two groups (0 where the lower
    group does not hold ``m`` bands), and the slope of :func:`drive_slope_bounds`;
    ``lip2 = sum_f d_f L2_f`` bounds the slope's own Lipschitz constant
    (:func:`~sweepcli.physics.certify.hopping_bounds`)."""
    slices = None if drive.exact or slicing is None else slicing.slices
    factors = list(drive.factors(slices=slices))
    slope = drive_slope_bounds(factors)
    lip2 = float(sum(d * hopping_bounds(tb.hoppings)[1] for d, tb in factors))
    T = drive.period

    def data(k: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        u = floquet_evolution(drive, k, slicing=slicing).u
        eps, v = quasienergies(u, T)
        width = np.sin(np.abs(eps) * T)
        low = eps < 0
        sep = np.min(np.where(low, width, np.inf), axis=-1) + \
            np.min(np.where(low, np.inf, width), axis=-1)
        sep = np.where(np.sum(low, axis=-1) == m, sep, 0.0)
        return (v[..., m:] if upper else v[..., :m]), sep, slope(k)
    return data, lip2


def floquet_chern(drive: Drive, gaps: FloquetGaps, *, gap_tol: float = 1e-6,
                  kmesh_n: int = CHERN_KMESH, max_kmesh: int = CHERN_MAX_KMESH,
                  flux_tol: float = FLUX_TOL, slicing: Slicing | None = None) -> FloquetChern:
    """Chern numbers of both Floquet band groups of a 2D drive, proven on an adaptive mesh.

    Both gaps must be open (``>= gap_tol``). The smaller group's Chern number is computed as
    the static one is (:func:`~sweepcli.physics.chern.chern_number`): a base mesh of
    ``max(kmesh_n, min(gap_rule_kmesh(min(gap_0, gap_pi)), START_CAP))`` points per direction
    (raised by 1.5 while more than half its plaquettes fail, up to ``max_kmesh``), every
    plaquette whose bound does not prove it subdivided
    (:func:`~sweepcli.physics.certify.certified_chern` with the unitary constant ``pi / 2``;
    separation and slopes from :func:`floquet_subspace`: the local strip width between the two
    groups' eigenvalues at the corners and ``sum_f d_f ||dH_f/dk||`` of the drive's factors),
    up to ``WORK * max_kmesh**2`` points, else ``NOT_CONVERGED``. The other group's number is
    its negative (the two groups span every band, whose bundle is trivial). Proven and
    assumed: :mod:`sweepcli.physics.certify`; the operator is that of the time slicing
    ``slicing`` (default: the one the gap search used, ``gaps.slices``).
    """
    if not gaps.converged:
        return FloquetChern(None, None, None, math.nan, Reason.NOT_CONVERGED)
    if not (gaps.gap_0 >= gap_tol and gaps.gap_pi >= gap_tol):
        return FloquetChern(None, None, None, math.nan, Reason.GAP_CLOSED)
    if slicing is None and not drive.exact:
        slicing = Slicing(gaps.slices, 0.0, gaps.converged)
    n = min(max(kmesh_n, min(gap_rule_kmesh(min(gaps.gap_0, gaps.gap_pi)), START_CAP)),
            max_kmesh)
    # The size of the lower group, from the quasienergies at the gap's minimum.
    u = floquet_evolution(drive, np.zeros((1, 2)), slicing=slicing).u
    m = int(np.sum(quasienergies(u, drive.period)[0][0] < 0))
    norb = drive.norb
    if m in (0, norb):
        return FloquetChern(0, 0, None, 0.0, Reason.OK)
    upper = norb - m < m
    data, lip2 = floquet_subspace(drive, slicing, m, upper)
    c, flux, _, n = certified_chern(data, n, min(m, norb - m), lip2, flux_tol=flux_tol,
                                    budget=WORK * max_kmesh * max_kmesh, max_n=max_kmesh,
                                    growth=GROWTH, sylvester=math.pi / 2)
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
    w_0, w_pi : int or None (missing when that gap is closed or the integral did not settle).
    raw_0, raw_pi : the raw integrals on the last level (nan if not computed).
    residue : largest distance of a computed raw value from its integer (nan if none).
    kmesh : last k-mesh used.
    reason : Reason (GAP_CLOSED if either gap is closed, NOT_CONVERGED if a computed value did
        not settle; the other winding is still reported when it is well defined).
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

    Levels ``RUDNER_LEVELS`` with k-mesh ``>= kmesh_n`` and ``<= max_kmesh`` (every one of them:
    a single level may settle the value) are tried in turn. When both gaps are open the
    windings' difference is a Floquet band's Chern number, ``W_pi - W_0 = C_upper``
    (Rudner et al. 2013), which :func:`floquet_chern` proves (``chern``, computed when not
    given): a level is accepted when both raw integrals are within ``residue_tol`` of integers
    whose difference is that proven number; a proven difference that no level matches leaves
    both windings missing (``NOT_CONVERGED``). Where the Chern number could not be proven within
    its budget (the a-priori bound cannot see cancellations between the steps, e.g. the flat
    ``U(k)`` of the anomalous five-step drive) or one gap is closed, there is no such check,
    and a winding is accepted when two successive levels round to the same integer within
    ``residue_tol``.

    Proven and assumed: the difference ``W_pi - W_0`` of a pair stored with a proven Chern
    number is proven (the bound of :mod:`sweepcli.physics.certify`); the common part of both
    windings, and every winding stored without a proven Chern number, rests on the quadrature
    of :func:`rudner_integral` (spectral in k and t, its distance from an integer the measure
    of convergence), for which no a-priori bound is computed.
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
    prev = None
    raw = (math.nan, math.nan)
    n_used = None
    settled = [False, False]
    for n, q in levels:
        raw = rudner_integral(drive, n, q, slices=slices)
        n_used = n
        rounded = tuple(int(round(r)) for r in raw)
        res = [abs(r - i) for r, i in zip(raw, rounded)]
        if difference is not None:
            ok = res[0] < residue_tol and res[1] < residue_tol and \
                rounded[1] - rounded[0] == difference
            settled = [ok, ok]
        elif prev is not None:
            settled = [open_[g] and prev[g] == rounded[g] and res[g] < residue_tol
                       for g in (0, 1)]
        if all(settled[g] or not open_[g] for g in (0, 1)):
            break
        prev = rounded
    vals = [int(round(raw[g])) if (open_[g] and settled[g]) else None for g in (0, 1)]
    residues = [abs(raw[g] - round(raw[g])) for g in (0, 1) if open_[g]]
    if any(open_[g] and vals[g] is None for g in (0, 1)):
        reason = Reason.NOT_CONVERGED
    elif not all(open_):
        reason = Reason.GAP_CLOSED
    else:
        reason = Reason.OK
    raw_out = [raw[g] if open_[g] else math.nan for g in (0, 1)]
    each = [Reason.GAP_CLOSED if not open_[g] else
            Reason.NOT_CONVERGED if vals[g] is None else Reason.OK for g in (0, 1)]
    return RudnerWinding(vals[0], vals[1], raw_out[0], raw_out[1],
                         max(residues) if residues else math.nan, n_used, reason, *each)
