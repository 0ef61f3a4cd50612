"""Periodic drives: one protocol (:class:`~sweepcli.physics.drives.base.Drive`), one registry.

Each protocol lives in its own module and registers itself in :data:`DRIVES` under the job
file's ``[drive] kind``, with a one-line description, its source and the job-file hook
``parse`` (see :mod:`sweepcli.physics.drives.base`): adding a protocol is one new module here
plus its test. The time evolution shared by all of them is in
:mod:`sweepcli.physics.drives.evolution`.
"""

from __future__ import annotations

from ..registry import Registry

DRIVES: Registry = Registry("drive")

# Importing the modules fills the registry.
from . import harmonic, kicks, ramp, steps  # noqa: E402,F401
