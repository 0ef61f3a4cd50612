"""Periodic drives: one protocol (:class:`~sweepcli.physics.drives.base.Drive`), one registry.

Each protocol lives in its own module and registers itself in :data:`DRIVES` under the job
file's ``[drive] kind``, with a one-line description, its source and the job-file hook
``parse`` (see :mod:`sweepcli.physics.drives.base`): adding a protocol is one new module here
plus its test. The time evolution shared by all of them is in
:mod:`sweepcli.physics.drives.evolution`.
"""

from __future__ import annotations

import importlib
import pkgutil

from ..registry import Registry

DRIVES: Registry = Registry("drive")

# Importing every module of the package fills the registry: a new protocol needs no line here.
for _module in pkgutil.iter_modules(__path__):
    importlib.import_module(f"{__name__}.{_module.name}")
