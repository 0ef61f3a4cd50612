"""Registry of measurements: what can be computed at a grid point.

A measurement is registered with

* ``params``: its options, declared with constraints (validated once, at job load);
* ``quantities``: the stored variables, a tuple of :class:`~sweepcli.schema.Quantity` or a
  callable ``quantities(dim, driven=False) -> tuple`` when they depend on the lattice dimension
  or on whether the job is driven;
* ``dims``: the lattice dimensions it applies to; ``driven``: ``False`` (static jobs only),
  ``True`` (driven jobs only) or ``None`` (both); ``operators``: names of cell operators the
  model must provide (``"chiral"``, ``"spin"``);
* ``reason_groups`` (optional): a callable ``reason_groups(dim, driven=False) -> tuple`` of
  group suffixes, ``("0", "pi")`` for a measurement whose quantities belong to the two
  quasienergy gaps (``("0",)`` in a static job); each of its quantities names its group
  (:attr:`~sweepcli.schema.Quantity.group`, ``""`` for a quantity of the whole measurement);

and its function ``f(point, **options) -> dict`` returns one value per quantity plus
``"reason"``: a :class:`~sweepcli.schema.Reason`, or for a measurement with reason groups a
dict ``{group: Reason}`` with one entry per group. A missing float is ``nan``, a missing integer
``None``; the reason says why. The store adds one reason variable per measurement
(``<name>_reason``) or per group (``<name>_<group>_reason``,
:func:`~sweepcli.schema.reason_variable`), and every variable names the reason variables that
explain it (:func:`reason_links`).
"""

from __future__ import annotations

from collections.abc import Mapping

from ...schema import Quantity, Reason, reason_variable
from ..registry import Registry

MEASUREMENTS: Registry = Registry("measurement")


# F811 (here and below) is a false alarm: the linter reads the parameter as shadowing the
# submodule ``driven`` imported below for its side effect.
def quantities_of(name: str, dim: int, driven: bool = False) -> tuple[Quantity, ...]:  # noqa: F811
    """The variables measurement ``name`` stores for a lattice of dimension ``dim`` in a static
    (``driven=False``) or driven job."""
    q = MEASUREMENTS[name].extra["quantities"]
    return tuple(q(dim, driven=driven) if callable(q) else q)


def reason_groups_of(name: str, dim: int, driven: bool = False) -> tuple[str, ...]:  # noqa: F811
    """The reason groups of measurement ``name`` (``()``: one reason for the measurement)."""
    groups = MEASUREMENTS[name].extra.get("reason_groups")
    return tuple(groups(dim, driven=driven)) if groups is not None else ()


def reason_names(name: str, dim: int, driven: bool = False) -> dict[str, str]:  # noqa: F811
    """Group -> name of its reason variable (``{"": "<name>_reason"}`` without groups)."""
    groups = reason_groups_of(name, dim, driven) or ("",)
    return {g: reason_variable(name, g) for g in groups}


def reason_links(name: str, dim: int,
                 driven: bool = False) -> dict[str, tuple[str, ...]]:  # noqa: F811
    """Quantity name -> the reason variables that explain where it is missing: its group's
    reason, or every reason of the measurement for a quantity of no group (0 before pi)."""
    names = reason_names(name, dim, driven)
    out = {}
    for q in quantities_of(name, dim, driven):
        if q.group and q.group not in names:
            raise ValueError(f"measurement {name!r}: quantity {q.name!r} names reason group "
                             f"{q.group!r}, not one of {tuple(names)}")
        out[q.name] = (names[q.group],) if q.group else tuple(names.values())
    return out


def split_reason(name: str, reason: Reason | Mapping[str, Reason], dim: int,
                 driven: bool = False) -> dict[str, int]:  # noqa: F811
    """Reason variable -> code, from a measurement's returned ``"reason"``.

    A measurement without groups returns one :class:`Reason`; one with groups a dict with
    exactly its groups (anything else raises ``ValueError``, so a measurement that forgets a
    gap is recorded as failed rather than stored with a made-up reason).
    """
    names = reason_names(name, dim, driven)
    if "" in names:
        if isinstance(reason, Mapping):
            raise ValueError(f"measurement {name!r} has no reason groups but returned reasons "
                             f"for {sorted(reason)}")
        return {names[""]: int(Reason(reason))}
    if not isinstance(reason, Mapping) or set(reason) != set(names):
        got = sorted(reason) if isinstance(reason, Mapping) else reason
        raise ValueError(f"measurement {name!r} must return one reason per group "
                         f"{tuple(names)}; got {got!r}")
    return {names[g]: int(Reason(reason[g])) for g in names}


# Importing the modules fills the registry.
from . import boundary, driven, rotation, static, wilson  # noqa: E402,F401
