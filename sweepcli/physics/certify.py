"""Bounds that prove a k-mesh resolves an integer invariant, and the adaptive meshes built on them.

An FHS Chern sum or a determinant winding is an integer on any mesh; whether it is the right
integer is a property of the continuum between the mesh points, which the mesh values alone
cannot show (a Berry-flux pocket smaller than a plaquette, or two zeros of ``det q`` within one
step, leave every mesh phase small). The bounds here use, besides the mesh values, Lipschitz
constants that follow from the hoppings alone, the way
:func:`~sweepcli.physics.spectrum.velocity_bound` bounds the band velocity.

Inputs of a bound at each mesh point ``k_c``: the *separation* ``sep_c`` (the direct gap
``E_nocc - E_nocc-1`` of a Hermitian ``X = H``; for a drive, ``min_lower sin(|eps_j| T) +
min_upper sin(|eps_j| T)``, the gap around 0 of the Hermitian ``X = Y = i (U - U^+) / 2``, whose
eigenvectors are those of the Floquet operator ``U`` and whose eigenvalues ``sin(eps_j T)`` are
negative on the lower band group (quasienergies in ``(-pi/T, 0)``) and positive on the upper
one (``(0, pi/T)``); the smallest singular value ``sigma_min(q)`` of a chiral block ``q``) and
the *slope* ``g_c``, a bound on ``||d X / d k_u||`` at ``k_c`` for every unit direction ``u``;
and a constant ``lip2`` with ``||d^2 X / dk_u dk_w|| <= lip2`` for all unit ``u``, ``w`` and
every k (static models: from the hoppings; drives: ``g_c`` from the exact ``dU/dk`` at
``k_c`` and ``lip2`` from the steps, :func:`sweepcli.physics.floquet_chern.drive_curvature_bound`,
both valid for ``Y`` since ``||d^j Y|| <= ||d^j U||``), or ``g_c`` a bound for every k and
``lip2 = 0``. Within ``r`` of ``k_c``: ``||X(k) - X(k_c)|| <= eps_c = g_c r + lip2 r^2 / 2``
and the slope is at most ``g_c + lip2 r``; by Weyl's inequality (Hermitian) or its
singular-value form (blocks) the separation at ``k`` is at least ``sep_c - 2 eps_c`` (blocks:
``sep_c - eps_c``).

Chern numbers (:func:`cell_lambda`, :func:`certified_chern`)
-------------------------------------------------------------
For a cell of side ``h`` let ``G`` bound the slope and ``D`` the separation over the closed
cell (from its corners as above, every point being within ``h / sqrt 2`` of one), and
``lambda = h G / D``. Proven: the occupied projector (the spectral projector of ``X`` below
its gap) has ``||dP/dk_u|| <= G / D`` (the off-diagonal block ``Q dP P`` solves a Sylvester
equation whose two Hermitian spectra are separated by ``D``), so every
point of the cell has ``||P(k) - P(k_a)|| <= rho = sqrt 2 lambda`` from a corner ``k_a``. In
the smooth gauge ``V(k) = P V_a (V_a^+ P V_a)^-1/2``
of the cell, the link phase of a boundary segment of length ``l`` is at most
``m arcsin(y)``, ``y = (l / h) lambda / (1 - rho^2)`` (``m`` occupied bands; the eigenvalues of
``1 + M^-1/2 V_a^+ P (P' - P) V_a M^-1/2`` lie within ``y`` of 1), and ``|A| <= m rho ||dP|| /
(1 - rho^2)``. With ``4 m arcsin(lambda / (1 - 2 lambda^2)) < pi`` (:func:`lambda_max`) the
loop of each cell is then the unwrapped sum of its links, each link's phase plus the Berry
connection along it agrees between the two cells that share it (they differ by a multiple of
2 pi and are each below pi), and the FHS sum equals the continuum Chern number exactly. A
cell whose bound fails is subdivided (a quadtree; a coarse neighbour keeps its direct link and
the thin cell between that link and the subdivided edge lies on the neighbour's edge, so it
is covered by the neighbour's bound with half its perimeter). Assumed: the eigenvectors and
eigenvalues at the mesh points are exact to rounding, and the Floquet operator is the
discretised evolution (its time-slicing error is not part of the bound).

Windings (:func:`interval_theta`, :func:`certified_loop`)
---------------------------------------------------------
``|d arg det q / dk| = |Im Tr(q^-1 dq/dk)| <= r ||q^-1|| ||dq/dk||`` (``r`` the block size), so
over a step of length ``h`` the continuous change of ``arg det q`` is at most
``theta = r h G / sigma_lo`` (``G``, ``sigma_lo``: slope and smallest singular value over the
step, from its ends as above). Where every ``theta < pi`` the principal phase steps add up to
the continuous winding exactly; steps that fail are bisected.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping

import numpy as np

#: Safety factor on the cell bound of :func:`lambda_max`.
LAMBDA_SAFETY = 0.95
#: Largest accepted bound on the phase change of ``det q`` over one step (rad; < pi).
THETA_MAX = 3.0
#: Subdivision per direction of a cell (or step) whose bound fails, per level.
SPLIT = 2


def hermitian_norm(a: np.ndarray) -> np.ndarray:
    """Spectral norms of a stack ``(..., n, n)`` of Hermitian matrices (closed form for n <= 2)."""
    n = a.shape[-1]
    if n == 1:
        return np.abs(a[..., 0, 0].real)
    if n == 2:
        p, q = a[..., 0, 0].real, a[..., 1, 1].real
        return np.abs((p + q) / 2) + np.sqrt(((p - q) / 2) ** 2 + np.abs(a[..., 0, 1]) ** 2)
    return np.max(np.abs(np.linalg.eigvalsh(a)), axis=-1)


def smallest_singular(q: np.ndarray) -> np.ndarray:
    """``sigma_min`` of a stack ``(..., r, r)`` (closed form for r = 1)."""
    if q.shape[-1] == 1:
        return np.abs(q[..., 0, 0])
    return np.linalg.svd(q, compute_uv=False)[..., -1]


def hopping_bounds(hoppings: Mapping[tuple[int, ...], np.ndarray],
                   direction: np.ndarray | None = None) -> tuple[float, float]:
    """``(L1, L2)``: bounds on ``||dH/ds||`` and ``||d^2 H/ds^2||`` along a unit direction of
    reduced momentum (``direction`` given: along ``k = k0 + s direction``, not normalised).

    ``H(k) = onsite + sum_R [T_R e^{ik.R} + h.c.]``, so the ``j``-th derivative has norm at most
    ``2 sum_R |R.u|^j ||T_R||_2`` (``|R.u| <= |R|`` for a unit ``u``).
    """
    l1 = l2 = 0.0
    for r, t in hoppings.items():
        x = abs(float(np.dot(r, direction))) if direction is not None else \
            float(np.linalg.norm(r))
        nt = float(np.linalg.norm(t, 2))
        l1 += 2 * x * nt
        l2 += 2 * x * x * nt
    return l1, l2


#: Points per direction of the mesh on which :func:`mesh_hopping_bounds` takes its maxima.
BOUND_MESH = 24


def mesh_hopping_bounds(hoppings: Mapping[tuple[int, ...], np.ndarray],
                        n: int = BOUND_MESH) -> tuple[float, float]:
    """``(L1, L2)`` of :func:`hopping_bounds` for a 2D model, tightened by the maxima over an
    ``n x n`` mesh (never looser than :func:`hopping_bounds`).

    Proven: ``g(k) = max_u ||dH/dk_u||`` is Lipschitz with any bound ``L2`` on the second
    derivatives, and ``g <= sqrt(||d_1 H||^2 + ||d_2 H||^2)``; every ``k`` lies within ``r = (2
    pi / n) / sqrt 2`` of a mesh point, so ``max_k g <= max_mesh sqrt(||d_1 H||^2 + ||d_2
    H||^2) + L2 r``. Likewise ``max_{u,w} ||d_u d_w H|| <= max_mesh sqrt(sum_ij ||d_i d_j
    H||^2) + L3 r`` with ``L3 = 2 sum_R |R|^3 ||T_R||``. The Lipschitz terms use the bounds of
    :func:`hopping_bounds` (and the tightened ``L2`` for ``L1``). The crude bound counts
    every hopping at full strength in every direction; the mesh sees that they cannot all
    peak at the same k (a Qi-Wu-Zhang model has ``L1 = 4`` from the hoppings, 1.7 here).
    """
    if not hoppings:
        return 0.0, 0.0
    from .lattice import kmesh

    l1, l2 = hopping_bounds(hoppings)
    disp = np.array(list(hoppings.keys()), float)
    mats = np.stack(list(hoppings.values()))
    l3 = float(sum(2 * np.linalg.norm(r) ** 3 * np.linalg.norm(t, 2)
                   for r, t in zip(disp, mats)))
    phase = np.exp(1j * (kmesh(n, 2) @ disp.T))
    r = (2 * np.pi / n) / math.sqrt(2)

    def norm(weights: np.ndarray) -> np.ndarray:
        d = np.tensordot(weights * phase, mats, axes=([-1], [0]))
        return hermitian_norm(d + np.conj(np.swapaxes(d, -1, -2)))

    second = sum(norm(-disp[:, i] * disp[:, j]) ** 2 for i in range(2) for j in range(2))
    l2 = min(l2, float(np.max(np.sqrt(second))) + l3 * r)
    first = sum(norm(1j * disp[:, i]) ** 2 for i in range(2))
    l1 = min(l1, float(np.max(np.sqrt(first))) + l2 * r)
    return l1, l2


def lambda_max(m: int) -> float:
    """Largest accepted cell bound for ``m`` bands: ``LAMBDA_SAFETY`` times the root of
    ``lambda / (1 - 2 lambda^2) = sin(pi / (4 m))`` (module docstring)."""
    s = math.sin(math.pi / (4 * m))
    return LAMBDA_SAFETY * (-1 + math.sqrt(1 + 8 * s * s)) / (4 * s)


def cell_lambda(sep: np.ndarray, slope: np.ndarray, h: float, lip2: float) -> np.ndarray:
    """Bound ``lambda = h G / D`` of square cells from their corners (module docstring).

    ``sep``, ``slope``: ``(..., 4)`` at the corners; ``h`` the side. ``lip2`` may also be a
    sequence of ``K`` constants, one per slope bound given along the axis before the corners of
    ``slope`` ``(..., K, 4)``: each bound is valid, so the smallest is used. ``inf`` where the
    separation bound is not positive.
    """
    r = h / math.sqrt(2)
    lip2 = np.asarray(lip2, float)
    if lip2.ndim:
        # Several bounds (slope ``(..., K, 4)``, ``lip2`` ``(K,)``), each proven: the smallest
        # distance bound at each corner and the smallest slope bound over the cell.
        eps = np.min(slope * r + 0.5 * lip2[:, None] * r * r, axis=-2)
        g = np.min(np.max(slope, axis=-1) + lip2 * r, axis=-1)
    else:
        eps = slope * r + 0.5 * lip2 * r * r
        g = np.max(slope, axis=-1) + lip2 * r
    lo = np.min(sep - 2 * eps, axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(lo > 0, h * g / np.where(lo > 0, lo, 1.0), np.inf)


def _corners(x: np.ndarray) -> np.ndarray:
    """``(P, A, B, ...)`` values on open grids -> ``(P, A - 1, B - 1, ..., 4)`` at cell corners."""
    return np.stack([x[:, :-1, :-1], x[:, 1:, :-1], x[:, :-1, 1:], x[:, 1:, 1:]], axis=-1)


#: Largest share of hot base plaquettes that is subdivided; above it the next (uniform) base
#: mesh is taken, which shares the new points between neighbouring cells.
HOT_SHARE = 0.5


def certified_chern(data: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]],
                    n: int, m: int, lip2: float | tuple[float, ...], *, flux_tol: float,
                    budget: int,
                    max_n: int | None = None, growth: float = 1.5,
                    sep_max: float | None = None,
                    bound: Callable[[np.ndarray, np.ndarray, float], np.ndarray] | None = None
                    ) -> tuple[int | None, float, int, int]:
    """FHS Chern number on an ``n x n`` mesh refined until every cell's bound holds.

    Parameters
    ----------
    data : ``data(k)`` for reduced momenta ``(..., 2)`` returns the orthonormal columns
        ``(..., norb, m)`` of the subspace, its separation ``(...)`` and slope ``(...)``
        (module docstring).
    n : points per direction of the first periodic base mesh.
    m : rank of the subspace (sets :func:`lambda_max`).
    lip2 : Lipschitz constant of the slope (0 when the slope is a global bound), or a
        sequence of them when ``data`` returns several slope bounds ``(..., K)``
        (:func:`cell_lambda`).
    flux_tol : a cell whose plaquette phase is at or above this is subdivided too.
    budget : most points evaluated in all (base meshes included).
    max_n, growth : while more than :data:`HOT_SHARE` of the base plaquettes fail, the base
        mesh grows up to ``max_n`` (default ``n``): to the smallest multiple ``j n`` on which
        the corner data of the present mesh predict that at least half the cells pass
        (:func:`_base_multiple`; its points include the present ones, which are not
        evaluated again), or the largest multiple within ``max_n``; by ``growth`` when no
        multiple fits.
    sep_max : an upper bound on the separation at every k (2 for the strip of a unitary), if
        known: no cell of side ``h`` with ``h lip2 h / sqrt 2 > lambda_max sep_max``
        can pass the bound whatever its corners hold, so the base mesh starts at least that
        fine (at most ``max_n``).
    bound : ``bound(sep, slope, h)`` of the cells' corner data (``(..., 4)`` in the last axis,
        as :func:`cell_lambda` receives them) -> their ``lambda``, in place of
        :func:`cell_lambda` with ``lip2`` (``lip2`` then only sets the start
        mesh with ``sep_max``).

    Returns
    -------
    (chern or None, largest elementary phase, points evaluated, base mesh) : ``None`` when the
    budget ran out before every cell was proven.
    """
    from .chern import fhs_plaquette_phases, subdivided_plaquette_phases
    from .lattice import kmesh

    lam_max = lambda_max(m)
    if bound is None:
        def bound(sep: np.ndarray, slope: np.ndarray, h: float) -> np.ndarray:
            return cell_lambda(sep, slope, h, lip2)
    max_n = n if max_n is None else max_n
    lip2_min = float(np.min(lip2))
    if sep_max is not None and lip2_min > 0:
        h_min = math.sqrt(math.sqrt(2) * lam_max * sep_max / lip2_min)
        n = min(max(n, int(math.ceil(2 * np.pi / h_min))), max_n)
    used = 0

    def wrap(x: np.ndarray) -> np.ndarray:
        x = np.concatenate([x, x[:1]], axis=0)
        return np.concatenate([x, x[:, :1]], axis=1)

    v, sep, slope = data(kmesh(n, 2))
    used += n * n
    while True:
        f = fhs_plaquette_phases(v)
        h = 2 * np.pi / n
        csep, cslope = _corners(wrap(sep)[None])[0], _corners(wrap(slope)[None])[0]
        lam = bound(csep, cslope, h)
        hot = (lam > lam_max) | (np.abs(f) >= flux_tol)
        if hot.mean() <= HOT_SHARE or n >= max_n:
            break
        j = _base_multiple(csep, cslope, h, bound, lam_max, max_n // n)
        if j >= 2:
            # The finer mesh holds this one: only its new points are evaluated.
            k = kmesh(n * j, 2)
            old = np.zeros((n * j, n * j), bool)
            old[::j, ::j] = True
            fresh = data(k[~old])
            used += int(np.sum(~old))
            full = []
            for x, y in zip((v, sep, slope), fresh):
                z = np.empty((n * j, n * j) + x.shape[2:], np.result_type(x, y))
                z[::j, ::j] = x
                z[~old] = y
                full.append(z)
            v, sep, slope = full
            n *= j
        else:
            n = min(max(int(math.ceil(growth * n)), n + 1), max_n)
            v, sep, slope = data(kmesh(n, 2))
            used += n * n
    total = float(f[~hot].sum())
    max_flux = float(np.max(np.abs(f[~hot]), initial=0.0))
    # Corner data of the hot cells: (P, 2, 2, ...).
    idx = np.argwhere(hot)
    i0, j0 = idx[:, 0], idx[:, 1]
    i1, j1 = (i0 + 1) % n, (j0 + 1) % n
    corner = [np.stack([np.stack([x[i0, j0], x[i0, j1]], 1), np.stack([x[i1, j0], x[i1, j1]], 1)],
                       1) for x in (v, sep, slope)]
    origin = h * idx.astype(float)
    # The five new points of a cell split in two per direction, as (row, column) of its 3x3 grid.
    new = ((0, 1), (1, 0), (1, 1), (1, 2), (2, 1))
    while origin.size:
        used += 5 * origin.shape[0]
        if used > budget:
            return None, max(max_flux, math.pi), used, n
        pts = origin[:, None, :] + (h / 2) * np.array(new, float)[None]
        nv, nsep, nslope = data(pts)
        grids = []
        for c, x in zip(corner, (nv, nsep, nslope)):
            g = np.empty((c.shape[0], 3, 3) + c.shape[3:], c.dtype)
            g[:, ::2, ::2] = c
            for j, (a, b) in enumerate(new):
                g[:, a, b] = x[:, j]
            grids.append(g)
        gv, gsep, gslope = grids
        sub, edges = subdivided_plaquette_phases(gv)
        h /= 2
        lam = bound(_corners(gsep), _corners(gslope), h)
        hot = (lam > lam_max) | (np.abs(sub) >= flux_tol)
        total += float(sub[~hot].sum() + edges.sum())
        max_flux = max(max_flux, float(np.max(np.abs(sub[~hot]), initial=0.0)))
        p, a, b = np.nonzero(hot)
        corner = [np.stack([np.stack([g[p, a, b], g[p, a, b + 1]], 1),
                            np.stack([g[p, a + 1, b], g[p, a + 1, b + 1]], 1)], 1)
                  for g in grids]
        origin = origin[p] + h * np.stack([a, b], axis=-1)
    return int(round(-total / (2 * np.pi))), max_flux, used, n


def _base_multiple(csep: np.ndarray, cslope: np.ndarray, h: float,
                   bound: Callable[[np.ndarray, np.ndarray, float], np.ndarray],
                   lam_max: float, most: int) -> int:
    """The smallest ``j`` in ``2..most`` for which the cells of side ``h / j`` would pass the
    bound on more than ``1 - HOT_SHARE`` of the area if they held the corner data of the cells
    of side ``h`` that contain them (a prediction that only chooses the next base mesh: that
    mesh's cells are proven from their own corners); ``most`` when none does, 1 when
    ``most < 2``."""
    for j in range(2, most + 1):
        if np.mean(bound(csep, cslope, h / j) <= lam_max) \
                >= 1 - HOT_SHARE:
            return j
    return most


def interval_theta(sigma: np.ndarray, slope: np.ndarray, h: np.ndarray, lip2: float,
                   rank: int) -> np.ndarray:
    """Bound on the change of ``arg det q`` over each step of a closed loop.

    ``sigma``, ``slope``: ``(N, ...)`` smallest singular value of ``q`` and slope at the loop
    points; ``h``: ``(N,)`` length of the step from point ``j`` to ``j + 1`` (the last closes
    the loop). ``inf`` where the singular-value bound is not positive.
    """
    hh = h.reshape((-1,) + (1,) * (sigma.ndim - 1))
    r = hh / 2
    eps = slope * r + 0.5 * lip2 * r * r
    eps_n = np.roll(slope, -1, axis=0) * r + 0.5 * lip2 * r * r
    nxt = np.roll(sigma, -1, axis=0) - eps_n
    lo = np.minimum(sigma - eps, nxt)
    g = np.maximum(slope, np.roll(slope, -1, axis=0)) + lip2 * r
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(lo > 0, rank * hh * g / np.where(lo > 0, lo, 1.0), np.inf)


def certified_loop(measure: Callable[[np.ndarray], tuple[object, np.ndarray]], n: int,
                   budget: int, period: float = 2 * np.pi) -> tuple[object, np.ndarray, bool]:
    """Bisect the steps of a closed loop until a bound proves every step.

    ``measure(s)`` for sorted loop parameters ``s`` in ``[0, period)`` returns ``(result,
    bad)``, ``bad`` an ``(N,)`` mask of the steps ``s_j -> s_{j+1}`` (the last closing the
    loop) whose bound fails. Starts from ``n`` uniform points; returns ``(result, s, proven)``
    of the last loop measured, ``proven`` False when more than ``budget`` points would be
    needed.
    """
    s = period * np.arange(n) / n
    while True:
        result, bad = measure(s)
        if not np.any(bad):
            return result, s, True
        h = np.diff(np.append(s, s[0] + period))
        new = [s[bad] + h[bad] * j / SPLIT for j in range(1, SPLIT)]
        if s.size + sum(x.size for x in new) > budget:
            return result, s, False
        s = np.sort(np.concatenate([s] + new))
