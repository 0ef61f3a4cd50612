"""Built-in library of published lattice models.

Each model is a factory with explicit keyword parameters that returns a
:class:`~sweepcli.physics.lattice.TightBinding`, registered in :data:`MODELS` with its declared
parameters, a one-line description, its published source and ``dim`` / ``norb``. Conventions
(basis order, sign of each term) are in each docstring.
"""

from __future__ import annotations

import numpy as np

from ..registry import Registry

MODELS: Registry = Registry("model")

SQUARE = np.eye(2)
CHAIN = np.eye(1)

# Importing the modules fills the registry.
from . import bhz, chains, driven, kagome, kekule, two_band  # noqa: E402,F401
