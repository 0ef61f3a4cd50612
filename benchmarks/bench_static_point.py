"""Time one static grid point: Chern number of a four-band model on a 64 x 64 k-mesh.

Batched (``tb.bloch`` on the whole mesh, one stacked ``numpy.linalg.eigh``, link variables as
array operations) against a plain Python loop over k points (one ``H(k)``, one ``eigh`` and one
overlap determinant per k point and link). Both must give the same Chern number. Run by hand:

    python benchmarks/bench_static_point.py [--model bhz] [--n 64] [--repeat 3]
"""

from __future__ import annotations

import argparse
import os
import time

# A sweep runs one BLAS thread per worker; measure under the same condition.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402

from sweepcli.physics.chern import chern_number, fhs_chern  # noqa: E402
from sweepcli.physics.lattice import kmesh  # noqa: E402
from sweepcli.physics.measurements import MEASUREMENTS  # noqa: E402
from sweepcli.physics.models import MODELS  # noqa: E402
from sweepcli.physics.point import Point  # noqa: E402
from sweepcli.physics.spin_chern import spin_chern_number  # noqa: E402

SAMPLE = {"bhz": dict(M=1.0, mix=0.1), "bbh": dict(gamma=0.4),
          "bhz_corner": dict(m=1.0, delta2=0.5),
          "qwz": dict(m=1.0), "haldane": dict(t2=0.15, phi=1.0, M=0.2)}


def batched(tb, n: int, nocc: int) -> tuple[int, float]:
    v = np.linalg.eigh(tb.bloch(kmesh(n, 2)))[1][..., :nocc]
    return fhs_chern(v)


def loop(tb, n: int, nocc: int) -> int:
    vecs = [[None] * n for _ in range(n)]
    for i in range(n):
        for j in range(n):
            k = np.array([2 * np.pi * i / n, 2 * np.pi * j / n])
            vecs[i][j] = np.linalg.eigh(tb.bloch(k))[1][:, :nocc]

    def link(a, b):
        z = np.linalg.det(a.conj().T @ b)
        return z / abs(z)

    total = 0.0
    for i in range(n):
        for j in range(n):
            ip, jp = (i + 1) % n, (j + 1) % n
            u = (link(vecs[i][j], vecs[ip][j]) * link(vecs[ip][j], vecs[ip][jp])
                 * np.conj(link(vecs[i][jp], vecs[ip][jp]))
                 * np.conj(link(vecs[i][j], vecs[i][jp])))
            total += np.angle(u)
    return int(round(-total / (2 * np.pi)))


def best_of(f, repeat: int) -> tuple[float, object]:
    best, out = np.inf, None
    for _ in range(repeat):
        t = time.perf_counter()
        out = f()
        best = min(best, time.perf_counter() - t)
    return best, out


def polish_figures(model: str, repeat: int) -> None:
    """The gap polish of one point: every chosen mesh minimum in one batched Newton run (as
    :func:`sweepcli.physics.spectrum.polish_minima` does) against one run per minimum (each
    minimum polished alone, as a per-minimum optimiser does), interleaved, best of ``repeat``."""
    from sweepcli.physics.measurements.static import GAP_KMESH as n
    from sweepcli.physics.spectrum import _newton, energies, local_minima, velocity_bound

    tb = MODELS[model].func(**SAMPLE[model])
    nocc = tb.norb // 2
    mesh = kmesh(n, tb.dim)

    def phi(k):
        e = energies(tb, k)
        return (e[..., nocc] - e[..., nocc - 1]) ** 2

    g = np.sqrt(phi(mesh))
    step = 2 * np.pi / n
    reach = 2 * velocity_bound(tb.hoppings) * step * np.sqrt(tb.dim) / 2
    minima = local_minima(g)
    chosen = minima[g.ravel()[minima] <= g.ravel()[minima[0]] + reach]
    starts = mesh.reshape(-1, tb.dim)[chosen]
    t_batch, t_one = [], []
    for _ in range(repeat):
        t = time.perf_counter()
        together = _newton(phi, starts, step)[0]
        t_batch.append(time.perf_counter() - t)
        t = time.perf_counter()
        alone = np.concatenate([_newton(phi, s[None], step)[0] for s in starts])
        t_one.append(time.perf_counter() - t)
    diff = float(np.max(np.abs(np.sqrt(together) - np.sqrt(alone))))
    print(f"  gap polish of {len(starts)} mesh minima ({n} x {n} mesh): one at a time "
          f"{min(t_one) * 1e3:.1f} ms, batched {min(t_batch) * 1e3:.1f} ms, speed-up "
          f"{min(t_one) / min(t_batch):.1f}x; largest difference of the minima {diff:.1e}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--model", default="bhz", choices=sorted(SAMPLE))
    ap.add_argument("--n", type=int, default=64)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    tb = MODELS[args.model].func(**SAMPLE[args.model])
    nocc = tb.norb // 2
    t_b, (c_b, flux) = best_of(lambda: batched(tb, args.n, nocc), args.repeat)
    t_l, c_l = best_of(lambda: loop(tb, args.n, nocc), max(1, args.repeat // 2))
    print(f"model {args.model} {SAMPLE[args.model]}, {tb.norb} bands, {nocc} occupied, "
          f"{args.n} x {args.n} mesh")
    print(f"  batched : {t_b * 1e3:8.2f} ms  chern = {c_b}  max flux = {flux:.3f} rad")
    print(f"  loop    : {t_l * 1e3:8.2f} ms  chern = {c_l}")
    print(f"  ratio loop / batched = {t_l / t_b:.1f}x" + ("" if c_b == c_l else "  (MISMATCH)"))

    # The whole point as a sweep evaluates it: refined gap, then the Chern policy.
    def whole() -> dict:
        pt = Point(params=SAMPLE[args.model], build=lambda p: MODELS[args.model].func(**p))
        MEASUREMENTS["gap"].func(pt)
        return MEASUREMENTS["chern"].func(pt)

    t_w, rec = best_of(whole, args.repeat)
    print(f"  full point (gap + chern policy): {t_w * 1e3:.1f} ms, mesh {rec['chern_kmesh']}, "
          f"chern {rec['chern']}")
    polish_figures(args.model, args.repeat)
    t_p, r = best_of(lambda: chern_number(tb, nocc), args.repeat)
    print(f"  chern policy alone: {t_p * 1e3:.1f} ms (meshes up to {r.kmesh})")
    if "spin" in tb.operators:
        t_s, rs = best_of(lambda: spin_chern_number(tb, nocc, tb.operators["spin"]), args.repeat)
        print(f"  spin Chern policy: {t_s * 1e3:.1f} ms, spin_chern {rs.spin_chern}, "
              f"spin gap {rs.spin_gap:.3f}, mesh {rs.kmesh}")


if __name__ == "__main__":
    main()
