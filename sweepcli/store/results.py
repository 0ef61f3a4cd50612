"""The results of one sweep, held in memory and written to HDF5 (layout: results-schema.md).

Why in memory: an HDF5 file that is modified in place and then killed is often unreadable
(measured: ecosystem-notes.md), so the parent process keeps every array in memory and each
checkpoint writes a complete new file ``OUT.tmp``, flushes and fsyncs it, and renames it over
``OUT``. A reader can open ``OUT`` at any moment and sees the last checkpoint.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import h5py
import numpy as np

from ..errors import ResultsError
from ..schema import CF_CONVENTIONS, POINT_SECONDS, Grid, Reason

SCHEMA_VERSION = "1"
MARKER = "sweepcli_schema"
FILL_INT = np.int32(np.iinfo(np.int32).min)
REASON_FLAGS = " ".join(r.name.lower() for r in Reason)


@dataclass(frozen=True)
class Variable:
    """One stored grid-shaped variable.

    ``ancillary`` names the reason variables that say why it is missing at a point (written as
    the CF attribute ``ancillary_variables``, blank-separated); empty for a reason variable and
    in files written before the link existed (readers then fall back to
    ``<measurement>_reason``, see :meth:`Results.reason_variables`).
    """

    name: str
    dtype: str  # "float64", "int32" or "uint8" (reason codes)
    units: str
    long_name: str
    measurement: str  # the measurement that produced it
    ancillary: tuple[str, ...] = ()

    @property
    def is_reason(self) -> bool:
        return self.name.endswith("_reason") and self.dtype == "uint8"

    def missing(self):
        return {"float64": np.nan, "int32": FILL_INT,
                "uint8": np.uint8(Reason.NOT_COMPUTED)}[self.dtype]


@dataclass(frozen=True)
class AxisData:
    name: str
    values: np.ndarray
    units: str
    long_name: str
    spacing: str


class Results(Grid):
    """Grid-shaped results of one sweep plus the provenance attributes.

    ``data[name]`` has the grid shape; ``done`` (uint8) is 1 where a point was evaluated;
    ``failure`` holds the error message of a point whose evaluation raised ("" otherwise).
    """

    def __init__(self, axes: list[AxisData], variables: list[Variable],
                 attrs: Mapping[str, str]) -> None:
        self.axes = list(axes)
        self.variables = {v.name: v for v in variables}
        self.attrs = dict(attrs)
        shape = self.shape
        self.data = {v.name: np.full(shape, v.missing(), dtype=v.dtype) for v in variables}
        self.done = np.zeros(shape, dtype=np.uint8)
        self.failure = np.full(shape, "", dtype=object)
        # Tables beside the grid (e.g. predicted transitions): name -> column -> 1-D array.
        self.tables: dict[str, dict[str, np.ndarray]] = {}

    @property
    def n_done(self) -> int:
        return int(self.done.sum())

    def axis(self, name: str) -> AxisData:
        return next(a for a in self.axes if a.name == name)

    def reason_variables(self, name: str) -> tuple[str, ...]:
        """The stored reason variables that explain where variable ``name`` is missing.

        Its ``ancillary_variables`` link (one per-gap reason such as ``corner_modes_pi_reason``,
        or several for a quantity shared by the gaps); for a file written before the link,
        ``<measurement>_reason`` when stored. ``()`` for a reason variable itself and for a
        variable without any.
        """
        var = self.variables[name]
        if var.is_reason:
            return ()
        if var.ancillary:
            return tuple(r for r in var.ancillary if r in self.variables and r != name)
        legacy = f"{var.measurement}_reason"
        return (legacy,) if legacy in self.variables and legacy != name else ()

    def reason_codes(self, name: str, data_of=None) -> np.ndarray | None:
        """Grid of the reason why ``name`` is missing: the first code that is not ``ok`` among
        its reason variables (:meth:`reason_variables`, 0 before pi), or ``None`` if it has none.
        ``data_of(reason_name)`` supplies the arrays (default: the stored ones)."""
        names = self.reason_variables(name)
        if not names:
            return None
        get = data_of or (lambda n: self.data[n])
        return first_reason([get(n) for n in names])

    def record(self, index: int, values: Mapping[str, object], failure: str = "", *,
               complete: bool = True) -> None:
        """Store the values of flat grid point ``index``; its completion bit is set last.

        ``complete=False`` stores part of the point's measurements (a ``[confirm]`` run's bulk
        or boundary pass): ``failure`` is added to the point's earlier message and ``done`` is
        left for the caller, who knows whether the point is complete.
        """
        multi = np.unravel_index(index, self.shape)
        for name, value in values.items():
            if name == POINT_SECONDS and name not in self.variables:
                continue  # a file written before compute times were stored, being resumed
            var = self.variables[name]
            if value is None or (var.dtype == "int32" and isinstance(value, float)
                                 and np.isnan(value)):
                value = var.missing()
            self.data[name][multi] = value
        if complete:
            self.failure[multi] = failure
            self.done[multi] = 1
        elif failure:
            self.failure[multi] = "; ".join(m for m in (self.failure[multi], failure) if m)

    # ----------------------------------------------------------------- files
    def write(self, path: str | Path) -> None:
        """Write a complete file to ``path.tmp``, fsync it and rename it over ``path``.

        The HDF5 image is built in memory first and written with plain ``os.write``: HDF5 meets
        a full disk deep in its own cache (a segmentation fault at exit was seen), a plain
        write fails with one clean ``OSError``. Whatever stops the write (that error, Ctrl-C or
        SIGTERM) removes ``path.tmp`` and leaves ``path`` as it was.
        """
        path = Path(path)
        tmp = path.with_name(path.name + ".tmp")
        try:
            image = self.image()
            _write_file(tmp, image)
            os.replace(tmp, path)
        except OSError as exc:
            tmp.unlink(missing_ok=True)
            raise ResultsError(
                f"{path}: cannot write the results file ({exc.strerror or exc}).") from None
        except BaseException:
            tmp.unlink(missing_ok=True)
            raise
        try:
            dir_fd = os.open(path.parent if str(path.parent) else ".", os.O_RDONLY)
            try:
                os.fsync(dir_fd)
            finally:
                os.close(dir_fd)
        except OSError:
            pass  # directory fsync is best effort (not supported on every file system)

    def image(self) -> bytes:
        """The bytes of the HDF5 file :meth:`write` writes (built in memory, no file touched)."""
        with h5py.File(f"sweepcli-image-{id(self)}", "w", driver="core",
                       backing_store=False) as f:
            self._fill(f)
            f.flush()
            return f.id.get_file_image()

    def _fill(self, f: h5py.File) -> None:
        for key, value in self.attrs.items():
            f.attrs[key] = value
        f.attrs[MARKER] = SCHEMA_VERSION
        f.attrs["Conventions"] = CF_CONVENTIONS
        f.attrs["axes"] = ",".join(a.name for a in self.axes)
        f.attrs["variables"] = ",".join(self.variables)
        scales = []
        for a in self.axes:
            ds = f.create_dataset(a.name, data=np.asarray(a.values, dtype=np.float64))
            ds.make_scale(a.name)
            ds.attrs["units"] = a.units
            ds.attrs["long_name"] = a.long_name
            ds.attrs["spacing"] = a.spacing
            scales.append(ds)
        compress = dict(compression="gzip", shuffle=True) if self.size > 1 else {}

        def grid_dataset(name: str, data: np.ndarray, **kw) -> h5py.Dataset:
            ds = f.create_dataset(name, data=data, **kw)
            for i, scale in enumerate(scales):
                ds.dims[i].attach_scale(scale)
            return ds

        for var in self.variables.values():
            ds = grid_dataset(var.name, self.data[var.name], **compress)
            ds.attrs["units"] = var.units
            ds.attrs["long_name"] = var.long_name
            ds.attrs["measurement"] = var.measurement
            if var.ancillary:
                ds.attrs["ancillary_variables"] = " ".join(var.ancillary)
            if var.dtype == "int32":
                ds.attrs["_FillValue"] = FILL_INT
            elif var.dtype == "uint8":
                ds.attrs["flag_values"] = np.array([int(r) for r in Reason], dtype=np.uint8)
                ds.attrs["flag_meanings"] = REASON_FLAGS
        ds = grid_dataset("done", self.done, **compress)
        ds.attrs["long_name"] = "point evaluated (1) or not yet (0)"
        ds.attrs["units"] = "1"
        ds = grid_dataset("failure", self.failure.astype(object),
                          dtype=h5py.string_dtype("utf-8"), **compress)
        ds.attrs["long_name"] = "error message of a point whose evaluation failed"
        for name, columns in self.tables.items():
            group = f.create_group(name)
            group.attrs["columns"] = ",".join(columns)
            for col, values in columns.items():
                if values.dtype == object:
                    group.create_dataset(col, data=values.astype(object),
                                         dtype=h5py.string_dtype("utf-8"))
                else:
                    group.create_dataset(col, data=values)

    @classmethod
    def read(cls, path: str | Path) -> Results:
        """Read a results file written by :meth:`write`.

        Raises
        ------
        ResultsError
            If the file is missing, truncated, corrupt or not a sweepcli results file.
        """
        path = Path(path)
        if not path.exists():
            raise ResultsError(f"{path}: no such results file.")
        try:
            with h5py.File(path, "r") as f:
                if MARKER not in f.attrs:
                    raise ResultsError(f"{path}: not a sweepcli results file (no "
                                       f"{MARKER!r} attribute).")
                return cls._from_file(f)
        except ResultsError:
            raise
        except (OSError, KeyError, ValueError, RuntimeError, TypeError, IndexError,
                AttributeError, UnicodeDecodeError) as exc:
            # h5py reports damaged metadata as RuntimeError, a wrong dtype as TypeError.
            raise ResultsError(f"{path}: cannot be read as a sweepcli results file; it may be "
                               f"truncated or corrupt ({exc}).") from None

    @classmethod
    def _from_file(cls, f: h5py.File) -> Results:
        attrs = {k: _text(v) for k, v in f.attrs.items() if k not in (MARKER, "axes", "variables")}
        names = [n for n in _text(f.attrs["axes"]).split(",") if n]
        axes = [AxisData(n, f[n][()], _text(f[n].attrs["units"]), _text(f[n].attrs["long_name"]),
                         _text(f[n].attrs["spacing"])) for n in names]
        variables = []
        for name in (n for n in _text(f.attrs["variables"]).split(",") if n):
            ds = f[name]
            variables.append(Variable(name, str(ds.dtype), _text(ds.attrs["units"]),
                                      _text(ds.attrs["long_name"]), _text(ds.attrs["measurement"]),
                                      tuple(_text(ds.attrs.get("ancillary_variables",
                                                               "")).split())))
        for a in axes:
            if a.values.ndim != 1 or a.values.dtype.kind != "f" or len(a.values) == 0:
                raise ValueError(f"axis {a.name!r} is not a list of numbers")
        out = cls(axes, variables, attrs)

        def grid(name: str, kinds: str) -> np.ndarray:
            ds = f[name]
            if ds.shape != out.shape or ds.dtype.kind not in kinds:
                raise ValueError(f"dataset {name!r} is {ds.dtype} of shape {ds.shape}, not "
                                 f"numbers of the grid's shape {out.shape}")
            return ds[()]

        for v in variables:
            out.data[v.name] = grid(v.name, "fiu")
        out.done = grid("done", "iu")
        if f["failure"].shape != out.shape or not h5py.check_string_dtype(f["failure"].dtype):
            raise ValueError(f"dataset 'failure' is not text of the grid's shape {out.shape}")
        out.failure = np.array(f["failure"].asstr()[()], dtype=object).reshape(out.shape)
        for name, group in f.items():
            if isinstance(group, h5py.Group):
                cols = [c for c in _text(group.attrs["columns"]).split(",") if c]
                out.tables[name] = {c: (np.array(group[c].asstr()[()], dtype=object)
                                        if h5py.check_string_dtype(group[c].dtype)
                                        else group[c][()]) for c in cols}
        return out


def first_reason(codes: Sequence[np.ndarray]) -> np.ndarray:
    """Elementwise the first reason code that is not ``ok`` (``ok`` where all are)."""
    out = np.array(codes[0], dtype=np.uint8, copy=True)
    for c in codes[1:]:
        out = np.where(out == Reason.OK, c, out).astype(np.uint8)
    return out


def _text(value: object) -> str:
    if isinstance(value, bytes):
        return value.decode("utf-8")
    return str(value)


def _write_file(path: Path, data: bytes) -> None:
    """Write ``data`` to a new file ``path`` and fsync it (an ``OSError`` on a full disk)."""
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
    try:
        view = memoryview(data)
        while view:
            view = view[os.write(fd, view):]
        os.fsync(fd)
    finally:
        os.close(fd)
