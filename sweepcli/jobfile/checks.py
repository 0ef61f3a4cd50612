"""Checks of a parsed job at sample grid points: values, drives, operators and sample sizes,
all before any work starts."""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np

from ..errors import JobError
from ..expressions import EvaluationError
from ..physics.drives.base import real
from ..physics.line_symmetry import commutator_violation
from ..physics.point import Point
from ..physics.registry import Param
from .checker import MAGNITUDE_HINT, MAX_MAGNITUDE, Checker
from .spec import Job

SAMPLED_POINTS = 1000  # grid points at which derived values are checked at load
DRIVE_BUILDS = 20  # of which the drive is built at the first few


def _check_drive(ck: Checker, job: Job, values: Mapping[str, complex], index: int,
                 build: bool) -> None:
    """Period and the protocol's own values (spans, kick times, ...) at one grid point; the
    drive must compile there."""
    d = job.drive
    where = f" at grid point {index}"
    period = d.period_at(values)
    key = "period" if d.period is not None else "omega"
    if not (math.isfinite(period) and period > 0):
        raise JobError(f"{ck.path}: [drive] {key} must give a positive, finite period; it gives "
                       f"{period:g}{where}.")
    d.protocol.check(values, period, lambda msg: JobError(f"{ck.path}: {msg}{where}."))
    try:
        if build:
            d.compile(values, job.build_model)
    except EvaluationError:
        raise  # reported with its own table and key by check_values
    except ValueError as exc:
        raise JobError(f"{ck.path}: [drive] cannot be built{where}: {exc}.") from None


def _check_line_operator(ck: Checker, job: Job, point: Point) -> None:
    """A line_winding operator must commute with H(k) of every part of the drive on the line."""
    for name, options in job.measurements:
        if name != "line_winding":
            continue
        opts = dict(options)
        op = opts["operator"]
        s = point.tb.operators[op] if isinstance(op, str) else op
        direction = np.asarray(opts["direction"], float)
        if direction.shape != (job.dim,):
            raise ck.fail(f"measure.{name}", "direction", f"a list of {job.dim} integers",
                          opts["direction"])
        origin = np.zeros(job.dim) if opts.get("origin") is None else np.asarray(opts["origin"])
        k = origin + np.linspace(0, 2 * np.pi, 7, endpoint=False)[:, None] * direction
        parts = [tb for _, tb in point.drive.factors()] if point.drive is not None else [point.tb]
        for tb in parts:
            err = commutator_violation(s, tb.bloch(k))
            if err is not None:
                raise JobError(f"{ck.path}: [measure.{name}] operator must commute with H(k) on "
                               f"the line k = origin + s * {list(opts['direction'])}; it does not "
                               f"(largest commutator entry {err:.3g} at the first grid point).")


def _check_loop_axis(ck: Checker, job: Job) -> None:
    """A Wilson loop runs along one of the model's reciprocal directions; a 1D loop has no
    transverse momentum."""
    for name, options in job.measurements:
        if name != "polarisation":
            continue
        opts = dict(options)
        if opts.get("axis", 0) >= job.dim:
            raise ck.fail(f"measure.{name}", "axis", f"0 for a {job.dim}D model", opts["axis"])
        if job.dim == 1 and opts.get("k_perp") is not None:
            raise ck.fail(f"measure.{name}", "k_perp", "absent for a 1D model (its loop has no "
                          "transverse momentum)", opts["k_perp"])


def _check_frame_times(ck: Checker, job: Job) -> None:
    """Given frame times must be one time-symmetric frame and its partner half a period on."""
    from ..physics.measurements import driven

    for name, options in job.measurements:
        times = dict(options).get("times")
        if times is not None and not driven.frame_times_valid(times):
            raise ck.fail(f"measure.{name}", "times", driven.TIMES_EXPECTED, times)


def _check_frames_symmetric(ck: Checker, job: Job, point: Point) -> None:
    """The frames of given ``chiral_windings`` times must be chiral symmetric, G U G = U^+,
    at the first grid point (checked at a few momenta); otherwise every point would fail."""
    from ..physics.chiral_frames import SYMMETRY_TOL
    from ..physics.drives.evolution import floquet_evolution

    opts = dict(job.measurements).get("chiral_windings", ())
    times = dict(opts).get("times")
    if times is None or point.drive is None:
        return
    g = point.tb.operators["chiral"]
    k = np.array([[0.3], [1.9], [-2.6]])
    for t in times:
        u = floquet_evolution(point.drive, k, start=t * point.drive.period).u
        err = float(np.max(np.abs(g @ u @ g - np.swapaxes(u, -1, -2).conj())))
        if err > SYMMETRY_TOL * 1e3:  # the tolerance of the measurement's own check
            raise ck.fail("measure.chiral_windings", "times",
                          "time-symmetric points of the drive (where G U G = U^dagger)", times,
                          f" At t = {t:g} T the frame deviates by {err:.2g} at the first grid "
                          "point; omit times to find them.")


SAMPLE_SHAPES = {"end_modes": ("cells", "max_cells", 1), "corner_modes": ("size", "max_size", 2)}


def _check_samples(ck: Checker, job: Job, point: Point) -> None:
    """Open samples must be large enough to hold bound modes, and the largest sample a count may
    be doubled to must fit in memory; both are known before any work starts."""
    from ..physics import boundary, samples

    for name, options in job.measurements:
        if name == "polygon_modes":
            _check_polygon(ck, job, point, dict(options))
        if name not in SAMPLE_SHAPES:
            continue
        size_key, max_key, dims = SAMPLE_SHAPES[name]
        opts = dict(options)
        shape = (opts[size_key],) * dims
        tb = point.drive.factors()[0][1] if point.drive is not None else point.tb
        try:
            boundary.check_sample_side(shape)
        except ValueError as exc:
            raise JobError(f"{ck.path}: [measure.{name}] {size_key} = {opts[size_key]} is too "
                           f"small: {exc}.") from None
        # The count may double the sample up to max_key (never below the first size).
        key = max_key if opts[max_key] > opts[size_key] else size_key
        try:
            samples.choose_method(tb, (opts[key],) * dims, opts.get("method", "auto"),
                                  driven=point.drive is not None)
        except ValueError as exc:
            raise JobError(f"{ck.path}: [measure.{name}] {key} = {opts[key]} needs "
                           f"more memory than this machine has: {exc}.") from None


def _check_polygon(ck: Checker, job: Job, point: Point, opts: dict) -> None:
    """The polygon of ``[measure.polygon_modes]`` on the model's lattice: convex, sides along
    lattice vectors, long enough, and its largest sample within memory."""
    from ..physics import boundary, samples
    from ..physics.measurements.boundary import point_polygon

    table = "measure.polygon_modes"
    tb = point.drive.factors()[0][1] if point.drive is not None else point.tb
    key = "vertices" if opts["vertices"] is not None else "shape"
    try:
        poly = point_polygon(tb, opts["shape"], opts["vertices"], opts["coordinates"])
    except ValueError as exc:
        got = opts[key] if key == "vertices" else opts["shape"]
        raise ck.fail(table, key, "a convex polygon whose sides run along lattice vectors of "
                      "the model", got, f" {str(exc)[:1].upper()}{str(exc)[1:]}.") from None
    if opts.get("energy") is not None and point.drive is not None:
        raise ck.fail(table, "energy", "absent in a driven job (its windows are centred at 0 "
                      "and pi/T)", opts["energy"])
    try:
        boundary.check_polygon_side(poly, opts["size"])
    except ValueError as exc:
        raise JobError(f"{ck.path}: [{table}] size = {opts['size']} is too small: "
                       f"{exc}.") from None
    largest = max(opts["size"], opts["max_size"])
    try:
        samples.choose_method(tb, samples.polygon_cells(poly, largest)[1],
                              opts.get("method", "auto"), driven=point.drive is not None)
    except ValueError as exc:
        raise JobError(f"{ck.path}: [{table}] max_size = {largest} needs more memory than "
                       f"this machine has: {exc}.") from None


def check_values(ck: Checker, job: Job, declared: dict[str, Param], exprs: dict) -> None:
    """Check derived values and Hermiticity at a sample of grid points (all when few).

    Every expression of the job (parameters, model coefficients, drive) is evaluated at each
    sampled point; one without a finite value there (``sqrt(-1)``, ``1/0``) is refused with the
    table and key where it was written.
    """
    _check_frame_times(ck, job)
    _check_loop_axis(ck, job)
    size = job.size
    idx = np.unique(np.linspace(0, size - 1, min(size, SAMPLED_POINTS)).round().astype(np.int64))
    for i in idx:
        try:
            _check_point(ck, job, declared, exprs, idx, int(i))
        except EvaluationError as exc:
            e = exc.expression
            raise ck.fail(e.table, e.key, "an expression that is defined at every grid point",
                          e.text, f" At grid point {int(i)}: {exc.detail}.") from None


def _check_point(ck: Checker, job: Job, declared: dict[str, Param], exprs: dict,
                 idx: np.ndarray, i: int) -> None:
    values = job.values_at(i)
    for key in exprs:
        v = values[key]
        if abs(v) > MAX_MAGNITUDE:
            raise ck.fail("params", key, f"an expression of magnitude at most {MAX_MAGNITUDE:g}",
                          exprs[key].text, f" It evaluates to {v:g} at grid point {i}."
                          + MAGNITUDE_HINT)
        param = declared.get(key)
        if param is None or job.custom is not None:
            continue
        if isinstance(v, complex) and abs(v.imag) > 1e-12 * max(1.0, abs(v)):
            raise ck.fail("params", key, f"an expression with a real value ({param.expectation()})",
                          exprs[key].text, f" It evaluates to {v} at grid point {i}.")
        if not param.admits(real(v)):
            raise ck.fail("params", key, f"an expression whose value is {param.expectation()}",
                          exprs[key].text, f" It evaluates to {real(v):g} at grid point {i}.")
    _check_magnitudes(ck, job, values, i)
    if job.drive.kind != "static":
        _check_drive(ck, job, values, i, build=i in idx[:DRIVE_BUILDS])
    if i == idx[0]:
        first = job.point(i)
        _check_line_operator(ck, job, first)
        _check_frames_symmetric(ck, job, first)
        _check_samples(ck, job, first)
    if job.custom is not None:
        _check_hermitian(ck, job, values, i)
        if i == idx[0]:
            _check_custom_rotation(ck, job, values, i)


def _check_custom_rotation(ck: Checker, job: Job, values: Mapping[str, complex],
                           index: int) -> None:
    """A custom model's ``[model.rotation]`` must be a symmetry, ``H(k') = D H(k) D^dagger``,
    of the model at the first grid point (a point where a swept parameter breaks it fails with
    the same message)."""
    from ..physics.rotation import RotationError, check_rotation

    rot = job.custom.rotation
    if rot is None:
        return
    d = job.drive  # the static model, as in _check_hermitian
    static = tuple((k, e) for k, e in d.overrides[0] if k not in values) if d.always_set else ()
    try:
        check_rotation(job.build_model({**values, **{k: e(values) for k, e in static}}), rot)
    except RotationError as exc:
        raise JobError(f"{ck.path}: [model.rotation] must be a symmetry of the model; at grid "
                       f"point {index} {exc}.") from None


def _check_magnitudes(ck: Checker, job: Job, values: Mapping[str, complex], index: int) -> None:
    """Drive values and custom model coefficients of magnitude at most ``MAX_MAGNITUDE`` at one
    grid point (a drive value of 2**70 left every other term of H without a significant digit;
    1e308 overflowed), each named by the table and key where it was written."""
    d = job.drive
    exprs = [e for e in (d.period, d.omega) if e is not None]
    if d.protocol is not None:
        exprs += d.protocol.expressions()
    # As the model is built (see _check_hermitian): a coefficient every step sets takes the
    # first step's value in the static model.
    static = tuple((k, e) for k, e in d.overrides[0] if k not in values) if d.always_set else ()
    sets = [{**values, **{k: e(values) for k, e in over}} for over in [static, *d.overrides]]
    coeffs = ([e for _, e in job.custom.onsite] + [e for _, _, e in job.custom.hoppings]
              if job.custom is not None else [])
    for e, at in [(e, values) for e in exprs] + [(e, v) for e in coeffs for v in sets]:
        v = e(at)
        if abs(v) > MAX_MAGNITUDE:
            raise ck.fail(e.table, e.key, f"an expression of magnitude at most "
                          f"{MAX_MAGNITUDE:g}", e.text,
                          f" It evaluates to {abs(v):g} in magnitude at grid point {index}."
                          + MAGNITUDE_HINT)


def _check_hermitian(ck: Checker, job: Job, values: Mapping[str, complex], index: int) -> None:
    """A custom model must be Hermitian wherever it is built: the static model (a coefficient
    that every step sets needs no value of its own and takes that of the first step, as in
    :meth:`Job.point`) and the model with the overrides of each step or kick."""
    d = job.drive
    static = tuple((k, e) for k, e in d.overrides[0] if k not in values) if d.always_set else ()
    for over in [static] + d.overrides:
        err = job.build_model({**values, **{k: e(values) for k, e in over}}).hermiticity_error()
        if err > 1e-10:
            raise JobError(f"{ck.path}: [[model.onsite]] terms must add up to a Hermitian "
                           f"matrix; at grid point {index} they deviate by {err:.3g} "
                           "(use real coefficients for Hermitian matrices, or pair a term "
                           "with its conjugate).")
