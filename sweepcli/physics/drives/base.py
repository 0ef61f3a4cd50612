"""The drive protocol, the helpers its implementations share, and the job-file hook contract.

Conventions
-----------
* ``hbar = 1``; the one-period evolution is ``U = T exp(-i int_0^T H(t) dt)`` (time-ordered,
  later times to the left). Quasienergies ``eps`` in ``(-pi/T, pi/T]`` label the eigenvalues
  ``exp(-i eps T)`` of ``U`` (see :mod:`sweepcli.physics.quasienergy`).
* Every drive reduces to a list of *factors* ``(duration, TightBinding)`` in time order, each
  contributing ``exp(-i duration H)``. A delta kick ``exp(-i K)`` is a factor of duration 1 with
  ``H = K``. :func:`~sweepcli.physics.drives.evolution.evolve` multiplies the factors of any
  drive, for batched Bloch matrices ``(..., n, n)`` or for the sparse matrix of an open sample.
* A drive is *exact* when its factors are exact for any window (steps, kicks), or *sliced* when
  they approximate a smooth ``H(t)`` with ``slices`` time slices (harmonic, ramped steps); a
  sliced drive (:class:`SlicedDrive`) carries ``tol``, ``min_slices`` and ``max_slices``, and the
  slices are doubled until ``U`` stops changing
  (:func:`~sweepcli.physics.drives.evolution.decide_slicing`).
* A *frame* is the choice of the starting time ``t0``: ``U(t0) = U(t0 + T, t0)``. Frames are
  unitarily equivalent but the chiral invariants of 1D drives need the two
  time-reversal-symmetric ones (Asboth and Obuse, PRB 88, 121406 (2013)), which
  :meth:`Drive.symmetric_times` finds (steps, ramps, harmonic terms and kicks each derive the
  condition for their own form of ``H(t)``; :func:`mirror_defect` compares two Hamiltonians).

Job-file hook
-------------
A protocol registers ``parse(table, reader) -> spec`` beside its class (``DRIVES.register(kind,
..., keys=(...), parse=...)``, ``keys`` the ``[drive]`` keys it reads besides ``kind``, ``period``
and ``omega``). The job-file layer passes a ``reader`` with ``expr(table, key, value)``
(an expression of the job's parameters), ``overrides(table, value)`` (a ``set = {...}`` table),
``entries(key)`` (the ``[[drive.KEY]]`` tables), ``only(table, mapping, allowed)``,
``number(table, key, value, Param)``, ``fail(table, key, expected, got, extra="")`` (the error
to raise) and ``model_params``. The returned spec is frozen and hashable and offers:

* ``expressions()``: every expression it holds; ``overrides()``: the parameter sets its parts
  apply (``((name, expression), ...)`` each); ``varied()``: the model parameters it changes in
  time; ``covers_period``: whether the parameters are at all times those of the parts (or
  between two of them), so that a parameter every part sets needs no value of its own;
* ``check(values, period, fail)``: values at one grid point, ``fail("[drive.x] key must ...;
  it is VALUE")`` raising the job error;
* ``compile(values, period, build)``: the :class:`Drive` at one grid point, ``build`` mapping
  parameter values to a TightBinding.

This module imports numpy only; the reader is duck-typed, so the physics core stays free of
the job-file layer.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from ..lattice import TightBinding
from ..registry import Param

Factor = tuple[float, TightBinding]

#: Relative tolerance for "durations sum to the period" and for matching times.
TIME_RTOL = 1e-9


class NoSymmetricTime(ValueError):
    """The drive has no (chiral-)symmetric starting time at all, as opposed to a protocol that
    cannot look for one: its chiral invariants are undefined (``Reason.NO_CHIRAL_FRAME``)."""


class Drive(ABC):
    """The protocol every periodic drive follows (implementations are frozen dataclasses).

    Attributes
    ----------
    period : float
        ``T > 0`` (time units, inverse energy).
    exact : bool (class attribute)
        Whether :meth:`factors` is exact for any window (``slices`` ignored) or a time slicing
        of a smooth ``H(t)``; a sliced drive also has ``tol``, ``min_slices``, ``max_slices``.
    """

    exact: ClassVar[bool] = True

    @property
    def dim(self) -> int:
        """Lattice dimension."""
        return self.factors(slices=1)[0][1].dim

    @property
    def norb(self) -> int:
        """Orbitals per cell."""
        return self.factors(slices=1)[0][1].norb

    @abstractmethod
    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors ``(duration, TightBinding)`` of the evolution from ``start`` to ``stop``
        (default ``start + T``) in time order; the drive is continued periodically. ``slices``:
        time slices per period of a sliced drive (default its ``min_slices``)."""

    def symmetric_times(self, chiral: np.ndarray | None = None, atol: float = 1e-10
                        ) -> tuple[float, float]:
        """The two time-reversal-symmetric (chiral-symmetric with ``chiral``) starting times.

        A time ``t*`` is symmetric when ``H(t* + s) = H(t* - s)`` for all ``s`` or, with
        ``chiral`` given, ``chiral H(t* + s) chiral = -H(t* - s)``: then the frame starting at
        ``t*`` has ``chiral U chiral = U^dagger`` (Asboth and Obuse, PRB 88, 121406 (2013)).
        The reflection ``t -> 2 t* - t`` of the circle of length ``T`` fixes ``t*`` and
        ``t* + T/2``, so symmetric times come in pairs ``t1, t2 = t1 + T/2``; ``factors(start=
        t1)`` of a protocol that implements this method is then symmetric about ``t1 + T/2``
        factor by factor, so the discretised ``U`` keeps the symmetry exactly.

        Returns
        -------
        (t1, t2) : floats in ``[0, T)``, ``t1`` the earlier of the pair.

        Raises
        ------
        NoSymmetricTime
            When the protocol has searched every candidate and the drive has none.
        ValueError
            When the drive has no symmetric time (or the protocol cannot find them; give the
            times explicitly then).
        """
        raise ValueError(f"symmetric times are not found automatically for a "
                         f"{type(self).__name__}; give them explicitly for this drive")


def real(value: complex) -> float:
    """The real part of a parameter value (expressions evaluate to complex numbers)."""
    return float(value.real) if isinstance(value, complex) else float(value)


def overridden(values: Mapping[str, complex], overrides: Sequence[tuple[str, Callable]]
               ) -> dict[str, complex]:
    """Parameter values with a part's ``set = {...}`` expressions applied."""
    return {**values, **{k: e(values) for k, e in overrides}}


def mirror_defect(a: TightBinding, b: TightBinding, chiral: np.ndarray | None = None) -> float:
    """Largest entry of ``image(a) - b`` over the onsite and hopping matrices, with
    ``image(h) = h`` (``chiral is None``) or ``-chiral h chiral``: zero when ``a`` is the mirror
    image of ``b`` in the sense of :meth:`Drive.symmetric_times` (``H(k)`` of both then obey
    ``chiral H_a(k) chiral = -H_b(k)`` at every ``k``)."""
    ha, hb = a.hoppings, b.hoppings
    zero = np.zeros((a.norb, a.norb), complex)

    def image(m: np.ndarray) -> np.ndarray:
        return m if chiral is None else -(chiral @ m @ chiral)

    pairs = [(a.onsite, b.onsite)] + [(ha.get(r, zero), hb.get(r, zero))
                                      for r in set(ha) | set(hb)]
    return max(float(np.max(np.abs(image(x) - y), initial=0.0)) for x, y in pairs)


def mirror_deviation(hamiltonian_at: Callable[[float], TightBinding], tstar: float,
                     offsets: Sequence[float], chiral: np.ndarray | None = None) -> float:
    """Largest :func:`mirror_defect` of ``H(t* + s)`` against ``H(t* - s)`` over ``offsets``."""
    return max((mirror_defect(hamiltonian_at(tstar + s), hamiltonian_at(tstar - s), chiral)
                for s in offsets), default=0.0)


def check_period(period: float) -> float:
    period = float(period)
    if not (math.isfinite(period) and period > 0):
        raise ValueError(f"the drive period must be a positive finite number; got {period}")
    return period


def check_compatible(tbs: Sequence[TightBinding], what: str) -> None:
    ref = tbs[0]
    for i, tb in enumerate(tbs[1:], start=1):
        if tb.norb != ref.norb or tb.dim != ref.dim:
            raise ValueError(f"{what} {i} has {tb.norb} orbitals in {tb.dim}D, but {what} 0 has "
                             f"{ref.norb} in {ref.dim}D; all parts of a drive must share the "
                             f"lattice")


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


SCHEMES = ("magnus4", "midpoint")
_CF4_C = (0.5 - math.sqrt(3) / 6, 0.5 + math.sqrt(3) / 6)
_CF4_A = ((3 - 2 * math.sqrt(3)) / 12, (3 + 2 * math.sqrt(3)) / 12)


def smooth_factors(hamiltonian_at: Callable[[float], TightBinding], start: float, stop: float,
                   slices: int, scheme: str = "magnus4") -> list[Factor]:
    """Factors of a smooth ``H(t)`` on ``[start, stop]`` cut into ``slices`` equal slices.

    ``magnus4``: per slice ``exp(-i dt (a1 H(c1) + a2 H(c2))) exp(-i dt (a2 H(c1) +
    a1 H(c2)))`` with Gauss nodes ``c = 1/2 -+ sqrt(3)/6`` and ``a = (3 -+ 2 sqrt 3)/12``, the
    fourth-order commutator-free Magnus scheme of Blanes and Moan (J. Comput. Phys. 227, 4566
    (2008)), error ``O(dt^4)``; ``midpoint``: ``exp(-i dt H(t + dt/2))``, ``O(dt^2)``.
    """
    length = stop - start
    if length <= 0:
        return []
    dt = length / slices
    out: list[Factor] = []
    for j in range(slices):
        t0 = start + j * dt
        if scheme == "midpoint":
            out.append((dt, hamiltonian_at(t0 + dt / 2)))
            continue
        h1 = hamiltonian_at(t0 + _CF4_C[0] * dt)
        h2 = hamiltonian_at(t0 + _CF4_C[1] * dt)
        # a1 + a2 = 1/2: each exponential is half a slice of a weighted mean Hamiltonian.
        a1, a2 = _CF4_A
        out.append((dt / 2, combine([(2 * a2, h1), (2 * a1, h2)])))
        out.append((dt / 2, combine([(2 * a1, h1), (2 * a2, h2)])))
    return out


@dataclass(frozen=True, eq=False, kw_only=True)
class Slicing:
    """The time-slicing settings a sliced drive's ``[drive]`` table gives (:func:`read_slicing`),
    shared by its job-file spec and its :class:`SlicedDrive`. Keyword-only, so that they follow
    the fields of a subclass; ``eq=False`` leaves equality to the subclass.

    Parameters
    ----------
    tol : float
        Accept ``U`` when doubling the number of slices changes it by less than ``tol``
        (largest absolute entry difference over the whole k batch).
    max_slices : int
        Largest number of slices per period; beyond it the evolution is reported unconverged.
    scheme : ``"magnus4"`` or ``"midpoint"``
        See :func:`smooth_factors`.
    """

    tol: float = 1e-8
    max_slices: int = 4096
    scheme: str = "magnus4"

    def slicing(self) -> dict:
        """The settings as keywords of a :class:`SlicedDrive`."""
        return {"tol": self.tol, "max_slices": self.max_slices, "scheme": self.scheme}


@dataclass(frozen=True, eq=False, kw_only=True)
class SlicedDrive(Slicing, Drive):
    """A drive whose factors slice a smooth ``H(t)``: the :class:`Slicing` settings and
    ``min_slices`` (int, the first number of slices), checked after the subclass's own checks
    (``super().__post_init__()``)."""

    min_slices: int = 8

    exact = False

    def __post_init__(self) -> None:
        if not self.tol > 0:
            raise ValueError(f"the time-slicing tolerance must be > 0; got {self.tol}")
        if self.scheme not in SCHEMES:
            raise ValueError(f"scheme must be 'magnus4' or 'midpoint'; got {self.scheme!r}")
        if not 1 <= self.min_slices <= self.max_slices:
            raise ValueError("need 1 <= min_slices <= max_slices")


class SegmentDrive(Drive):
    """A drive built on time-ordered ``segments`` (a field of the subclass: a tuple of
    ``(duration, TightBinding)`` on one lattice), whose lattice is that of the first segment."""

    @property
    def norb(self) -> int:
        return self.segments[0][1].norb

    @property
    def dim(self) -> int:
        return self.segments[0][1].dim


def read_slicing(t: Mapping, r) -> dict:
    """The ``tol``, ``max_slices`` and ``scheme`` keys of a sliced drive's ``[drive]`` table."""
    scheme = t.get("scheme", "magnus4")
    if scheme not in SCHEMES:
        raise r.fail("drive", "scheme", "\"magnus4\" or \"midpoint\"", scheme)
    return {"tol": float(r.number("drive", "tol", t.get("tol", 1e-8),
                                  Param("tol", low=0, open_low=True))),
            "max_slices": r.number("drive", "max_slices", t.get("max_slices", 4096),
                                   Param("max_slices", kind="int", low=8)),
            "scheme": scheme}


SLICING_KEYS = ("tol", "max_slices", "scheme")
