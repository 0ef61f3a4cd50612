"""Registry of measurements: what can be computed at a grid point.

A measurement is registered with

* ``params``: its options, declared with constraints (validated once, at job load);
* ``quantities``: the stored variables, a tuple of :class:`~sweepcli.schema.Quantity` or a
  callable ``quantities(dim, driven=False) -> tuple`` when they depend on the lattice dimension
  or on whether the job is driven;
* ``dims``: the lattice dimensions it applies to; ``driven``: ``False`` (static jobs only),
  ``True`` (driven jobs only) or ``None`` (both); ``operators``: names of cell operators the
  model must provide (``"chiral"``, ``"spin"``);

and its function ``f(point, **options) -> dict`` returns one value per quantity plus
``"reason"`` (a :class:`~sweepcli.schema.Reason`). A missing float is ``nan``, a missing
integer ``None``; the reason says why. The variable ``<name>_reason`` is added by the store.
"""

from __future__ import annotations

from ...schema import Quantity
from ..registry import Registry

MEASUREMENTS: Registry = Registry("measurement")


# F811 is a false alarm: the linter reads the parameter as shadowing the submodule ``driven``
# imported below for its side effect.
def quantities_of(name: str, dim: int, driven: bool = False) -> tuple[Quantity, ...]:  # noqa: F811
    """The variables measurement ``name`` stores for a lattice of dimension ``dim`` in a static
    (``driven=False``) or driven job."""
    q = MEASUREMENTS[name].extra["quantities"]
    return tuple(q(dim, driven=driven) if callable(q) else q)


# Importing the modules fills the registry.
from . import boundary, driven, static  # noqa: E402,F401
