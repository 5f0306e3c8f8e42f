"""The loss-sequence generators, one registry.

``adversaries.get(name, **params)`` builds one by registry name (or
``module:Class``); ``adversaries.names()`` lists them; ``describe()`` gives
(name, one-line description, parameters); ``from_spec(spec)`` builds one from
a name, a ``{name, params}`` table or a recorded ``spec()``. Modules register
on import:

- ``oblivious``: sequences fixed in advance (i.i.d., gaps, regime shifts, near ties, ...);
- ``lower_bounds``: random constructions from lower-bound proofs (block-random, multi-scale walk);
- ``heavy_tail``: sequences that give switch counts heavy upper tails;
- ``adaptive``: adversaries that react to the history of play;
- ``compose``: composites built from other adversaries (concat, mix, permute, ...).
"""

from harness.registry import Registry

REGISTRY = Registry("adversary")

from . import oblivious, lower_bounds, heavy_tail, adaptive, compose  # noqa: E402,F401  (registers)
from .compose import from_spec  # noqa: E402


# Package-level registry calls: get(name, **params) builds one (registry name
# or module:Class), names() lists them, describe() gives (name, description,
# parameters) rows.
get = REGISTRY.get
names = REGISTRY.names
describe = REGISTRY.describe
