"""One tight-binding description from which Bloch Hamiltonians and open samples are built.

Conventions
-----------
* Momenta are *reduced*: ``k = (k_1, ..., k_d)`` with ``k_i = k . a_i`` in radians, so the
  Brillouin zone is ``[0, 2 pi)^d`` whatever the lattice vectors are.
* Periodic ("lattice") gauge: the Bloch phase is ``exp(i k . R)`` with ``R`` the integer cell
  displacement; orbital positions do not enter ``H(k)``, so ``H(k + 2 pi e_i) = H(k)``. This is
  the gauge that Fukui-Hatsugai-Suzuki link variables and 1D windings need.
* ``hoppings[R][i, j] = <i, cell 0 | H | j, cell R>``. Only one of each pair ``R, -R`` is stored;
  the Hermitian conjugate is added when ``H(k)`` or a sample is built. A stored ``R = 0`` is not
  allowed: intra-cell terms belong to ``onsite``, which must be Hermitian.

    H(k) = onsite + sum_R [ T_R exp(i k.R) + T_R^dagger exp(-i k.R) ]
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

PAULI = {
    "0": np.eye(2, dtype=complex),
    "x": np.array([[0, 1], [1, 0]], dtype=complex),
    "y": np.array([[0, -1j], [1j, 0]], dtype=complex),
    "z": np.array([[1, 0], [0, -1]], dtype=complex),
}


def pauli(word: str) -> np.ndarray:
    """Kronecker product of Pauli matrices named by ``word``, e.g. ``"zx"`` = sigma_z (x) sigma_x.

    Letters: ``0`` (identity), ``x``, ``y``, ``z``; the first letter is the outermost factor.
    """
    out = np.ones((1, 1), dtype=complex)
    for letter in word:
        out = np.kron(out, PAULI[letter])
    return out


@dataclass(frozen=True, eq=False)
class TightBinding:
    """A lattice model: cells on a Bravais lattice, ``n`` orbitals per cell.

    Parameters
    ----------
    lattice_vectors : (d, d) float
        Rows are the primitive vectors ``a_i`` in Cartesian coordinates (lattice constant 1).
    orbital_positions : (n, d) float
        Orbital positions inside the cell in reduced coordinates (used for pictures and
        boundary classification only, never in ``H(k)``).
    onsite : (n, n) complex, Hermitian
    hoppings : mapping from integer displacement ``R`` (tuple of length d) to ``(n, n)`` complex
    operators : named ``(n, n)`` matrices acting on one cell (``"chiral"``, ``"spin"``, ...) that
        measurements may use; absent when the model has no such symmetry.
    rotations : rotation order ``n`` -> the model's ``C_n`` rotation, a
        :class:`sweepcli.physics.rotation.Rotation` (orbital matrix and cell map); absent when
        the parameters break it. Not carried to samples, ribbons or drives.
    """

    lattice_vectors: np.ndarray
    orbital_positions: np.ndarray
    onsite: np.ndarray
    hoppings: Mapping[tuple[int, ...], np.ndarray]
    operators: Mapping[str, np.ndarray] = field(default_factory=dict)
    rotations: Mapping[int, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        a = np.atleast_2d(np.asarray(self.lattice_vectors, dtype=float))
        onsite = np.atleast_2d(np.asarray(self.onsite, dtype=complex))
        n = onsite.shape[0]
        pos = np.asarray(self.orbital_positions, dtype=float).reshape(n, a.shape[0])
        hops = {tuple(int(x) for x in r): np.asarray(t, dtype=complex)
                for r, t in self.hoppings.items()}
        for r, t in hops.items():
            if len(r) != a.shape[0]:
                raise ValueError(f"hopping displacement {r} has the wrong dimension")
            if not any(r):
                raise ValueError("a zero displacement belongs to onsite, not hoppings")
            if t.shape != (n, n):
                raise ValueError(f"hopping {r} has shape {t.shape}, expected {(n, n)}")
        ops = {k: np.asarray(v, dtype=complex) for k, v in self.operators.items()}
        object.__setattr__(self, "lattice_vectors", a)
        object.__setattr__(self, "orbital_positions", pos)
        object.__setattr__(self, "onsite", onsite)
        object.__setattr__(self, "hoppings", _merge_opposite(hops))
        object.__setattr__(self, "operators", ops)
        object.__setattr__(self, "rotations", dict(self.rotations))

    @property
    def dim(self) -> int:
        return self.lattice_vectors.shape[0]

    @property
    def norb(self) -> int:
        return self.onsite.shape[0]

    def hermiticity_error(self) -> float:
        """Largest deviation of ``onsite`` from Hermiticity (hoppings are Hermitian by
        construction)."""
        return float(np.max(np.abs(self.onsite - self.onsite.conj().T), initial=0.0))

    def _stacked(self) -> tuple[np.ndarray, np.ndarray]:
        if not self.hoppings:
            return np.zeros((0, self.dim)), np.zeros((0, self.norb, self.norb), complex)
        disp = np.array(list(self.hoppings.keys()), dtype=float)
        mats = np.stack(list(self.hoppings.values()))
        return disp, mats

    def bloch(self, k: np.ndarray) -> np.ndarray:
        """Bloch Hamiltonian for reduced momenta ``k`` of shape ``(..., d)``; returns
        ``(..., n, n)``."""
        k = np.asarray(k, dtype=float)
        disp, mats = self._stacked()
        phase = np.exp(1j * (k @ disp.T))  # (..., m)
        h = np.tensordot(phase, mats, axes=([-1], [0]))
        return self.onsite + h + np.swapaxes(h, -1, -2).conj()

    def bloch_derivative(self, k: np.ndarray, axis: int) -> np.ndarray:
        """``dH/dk_axis`` for reduced momenta ``k`` of shape ``(..., d)``; returns
        ``(..., n, n)``."""
        k = np.asarray(k, dtype=float)
        disp, mats = self._stacked()
        phase = 1j * disp[:, axis] * np.exp(1j * (k @ disp.T))
        h = np.tensordot(phase, mats, axes=([-1], [0]))
        return h + np.swapaxes(h, -1, -2).conj()


def _merge_opposite(hops: dict[tuple[int, ...], np.ndarray]) -> dict[tuple[int, ...], np.ndarray]:
    """One canonical representative of each ``R, -R`` pair: the one whose first nonzero entry is
    positive (``T_{-R}`` contributes ``T_{-R}^dagger`` to ``+R``). Canonical keys let models on
    the same lattice be compared and combined term by term."""
    merged: dict[tuple[int, ...], np.ndarray] = {}
    for r, t in hops.items():
        if next(x for x in r if x != 0) > 0:
            merged[r] = merged.get(r, 0) + t
        else:
            neg = tuple(-x for x in r)
            merged[neg] = merged.get(neg, 0) + t.conj().T
    return merged


def fourier_term(displacement: tuple[int, ...], cos: np.ndarray | None = None,
                 sin: np.ndarray | None = None) -> tuple[tuple[int, ...], np.ndarray]:
    """Hopping that produces ``cos(k.R) * C + sin(k.R) * S`` in ``H(k)`` (C, S Hermitian)."""
    n = (cos if cos is not None else sin).shape[0]
    c = np.zeros((n, n), complex) if cos is None else np.asarray(cos, complex)
    s = np.zeros((n, n), complex) if sin is None else np.asarray(sin, complex)
    return tuple(displacement), 0.5 * (c - 1j * s)


def assemble(lattice_vectors, orbital_positions, onsite, terms, operators=None,
             rotations=None) -> TightBinding:
    """Build a :class:`TightBinding` from an iterable of ``(R, T_R)`` terms, summing repeats."""
    hops: dict[tuple[int, ...], np.ndarray] = {}
    for r, t in terms:
        r = tuple(int(x) for x in r)
        hops[r] = hops.get(r, 0) + np.asarray(t, complex)
    return TightBinding(lattice_vectors, orbital_positions, onsite, hops, operators or {},
                        rotations or {})


def kmesh(n: int | tuple[int, ...], dim: int) -> np.ndarray:
    """Uniform reduced-momentum mesh ``2 pi j / n``; returns shape ``(n_1, ..., n_d, d)``."""
    ns = (n,) * dim if np.isscalar(n) else tuple(n)
    axes = [2 * np.pi * np.arange(m) / m for m in ns]
    return np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1)
