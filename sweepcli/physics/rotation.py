"""Rotation symmetry of a 2D lattice model: rotation eigenvalues of the filled bands at the
high-symmetry momenta, the symmetry indicators built from them, and the corner charge they
predict.

A model provides its ``C_n`` rotation as a :class:`Rotation` (orbital matrix, cell map and cell
shifts; :func:`site_rotation` derives one from orbital positions). Before any eigenvalue is
read, :func:`check_rotation` verifies ``H(k') = D(k') H(k) D(k')^dagger`` at random momenta and
refuses (``RotationError``) a rotation that is not a symmetry of the Hamiltonian.

Conventions
-----------
* The rotation acts on the orbital ``j`` of cell ``R`` (integer reduced coordinates) as
  ``C |j, R> = sum_i r_ij |i, R G + s_j>``: ``G`` (``cell_map``) is the integer matrix of the
  rotation on reduced coordinates acting on row vectors, ``s_j`` (``shifts``) the cell of the
  image of orbital ``j``'s site in cell 0, ``r`` (``matrix``) the unitary on the orbitals
  (a permutation, with phases where the hoppings carry a gauge flux).
* In the periodic gauge of :mod:`sweepcli.physics.lattice` (Bloch states
  ``|j, k> = sum_R e^{i k.R} |j, R>``, ``k`` reduced) this gives
  ``C |j, k> = sum_i D(k')_ij |i, k'>`` with ``k' = k G^{-T}`` (rows) and
  ``D(k')_ij = r_ij exp(-i k'.s_j)``, so the symmetry reads ``H(k') = D(k') H(k) D(k')^dagger``.
* At a momentum ``Pi`` fixed by ``C_m = C_n^{n/m}`` (``Pi G^{-T (n/m)} = Pi`` mod 2 pi) the
  rotation of the Bloch states at ``Pi`` is ``D_m(Pi) = D(k_p) ... D(k_1)``,
  ``k_s = Pi G^{-T s}``, ``p = n/m`` (the periodic gauge makes ``k_p`` and ``Pi`` the same
  vectors). Its eigenvalues on the filled bands are the rotation eigenvalues.
* Labels (Benalcazar, Li and Hughes, PRB 99, 245151 (2019); the labelling as remembered here):
  ``Pi_p^(m)`` is the eigenvalue ``exp(2 pi i (p - 1)/m)``, ``p = 1, ..., m``, of ``C_m`` at
  ``Pi``; ``#Pi_p^(m)`` the number of filled bands with it, and the indicator
  ``[Pi_p^(m)] = #Pi_p^(m) - #Gamma_p^(m)``. This labelling needs ``C_n^n = +1`` on the filled
  bands (spinless, no flux through the rotation centre). For a rotation with ``D^n = -1`` (a
  pi flux through the rotation centre: the BBH model) the indices are taken of the rotation
  times ``exp(i pi / n)``, whose ``n``-th power is +1, and no corner charge is given
  (``Indicators.charge`` is ``None``): the formulas below do not hold there (the BBH flake has
  corner charge 1/2 where the C4 formula would give 1/4; tests/physics/test_rotation.py).
* High-symmetry momenta (reduced, ``k_i = k . a_i``): square lattice ``X = (pi, 0)``,
  ``M = (pi, pi)``; triangular lattice (``a_1 = (1, 0)``, ``a_2 = (1/2, sqrt 3/2)``)
  ``M = (pi, 0)`` and ``K = (4 pi/3, 2 pi/3)`` (Cartesian ``(4 pi/3, 0)``), ``K' = -K``.

Corner charge (BLH 2019, formulas from memory; their sign is fixed against flakes in
tests/physics/test_rotation.py), in units of the electron charge, counting the filled states as
``+1`` against a uniform background of ``filling / n_orb`` per orbital, mod 1::

    C4:  Q = (1/4) ([X_1^(2)] + 2 [M_1^(4)] + 3 [M_2^(4)])
    C3:  Q = (1/3) [K_2^(3)]
    C6:  Q = (1/4) [M_1^(2)] + (1/6) [K_2^(3)]

In a polarised crystal (the breathing kagome lattice at filling one, the flux-free C4 plaquette
model at filling one) the edges carry a fractional charge per cell, and the corner charge is
that of a flake whose sides hold a whole number of such charges (or with the edges' share taken
out); tests/physics/test_rotation.py does so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from .lattice import TightBinding

#: Orders of rotation this module knows the high-symmetry momenta and corner charge of.
ORDERS = (3, 4, 6)
#: Relative tolerance of the symmetry check ``H(k') = D H(k) D^dagger`` (times the largest
#: hopping) and of an eigenvalue's distance from an ``m``-th root of unity.
SYMMETRY_TOL = 1e-8
EIGEN_TOL = 1e-6


class RotationError(ValueError):
    """A rotation that is not a symmetry of the model, or a rotation the module cannot use."""


@dataclass(frozen=True, eq=False)
class Rotation:
    """A ``C_n`` rotation of a 2D lattice model (module docstring for the conventions).

    order : n (3, 4 or 6)
    cell_map : (2, 2) int, ``R -> R @ cell_map`` (reduced row vectors)
    matrix : (norb, norb) complex unitary ``r``
    shifts : (norb, 2) int, the cell of the image of orbital ``j`` of cell 0
    """

    order: int
    cell_map: np.ndarray
    matrix: np.ndarray
    shifts: np.ndarray

    def __post_init__(self) -> None:
        g = np.asarray(self.cell_map)
        if g.shape != (2, 2) or not np.allclose(g, np.round(g)):
            raise RotationError("a rotation's cell map must be a 2x2 integer matrix")
        r = np.asarray(self.matrix, dtype=complex)
        n = r.shape[0]
        if r.shape != (n, n) or not np.allclose(r.conj().T @ r, np.eye(n), atol=1e-10):
            raise RotationError("a rotation's orbital matrix must be square and unitary")
        s = np.asarray(self.shifts).reshape(n, 2)
        object.__setattr__(self, "cell_map", np.round(g).astype(int))
        object.__setattr__(self, "matrix", r)
        object.__setattr__(self, "shifts", np.round(s).astype(int))

    def k_image(self, k: np.ndarray) -> np.ndarray:
        """``k' = k G^{-T}``: where the rotation takes reduced momenta ``k`` (..., 2)."""
        return np.asarray(k, float) @ np.linalg.inv(self.cell_map).T

    def bloch(self, k_image: np.ndarray) -> np.ndarray:
        """``D(k')`` (..., n, n) at the image momenta ``k'``."""
        phase = np.exp(-1j * (np.asarray(k_image, float) @ self.shifts.T))  # (..., n)
        return self.matrix * phase[..., None, :]

    def power_at(self, k: np.ndarray, p: int) -> np.ndarray:
        """``D_{C^p}``: the matrix of ``C^p`` from the Bloch states at ``k`` to those at
        ``k G^{-T p}``."""
        out = np.eye(self.matrix.shape[0], dtype=complex)
        kk = np.asarray(k, float)
        for _ in range(p):
            kk = self.k_image(kk)
            out = self.bloch(kk) @ out
        return out


def site_rotation(lattice_vectors: np.ndarray, positions: np.ndarray, order: int,
                  centre, phases=None, matrix=None) -> Rotation:
    """The counter-clockwise ``C_order`` rotation about ``centre`` (reduced coordinates) that
    moves every orbital site onto an orbital site, from the orbital positions (reduced).

    Orbitals at one position form a site; the ``q``-th orbital of a site goes to the ``q``-th
    orbital of its image (which must hold as many). ``phases`` (n,) multiplies the column of
    each orbital (``r_ij = phases[j]`` on its image); ``matrix`` (n, n), unitary, acts on the
    orbitals before they are moved, ``r = P matrix`` with ``P`` the permutation of the sites,
    and may mix only orbitals of one site (a p-orbital doublet, a spin). Raises
    :class:`RotationError` when the lattice or the sites are not symmetric or the matrix is not
    such a unitary.
    """
    a = np.asarray(lattice_vectors, float)
    x = np.asarray(positions, float)
    n = x.shape[0]
    th = 2 * math.pi / order
    rot = np.array([[math.cos(th), -math.sin(th)], [math.sin(th), math.cos(th)]])
    m = a @ rot.T @ np.linalg.inv(a)  # reduced rows: x -> x @ m
    if not np.allclose(m, np.round(m), atol=1e-9):
        raise RotationError(f"the lattice has no {order}-fold rotation")
    c = np.asarray(centre, float)
    # Sites: orbitals at one position (the same point, not merely the same point mod cells).
    site_of = np.full(n, -1)
    sites: list[list[int]] = []
    for j in range(n):
        for s, members in enumerate(sites):
            if np.allclose(x[members[0]], x[j], atol=1e-9):
                members.append(j)
                site_of[j] = s
                break
        else:
            site_of[j] = len(sites)
            sites.append([j])
    image = (x - c) @ m + c
    perm = np.zeros((n, n), complex)
    shifts = np.zeros((n, 2), int)
    for members in sites:
        d = image[members[0]][None, :] - x
        hit = np.flatnonzero(np.all(np.abs(d - np.round(d)) < 1e-9, axis=1))
        targets = list(dict.fromkeys(site_of[hit].tolist()))
        if len(targets) != 1:
            raise RotationError(f"orbital {members[0]} has no single image under the {order}-fold "
                                f"rotation about {tuple(c)}")
        into = sites[int(targets[0])]
        if len(into) != len(members):
            raise RotationError(f"orbital {members[0]}'s site holds {len(members)} orbitals and "
                                f"its image under the {order}-fold rotation {len(into)}")
        shift = np.round(d[into[0]]).astype(int)
        for j, i in zip(members, into):
            perm[i, j] = 1.0
            shifts[j] = shift
    ph = np.ones(n, complex) if phases is None else np.asarray(phases, complex)
    u = np.diag(ph)
    if matrix is not None:
        u = np.asarray(matrix, complex) @ u
        if u.shape != (n, n) or not np.allclose(u.conj().T @ u, np.eye(n), atol=1e-10):
            raise RotationError(f"the orbital matrix must be a unitary {n} x {n} matrix")
        if np.any(np.abs(u[site_of[:, None] != site_of[None, :]]) > 1e-12):
            raise RotationError("the orbital matrix may mix only orbitals at one position")
    return Rotation(order, np.round(m).astype(int), perm @ u, shifts)


def check_rotation(tb: TightBinding, rot: Rotation, samples: int = 6, seed: int = 0) -> float:
    """Largest ``|H(k') - D(k') H(k) D(k')^dagger|`` over random momenta and the
    high-symmetry ones, relative to the largest matrix element of the model; raises
    :class:`RotationError` above :data:`SYMMETRY_TOL`."""
    if tb.dim != 2:
        raise RotationError(f"rotation eigenvalues need a 2D model; this one is {tb.dim}D")
    if rot.matrix.shape[0] != tb.norb:
        raise RotationError(f"the rotation acts on {rot.matrix.shape[0]} orbitals; the model "
                            f"has {tb.norb}")
    rng = np.random.default_rng(seed)
    k = np.concatenate([2 * np.pi * rng.random((samples, 2)),
                        np.array(list(high_symmetry_points(rot.order).values()))])
    kp = rot.k_image(k)
    d = rot.bloch(kp)
    lhs = tb.bloch(kp)
    rhs = d @ tb.bloch(k) @ np.swapaxes(d, -1, -2).conj()
    scale = max([float(np.abs(tb.onsite).max(initial=0.0))]
                + [float(np.abs(t).max()) for t in tb.hoppings.values()] + [1e-300])
    err = float(np.abs(lhs - rhs).max()) / scale
    if not err <= SYMMETRY_TOL:
        raise RotationError(f"the {rot.order}-fold rotation is not a symmetry of the model: "
                            f"H(k') differs from D H(k) D^dagger by {err:.3g} (relative to the "
                            f"largest hopping; tolerance {SYMMETRY_TOL:g})")
    return err


def high_symmetry_points(order: int) -> dict[str, np.ndarray]:
    """Reduced momenta of the points the indicators of ``C_order`` use (module docstring)."""
    if order == 4:
        return {"Gamma": np.zeros(2), "X": np.array([np.pi, 0.0]),
                "M": np.array([np.pi, np.pi])}
    k = np.array([4 * np.pi / 3, 2 * np.pi / 3])
    if order == 3:
        return {"Gamma": np.zeros(2), "K": k, "K'": -k}
    if order == 6:
        return {"Gamma": np.zeros(2), "M": np.array([np.pi, 0.0]), "K": k}
    raise RotationError(f"rotation order must be one of {ORDERS}; got {order}")


#: For each order: (point, sub-order m) whose ``C_m`` eigenvalue counts the indicators use.
_POINTS = {4: (("X", 2), ("M", 4)), 3: (("K", 3),), 6: (("M", 2), ("K", 3))}


def spinless_rotation(rot: Rotation, tol: float = 1e-9) -> tuple[Rotation, bool]:
    """``(rot, True)`` when ``D^n = +1`` at Gamma, ``(exp(i pi/n) rot, False)`` when
    ``D^n = -1``; raises :class:`RotationError` otherwise."""
    dn = rot.power_at(np.zeros(2), rot.order)
    eye = np.eye(dn.shape[0])
    if np.allclose(dn, eye, atol=tol):
        return rot, True
    if np.allclose(dn, -eye, atol=tol):
        return Rotation(rot.order, rot.cell_map, rot.matrix * np.exp(1j * np.pi / rot.order),
                        rot.shifts), False
    raise RotationError(f"the {rot.order}-th power of the rotation is neither +1 nor -1")


def eigen_counts(tb: TightBinding, rot: Rotation, nocc: int, k: np.ndarray, m: int
                 ) -> tuple[np.ndarray, float]:
    """Counts ``#Pi_p^(m)``, ``p = 1..m`` (array index ``p - 1``), of the ``C_m`` eigenvalues
    of the lowest ``nocc`` bands at ``k`` (a point fixed by ``C_m``), and the gap above them.

    Raises :class:`RotationError` when ``k`` is not fixed by ``C_m``, the filled bands are not
    mapped onto themselves, or an eigenvalue is not an ``m``-th root of unity.
    """
    p = rot.order // m
    kp = k.copy()
    for _ in range(p):
        kp = rot.k_image(kp)
    if not np.allclose(np.exp(1j * (kp - k)), 1.0, atol=1e-9):
        raise RotationError(f"momentum {tuple(k)} is not fixed by C_{m}")
    e, v = np.linalg.eigh(tb.bloch(k))
    gap = float(e[nocc] - e[nocc - 1]) if nocc < len(e) else math.inf
    vo = v[:, :nocc]
    rep = vo.conj().T @ rot.power_at(k, p) @ vo
    if not np.allclose(rep.conj().T @ rep, np.eye(nocc), atol=EIGEN_TOL):
        raise RotationError(f"the rotation does not map the filled bands at {tuple(k)} onto "
                            f"themselves (is the gap above them open?)")
    lam = np.linalg.eigvals(rep)
    labels = np.round(np.angle(lam) * m / (2 * np.pi)).astype(int) % m
    if not np.allclose(lam, np.exp(2j * np.pi * labels / m), atol=EIGEN_TOL):
        raise RotationError(f"a C_{m} eigenvalue at {tuple(k)} is not an {m}-th root of unity")
    return np.bincount(labels, minlength=m), gap


@dataclass(frozen=True)
class Indicators:
    """Rotation indicators of the filled bands.

    order : n; indices : name -> ``[Pi_p^(m)]`` (``"X1(2)"``, ``"M1(4)"``, ``"M2(4)"``,
    ``"K1(3)"``, ``"K2(3)"``, ``"M1(2)"``); charge : the corner charge (a fraction in
    ``[0, 1)``), ``None`` for a rotation whose ``n``-th power is -1 (``spinless`` False);
    gap : the smallest direct gap above the filled bands at the points used;
    symmetry_error : the relative residual of the symmetry check.
    """

    order: int
    indices: dict[str, int]
    charge: Fraction | None
    gap: float
    symmetry_error: float
    spinless: bool = True


def corner_charge_formula(order: int, ind: dict[str, int]) -> Fraction:
    """The corner charge of BLH 2019 from the indices (module docstring), in ``[0, 1)``."""
    if order == 4:
        q = Fraction(ind["X1(2)"] + 2 * ind["M1(4)"] + 3 * ind["M2(4)"], 4)
    elif order == 3:
        q = Fraction(ind["K2(3)"], 3)
    elif order == 6:
        q = Fraction(ind["M1(2)"], 4) + Fraction(ind["K2(3)"], 6)
    else:
        raise RotationError(f"rotation order must be one of {ORDERS}; got {order}")
    return q - math.floor(q)


def indicators(tb: TightBinding, rot: Rotation, nocc: int) -> Indicators:
    """The rotation indicators and corner charge of the lowest ``nocc`` bands of ``tb``.

    Checks the symmetry first (:func:`check_rotation`); raises :class:`RotationError` when it
    fails or the rotation cannot be labelled. A closed gap is reported in ``gap`` (the caller
    decides), not raised, unless it makes the filled bands non-invariant.
    """
    if not 0 < nocc < tb.norb:
        raise RotationError(f"filling must be between 1 and {tb.norb - 1}; got {nocc}")
    err = check_rotation(tb, rot)
    rot, spinless = spinless_rotation(rot)
    pts = high_symmetry_points(rot.order)
    ind: dict[str, int] = {}
    gaps = []
    for name, m in _POINTS[rot.order]:
        at_pi, g1 = eigen_counts(tb, rot, nocc, pts[name], m)
        at_gamma, g0 = eigen_counts(tb, rot, nocc, pts["Gamma"], m)
        gaps += [g0, g1]
        diff = at_pi - at_gamma
        for p in range(1, m + 1):
            ind[f"{name}{p}({m})"] = int(diff[p - 1])
    charge = corner_charge_formula(rot.order, ind) if spinless else None
    return Indicators(rot.order, ind, charge, min(gaps), err, spinless)
