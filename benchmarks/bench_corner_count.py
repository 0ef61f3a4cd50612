"""One corner-mode count (both gaps, edge gap included) against a plain Krylov reference.

Run by hand (not a test): ``python3 benchmarks/bench_corner_count.py [--sizes 24 32]``.

The project's part is one ``corner_modes`` measurement at a grid point, as a sweep runs it
(``size = max_size = L``, method ``auto``): the bulk windows, the ribbons that give the edge gap
and decay length of each gap, the flake's in-window states and the counting rule. Its time is
split into phases by wrapping the functions that do them (ribbons / flake solve / counting /
the rest), so the script also runs on older versions of the project (``--project-only`` with
``PYTHONPATH`` pointing at another checkout gives the "before" numbers).

The reference is written here, independent of the project's solvers:

* driven: ``scipy.sparse.linalg.eigsh`` on ``A = (U + U^dagger)/2``, ``U`` applied to vectors by a
  Chebyshev expansion of each step's exponential (Tal-Ezer and Kosloff, J. Chem. Phys. 81, 3967
  (1984)) whose bounds, scaled matrix and coefficients are computed once; one run per gap
  (``which="LA"`` for quasienergy 0, ``"SA"`` for ``pi/T``) asking for
  ``max(6, states + 1)`` levels, ``states`` being the in-window states the project found (the
  project must also converge one level beyond its window), then the same Rayleigh-Ritz step;
* static: shift-invert ``eigsh(H, sigma=centre)``, one LU factorisation, same number of levels.

The reference finds the flake states only (no ribbons, no counting), so the ratio
project / reference is the whole count against a bare Krylov solve. BLAS is pinned to one
thread; project and reference alternate and the fastest of ``--repeat`` runs is kept (the
machine is shared, times are noisy).
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import argparse  # noqa: E402
import time  # noqa: E402
from collections import defaultdict  # noqa: E402

import numpy as np  # noqa: E402
import scipy.sparse as sp  # noqa: E402
from scipy.sparse.linalg import LinearOperator, eigsh, splu  # noqa: E402
from scipy.special import jv  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402

from sweepcli.physics import boundary as bd  # noqa: E402
from sweepcli.physics import samples  # noqa: E402
from sweepcli.physics.boundary import boxes, solvers  # noqa: E402
from sweepcli.physics.drives.steps import StepDrive  # noqa: E402
from sweepcli.physics.measurements import MEASUREMENTS  # noqa: E402
from sweepcli.physics.models import MODELS  # noqa: E402
from sweepcli.physics.point import Point  # noqa: E402

CORNER = MODELS["bhz_corner"].func


def driven_point(omega: float) -> Point:
    """bhz_corner, delta2 = 0.8: m = -0.5 for 0.4 T, then m = 3.0 for 0.6 T, T = 2 pi / omega."""
    period = 2 * np.pi / omega
    drive = StepDrive(period, ((0.4 * period, CORNER(m=-0.5, delta2=0.8)),
                               (0.6 * period, CORNER(m=3.0, delta2=0.8))))
    return Point(params={}, build=lambda p: CORNER(m=-0.5, delta2=0.8), drive=drive)


def static_point() -> Point:
    """bhz_corner, m = 1, delta2 = 0.5: the corner phase (four corner modes at zero energy)."""
    return Point(params={}, build=lambda p: CORNER(m=1.0, delta2=0.5))


# ----------------------------------------------------------------------------------------------
# The project's count, split into phases


class Phases:
    """Wraps the functions of each phase (whichever exist in this version) to time them."""

    PHASES = {
        "ribbons": [(bd, "floquet_boundary_gaps"), (bd, "floquet_boundary_gap"),
                    (bd, "static_boundary_gap")],
        "flake": [(boxes, "floquet_levels"), (boxes, "static_levels"), (boxes, "sample_steps"),
                  (getattr(solvers, "FloquetSample", None), "_levels"),
                  (getattr(solvers, "FloquetSample", None), "_filtered_levels")],
        "counting": [(boxes.counts, "count")],
    }

    def __init__(self) -> None:
        self.times: dict[str, float] = defaultdict(float)
        self.depth = 0
        self.saved = []
        for phase, targets in self.PHASES.items():
            for owner, name in targets:
                if owner is not None and hasattr(owner, name):
                    self.saved.append((owner, name, getattr(owner, name)))
                    setattr(owner, name, self._wrap(phase, getattr(owner, name)))

    def _wrap(self, phase, func):
        def timed(*args, **kwargs):
            if self.depth:  # a phase inside another counts for the outer one
                return func(*args, **kwargs)
            self.depth += 1
            t0 = time.perf_counter()
            try:
                return func(*args, **kwargs)
            finally:
                self.times[phase] += time.perf_counter() - t0
                self.depth -= 1
        return timed

    def restore(self) -> None:
        for owner, name, func in reversed(self.saved):
            setattr(owner, name, func)


def project_count(point: Point, size: int) -> tuple[float, dict, dict]:
    phases = Phases()
    try:
        t0 = time.perf_counter()
        out = MEASUREMENTS["corner_modes"].func(point, size=size, max_size=size)
        total = time.perf_counter() - t0
    finally:
        phases.restore()
    split = dict(phases.times)
    split["other"] = total - sum(split.values())
    return total, split, out


# ----------------------------------------------------------------------------------------------
# The plain reference


class Chebyshev:
    """``exp(-i t h)`` (or its adjoint) on vectors; bounds and coefficients computed once."""

    def __init__(self, h: sp.csr_matrix, t: float) -> None:
        diag = h.diagonal().real
        radius = np.asarray(abs(h).sum(axis=1)).ravel() - np.abs(diag)
        lo, hi = float(np.min(diag - radius)), float(np.max(diag + radius))
        a, b = 0.5 * (hi + lo), 0.5 * (hi - lo)
        kmax = int(b * t + 20)
        while abs(jv(kmax, b * t)) > 1e-15:
            kmax += 10
        self.c = jv(np.arange(kmax + 1), b * t) * (-1j) ** np.arange(kmax + 1)
        self.c[1:] *= 2
        self.phase = np.exp(-1j * a * t)
        self.g = sp.csr_matrix((h - a * sp.identity(h.shape[0], format="csr")) / b)

    def __call__(self, x: np.ndarray, adjoint: bool = False) -> np.ndarray:
        c = self.c.conj() if adjoint else self.c
        prev, cur = x, self.g @ x
        out = c[0] * prev + c[1] * cur
        for ck in c[2:]:
            prev, cur = cur, 2 * (self.g @ cur) - prev
            out = out + ck * cur
        return out * (np.conj(self.phase) if adjoint else self.phase)


def _v0(n: int) -> np.ndarray:
    rng = np.random.default_rng(7)
    return rng.standard_normal(n) + 1j * rng.standard_normal(n)


def reference_driven(point: Point, size: int, states: dict[str, int]) -> float:
    t0 = time.perf_counter()
    steps = [Chebyshev(samples.open_hamiltonian(tb, (size, size)), t)
             for t, tb in point.drive.factors()]
    n = steps[0].g.shape[0]

    def apply_u(x):
        for s in steps:
            x = s(x)
        return x

    def apply_a(x):
        y = x
        for s in reversed(steps):
            y = s(y, adjoint=True)
        return 0.5 * (apply_u(x) + y)

    op = LinearOperator((n, n), matvec=apply_a, dtype=complex)
    for g, which in (("0", "LA"), ("pi", "SA")):
        _, q = eigsh(op, k=max(6, states.get(g, 0) + 1), which=which, v0=_v0(n))
        np.linalg.eigvals(q.conj().T @ apply_u(q))  # Rayleigh-Ritz with U, as the project
    return time.perf_counter() - t0


def reference_static(point: Point, size: int, centre: float, states: int) -> float:
    t0 = time.perf_counter()
    h = samples.open_hamiltonian(point.tb, (size, size)).tocsc()
    n = h.shape[0]
    sigma = centre + 1e-6
    lu = splu((h - sigma * sp.identity(n, format="csc")).tocsc())
    opinv = LinearOperator((n, n), matvec=lu.solve, dtype=complex)
    eigsh(h, k=max(6, states + 1), sigma=sigma, which="LM", v0=_v0(n), OPinv=opinv)
    return time.perf_counter() - t0


# ----------------------------------------------------------------------------------------------


def counted(out: dict, g: str) -> str:
    total = out[f"corner_modes_{g}"]
    return f"{g}: {total if total is not None else 'missing'} ({out[f'corner_modes_{g}_states']})"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[24, 32])
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--project-only", action="store_true",
                    help="time the project only (e.g. on an older checkout)")
    args = ap.parse_args()
    cases = [("driven omega=6", lambda: driven_point(6.0)),
             ("driven omega=3.5", lambda: driven_point(3.5)),
             ("static m=1", static_point)]
    print(f"{'case':<18} {'L':>3} {'project s':>10} {'ribbons':>8} {'flake':>8} "
          f"{'counting':>8} {'other':>7} {'ref s':>7} {'ratio':>6}  counts (states)")
    for size in args.sizes:
        for name, make in cases:
            best, best_ref = None, np.inf
            for _ in range(args.repeat):
                point = make()  # a fresh point: nothing memoised between repeats
                total, split, out = project_count(point, size)
                if best is None or total < best[0]:
                    best = (total, split, out)
                if args.project_only:
                    continue
                states = {g: out.get(f"corner_modes_{g}_states") or 0 for g in ("0", "pi")}
                if point.drive is not None:
                    ref = reference_driven(make(), size, states)
                else:
                    from sweepcli.physics.measurements.boundary import point_windows
                    centre = point_windows(point, bd.WINDOW_FRACTION)["0"].centre
                    ref = reference_static(make(), size, centre, states["0"])
                best_ref = min(best_ref, ref)
            total, split, out = best
            gaps = ("0", "pi") if "corner_modes_pi" in out else ("0",)
            ratio = "-" if args.project_only else f"{total / best_ref:.2f}"
            ref_s = "-" if args.project_only else f"{best_ref:.2f}"
            print(f"{name:<18} {size:>3} {total:>10.2f} {split.get('ribbons', 0):>8.2f} "
                  f"{split.get('flake', 0):>8.2f} {split.get('counting', 0):>8.2f} "
                  f"{split['other']:>7.2f} {ref_s:>7} {ratio:>6}  "
                  f"{'; '.join(counted(out, g) for g in gaps)}", flush=True)


if __name__ == "__main__":
    with threadpool_limits(limits=1):
        main()
