"""Circularly driven graphene at high frequency: the Floquet bands' Chern number equals that of
the first-order high-frequency effective Hamiltonian (Oka and Aoki, PRB 79, 081406 (2009);
Kitagawa, Oka, Brataas, Fu and Demler, PRB 84, 235108 (2011)).

The effective Hamiltonian is computed here independently of the Floquet code: the Fourier
components H_m(k) of H(k, t) = sum_m H_m e^{i m w t} by FFT over one period, then (from memory,
the standard van Vleck / Magnus result, e.g. Kitagawa et al. eq. for H_eff)
    H_eff = H_0 + (1/w) sum_{m >= 1} [H_m, H_{-m}] / m.
"""

import math

import numpy as np
import pytest

from sweepcli.physics import floquet_chern as fc
from sweepcli.physics import quasienergy as qe
from sweepcli.physics.chern import fhs_chern
from sweepcli.physics.drives.harmonic import HarmonicDrive
from sweepcli.physics.lattice import kmesh
from sweepcli.physics.models import MODELS

GRAPHENE = MODELS["graphene_field"].func


def drive(amplitude, omega, sense=+1):
    def at(t):
        return GRAPHENE(ax=amplitude * math.cos(omega * t),
                        ay=sense * amplitude * math.sin(omega * t))
    return HarmonicDrive(2 * math.pi / omega, at, tol=1e-9)


def effective_hamiltonian(amplitude, omega, k, sense=+1, slices=64):
    t = 2 * math.pi / omega * np.arange(slices) / slices
    hs = np.stack([GRAPHENE(ax=amplitude * math.cos(omega * x),
                            ay=sense * amplitude * math.sin(omega * x)).bloch(k) for x in t])
    # H_m = (1/T) int H(t) e^{-i m w t} dt, so that H(t) = sum_m H_m e^{i m w t}.
    comps = np.fft.fft(hs, axis=0) / slices
    h_eff = comps[0].copy()
    for m in range(1, 4):
        hp, hm = comps[m], comps[-m]
        h_eff = h_eff + (hp @ hm - hm @ hp) / (m * omega)
    return h_eff


def lower_band_chern(h):
    _, v = np.linalg.eigh(h)
    return fhs_chern(v[..., :1])[0]


@pytest.mark.parametrize("sense", [+1, -1])
def test_circular_drive_chern_equals_effective_hamiltonian(sense):
    amplitude, omega = 0.6, 12.0
    n = 36
    k = kmesh(n, 2)
    h_eff = effective_hamiltonian(amplitude, omega, k, sense)
    c_eff = lower_band_chern(h_eff)
    assert abs(c_eff) == 1  # the light-induced gap is topological (Oka and Aoki 2009)

    d = drive(amplitude, omega, sense)
    gaps = qe.floquet_gaps(d, qe.floquet_mesh(d, 24, 2))
    chern = fc.floquet_chern(d, gaps)
    assert chern.lower == c_eff and chern.upper == -c_eff
    # Reversing the circulation reverses the Chern number.
    assert c_eff == sense * lower_band_chern(effective_hamiltonian(amplitude, omega, k, +1))
    # The quasienergy gap at 0 is the effective Hamiltonian's gap to leading order in 1/w.
    e = np.linalg.eigvalsh(h_eff)
    assert gaps.gap_0 == pytest.approx(np.min(e[..., 1] - e[..., 0]), rel=0.1)
