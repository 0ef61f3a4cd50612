"""Corner-mode counting on L x L four-band flakes: dense diagonalisation against Lanczos.

Run by hand (not a test): ``python3 benchmarks/bench_flake_modes.py``.

Two cases, both one point of a sweep (window from the bulk, then the in-window levels of the
flake and their classification):

* driven: the two-step Benalcazar-Bernevig-Hughes drive (intra-cell bonds gamma = 0.5 for T/2,
  then inter-cell bonds lambda = 1.2 for T/2, T = 2), corner modes at quasienergy 0 and pi/T;
  dense forms U (N x N) and diagonalises (U + U^dagger)/2, Lanczos applies U and U^dagger to
  vectors (Chebyshev expansion of each step's exponential) and never forms U;
* static: bhz_corner (m = 1, delta2 = 0.5) at energy 0; dense eigh (eigenvectors of the window
  only) against shift-invert Lanczos.

BLAS is pinned to one thread, so times are single-core. Both methods must give the same counts.
Prints times, the dense/Lanczos ratio and, per method, the largest L whose point fits in
``--budget`` seconds (measured for Lanczos by walking up in L; for dense extrapolated from the
largest measured L with the N^3 cost of a dense diagonalisation, N = 4 L^2, unless measured).
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("MKL_NUM_THREADS", "1")

import argparse  # noqa: E402
import time  # noqa: E402

from sweepcli.physics import boundary as bd  # noqa: E402
from sweepcli.physics.drives.steps import StepDrive  # noqa: E402
from sweepcli.physics.models import MODELS  # noqa: E402


def _counted(res: bd.ModeCount) -> tuple:
    """The per-corner counts, or the reason they are missing (with the in-window states)."""
    if res.per_corner is None:
        return (res.reason.name.lower(), res.states)
    return tuple(res.per_corner.tolist())


def driven_case():
    period = 2.0
    bbh = MODELS["bbh"].func
    drive = StepDrive(period, ((period / 2, bbh(gamma=0.5, lam=0.0)),
                               (period / 2, bbh(gamma=0.0, lam=1.2))))
    factors = drive.factors()
    windows = bd.floquet_windows(drive)

    def run(size: int, method: str):
        # xi = 0: always diagonalise the given flake (the solver is what is timed here).
        res = bd.floquet_box_modes(factors, (size, size), windows, method=method,
                                   xi={"0": 0.0, "pi": 0.0})
        return tuple(_counted(res[g]) for g in ("0", "pi"))

    return run


def static_case():
    tb = MODELS["bhz_corner"].func(m=1.0, delta2=0.5)
    window = bd.static_window(tb)

    def run(size: int, method: str):
        res = bd.box_modes(tb, (size, size), window, method=method, xi=0.0)
        return _counted(res)

    return run


def timed(run, size: int, method: str):
    t0 = time.perf_counter()
    counts = run(size, method)
    return time.perf_counter() - t0, counts


def bench(name: str, run, sizes: list[int], budget: float, dense_max_l: int) -> None:
    print(f"\n== {name}: corner modes of an L x L four-band flake (one core) ==")
    print(f"{'L':>4} {'N':>6} {'dense s':>9} {'Lanczos s':>10} {'dense/Lanczos':>14}  counts")
    last_dense = None
    fit_sparse = None
    for size in sizes:
        n = 4 * size * size
        ts, cs = timed(run, size, "sparse")
        if ts <= budget:
            fit_sparse = size
        if size <= dense_max_l:
            td, cd = timed(run, size, "dense")
            last_dense = (size, td)
            same = "same" if cd == cs else f"DIFFER dense {cd}"
            print(f"{size:>4} {n:>6} {td:>9.2f} {ts:>10.2f} {td / ts:>14.1f}  {cs} ({same})")
        else:
            print(f"{size:>4} {n:>6} {'-':>9} {ts:>10.2f} {'-':>14}  {cs}")
    # Lanczos: walk up from the largest size until the budget is exceeded.
    size, t = sizes[-1], ts
    while t <= budget:
        fit_sparse = size
        size = int(size * 1.25 + 1)
        t, _ = timed(run, size, "sparse")
        print(f"{size:>4} {4 * size * size:>6} {'-':>9} {t:>10.2f} {'-':>14}  (Lanczos walk)")
    # Dense: N^3 from the largest measured point.
    ld, td = last_dense
    fit_dense = int(ld * (budget / td) ** (1 / 6))
    print(f"largest L within {budget:g} s per point: dense ~{fit_dense} (extrapolated as L^6 "
          f"from L = {ld}), Lanczos {fit_sparse} (measured)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[16, 24, 32])
    ap.add_argument("--budget", type=float, default=10.0, help="seconds per point")
    ap.add_argument("--dense-max", type=int, default=32, help="largest L run densely")
    ap.add_argument("--case", choices=("driven", "static", "both"), default="both")
    args = ap.parse_args()
    if args.case in ("driven", "both"):
        bench("driven (two-step BBH)", driven_case(), args.sizes, args.budget, args.dense_max)
    if args.case in ("static", "both"):
        bench("static (bhz_corner)", static_case(), args.sizes, args.budget, args.dense_max)


if __name__ == "__main__":
    main()
