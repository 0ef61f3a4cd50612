"""One driven grid point: batched Floquet core versus a plain per-k-point loop.

Four-band BHZ-like model (d.Gamma, Dirac type; optionally with a term that breaks the
Clifford structure so the eigh path is used), three step segments, 64 x 64 k-mesh; computed:
the quasienergies, the grid gaps at 0 and pi/T, and the Chern numbers of the two Floquet band
groups. The reference loops over k with scipy.linalg.expm and numpy.linalg.eig and sums the
Fukui-Hatsugai-Suzuki plaquettes in Python. Prints the times and their ratio.

Both run with BLAS pinned to one thread (environment set before numpy is imported, and
``threadpoolctl``), as a sweep's workers do: with several threads the small per-k matrices of
the loop pay the threading overhead and the ratio is inflated many times over. The two are
interleaved, batched then loop in each of ``--repeat`` rounds, so that both see the same load
on a shared machine; the best of the rounds is reported.

Run: python benchmarks/bench_driven_point.py [--repeat 3]
"""

from __future__ import annotations

import argparse
import os
import time

# A sweep runs one BLAS thread per worker; measure under the same condition.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402
import scipy.linalg as sl  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402

from sweepcli.physics import floquet_chern as fc  # noqa: E402
from sweepcli.physics import quasienergy as qe  # noqa: E402
from sweepcli.physics.chern import fhs_chern  # noqa: E402
from sweepcli.physics.drives.steps import StepDrive  # noqa: E402
from sweepcli.physics.lattice import assemble, fourier_term, kmesh, pauli  # noqa: E402

N = 64


def four_band(m: float, mix: float):
    """``sin k1 G1 + sin k2 G2 + (m + cos k1 + cos k2) G3 + mix sz (x) sz``; the last term
    commutes with G3 and breaks the anticommuting (Dirac) structure."""
    g1, g2, g3 = pauli("xz"), pauli("y0"), pauli("z0")
    terms = [fourier_term((1, 0), cos=g3, sin=g1), fourier_term((0, 1), cos=g3, sin=g2)]
    return assemble(np.eye(2), np.zeros((4, 2)), m * g3 + mix * pauli("zz"), terms)


def drive(mix: float) -> StepDrive:
    return StepDrive(1.2, ((0.3, four_band(0.8, mix)), (0.48, four_band(0.3, mix)),
                           (0.42, four_band(-1.2, mix))))


def batched(d: StepDrive):
    mesh = qe.floquet_mesh(d, N, 2)
    d0, dpi = qe.gap_distances(mesh.eps, d.period)
    lower, upper = fc.band_groups(mesh.eps, mesh.vectors)
    return 2 * d0.min(), 2 * dpi.min(), fhs_chern(upper)[0], fhs_chern(lower)[0]


def loop_chern(vecs):
    total = 0.0
    for i in range(N):
        for j in range(N):
            a, b = vecs[i][j], vecs[(i + 1) % N][j]
            c, e = vecs[(i + 1) % N][(j + 1) % N], vecs[i][(j + 1) % N]
            link = (np.linalg.det(a.conj().T @ b) * np.linalg.det(b.conj().T @ c)
                    * np.linalg.det(c.conj().T @ e) * np.linalg.det(e.conj().T @ a))
            total += np.angle(link)
    return int(round(-total / (2 * np.pi)))


def loop(d: StepDrive):
    T = d.period
    ks = kmesh(N, 2)
    g0 = gpi = np.inf
    up = [[None] * N for _ in range(N)]
    low = [[None] * N for _ in range(N)]
    for i in range(N):
        for j in range(N):
            u = np.eye(4, dtype=complex)
            for dur, tb in d.segments:
                u = sl.expm(-1j * dur * tb.bloch(ks[i, j])) @ u
            lam, v = np.linalg.eig(u)
            eps = -np.angle(lam) / T
            order = np.argsort(eps)
            eps, v = eps[order], v[:, order]
            g0 = min(g0, 2 * np.min(np.abs(eps)))
            gpi = min(gpi, 2 * np.min(np.pi / T - np.abs(eps)))
            q, _ = np.linalg.qr(v[:, eps < 0])
            low[i][j] = q
            q, _ = np.linalg.qr(v[:, eps > 0])
            up[i][j] = q
    return g0, gpi, loop_chern(up), loop_chern(low)


def interleaved(fast, slow, repeat: int) -> tuple[list[float], list[float], object, object]:
    """Times of ``fast`` and ``slow`` run alternately, ``repeat`` rounds, and their results."""
    t_fast, t_slow, out_fast, out_slow = [], [], None, None
    for _ in range(repeat):
        t = time.perf_counter()
        out_fast = fast()
        t_fast.append(time.perf_counter() - t)
        t = time.perf_counter()
        out_slow = slow()
        t_slow.append(time.perf_counter() - t)
    return t_fast, t_slow, out_fast, out_slow


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    for mix, label in ((0.0, "Dirac type (closed form)"), (0.3, "generic (batched eigh)")):
        d = drive(mix)
        with threadpool_limits(limits=1, user_api="blas"):
            batched(d)  # warm-up
            t_fast, t_slow, fast, slow = interleaved(lambda d=d: batched(d),
                                                     lambda d=d: loop(d), args.repeat)
        same = np.allclose(fast[:2], slow[:2], atol=1e-9) and fast[2:] == slow[2:]
        print(f"{label:26s} gaps (0, pi) = ({fast[0]:.4f}, {fast[1]:.4f}), "
              f"C (upper, lower) = {fast[2:]}; agree: {same}")
        print(f"{'':26s} best of {args.repeat}: batched {min(t_fast) * 1e3:8.1f} ms   "
              f"loop {min(t_slow) * 1e3:8.1f} ms   ratio {min(t_slow) / min(t_fast):6.1f}x "
              f"(medians {np.median(t_slow) / np.median(t_fast):.1f}x)")


if __name__ == "__main__":
    main()
