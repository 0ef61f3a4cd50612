"""The ``[drive]`` table: ``kind`` picks a registered drive protocol, whose ``parse`` hook reads
the rest through :class:`_DriveReader`."""

from __future__ import annotations

from ..errors import JobError, sentence, suggest
from ..expressions import Expression, ExpressionError, parse
from ..physics.drives import DRIVES
from ..physics.registry import Param
from .checker import Checker
from .spec import DriveSpec

DRIVE_KINDS = ("static", *DRIVES.names())


def read_drive(ck: Checker, doc: dict, known: set[str], declared: dict[str, Param],
               missing: list[Param], model: str) -> DriveSpec:
    """``[drive]``, and the required model parameters given nowhere unless the drive sets
    them at all times."""
    drive = _drive(ck, ck.table(doc, "drive"), known, set(declared))
    for p in missing:
        if p.name not in drive.always_set:
            what = f" ({p.doc})" if p.doc else ""
            raise JobError(f"{ck.path}: [params] {p.name} is required by model {model!r}{what} "
                           f"and must be {p.expectation()}; it is neither in [params] nor "
                           "in [sweep]" + (" nor set by every [[drive.step]]."
                                           if drive.protocol is not None
                                           and drive.protocol.covers_period else "."))
    return drive


class _DriveReader:
    """What a drive protocol's ``parse`` hook may use to read its part of the ``[drive]`` table
    (the contract is in :mod:`sweepcli.physics.drives.base`)."""

    def __init__(self, ck: Checker, t: dict, known: set[str], model_params: set[str]) -> None:
        self.ck, self.t, self.known, self.model_params = ck, t, known, model_params
        self.only, self.number, self.fail = ck.only, ck.number, ck.fail
        self.suggest = suggest

    def expr(self, table: str, key: str, value: object) -> Expression:
        """An arithmetic expression of the job's parameters."""
        ck = self.ck
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise ck.fail(table, key, "a number or an arithmetic expression", value)
        try:
            e = parse(str(value), table, key)
        except ExpressionError as exc:
            raise ck.fail(table, key, "a number or an arithmetic expression", value,
                          " " + sentence(exc)) from None
        for n in sorted(e.names):
            if n not in self.known:
                raise ck.fail(table, key, "an expression of defined parameters", value,
                              f" {n!r} is not defined in [params] or [sweep]."
                              f"{suggest(n, self.known)}")
        return e

    def overrides(self, table: str, value: object) -> tuple:
        """A ``set = { param = expression, ... }`` table of model parameters."""
        if value is None:
            return ()
        if not isinstance(value, dict):
            raise self.ck.fail(table, "set", "a table of model parameters and values, e.g. "
                               "{ m = \"m1\" }", value)
        out = []
        for key, v in value.items():
            if key not in self.model_params:
                raise self.ck.unknown(f"{table}.set", key, sorted(self.model_params),
                                      what="model parameter")
            out.append((key, self.expr(f"{table}.set", key, v)))
        return tuple(out)

    def entries(self, key: str) -> list[dict]:
        """The ``[[drive.KEY]]`` tables (at least one)."""
        value = self.t.get(key)
        if not isinstance(value, list) or not value or not all(isinstance(v, dict) for v in value):
            raise self.ck.fail("drive", key, f"one or more tables [[drive.{key}]]", value)
        return value


def _drive(ck: Checker, t: dict, known: set[str], model_params: set[str]) -> DriveSpec:
    """The ``[drive]`` table: ``kind`` picks the registered protocol, whose hook reads the rest."""
    kind = t.get("kind", "static")
    if kind not in DRIVE_KINDS:
        raise ck.fail("drive", "kind", "one of " + ", ".join(repr(k) for k in DRIVE_KINDS),
                      kind, suggest(str(kind), DRIVE_KINDS))
    if kind == "static":
        ck.only("drive", t, ["kind"])
        return DriveSpec()
    entry = DRIVES[kind]
    ck.only("drive", t, ["kind", "period", "omega", *entry.extra["keys"]])
    reader = _DriveReader(ck, t, known, model_params)
    if ("period" in t) == ("omega" in t):
        raise ck.fail("drive", "period", "given, or omega instead (exactly one of them)",
                      None if "period" not in t else "both")
    period = reader.expr("drive", "period", t["period"]) if "period" in t else None
    omega = reader.expr("drive", "omega", t["omega"]) if "omega" in t else None
    return DriveSpec(kind, period, omega, entry.extra["parse"](t, reader), source=tuple(t.items()))
