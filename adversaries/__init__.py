"""The loss-sequence generators, one registry.

``adversaries.get(name, **params)`` builds one by registry name (or
``module:Class``); ``adversaries.names()`` lists them; ``describe()`` gives
(name, one-line description, parameters). Modules register on import:

- ``oblivious``: sequences fixed in advance (i.i.d., alternating, ...).
"""

from harness.registry import Registry

REGISTRY = Registry("adversary")

from . import oblivious  # noqa: E402,F401  (registers)


def get(name: str, **params):
    """An adversary by registry name or ``module:Class``, built with ``params``."""
    return REGISTRY.get(name, **params)


def names() -> list[str]:
    return REGISTRY.names()


def describe():
    return REGISTRY.describe()
