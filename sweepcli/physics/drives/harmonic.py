"""Smooth drives ``H(t)`` (harmonic terms in the job file), integrated time-ordered in slices."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ..lattice import TightBinding
from ..registry import Param
from . import DRIVES
from .base import (
    SLICING_KEYS,
    Factor,
    NoSymmetricTime,
    SlicedDrive,
    Slicing,
    check_period,
    mirror_deviation,
    read_slicing,
    real,
    smooth_factors,
)

#: Samples per period of the first Fourier analysis of ``H(t)`` (doubled while unresolved).
FOURIER_SAMPLES = 32
#: Most samples per period of that analysis.
MAX_FOURIER_SAMPLES = 1024
#: Offsets ``s`` at which a symmetric time found from the harmonics is checked directly.
MIRROR_CHECKS = 24


def _stacked(tbs: Sequence[TightBinding]) -> np.ndarray:
    """``(len(tbs), 1 + R, n, n)``: the onsite and hopping matrices of each model, hoppings in
    the order of the sorted union of their displacements (absent ones zero)."""
    keys = sorted(set().union(*(tb.hoppings for tb in tbs)))
    zero = np.zeros((tbs[0].norb, tbs[0].norb), complex)
    return np.array([[tb.onsite] + [tb.hoppings.get(r, zero) for r in keys] for tb in tbs],
                    dtype=complex)


def fourier_coefficients(hamiltonian_at: Callable[[float], TightBinding], period: float,
                         atol: float) -> np.ndarray:
    """Fourier coefficients ``c_m`` of ``H(t) = sum_m c_m exp(i m omega t)``, ``omega = 2 pi/T``.

    ``H`` is sampled at ``N`` equal times per period and transformed (numpy.fft); ``N`` is
    doubled from ``FOURIER_SAMPLES`` while the upper half of the harmonics holds an entry above
    ``atol / 10`` (aliasing), up to ``MAX_FOURIER_SAMPLES``.

    Returns
    -------
    (N, 1 + R, n, n) : ``c[m]`` for ``m = 0 .. N/2 - 1`` and ``c[N - m] = c_{-m}``, of the onsite
    and hopping matrices stacked as in :func:`_stacked`.
    """
    n = FOURIER_SAMPLES
    while True:
        c = np.fft.fft(_stacked([hamiltonian_at(period * j / n) for j in range(n)]), axis=0) / n
        tail = float(np.max(np.abs(c[n // 4: n - n // 4 + 1])))
        if tail <= atol / 10 or n >= MAX_FOURIER_SAMPLES:
            return c
        n *= 2


@dataclass(frozen=True)
class HarmonicSpec(Slicing):
    """The ``[[drive.term]]`` tables: ``(parameter, amplitude, harmonic n, phase)`` adding
    ``amplitude * cos(n omega t + phase)`` to the parameter, and the slicing settings (see
    :mod:`sweepcli.physics.drives.base` for the hook contract)."""

    terms: tuple

    covers_period = False

    def expressions(self) -> list:
        return [e for _, amp, _, phase in self.terms for e in (amp, phase)]

    def overrides(self) -> list[tuple]:
        return []

    def varied(self) -> set[str]:
        return {p for p, *_ in self.terms}

    def check(self, values: Mapping[str, complex], period: float,
              fail: Callable[[str], Exception]) -> None:
        """Nothing beyond the period: any amplitude and phase give a drive."""

    def compile(self, values: Mapping[str, complex], period: float,
                build: Callable[[Mapping[str, complex]], TightBinding]) -> HarmonicDrive:
        omega = 2 * math.pi / period
        terms = [(p, real(a(values)), n, real(ph(values))) for p, a, n, ph in self.terms]

        def hamiltonian_at(t: float) -> TightBinding:
            shifted = dict(values)
            for p, amp, n, phase in terms:
                shifted[p] = real(shifted[p]) + amp * math.cos(n * omega * t + phase)
            return build(shifted)

        return HarmonicDrive(period, hamiltonian_at, **self.slicing())


def parse_harmonic(t: Mapping, r) -> HarmonicSpec:
    """The ``[[drive.term]]`` tables (``param``, ``amplitude``, ``harmonic``, ``phase``) and
    ``tol``, ``max_slices``, ``scheme``."""
    terms = []
    for i, term in enumerate(r.entries("term")):
        table = f"drive.term.{i}"
        r.only(table, term, ["param", "amplitude", "harmonic", "phase"])
        param = term.get("param")
        if not isinstance(param, str) or param not in r.model_params:
            raise r.fail(table, "param", "a model parameter (" + ", ".join(sorted(r.model_params))
                         + ")", param, r.suggest(str(param), r.model_params))
        n = r.number(table, "harmonic", term.get("harmonic", 1),
                     Param("harmonic", kind="int", low=1))
        terms.append((param, r.expr(table, "amplitude", term.get("amplitude")),
                      n, r.expr(table, "phase", term.get("phase", 0))))
    return HarmonicSpec(tuple(terms), **read_slicing(t, r))


@DRIVES.register("harmonic", description="model parameters plus sums of cos(n omega t + phase), "
                 "integrated in time slices until U converges",
                 source="Blanes and Moan, J. Comput. Phys. 227, 4566 (2008) (integrator)",
                 keys=("term", *SLICING_KEYS), parse=parse_harmonic)
@dataclass(frozen=True, eq=False)
class HarmonicDrive(SlicedDrive):
    """Smooth drive ``H(t)``, evaluated on demand and integrated time-ordered (sliced).

    Parameters
    ----------
    period : float
        ``T > 0``.
    hamiltonian_at : callable ``t -> TightBinding``
        The Hamiltonian at time ``t`` (e.g. a model factory with ``cos(omega t)`` terms).
    tol, max_slices, scheme, min_slices
        Keyword-only; see :class:`~sweepcli.physics.drives.base.SlicedDrive`.
    """

    period: float
    hamiltonian_at: Callable[[float], TightBinding]

    def __post_init__(self) -> None:
        object.__setattr__(self, "period", check_period(self.period))
        super().__post_init__()

    @property
    def norb(self) -> int:
        return self.hamiltonian_at(0.0).norb

    @property
    def dim(self) -> int:
        return self.hamiltonian_at(0.0).dim

    def factors(self, start: float = 0.0, stop: float | None = None, *,
                slices: int | None = None) -> list[Factor]:
        """Factors for ``slices`` equal slices of ``[start, stop]`` (default ``min_slices``).

        The slices and both schemes of :func:`~sweepcli.physics.drives.base.smooth_factors`
        are symmetric under the reflection about the centre of the window (the Gauss nodes of a
        slice go to those of its mirror slice, and the two exponentials of a slice to those of
        the mirror slice in reverse order), so a frame starting at a symmetric time
        (:meth:`symmetric_times`) is chiral symmetric at any number of slices, up to rounding.
        """
        stop = start + self.period if stop is None else stop
        n = self.min_slices if slices is None else int(slices)
        return smooth_factors(self.hamiltonian_at, start, stop, n, self.scheme)

    def symmetric_times(self, chiral: np.ndarray | None = None, atol: float = 1e-10
                        ) -> tuple[float, float]:
        """The two symmetric starting times ``t1, t2 = t1 + T/2`` of the smooth drive.

        Derivation. Write ``H(t) = H0 + sum_n [A_n cos(n w t) + B_n sin(n w t)]`` (``w = 2 pi /
        T``; a job-file term ``a cos(n w t + phase)`` of a parameter entering ``H`` linearly
        through ``D`` gives ``A_n = a cos(phase) D``, ``B_n = -a sin(phase) D``) and ``P[h] =
        -chiral h chiral`` (``P[h] = h`` without ``chiral``). About a time ``t*``, with
        ``theta = n w t*``, harmonic ``n`` is ``a_n cos(n w s) + b_n sin(n w s)`` in ``s = t -
        t*``, its even part ``a_n = A_n cos theta + B_n sin theta`` and its odd part ``b_n =
        B_n cos theta - A_n sin theta``. Since ``cos`` and ``sin`` of different harmonics are
        independent functions of ``s``, ``P[H(t* + s)] = H(t* - s)`` for all ``s`` splits into

        * ``P[H0] = H0``: the time average is chiral odd (for any ``t*``);
        * ``P[a_n] = a_n`` and ``P[b_n] = -b_n`` for every ``n``: the part of each harmonic even
          about ``t*`` is chiral odd, the odd part chiral even.

        A pure cosine of a chiral-odd ``A`` needs ``A sin theta = 0``: ``t* = j T / (2 n)``
        (``t* = 0, T/2`` for ``n = 1``); a sine of a chiral-odd ``B`` needs ``cos theta = 0``:
        ``t* = T/4, 3T/4`` for ``n = 1``; ``cos(n w t + phase)`` of a chiral-odd term needs
        ``sin(theta + phase) = 0``; a chiral-even term (a staggered potential in a chain, say)
        must be odd about ``t*``. A cosine and a sine of chiral-odd terms in the same harmonic
        have no common ``t*``. In complex form, ``c_{+-n} = (A_n -+ i B_n)/2``, the condition
        reads ``P[c_n] = z^n c_{-n}`` with ``z = exp(-2 i w t*)``, which fixes ``z^n`` from one
        harmonic: ``t*`` is one of ``2n`` points ``-arg(z^n) / (2 n w) + j T / (2 n)``.

        Method. ``H(t)`` is sampled and Fourier analysed (:func:`fourier_coefficients`; exact
        for a model linear in the driven parameters, converged to ``atol`` otherwise); the
        candidate times come from the strongest harmonic; a candidate is accepted when the
        residues ``|P[c_m] e^{i m w t*} - c_{-m} e^{-i m w t*}|`` (largest entries) of all
        harmonics (``m`` and ``-m`` alike) sum to at most ``atol``, which bounds the violation at
        every ``s``, and when
        ``P[H(t* + s)] = H(t* - s)`` holds to ``atol`` at ``MIRROR_CHECKS`` offsets ``s``
        evaluated directly. The earliest accepted time in ``[0, T)`` and its partner are
        returned (Asboth and Obuse, PRB 88, 121406 (2013)).

        Raises
        ------
        ValueError
            If no time is symmetric; the message says which part of ``H(t)`` prevents it.
        """
        T = self.period
        g = None if chiral is None else np.asarray(chiral, complex)
        what = "chiral-symmetric" if g is not None else "time-reversal-symmetric"
        odd = "chiral odd (chiral H0 chiral = -H0)" if g is not None else "real"
        c = fourier_coefficients(self.hamiltonian_at, T, atol)
        nsamp = c.shape[0]

        def image(m: np.ndarray) -> np.ndarray:
            return m if g is None else -(g @ m @ g)

        def largest(m: np.ndarray) -> float:
            return float(np.max(np.abs(m), initial=0.0))

        static = largest(image(c[0]) - c[0])
        if static > atol:
            raise NoSymmetricTime(f"this harmonic drive has no {what} starting time: the time "
                             f"average of H(t) is not {odd}; it deviates by {static:.3g}")
        harmonics = range(1, nsamp // 2)
        present = [m for m in harmonics if max(largest(c[m]), largest(c[-m])) > atol / 4]
        if not present:
            return 0.0, T / 2
        m1 = max(present, key=lambda m: largest(c[m]) + largest(c[-m]))
        zm = np.vdot(c[-m1], image(c[m1]))  # P[c_m] = z^m c_{-m}, z^m estimated
        if abs(zm) <= atol ** 2:
            raise NoSymmetricTime(f"this harmonic drive has no {what} starting time: harmonic {m1} "
                             f"of H(t) is at no time its own mirror image")
        base = -float(np.angle(zm)) / (4 * math.pi * m1)
        cands = []
        for j in range(2 * m1):
            t = (base + j / (2 * m1)) % 1.0
            snap = round(t * 4 * m1) / (4 * m1)
            t = (snap if abs(t - snap) < 1e-12 else t) % 1.0
            cands.append(t * T)

        def residues(ts: float) -> np.ndarray:
            ph = np.exp(1j * 2 * math.pi * np.arange(1, nsamp // 2) * ts / T)
            return np.array([largest(image(c[m]) * ph[m - 1] - c[-m] / ph[m - 1])
                             for m in harmonics])

        offsets = T * (np.arange(MIRROR_CHECKS) + 0.5 * (math.sqrt(5) - 1)) / MIRROR_CHECKS
        best = None
        for ts in sorted(cands):
            res = residues(ts)
            total = static + 2 * float(res.sum())
            if best is None or total < best[0]:
                best = (total, ts, 1 + int(np.argmax(res)))
            if total <= atol and mirror_deviation(self.hamiltonian_at, ts, offsets, g) <= atol:
                return ts, (ts + T / 2) % T
        total, ts, worst = best
        rule = ("chiral H(t* + s) chiral = -H(t* - s)" if g is not None
                else "H(t* + s) = H(t* - s)")
        raise NoSymmetricTime(f"this harmonic drive has no {what} starting time: no t* has {rule} "
                         f"for all s; the candidates of harmonic {m1} (first t* = "
                         f"{min(cands) / T:.6g} T) leave a deviation of at least {total:.3g}, "
                         f"most of it from harmonic {worst}")
