"""Wilson loops of a band group: Wannier centres, polarisation, the Wannier gap, and nested
Wilson loops for the quadrupole moment.

Pure functions over arrays. A *band group* is a callable ``group(k)`` that returns, at reduced
momenta ``k`` of shape ``(..., d)``, orthonormal columns ``(..., n, m)`` spanning the group and
its separation from the other bands there (:func:`static_group`: the lowest ``nocc`` bands or
the rest; :func:`floquet_group`: the Floquet bands between the 0 and pi gaps).

Conventions
-----------
* Reduced momenta and the periodic gauge of :mod:`sweepcli.physics.lattice`:
  ``H(k + 2 pi e_i) = H(k)``, so the eigenvectors at the end of a loop are those at its start
  and the discretised loop closes exactly. Orbital positions do not enter ``H(k)``, so Wannier
  centres are measured as if every orbital sat at the origin of its cell, in units of the
  lattice vector ``a_{axis+1}`` along the loop (the convention of the Bloch Hamiltonians of
  Benalcazar, Bernevig and Hughes 2017, whose quantised values 0 and 1/2 hold in it).
* The Wilson loop along ``axis`` (``k_axis`` from 0 to 2 pi on ``N`` points ``k_j``) at
  transverse momentum ``k_perp`` is ``W = F_{N-1} ... F_1 F_0`` with
  ``F_j = V(k_{j+1})^+ V(k_j)`` replaced by its unitary polar part (``U S V^+ -> U V^+``), and
  ``V(k_N) = V(k_0)``. Its eigenvalues are ``exp(i 2 pi nu)``, ``nu`` the Wannier centres in
  ``[0, 1)`` (Benalcazar, Bernevig and Hughes, Science 357, 61 (2017), and PRB 96, 245115
  (2017), whose sign convention this is: for one band ``nu = (1/2 pi) oint A`` with
  ``A = i <u|d_k u>``).
* The polarisation of the group at ``k_perp`` is ``sum nu mod 1`` (the Berry phase of the group
  over 2 pi); its winding as ``k_perp`` runs over the zone (the *Wannier flow*) is an integer:
  ``-C`` for loops along ``k_1`` (``axis = 0``) and ``+C`` for loops along ``k_2``, ``C`` the
  Chern number of the group with the sign of :mod:`sweepcli.physics.chern` (from
  ``d/dk_2 oint A_1 dk_1 = -oint Omega_12 dk_1``; the flow-Chern relation is that of Yu, Qi,
  Bernevig, Fang and Dai, PRB 84, 075119 (2011), cited from memory). The polarisation averaged
  over ``k_perp`` is defined only where the flow is zero.

Convergence
-----------
The discretised loop converges as the mesh grows; the loop mesh is doubled until no Wannier
centre changes by more than ``tol`` (a distance on the circle ``[0, 1)``), and the transverse
mesh is doubled until neighbouring polarisations differ by less than ``step_tol`` (so the flow
counts every turn) and, for a zero flow, the trapezoid average agrees with the average over
every other point. Otherwise the result is not converged. The Wannier gap (the smallest
distance between two Wannier bands, on the circle) is the minimum on the transverse mesh,
polished in continuous ``k_perp`` with scipy's bounded scalar minimiser.

Nested Wilson loops (:func:`nested_polarisation`, :func:`quadrupole`)
----------------------------------------------------------------------
As Benalcazar, Bernevig and Hughes (Science 2017; PRB 96, 245115 (2017)), written from memory:
the Wilson loop along ``x`` based at each ``k`` (transported from its base ``k_x = 0`` by the
partial products ``G_i = F_{i-1} ... F_0``, so ``W_i = G_i W_0 G_i^+``), the Wannier sector
``nu_x^+``, the eigenvectors of ``W`` with ``nu_x`` in ``(0, 1/2)``, and the Wannier states
``w(k) = V(k) G(k) E_+(k_y)`` that span it. The nested loop along ``y`` of these states at each
``k_x`` gives the Wannier-sector polarisation
``p_y^{nu_x^+} = (1/N_x) sum_{k_x} (1/2 pi) arg det W~_y(k_x)`` (mod 1), and likewise
``p_x^{nu_y^+}`` from loops along ``y`` nested along ``x``. The sector is well defined while no
Wannier centre reaches the cuts 0 and 1/2: its gap is twice the smallest distance of a centre
from them (for a spectrum symmetric about 0, as reflection symmetry makes it, the distance
between the two sectors). The quadrupole moment is ``q_xy = 2 p_x^{nu_y^+} p_y^{nu_x^+} mod 1``
(BBH PRB 96, 245115 (2017), the Z2 product form, from memory); reflection symmetries quantise
both sector polarisations to 0 or 1/2, so ``q_xy`` is 0 or 1/2 (1/2 in the quadrupole phase
``|gamma/lambda| < 1`` of their model).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from ..schema import Reason
from .drives.base import Drive
from .drives.evolution import Slicing, floquet_evolution
from .lattice import TightBinding, kmesh
from .quasienergy import dagger, gap_distances, quasienergies, unitary_eig

#: Smallest accepted singular value of a link ``V(k_{j+1})^+ V(k_j)``: below it the subspace
#: turns by nearly 90 degrees between two mesh points and the mesh is too coarse.
SINGULAR_TOL = 0.2
#: Largest accepted change of the polarisation between neighbouring transverse momenta
#: (fraction of a turn; 1 rad as for the phase steps of windings, see ``PHASE_TOL``).
STEP_TOL = 1.0 / (2 * math.pi)

Group = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]


# ----------------------------------------------------------------------------------------------
# Band groups
# ----------------------------------------------------------------------------------------------

def static_group(tb: TightBinding, nocc: int, upper: bool = False) -> Group:
    """The lowest ``nocc`` bands of ``tb`` (``upper``: the others) and their direct gap.

    ``group(k) -> (vectors (..., n, m), gap (...))`` with ``gap = E_nocc - E_{nocc-1}``
    (energy).
    """
    if not 0 < nocc < tb.norb:
        raise ValueError(f"a band group of {nocc} filled bands needs 0 < filling < {tb.norb}")

    def group(k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        e, v = np.linalg.eigh(tb.bloch(k))
        vec = v[..., nocc:] if upper else v[..., :nocc]
        return vec, e[..., nocc] - e[..., nocc - 1]
    return group


def floquet_group(drive: Drive, slicing: Slicing | None = None, upper: bool = False) -> Group:
    """The Floquet bands with quasienergy in ``(-pi/T, 0)`` (``upper``: ``(0, pi/T)``).

    ``group(k) -> (vectors (..., n, m), separation (...))``: the columns of the group (its size
    fixed by ``k = 0``) and ``2 min(d_0, d_pi)`` (energy), ``d_0``, ``d_pi`` the distances of the
    quasienergies from 0 and pi/T (:func:`~sweepcli.physics.quasienergy.gap_distances`); the
    separation is 0 where the group has another size (a gap is closed there).
    """
    period = drive.period
    eps0, _ = quasienergies(floquet_evolution(drive, np.zeros((1, drive.dim)),
                                              slicing=slicing).u, period)
    m = int(np.sum(eps0[0] < 0))
    if (m == 0 and not upper) or (m == drive.norb and upper):
        raise ValueError("the Floquet band group is empty (no quasienergy on that side of 0 "
                         "at k = 0)")

    def group(k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        eps, v = quasienergies(floquet_evolution(drive, k, slicing=slicing).u, period)
        d0, dpi = gap_distances(eps, period)
        sep = np.where(np.sum(eps < 0, axis=-1) == m, 2 * np.minimum(d0, dpi), 0.0)
        return (v[..., m:] if upper else v[..., :m]), sep
    return group


# ----------------------------------------------------------------------------------------------
# Loops
# ----------------------------------------------------------------------------------------------

def circle_distance(a: np.ndarray) -> np.ndarray:
    """Distance of ``a`` from the nearest integer (a distance on the circle ``[0, 1)``)."""
    a = np.asarray(a, dtype=float)
    return np.abs(a - np.round(a))


def unitary_links(v: np.ndarray, axis: int) -> tuple[np.ndarray, float]:
    """Links ``F_j = V_{j+1}^+ V_j`` along ``axis`` of ``v`` (periodic), made unitary.

    Parameters
    ----------
    v : (..., n, m) columns on a periodic mesh; ``axis`` counts the mesh axes (not the last two).

    Returns
    -------
    links : same mesh shape, ``(..., m, m)`` unitary polar parts.
    smallest : smallest singular value of any link before that (1: parallel subspaces).
    """
    f = dagger(np.roll(v, -1, axis=axis)) @ v
    u, s, vh = np.linalg.svd(f)
    return u @ vh, float(s.min()) if s.size else 1.0


def ordered_product(f: np.ndarray) -> np.ndarray:
    """``F_{N-1} ... F_1 F_0`` over axis ``-3`` of a stack ``(..., N, m, m)`` (pairwise)."""
    while f.shape[-3] > 1:
        if f.shape[-3] % 2:
            eye = np.broadcast_to(np.eye(f.shape[-1], dtype=f.dtype),
                                  f.shape[:-3] + (1,) + f.shape[-2:])
            f = np.concatenate([f, eye], axis=-3)
        f = f[..., 1::2, :, :] @ f[..., 0::2, :, :]
    return f[..., 0, :, :]


def wannier_phases(w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Wannier centres ``nu`` in ``[0, 1)``, ascending, and eigenvectors of unitary loops
    ``(..., m, m)`` (eigenvalues ``exp(i 2 pi nu)``)."""
    phases, vec = unitary_eig(w)
    nu = (phases / (2 * np.pi)) % 1.0
    nu = np.where(nu >= 1.0, 0.0, nu)
    order = np.argsort(nu, axis=-1)
    return np.take_along_axis(nu, order, -1), np.take_along_axis(vec, order[..., None, :], -1)


def loop_momenta(dim: int, axis: int, kperp: np.ndarray, n: int) -> np.ndarray:
    """Momenta ``(M, n, d)`` of loops along ``axis`` at the transverse momenta ``kperp`` (M,)
    (``M = 1``, ``kperp`` unused, in 1D)."""
    t = 2 * np.pi * np.arange(n) / n
    if dim == 1:
        return t[None, :, None]
    kperp = np.atleast_1d(np.asarray(kperp, dtype=float))
    k = np.empty((kperp.size, n, 2))
    k[..., axis] = t[None, :]
    k[..., 1 - axis] = kperp[:, None]
    return k


@dataclass(frozen=True)
class Loops:
    """Wilson loops at ``M`` transverse momenta on one loop mesh.

    Attributes
    ----------
    nu : (M, m) Wannier centres in ``[0, 1)``, ascending.
    separation : smallest separation of the group at the loop points (energy).
    smallest_link : smallest singular value of a link (below :data:`SINGULAR_TOL`: too coarse).
    """

    nu: np.ndarray
    separation: float
    smallest_link: float


def wilson_loops(group: Group, dim: int, axis: int, kperp: np.ndarray, n: int) -> Loops:
    """Wannier centres of ``group`` from loops of ``n`` points along ``axis`` at each of
    ``kperp`` (module docstring)."""
    v, sep = group(loop_momenta(dim, axis, kperp, n))
    links, smallest = unitary_links(v, axis=-3)
    nu, _ = wannier_phases(ordered_product(links))
    return Loops(nu, float(np.min(sep)), smallest)


def spectrum_change(a: np.ndarray, b: np.ndarray) -> float:
    """Largest distance on the circle between two Wannier spectra ``(M, m)`` (ascending in
    ``[0, 1)``), paired by the cyclic shift that fits best at each transverse momentum."""
    m = a.shape[-1]
    best = np.full(a.shape[:-1], np.inf)
    for s in range(m):
        best = np.minimum(best, circle_distance(a - np.roll(b, s, axis=-1)).max(axis=-1))
    return float(best.max()) if best.size else 0.0


def band_distance(nu: np.ndarray) -> np.ndarray:
    """Smallest distance on the circle between two Wannier centres, per row of ``(..., m)``
    (ascending); 1 for a single band (its distance to its own periodic image)."""
    if nu.shape[-1] == 1:
        return np.ones(nu.shape[:-1])
    gaps = np.diff(np.concatenate([nu, nu[..., :1] + 1.0], axis=-1), axis=-1)
    return gaps.min(axis=-1)


@dataclass(frozen=True)
class LoopMesh:
    """The loop mesh that converged at fixed transverse momenta.

    ``loops`` on ``kmesh`` points (the finer of the last two meshes compared), ``change`` the
    largest change of a centre between them, ``separation`` the smallest separation of the
    group on every loop computed, ``converged`` whether ``change < tol`` (with resolved links)
    within ``max_kmesh``.
    """

    loops: Loops
    kmesh: int
    change: float
    separation: float
    converged: bool


def converge_loops(group: Group, dim: int, axis: int, kperp: np.ndarray, *, kmesh_n: int,
                   max_kmesh: int, tol: float) -> LoopMesh:
    """Double the loop mesh from ``kmesh_n`` until no Wannier centre moves by ``tol`` or more
    (and every link is resolved), at most to ``max_kmesh`` points."""
    n = max(int(kmesh_n), 4)
    prev = wilson_loops(group, dim, axis, kperp, n)
    sep = prev.separation
    change = math.inf
    while 2 * n <= max_kmesh:
        n *= 2
        cur = wilson_loops(group, dim, axis, kperp, n)
        sep = min(sep, cur.separation)
        change = spectrum_change(prev.nu, cur.nu)
        if change < tol and prev.smallest_link >= SINGULAR_TOL:
            return LoopMesh(cur, n, change, sep, True)
        prev = cur
    return LoopMesh(prev, n, change, sep, False)


# ----------------------------------------------------------------------------------------------
# Wannier bands, polarisation, flow
# ----------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class WannierBands:
    """Wannier centres of a band group along one direction, against the transverse momentum.

    Attributes
    ----------
    kperp : (M,) transverse momenta (rad) of the accepted transverse mesh (``(1,)`` zeros in 1D).
    nu : (M, m) Wannier centres in ``[0, 1)``, ascending.
    polarisation : (M,) ``sum nu mod 1``.
    flow : winding of ``polarisation`` over the transverse zone (0 in 1D); ``None`` if missing.
    mean : the polarisation averaged over ``k_perp`` (mod 1), nan where ``flow != 0`` or missing.
    wannier_gap : smallest distance between two Wannier bands (circle), polished off the mesh.
    kmesh : loop points; kperp_mesh : transverse points.
    separation : smallest separation of the group on the loops (energy).
    reason : ``OK``, ``GAP_CLOSED`` (the group touches the other bands on a loop) or
        ``NOT_CONVERGED``.
    """

    kperp: np.ndarray
    nu: np.ndarray
    polarisation: np.ndarray
    flow: int | None
    mean: float
    wannier_gap: float
    kmesh: int | None
    kperp_mesh: int | None
    separation: float
    reason: Reason


def mod1(x: float) -> float:
    """``x mod 1`` in ``[0, 1)``; values within rounding (1e-13) below 1 are 0 (``-1e-17 % 1.0``
    is ``1.0`` in floating point)."""
    r = float(x) % 1.0
    return 0.0 if r >= 1.0 - 1e-13 else r


def _unwrap(p: np.ndarray) -> tuple[np.ndarray, float, int]:
    """Values of a closed periodic sequence unwrapped by steps in ``[-1/2, 1/2)``: ``(unwrapped,
    largest |step|, winding)``."""
    steps = (np.diff(np.append(p, p[0])) + 0.5) % 1.0 - 0.5
    out = p[0] + np.concatenate([[0.0], np.cumsum(steps[:-1])])
    return out, float(np.max(np.abs(steps))), int(round(float(steps.sum())))


def wannier_bands(group: Group, dim: int, axis: int = 0, *, kmesh_n: int = 32,
                  max_kmesh: int = 2048, kperp_mesh: int = 16, max_kperp_mesh: int = 256,
                  tol: float = 1e-4, gap_tol: float = 1e-6, step_tol: float = STEP_TOL,
                  polish: bool = True) -> WannierBands:
    """Wannier bands ``nu(k_perp)`` of ``group`` along ``axis``, converged in both meshes.

    The loop mesh starts at ``kmesh_n`` and is doubled as in :func:`converge_loops`; the
    transverse mesh (2D) starts at ``kperp_mesh`` and is doubled up to ``max_kperp_mesh`` until
    every step of the polarisation is below ``step_tol`` and, where the flow is zero, the
    trapezoid average over ``k_perp`` agrees within ``tol`` with the average over every other
    point. A separation at or below ``gap_tol`` on a loop gives ``GAP_CLOSED``.
    """
    if dim not in (1, 2) or axis not in range(dim):
        raise ValueError(f"a Wilson loop of a {dim}D model runs along axis 0"
                         + (" or 1" if dim == 2 else "") + f"; got axis {axis}")
    nan = math.nan
    m_perp = 1 if dim == 1 else max(int(kperp_mesh), 4)
    n0 = kmesh_n
    while True:
        kperp = 2 * np.pi * np.arange(m_perp) / m_perp
        lm = converge_loops(group, dim, axis, kperp, kmesh_n=n0, max_kmesh=max_kmesh, tol=tol)
        empty = WannierBands(kperp, lm.loops.nu, np.zeros(0), None, nan, nan, lm.kmesh,
                             m_perp, lm.separation, Reason.NOT_CONVERGED)
        if not lm.separation > gap_tol:
            return replace(empty, reason=Reason.GAP_CLOSED)
        if not lm.converged:
            return empty
        nu = lm.loops.nu
        p = nu.sum(axis=-1) % 1.0
        if dim == 1:
            return WannierBands(kperp, nu, p, 0, mod1(p[0]), float(band_distance(nu)[0]),
                                lm.kmesh, 1, lm.separation, Reason.OK)
        unwrapped, step, flow = _unwrap(p)
        settled = step < step_tol
        if settled and flow == 0:
            half = unwrapped[::2].mean()
            settled = float(circle_distance(unwrapped.mean() - half)) < tol
        if settled:
            break
        if 2 * m_perp > max_kperp_mesh:
            return empty
        m_perp *= 2
        n0 = max(lm.kmesh // 2, kmesh_n)
    mean = mod1(unwrapped.mean()) if flow == 0 else nan
    gaps = band_distance(nu)
    gap = float(gaps.min())
    if polish and nu.shape[-1] > 1:
        gap = min(gap, _polish_gap(group, dim, axis, kperp, gaps, lm.kmesh))
    return WannierBands(kperp, nu, p, flow, mean, gap, lm.kmesh, m_perp, lm.separation,
                        Reason.OK)


def _polish_gap(group: Group, dim: int, axis: int, kperp: np.ndarray, gaps: np.ndarray,
                n: int) -> float:
    """The Wannier gap minimised in continuous ``k_perp`` around the smallest mesh value."""
    from scipy.optimize import minimize_scalar

    i = int(np.argmin(gaps))
    h = kperp[1] - kperp[0]

    def f(x: float) -> float:
        return float(band_distance(wilson_loops(group, dim, axis, np.array([x]), n).nu)[0])

    r = minimize_scalar(f, bounds=(kperp[i] - h, kperp[i] + h), method="bounded",
                        options={"xatol": 1e-6 * h, "maxiter": 40})
    return float(r.fun) if np.isfinite(r.fun) else math.inf


def polarisation_at(group: Group, dim: int, axis: int, kperp: float, *, kmesh_n: int,
                    max_kmesh: int, tol: float) -> tuple[float, LoopMesh]:
    """The polarisation ``sum nu mod 1`` of the loop at one transverse momentum (rad)."""
    lm = converge_loops(group, dim, axis, np.array([kperp]), kmesh_n=kmesh_n,
                        max_kmesh=max_kmesh, tol=tol)
    return mod1(lm.loops.nu.sum()), lm


# ----------------------------------------------------------------------------------------------
# Nested loops and the quadrupole moment
# ----------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class SectorPolarisation:
    """The nested Wilson loop of the Wannier sector ``nu in (0, 1/2)`` on one mesh.

    Attributes
    ----------
    p : the sector polarisation along the nested direction, averaged over the first loop's
        base momentum (mod 1); nan where it winds.
    per_k : (N,) its value at each base momentum (mod 1).
    winding : winding of ``per_k`` over the zone (a nonzero winding leaves ``p`` undefined).
    sector_gap : twice the smallest distance of a Wannier centre from the cuts 0 and 1/2.
    size : bands in the sector, or -1 where the size changes over the mesh.
    nu : (N, m) Wannier centres of the first loop against the nested direction's momentum.
    smallest_link : smallest singular value of any link (first and nested loops).
    """

    p: float
    per_k: np.ndarray
    winding: int
    sector_gap: float
    size: int
    nu: np.ndarray
    smallest_link: float


def nested_polarisation(v: np.ndarray, axis: int) -> SectorPolarisation:
    """Sector polarisation from loops along ``axis`` nested along the other direction.

    Parameters
    ----------
    v : (N1, N2, n, m) columns of the band group on :func:`~sweepcli.physics.lattice.kmesh`
        ``(N1, N2)`` (first index along ``k_1``).
    axis : 0: Wilson loops along ``k_1``, sector of ``nu_1``, nested loops along ``k_2``
        (``p_2^{nu_1^+}``); 1: the other way round (``p_1^{nu_2^+}``).
    """
    if axis == 1:
        v = np.swapaxes(v, 0, 1)
    na = v.shape[0]
    links, small = unitary_links(v, axis=0)  # (Na, Nb, m, m), loops along the first index
    m = v.shape[-1]
    g = np.empty((na,) + links.shape[1:], dtype=complex)
    g[0] = np.eye(m)
    for i in range(1, na):
        g[i] = links[i - 1] @ g[i - 1]
    w0 = links[na - 1] @ g[na - 1]
    nu, e = wannier_phases(w0)  # (Nb, m), (Nb, m, m)
    inside = (nu > 0) & (nu < 0.5)
    counts = inside.sum(axis=-1)
    gap = float(2 * np.min(np.minimum(circle_distance(nu), circle_distance(nu - 0.5))))
    if counts.min() != counts.max():
        return SectorPolarisation(math.nan, np.full(na, math.nan), 0, gap, -1, nu, small)
    ms = int(counts[0])
    if ms == 0:
        return SectorPolarisation(0.0, np.zeros(na), 0, gap, 0, nu, small)
    # Columns of the sector, in ascending nu (stable order of the mask).
    order = np.argsort(~inside, axis=-1, kind="stable")[:, :ms]
    es = np.take_along_axis(e, order[:, None, :], -1)  # (Nb, m, ms)
    w = v @ g @ es[None]  # (Na, Nb, n, ms)
    nested, small2 = unitary_links(w, axis=1)
    loops = ordered_product(nested)  # (Na, ms, ms), products along the second index
    per_k = (np.angle(np.linalg.det(loops)) / (2 * np.pi)) % 1.0
    unwrapped, _, winding = _unwrap(per_k)
    p = mod1(unwrapped.mean()) if winding == 0 else math.nan
    return SectorPolarisation(p, per_k, winding, gap, ms, nu, min(small, small2))


@dataclass(frozen=True)
class Quadrupole:
    """Quadrupole moment from nested Wilson loops.

    Attributes
    ----------
    q : ``q_xy`` rounded to 0 or 1/2, or nan where missing.
    p_x, p_y : ``p_x^{nu_y^+}``, ``p_y^{nu_x^+}`` as computed (mod 1; nan where missing).
    residue : largest distance of ``p_x``, ``p_y`` from the nearest multiple of 1/2.
    sector_gap : the smaller of the two sectors' gaps (nan if none was computed).
    kmesh : points per direction of the last mesh; change : largest change of ``p_x``, ``p_y``
        between the last two meshes.
    reason : ``OK``, ``GAP_CLOSED``, ``NOT_CONVERGED``, ``SECTOR_GAP_CLOSED`` (a Wannier centre
        within ``wannier_gap_tol / 2`` of a cut, or the sector size changes) or ``NOT_QUANTISED``
        (a sector polarisation winds or lies farther than ``quant_tol`` from 0 and 1/2).
    """

    q: float
    p_x: float
    p_y: float
    residue: float
    sector_gap: float
    kmesh: int | None
    change: float
    reason: Reason


def _sector_pair(group: Group, n: int) -> tuple[SectorPolarisation, SectorPolarisation, float]:
    v, sep = group(kmesh(n, 2))
    return nested_polarisation(v, 1), nested_polarisation(v, 0), float(np.min(sep))


def quadrupole(group: Group, *, kmesh_n: int = 16, max_kmesh: int = 128, tol: float = 1e-3,
               gap_tol: float = 1e-6, wannier_gap_tol: float = 1e-3,
               quant_tol: float = 0.02) -> Quadrupole:
    """``q_xy = 2 p_x^{nu_y^+} p_y^{nu_x^+} mod 1`` of a 2D band group (module docstring).

    The ``N x N`` mesh starts at ``kmesh_n`` and is doubled until both sector polarisations
    change by less than ``tol`` (on the circle) with every link resolved, at most to
    ``max_kmesh``. ``q`` is stored only when both sector gaps are at least ``wannier_gap_tol``
    and both polarisations lie within ``quant_tol`` of 0 or 1/2.
    """
    nan = math.nan
    n = max(int(kmesh_n), 4)
    prev = None
    last = (nan, nan, nan)
    change = math.inf
    while n <= max_kmesh:
        px, py, sep = _sector_pair(group, n)
        gap = min(px.sector_gap, py.sector_gap)
        last = (px.p, py.p, gap)
        if not sep > gap_tol:
            return Quadrupole(nan, nan, nan, nan, gap, n, change, Reason.GAP_CLOSED)
        if px.size < 0 or py.size < 0 or not gap >= wannier_gap_tol:
            return Quadrupole(nan, px.p, py.p, nan, gap, n, change, Reason.SECTOR_GAP_CLOSED)
        if px.winding or py.winding:
            return Quadrupole(nan, px.p, py.p, nan, gap, n, change, Reason.NOT_QUANTISED)
        small = min(px.smallest_link, py.smallest_link)
        if prev is not None:
            change = float(max(circle_distance(px.p - prev[0]), circle_distance(py.p - prev[1])))
            if change < tol and small >= SINGULAR_TOL:
                break
        prev = (px.p, py.p)
        n *= 2
    else:
        return Quadrupole(nan, last[0], last[1], nan, last[2], n // 2, change,
                          Reason.NOT_CONVERGED)
    p_x, p_y = px.p, py.p
    residue = float(max(circle_distance(2 * p_x), circle_distance(2 * p_y)) / 2)
    if residue > quant_tol:
        return Quadrupole(nan, p_x, p_y, residue, gap, n, change, Reason.NOT_QUANTISED)
    hx, hy = round(2 * p_x) % 2, round(2 * p_y) % 2  # p = h / 2
    q = (hx * hy / 2.0) % 1.0
    return Quadrupole(q, p_x, p_y, residue, gap, n, change, Reason.OK)
