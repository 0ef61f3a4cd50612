"""Floquet spectra, quasienergy gaps and the topological invariants of periodic drives.

Conventions
-----------
* ``U = T exp(-i int_0^T H dt)`` (:mod:`sweepcli.physics.drive`); quasienergies ``eps`` in
  ``(-pi/T, pi/T]`` with ``U v = exp(-i eps T) v``, sorted ascending.
* The *0 gap* and the *pi gap* are the quasienergy windows around ``eps = 0`` and
  ``eps = pi/T``. ``gap_0 = 2 min_{k, j} |eps_j(k)|`` and
  ``gap_pi = 2 min_{k, j} (pi/T - |eps_j(k)|)`` (energy units): the width of the window centred
  on 0 (on pi/T) that no band enters. It is the distance between the neighbouring
  quasienergies straddling 0 (pi/T) when the spectrum is symmetric about it (chiral or
  particle-hole symmetric drives) and vanishes exactly where ``U(k)`` has the eigenvalue +1
  (-1), which is where the invariants of that gap may change. (A per-k straddling distance would
  stay finite while a single band touches the gap centre.)
* Floquet bands are grouped *between the gaps*: the "upper" group has ``eps`` in ``(0, pi/T)``,
  the "lower" group ``(-pi/T, 0)``; when both gaps are open the size of each group is the same
  at every k and each group is a smooth vector bundle.
* Chern numbers use :func:`sweepcli.physics.invariants.fhs_chern` (sign: the lower band of
  ``d.sigma`` has the degree of ``d_hat``). 1D windings use
  :func:`sweepcli.physics.invariants.det_winding` of the block ``P_- X P_+`` of the chiral
  operator's eigenspaces (SSH: +1 for ``|v| < |w|``).
* Momenta are reduced (``k_i = k . a_i``); reported locations are wrapped to ``[-pi, pi)``.

Published methods
-----------------
* Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013): winding ``W_eps`` of the periodised
  evolution; ``C_band = W(gap above) - W(gap below)``; the anomalous five-step drive.
* Asboth and Obuse, PRB 88, 121406 (2013); Asboth, Tarasinski and Delplace, PRB 90, 125143
  (2014): ``nu_0``, ``nu_pi`` of chiral 1D drives from the two symmetric time frames.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq, linear_sum_assignment

from ..schema import Reason
from . import invariants as inv
from .drive import (
    Drive,
    FactorStack,
    HarmonicDrive,
    Slicing,
    StepDrive,
    evolve,
    floquet_evolution,
    hermitian_exponential,
)
from .lattice import TightBinding, kmesh
from .spectrum import polish_minima, velocity_bound, wrap_k

#: Default mesh of the quasienergy-gap search (points per direction; minima are refined).
GAP_KMESH = 32
#: Largest accepted distance of the raw Rudner winding integral from an integer.
RESIDUE_TOL = 0.05
#: (k-mesh, Gauss nodes per factor) levels of the Rudner winding integral.
RUDNER_LEVELS = ((16, 6), (24, 8), (32, 10), (48, 12), (64, 16), (96, 20), (128, 24))
#: Largest accepted ``|[S, X]|`` (symmetry on a line) and ``|G U G - U^dagger|`` (chiral frame).
SYMMETRY_TOL = 1e-8


def _dagger(x: np.ndarray) -> np.ndarray:
    return np.conj(np.swapaxes(x, -1, -2))


# --------------------------------------------------------------------------------------------
# Eigen-decomposition of unitaries


def unitary_eig(u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Eigenphases and orthonormal eigenvectors of a batch of unitaries, stably.

    ``numpy.linalg.eig`` returns non-orthogonal vectors inside (nearly) degenerate eigenvalue
    clusters. Instead, for each matrix the phase in the middle of the largest gap of its
    eigenphases is rotated to -1, and the Cayley transform ``i (1 - W)(1 + W)^-1`` of the
    rotated ``W`` (Hermitian, eigenvalues ``tan(beta/2)``, a monotonic map of the phases so
    distinct phases stay distinct) is diagonalised with ``numpy.linalg.eigh``. Phases are then
    read off as Rayleigh quotients ``v^+ U v``.

    Parameters
    ----------
    u : (..., n, n) unitary

    Returns
    -------
    phases : (..., n) ``angle`` of the eigenvalues in ``(-pi, pi]``, ascending.
    vectors : (..., n, n) orthonormal columns in the same order.
    """
    u = np.asarray(u, dtype=complex)
    n = u.shape[-1]
    ph = np.sort(np.angle(np.linalg.eigvals(u)), axis=-1)
    gaps = np.diff(np.concatenate([ph, ph[..., :1] + 2 * np.pi], axis=-1), axis=-1)
    j = np.argmax(gaps, axis=-1)
    mid = np.take_along_axis(ph, j[..., None], -1)[..., 0] + \
        np.take_along_axis(gaps, j[..., None], -1)[..., 0] / 2
    w = np.exp(1j * (np.pi - mid))[..., None, None] * u
    eye = np.eye(n)
    h = 1j * np.linalg.solve(eye + w, eye - w)
    h = (h + _dagger(h)) / 2
    _, v = np.linalg.eigh(h)
    lam = np.einsum("...ji,...jk,...ki->...i", np.conj(v), u, v)
    phases = np.angle(lam)
    phases = np.where(phases <= -np.pi, phases + 2 * np.pi, phases)
    order = np.argsort(phases, axis=-1)
    phases = np.take_along_axis(phases, order, -1)
    v = np.take_along_axis(v, order[..., None, :], -1)
    return phases, v


def wrap_quasienergy(eps: np.ndarray, period: float) -> np.ndarray:
    """Quasienergies (or differences of them) reduced to ``(-pi/T, pi/T]``: ``-pi/T`` -> ``pi/T``.

    The one wrap of the project: bulk spectra, open samples and ribbons all use it.
    """
    half = np.pi / period
    return half - (half - np.asarray(eps, dtype=float)) % (2 * half)


def quasienergies(u: np.ndarray, period: float) -> tuple[np.ndarray, np.ndarray]:
    """Quasienergies ``(..., n)`` in ``(-pi/T, pi/T]``, ascending; eigenvectors ``(..., n, n)``.

    ``U v = exp(-i eps T) v``; vectors from :func:`unitary_eig` (orthonormal in degenerate
    clusters).
    """
    phases, v = unitary_eig(u)
    eps = wrap_quasienergy(-phases / period, period)
    order = np.argsort(eps, axis=-1)
    return np.take_along_axis(eps, order, -1), np.take_along_axis(v, order[..., None, :], -1)


def quasienergy_values(u: np.ndarray, period: float) -> np.ndarray:
    """Quasienergies only, ascending (``numpy.linalg.eigvals``; unitary spectra are stable)."""
    eps = -np.angle(np.linalg.eigvals(np.asarray(u, dtype=complex))) / period
    return np.sort(wrap_quasienergy(eps, period), axis=-1)


def gap_distances(eps: np.ndarray, period: float) -> tuple[np.ndarray, np.ndarray]:
    """Per-k distances ``min_j |eps_j|`` and ``min_j (pi/T - |eps_j|)`` (half the local gaps)."""
    a = np.abs(eps)
    return np.min(a, axis=-1), np.min(np.pi / period - a, axis=-1)


# --------------------------------------------------------------------------------------------
# Spectra on a mesh, gaps


@dataclass(frozen=True)
class FloquetMesh:
    """Floquet operator diagonalised on a uniform periodic mesh.

    Attributes
    ----------
    k : (N, ..., N, d) reduced momenta (:func:`sweepcli.physics.lattice.kmesh`).
    eps : (N, ..., N, n) quasienergies, ascending, energy units.
    vectors : (N, ..., N, n, n) orthonormal eigenvectors (columns).
    u : (N, ..., N, n, n) the Floquet operator.
    error, slices, converged : of the time integration (:class:`~sweepcli.physics.drive.Evolution`).
    """

    k: np.ndarray
    eps: np.ndarray
    vectors: np.ndarray
    u: np.ndarray
    error: float
    slices: int
    converged: bool


def floquet_mesh(drive: Drive, n: int, dim: int, slicing: Slicing | None = None) -> FloquetMesh:
    """Diagonalise ``U(k)`` on an ``n^dim`` mesh.

    ``slicing``: the drive's time slicing if already decided
    (:func:`~sweepcli.physics.drive.decide_slicing`); otherwise it is converged on this mesh.
    """
    k = kmesh(n, dim)
    ev = floquet_evolution(drive, k, slicing=slicing)
    eps, v = quasienergies(ev.u, drive.period)
    return FloquetMesh(k, eps, v, ev.u, ev.error, ev.slices, ev.converged)


@dataclass(frozen=True)
class FloquetGaps:
    """Quasienergy gaps at 0 and pi/T.

    Attributes
    ----------
    gap_0, gap_pi : float
        Energy units, see the module docstring; refined in continuous k.
    k_0, k_pi : (d,) reduced momenta of the minima, wrapped to ``[-pi, pi)``.
    grid_gap_0, grid_gap_pi : the same minima on the mesh only.
    converged : whether the time integration converged (harmonic drives).
    slices : time slices per period of that integration (1 for step and kick drives).
    """

    gap_0: float
    k_0: np.ndarray
    gap_pi: float
    k_pi: np.ndarray
    grid_gap_0: float
    grid_gap_pi: float
    converged: bool
    slices: int = 1


def distance_bound(drive: Drive, slices: int) -> float:
    """Lipschitz constant (energy per radian of reduced momentum) of every quasienergy band.

    ``dU/dk = -i int U(T, t) dH(t)/dk U(t, 0) dt`` has norm at most ``int ||dH/dk|| dt``, and an
    eigenphase of a unitary moves no faster than the operator, so
    ``|d eps / dk| <= (1/T) sum_f d_f v_f`` over the factors ``(d_f, H_f)`` with ``v_f`` from
    :func:`~sweepcli.physics.spectrum.velocity_bound` (a kick counts with duration 1). The
    distances ``min_j |eps_j|`` and ``min_j (pi/T - |eps_j|)`` have the same constant.
    """
    return sum(d * velocity_bound(tb.hoppings) for d, tb in drive.factors(slices=slices)
               ) / drive.period


def floquet_gaps(drive: Drive, mesh: FloquetMesh, *, refine: bool = True) -> FloquetGaps:
    """Gaps at quasienergy 0 and pi/T from a mesh, each minimum refined off the grid.

    The local minima of ``min_j |eps_j|`` (resp. ``pi/T - |eps_j|``) on the mesh that could
    hide a lower value are polished in continuous k
    (:func:`~sweepcli.physics.spectrum.polish_minima` on the squared distance, with the
    Lipschitz constant of :func:`distance_bound`); ``U(k)`` off the mesh comes from the stacked
    factors at the mesh's slicing. The closings are where ``U(k)`` has eigenvalue +1 (resp. -1),
    where both distances are cone-shaped.
    """
    T = drive.period
    d0, dpi = gap_distances(mesh.eps, T)
    dim = mesh.k.shape[-1]
    kflat = mesh.k.reshape(-1, dim)
    stack = FactorStack(drive.factors(slices=mesh.slices)) if refine else None
    lipschitz = distance_bound(drive, mesh.slices) if refine else 0.0

    out = []
    for which, dist in ((0, d0), (1, dpi)):
        grid_i = int(np.argmin(dist))
        grid = float(dist.ravel()[grid_i])
        if refine:
            def f(k: np.ndarray, which: int = which) -> np.ndarray:
                return gap_distances(quasienergy_values(stack.operator(k), T), T)[which]
            best, kbest = polish_minima(f, dist, mesh.k, lipschitz, square=True)
        else:
            best, kbest = grid, kflat[grid_i]
        out.append((2 * max(best, 0.0), wrap_k(kbest), 2 * grid))
    (g0, k0, gg0), (gpi, kpi, ggpi) = out
    return FloquetGaps(g0, k0, gpi, kpi, gg0, ggpi, mesh.converged, mesh.slices)


# --------------------------------------------------------------------------------------------
# Floquet bands and their Chern numbers


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
        (sign of :func:`sweepcli.physics.invariants.fhs_chern`); ``None`` if missing. A group
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


def floquet_chern(drive: Drive, gaps: FloquetGaps, *, gap_tol: float = 1e-6,
                  kmesh_n: int = inv.CHERN_KMESH, max_kmesh: int = inv.CHERN_MAX_KMESH,
                  flux_tol: float = inv.FLUX_TOL,
                  mesh_of: Callable[[int], FloquetMesh] | None = None) -> FloquetChern:
    """Chern numbers of both Floquet band groups of a 2D drive, with a convergence policy.

    Both gaps must be open (``>= gap_tol``). The first mesh is
    ``max(kmesh_n, gap_rule_kmesh(min(gap_0, gap_pi)))``; the answer is accepted when two
    successive meshes (growth 1.5) have the largest plaquette flux below ``flux_tol`` and agree,
    as for static bands (:mod:`sweepcli.physics.invariants`).
    """
    if not (gaps.gap_0 >= gap_tol and gaps.gap_pi >= gap_tol):
        return FloquetChern(None, None, None, math.nan, Reason.GAP_CLOSED)
    mesh_of = mesh_of or (lambda n: floquet_mesh(drive, n, 2))
    start = max(kmesh_n, inv.gap_rule_kmesh(min(gaps.gap_0, gaps.gap_pi)))
    prev = None
    last_n, last_flux = None, math.nan
    for n in inv.mesh_sequence(min(start, max_kmesh), max_kmesh, inv.GROWTH):
        mesh = mesh_of(n)
        if not mesh.converged:
            return FloquetChern(None, None, n, math.nan, Reason.NOT_CONVERGED)
        groups = band_groups(mesh.eps, mesh.vectors)
        if groups is None:
            return FloquetChern(None, None, n, math.nan, Reason.GAP_CLOSED)
        values, flux = [], 0.0
        for g in groups:
            if g.shape[-1] == 0:
                values.append(0)
                continue
            c, f = inv.fhs_chern(g)
            values.append(c)
            flux = max(flux, f)
        last_n, last_flux = n, flux
        ok = flux < flux_tol
        if ok and prev is not None and prev == values:
            return FloquetChern(values[1], values[0], n, flux, Reason.OK)
        prev = values if ok else None
    return FloquetChern(None, None, last_n, last_flux, Reason.NOT_CONVERGED)


# --------------------------------------------------------------------------------------------
# Rudner winding of the periodised evolution


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
    Floquet band with this project's Chern sign (:func:`~sweepcli.physics.invariants.fhs_chern`,
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
    heff = {g: vf @ (a[..., :, None] * _dagger(vf)) / T for g, a in alpha.items()}
    total = {0: 0.0 + 0j, 1: 0.0 + 0j}
    harmonic = isinstance(drive, HarmonicDrive)
    u_start = np.broadcast_to(np.eye(drive.norb, dtype=complex), k.shape[:-1] + (drive.norb,) * 2)
    tau = 0.0
    for d, tb in mats:
        h = tb.bloch(k)
        e, v = np.linalg.eigh(h)
        emax = float(np.max(np.abs(e)))
        q = 3 if harmonic else nodes + int(math.ceil(d * emax + 2 * np.pi * d / tau_total))
        x, wq = np.polynomial.legendre.leggauss(q)
        x, wq = (x + 1) / 2, wq / 2
        vh = _dagger(v)
        for xi, wi in zip(x, wq):
            ut = (v * np.exp(-1j * e * xi * d)[..., None, :]) @ vh @ u_start
            s = (tau + xi * d) / tau_total
            gen = _dagger(ut) @ (-1j * h) @ ut
            for g in (0, 1):
                es = vf @ (np.exp(1j * alpha[g] * s)[..., :, None] * _dagger(vf))
                ue = ut @ es
                ueh = _dagger(ue)
                a_t = _dagger(es) @ gen @ es + 1j * heff[g] * T / tau_total
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
    """

    w_0: int | None
    w_pi: int | None
    raw_0: float
    raw_pi: float
    residue: float
    kmesh: int | None
    reason: Reason


def rudner_winding(drive: Drive, gaps: FloquetGaps, *, gap_tol: float = 1e-6,
                   kmesh_n: int = 16, max_kmesh: int = 128, residue_tol: float = RESIDUE_TOL
                   ) -> RudnerWinding:
    """``W_0`` and ``W_pi`` of a 2D drive (see :func:`rudner_integral`), raised until settled.

    Levels ``RUDNER_LEVELS`` with k-mesh ``>= kmesh_n`` and ``<= max_kmesh`` are tried in turn;
    a value is accepted when two successive levels round to the same integer and the last is
    within ``residue_tol`` of it.
    """
    if not gaps.converged:
        return RudnerWinding(None, None, math.nan, math.nan, math.nan, None,
                             Reason.NOT_CONVERGED)
    open_ = (gaps.gap_0 >= gap_tol, gaps.gap_pi >= gap_tol)
    if not any(open_):
        return RudnerWinding(None, None, math.nan, math.nan, math.nan, None, Reason.GAP_CLOSED)
    # The slice count at which the mesh evolution converged (harmonic drives).
    slices = gaps.slices if isinstance(drive, HarmonicDrive) else None
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
        if prev is not None:
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
    return RudnerWinding(vals[0], vals[1], raw_out[0], raw_out[1],
                         max(residues) if residues else math.nan, n_used, reason)


# --------------------------------------------------------------------------------------------
# Chiral 1D invariants from the symmetric time frames


@dataclass(frozen=True)
class ChiralWindings:
    """Invariants of the 0 and pi gaps of a chiral-symmetric (sector of a) 1D drive.

    Attributes
    ----------
    nu_0, nu_pi : int or None.
    nu, nu_prime : windings of the two symmetric frames (None unless both gaps are open).
    gap_0, gap_pi : gaps on the line's mesh (energy units, ``2 min |eps|`` as in the module
        docstring).
    kmesh : mesh used last.
    reason : Reason.
    """

    nu_0: int | None
    nu_pi: int | None
    nu: int | None
    nu_prime: int | None
    gap_0: float
    gap_pi: float
    kmesh: int | None
    reason: Reason


def _chiral_check(u: np.ndarray, g: np.ndarray, what: str) -> None:
    err = float(np.max(np.abs(g @ u @ g - _dagger(u)), initial=0.0))
    if err > SYMMETRY_TOL * 1e3:
        raise ValueError(f"the {what} is not chiral symmetric (|G U G - U^+| = {err:.2g}); "
                         f"start the frames at time-reversal-symmetric times of a drive whose "
                         f"steps anticommute with the chiral operator")


def chiral_from_frames(u1: np.ndarray, u2: np.ndarray, f: np.ndarray, chiral: np.ndarray,
                       period: float, *, gap_tol: float = 1e-6,
                       phase_tol: float = inv.PHASE_TOL) -> tuple[ChiralWindings, float]:
    """``nu_0, nu_pi`` from the frames ``U_1 = U(t1 + T, t1)``, ``U_2`` and ``F = U(t1 + T/2, t1)``.

    Construction (Asboth and Obuse 2013; Asboth, Tarasinski and Delplace 2014): in a symmetric
    frame ``G U G = U^+``, so ``H_eff = (i/T) log U`` is chiral and its block
    ``h = P_- H_eff P_+`` has a winding. The block ``P_- U P_+ = -i h sin(T sqrt(h^+ h)) /
    sqrt(h^+ h)`` has the same determinant winding without any logarithm (the second factor
    is positive while both gaps are open), so ``nu`` and ``nu'`` are the windings of
    ``det P_- U_1 P_+`` and ``det P_- U_2 P_+``, and ``nu_0 = (nu + nu')/2``,
    ``nu_pi = (nu - nu')/2``. This needs both gaps. When only one gap is open the half-period
    operator is used instead: with ``U_1 = G F^+ G F``, ``U_1`` has eigenvalue +1 (-1) exactly
    where ``P_- F P_+`` (``P_+ F P_+``) is singular, and ``nu_0 = wind det P_- F P_+``,
    ``nu_pi = wind det P_+ F P_+`` (equal to the frame formula when both gaps are open; this is
    checked by the tests).

    Parameters
    ----------
    u1, u2, f : (N, m, m) on a closed loop ``k_j = k(2 pi j / N)``.
    chiral : (m, m) chiral operator (Hermitian, squares to 1, traceless).

    Returns
    -------
    (ChiralWindings, largest phase step) — the caller refines the mesh while the step exceeds
    ``phase_tol``.
    """
    g = np.asarray(chiral, dtype=complex)
    eps = quasienergy_values(u1, period)
    d0, dpi = gap_distances(eps, period)
    gap0, gappi = 2 * float(d0.min()), 2 * float(dpi.min())
    open0, openpi = gap0 >= gap_tol, gappi >= gap_tol
    n = u1.shape[0]
    if not (open0 or openpi):
        return ChiralWindings(None, None, None, None, gap0, gappi, n, Reason.GAP_CLOSED), 0.0
    pm, pp = inv.chiral_eigenbasis(g)
    if open0 and openpi:
        nu, s1 = inv.det_winding(inv.chiral_blocks(u1, g))
        nup, s2 = inv.det_winding(inv.chiral_blocks(u2, g))
        step = max(s1, s2)
        if (nu + nup) % 2:
            return ChiralWindings(None, None, nu, nup, gap0, gappi, n,
                                  Reason.NOT_CONVERGED), math.pi
        return ChiralWindings((nu + nup) // 2, (nu - nup) // 2, nu, nup, gap0, gappi, n,
                              Reason.OK), step
    if open0:
        v, step = inv.det_winding(np.conj(pm.T) @ f @ pp)
        return ChiralWindings(v, None, None, None, gap0, gappi, n, Reason.GAP_CLOSED), step
    v, step = inv.det_winding(np.conj(pp.T) @ f @ pp)
    return ChiralWindings(None, v, None, None, gap0, gappi, n, Reason.GAP_CLOSED), step


def half_period_windings(f: np.ndarray, chiral: np.ndarray) -> tuple[int, int]:
    """``(wind det P_- F P_+, wind det P_+ F P_+)`` of a half-period operator on a loop."""
    pm, pp = inv.chiral_eigenbasis(chiral)
    return (inv.det_winding(np.conj(pm.T) @ f @ pp)[0],
            inv.det_winding(np.conj(pp.T) @ f @ pp)[0])


def _line(origin: Sequence[float], direction: Sequence[float], n: int) -> np.ndarray:
    s = 2 * np.pi * np.arange(n) / n
    return np.asarray(origin, float)[None, :] + s[:, None] * np.asarray(direction, float)[None, :]


def _check_direction(direction: Sequence[float], dim: int) -> np.ndarray:
    d = np.asarray(direction, dtype=float).ravel()
    if d.size != dim:
        raise ValueError(f"the line direction needs {dim} components; got {d.size}")
    if not np.allclose(d, np.round(d)) or not np.any(np.round(d)):
        raise ValueError(f"the line direction must be a nonzero integer vector in reduced "
                         f"coordinates so that the line closes on itself; got {list(d)}")
    return np.round(d)


def frame_times(drive: Drive, chiral: np.ndarray, times: Sequence[float] | None
                ) -> tuple[float, float]:
    """The two symmetric starting times: given, or found for a :class:`StepDrive`."""
    if times is not None:
        t = [float(x) for x in times]
        if len(t) == 1:
            t.append((t[0] + drive.period / 2) % drive.period)
        if len(t) != 2:
            raise ValueError("give one or two symmetric times")
        return t[0], t[1]
    if not isinstance(drive, StepDrive):
        raise ValueError("symmetric times are found automatically only for step drives; give "
                         "them explicitly for this drive")
    return drive.symmetric_times(chiral)


def _frames_on(drive: Drive, k: np.ndarray, t1: float, t2: float, slicing: Slicing | None = None
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray, bool]:
    T = drive.period
    e1 = floquet_evolution(drive, k, start=t1, slicing=slicing)
    e2 = floquet_evolution(drive, k, start=t2, slicing=slicing)
    ef = floquet_evolution(drive, k, start=t1, stop=t1 + T / 2, slicing=slicing)
    return e1.u, e2.u, ef.u, e1.converged and e2.converged and ef.converged


def _walk(measure: Callable[[int], tuple[ChiralWindings, float]], kmesh_n: int, max_kmesh: int,
          phase_tol: float) -> ChiralWindings:
    prev = None
    last = None
    for n in inv.mesh_sequence(kmesh_n, max_kmesh, 2.0):
        r, step = measure(n)
        last = r
        if r.reason == Reason.GAP_CLOSED and r.nu_0 is None and r.nu_pi is None:
            return r
        key = (r.nu_0, r.nu_pi)
        if step < phase_tol and prev == key:
            return r
        prev = key if step < phase_tol else None
    return ChiralWindings(None, None, None, None, last.gap_0, last.gap_pi, last.kmesh,
                          Reason.NOT_CONVERGED)


def chiral_windings(drive: Drive, chiral: np.ndarray, *, times: Sequence[float] | None = None,
                    origin: Sequence[float] | None = None,
                    direction: Sequence[float] | None = None, gap_tol: float = 1e-6,
                    kmesh_n: int = inv.WINDING_KMESH, max_kmesh: int = 4096,
                    phase_tol: float = inv.PHASE_TOL, slicing: Slicing | None = None
                    ) -> ChiralWindings:
    """``nu_0`` and ``nu_pi`` of a chiral 1D drive (or along a line of a 2D drive).

    Parameters
    ----------
    drive : the compiled drive; every step must satisfy the chiral relation at the frames.
    chiral : (n, n) chiral operator.
    times : the symmetric starting times ``(t1, t2)``; found by
        :meth:`~sweepcli.physics.drive.StepDrive.symmetric_times` when omitted. ``nu`` belongs
        to ``t1``; exchanging ``t1`` and ``t2`` flips the sign of ``nu_pi``.
    origin, direction : the loop ``k(s) = origin + s direction``, ``s`` in ``[0, 2 pi)``
        (default: the 1D Brillouin zone).
    kmesh_n, max_kmesh, phase_tol : the mesh is doubled until the largest phase step of the
        determinants is below ``phase_tol`` on two meshes that agree.
    slicing : the drive's time slicing if already decided
        (:func:`~sweepcli.physics.drive.decide_slicing`); otherwise converged per frame and mesh.

    Raises
    ------
    ValueError if a frame is not chiral symmetric.
    """
    dim = drive.dim
    origin = np.zeros(dim) if origin is None else np.asarray(origin, float)
    direction = _check_direction(np.ones(1) if direction is None else direction, dim)
    g = np.asarray(chiral, dtype=complex)
    t1, t2 = frame_times(drive, g, times)

    def measure(n: int) -> tuple[ChiralWindings, float]:
        u1, u2, f, ok = _frames_on(drive, _line(origin, direction, n), t1, t2, slicing)
        if not ok:
            return ChiralWindings(None, None, None, None, math.nan, math.nan, n,
                                  Reason.NOT_CONVERGED), math.pi
        _chiral_check(u1, g, f"frame at t = {t1:g}")
        _chiral_check(u2, g, f"frame at t = {t2:g}")
        return chiral_from_frames(u1, u2, f, g, drive.period, gap_tol=gap_tol,
                                  phase_tol=phase_tol)

    return _walk(measure, kmesh_n, max_kmesh, phase_tol)


# --------------------------------------------------------------------------------------------
# Symmetry-resolved windings along an invariant line


@dataclass(frozen=True)
class SectorWinding:
    """Windings of one eigen-sector of a symmetry operator ``S`` on a line.

    Attributes
    ----------
    eigenvalue : complex eigenvalue of ``S`` labelling the sector.
    size : number of orbitals in the sector.
    result : :class:`ChiralWindings` of the sector (for a static model ``nu_0`` is the static
        winding and ``nu_pi`` is None).
    """

    eigenvalue: complex
    size: int
    result: ChiralWindings


def symmetry_sectors(operator: np.ndarray, tol: float = 1e-6) -> list[tuple[complex, np.ndarray]]:
    """Eigen-sectors ``(eigenvalue, Q)`` of a unitary ``S``, ``Q`` with orthonormal columns.

    Sectors are ordered by the eigenvalue's phase ``angle(lambda)`` in ``(-pi, pi]``; eigenvalues
    closer than ``tol`` share a sector.
    """
    s = np.asarray(operator, dtype=complex)
    if s.ndim != 2 or s.shape[0] != s.shape[1]:
        raise ValueError("the symmetry operator must be a square matrix")
    if np.max(np.abs(s @ _dagger(s) - np.eye(s.shape[0]))) > 1e-8:
        raise ValueError("the symmetry operator must be unitary")
    ph, v = unitary_eig(s)
    groups: list[list[int]] = []
    for j in range(len(ph)):
        if groups and abs(np.exp(1j * ph[j]) - np.exp(1j * ph[groups[-1][0]])) < tol:
            groups[-1].append(j)
        else:
            groups.append([j])
    first, last = np.exp(1j * ph[groups[0][0]]), np.exp(1j * ph[groups[-1][0]])
    if len(groups) > 1 and abs(first - last) < tol:
        groups[0] = groups.pop() + groups[0]  # phases just either side of pi
    return [(complex(np.exp(1j * ph[gr[0]])), v[:, gr]) for gr in groups]


def commutator_violation(s: np.ndarray, x: np.ndarray) -> float | None:
    """Largest entry of ``|[S, X]|`` when ``S`` does not commute with ``X``, else ``None``.

    ``x`` is ``(..., n, n)`` (a batch, e.g. ``H(k)`` on a line); ``S`` commutes when every
    entry is at most ``SYMMETRY_TOL * max(1, max |X|)``. The one commutation test of line
    symmetries, at job load and in :func:`line_sector_windings`.
    """
    err = float(np.max(np.abs(s @ x - x @ s), initial=0.0))
    return err if err > SYMMETRY_TOL * max(1.0, float(np.max(np.abs(x)))) else None


def _commutator_check(s: np.ndarray, x: np.ndarray, what: str, line: str) -> None:
    err = commutator_violation(s, x)
    if err is not None:
        raise ValueError(f"the symmetry operator does not commute with {what} on the line "
                         f"{line} (largest |[S, X]| = {err:.3g}); choose a line that the "
                         f"symmetry maps to itself pointwise, or another operator")


def line_sector_windings(source: Drive | TightBinding, operator: np.ndarray,
                         chiral: np.ndarray, *, origin: Sequence[float],
                         direction: Sequence[float], times: Sequence[float] | None = None,
                         gap_tol: float = 1e-6, kmesh_n: int = inv.WINDING_KMESH,
                         max_kmesh: int = 4096, phase_tol: float = inv.PHASE_TOL,
                         slicing: Slicing | None = None) -> list[SectorWinding]:
    """Windings at the 0 and pi gaps of each eigen-sector of ``S`` on a line of the BZ.

    On the line ``k(s) = origin + s direction`` (reduced coordinates, ``s`` in ``[0, 2 pi)``,
    ``direction`` an integer vector so the line closes) the symmetry ``S`` must commute with
    ``U(k)`` in both symmetric frames (a drive) or with ``H(k)`` (a static model), and with the
    chiral operator. ``U`` (or ``H``) is then block diagonal in the eigen-sectors of ``S``
    (:func:`symmetry_sectors`), each block is chiral with ``G_s = Q^+ G Q``, and each block's
    ``nu_0``, ``nu_pi`` follow from the same symmetric-frame construction as
    :func:`chiral_windings` (static: the winding of ``det P_- H_s P_+``). A sector whose
    chiral operator has unequal numbers of +1 and -1 eigenvalues has no winding (its result is
    missing with ``Reason.SECTOR_GAP_CLOSED``, the sector being gapless at 0). ``slicing`` as
    in :func:`chiral_windings`.

    Raises
    ------
    ValueError
        If ``S`` is not unitary, does not commute with ``U(k)``/``H(k)`` on the line or with
        the chiral operator, or a frame is not chiral symmetric.
    """
    s = np.asarray(operator, dtype=complex)
    g = np.asarray(chiral, dtype=complex)
    dim = source.dim
    origin = np.asarray(origin, dtype=float).ravel()
    if origin.size != dim:
        raise ValueError(f"the line origin needs {dim} components; got {origin.size}")
    direction = _check_direction(direction, dim)
    if s.shape != g.shape:
        raise ValueError(f"the symmetry operator is {s.shape[0]}x{s.shape[1]} but the model has "
                         f"{g.shape[0]} orbitals")
    line = f"k = {list(origin)} + s {list(direction)}"
    sectors = symmetry_sectors(s)
    _commutator_check(s, g, "the chiral operator", line)
    static = isinstance(source, TightBinding)
    t1 = t2 = 0.0
    if not static:
        t1, t2 = frame_times(source, g, times)
    cache: dict[int, tuple] = {}

    def data(n: int):
        if n not in cache:
            k = _line(origin, direction, n)
            if static:
                h = source.bloch(k)
                _commutator_check(s, h, "H(k)", line)
                cache[n] = (h, None, None, True)
            else:
                u1, u2, f, ok = _frames_on(source, k, t1, t2, slicing)
                for u, t in ((u1, t1), (u2, t2)):
                    _commutator_check(s, u, f"U(k) of the frame at t = {t:g}", line)
                    _chiral_check(u, g, f"frame at t = {t:g}")
                cache[n] = (u1, u2, f, ok)
        return cache[n]

    out: list[SectorWinding] = []
    for lam, q in sectors:
        qh = np.conj(q.T)
        gs = qh @ g @ q
        ws = np.linalg.eigvalsh((gs + _dagger(gs)) / 2)
        m = q.shape[1]
        if int(np.sum(ws < 0)) * 2 != m:
            out.append(SectorWinding(lam, m, ChiralWindings(None, None, None, None, 0.0, 0.0,
                                                            None, Reason.SECTOR_GAP_CLOSED)))
            continue

        def measure(n: int, qh=qh, q=q, gs=gs) -> tuple[ChiralWindings, float]:
            x1, x2, f, ok = data(n)
            if static:
                hs = qh @ x1 @ q
                e = np.linalg.eigvalsh(hs)
                gap0 = 2 * float(np.min(np.abs(e)))
                if not gap0 >= gap_tol:
                    return ChiralWindings(None, None, None, None, gap0, math.nan, n,
                                          Reason.GAP_CLOSED), 0.0
                v, step = inv.det_winding(inv.chiral_blocks(hs, gs))
                return ChiralWindings(v, None, None, None, gap0, math.nan, n, Reason.OK), step
            if not ok:
                return ChiralWindings(None, None, None, None, math.nan, math.nan, n,
                                      Reason.NOT_CONVERGED), math.pi
            return chiral_from_frames(qh @ x1 @ q, qh @ x2 @ q, qh @ f @ q, gs, source.period,
                                      gap_tol=gap_tol, phase_tol=phase_tol)

        out.append(SectorWinding(lam, m, _walk(measure, kmesh_n, max_kmesh, phase_tol)))
    return out


# --------------------------------------------------------------------------------------------
# Predicted transition lines


@dataclass(frozen=True)
class Transition:
    """An eigenphase of ``U(k*)`` crossing 0 or pi as a parameter varies.

    Attributes
    ----------
    value : parameter value of the crossing.
    gap : ``"0"`` or ``"pi"``.
    index : flat index of the momentum (leading axes of ``U``) where it happens.
    """

    value: float
    gap: str
    index: int


def transition_points(u_of: Callable[[float], np.ndarray], grid: Sequence[float], *,
                      xtol: float = 1e-12, check_tol: float = 1e-6) -> list[Transition]:
    """Parameter values where an eigenphase of ``U(k*)`` crosses 0 or pi.

    Parameters
    ----------
    u_of : callable ``p -> U`` of shape ``(..., n, n)`` (fixed momenta on the leading axes, e.g.
        the high-symmetry points or a line).
    grid : increasing parameter values; crossings are searched between neighbours.

    Method: at neighbouring grid values the eigenvectors are matched by overlap (an assignment
    maximising ``sum |<v_a|v_b>|^2``), which follows each eigenphase branch through a crossing
    even when the spectrum is symmetric (``+-phi`` passing through 0 leaves the sorted phases
    unchanged). A branch whose signed phase changes sign near 0 (near pi) brackets a crossing;
    ``scipy.optimize.brentq`` then finds the root of that branch's phase (phase minus pi),
    the branch being followed at each trial value by maximal overlap with its left-end
    eigenvector. A root is kept only if ``U`` really has an eigenphase within ``check_tol`` of
    0 (pi) there. A grid value where ``U`` already has such an eigenphase is a transition at
    that value.
    """
    grid = [float(x) for x in grid]
    if any(b <= a for a, b in zip(grid, grid[1:])):
        raise ValueError("the parameter grid must be strictly increasing")

    def eig(p: float) -> tuple[np.ndarray, np.ndarray]:
        u = np.asarray(u_of(p), dtype=complex)
        n = u.shape[-1]
        ph, v = unitary_eig(u.reshape(-1, n, n))
        return ph, v

    found: list[Transition] = []

    def on_grid(p: float, ph: np.ndarray) -> None:
        # A closing that falls on a grid value itself: no sign change brackets it, and the
        # branches touching 0 (pi) there may be degenerate, so record it directly.
        for m in range(ph.shape[0]):
            for kind, dist in (("0", np.min(np.abs(ph[m]))),
                               ("pi", np.min(np.pi - np.abs(ph[m])))):
                if dist < check_tol and not any(abs(t.value - p) < 1e3 * xtol and t.gap == kind
                                                and t.index == m for t in found):
                    found.append(Transition(p, kind, m))

    prev = eig(grid[0])
    on_grid(grid[0], prev[0])
    for a, b in zip(grid, grid[1:]):
        cur = eig(b)
        on_grid(b, cur[0])
        (pa, va), (pb, vb) = prev, cur
        for m in range(pa.shape[0]):
            overlap = np.abs(np.conj(va[m].T) @ vb[m]) ** 2
            rows, cols = linear_sum_assignment(-overlap)
            for j, jj in zip(rows, cols):
                x, y = pa[m, j], pb[m, jj]
                if np.sign(x) == np.sign(y) or x == 0 or y == 0:
                    continue
                kind = "0" if max(abs(x), abs(y)) < np.pi / 2 else "pi"
                if kind == "pi" and min(abs(x), abs(y)) < np.pi / 2:
                    continue
                ref = va[m][:, j]

                def branch(p: float, ref=ref, m=m, kind=kind) -> float:
                    ph, v = eig(p)
                    jj = int(np.argmax(np.abs(np.conj(v[m].T) @ ref)))
                    phi = ph[m, jj]
                    return phi if kind == "0" else (phi % (2 * np.pi)) - np.pi

                try:
                    root = brentq(branch, a, b, xtol=xtol)
                except ValueError:
                    continue
                ph, _ = eig(root)
                dist = np.min(np.abs(ph[m])) if kind == "0" else np.min(np.pi - np.abs(ph[m]))
                if dist < check_tol and not any(abs(t.value - root) < 1e3 * xtol and
                                                t.gap == kind and t.index == m for t in found):
                    found.append(Transition(root, kind, m))
        prev = cur
    return sorted(found, key=lambda t: t.value)
