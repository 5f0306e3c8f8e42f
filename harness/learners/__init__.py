"""Reference learners, one registry.

``get(name, **params)`` builds a learner by registry name (or ``module:Class``);
``names()`` lists them; ``describe()`` gives (name, description, parameters).
Modules register their learners on import:

- ``experts``: full-information learners (Hedge, FTL, FTPL, ...).
"""

from ..registry import Registry

REGISTRY = Registry("learner")

from . import experts  # noqa: E402,F401  (registers)


def get(name: str, **params):
    """A learner by registry name or ``module:Class``, built with ``params``."""
    return REGISTRY.get(name, **params)


def names() -> list[str]:
    return REGISTRY.names()


def describe():
    return REGISTRY.describe()
