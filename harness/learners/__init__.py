"""Reference learners, one registry.

``get(name, **params)`` builds a learner by registry name (or ``module:Class``);
``names()`` lists them; ``describe()`` gives (name, description, parameters).
Modules register their learners on import:

- ``experts``: full-information learners (Hedge, FTL, FTPL, ...);
- ``low_switching``: lazy FTPL, Shrinking Dartboard, random-walk perturbation,
  Gumbel FTPL, blocked Hedge;
- ``bandits``: EXP3, EXP3-IX, blocked EXP3;
- ``wrappers``: ``budget_cap`` and ``epoch_restart`` (registry names
  ``budget-cap`` and ``epoch-restart``, inner learner by name);
- ``flawed``: deliberately flawed learners for demos and harness tests.

A learner's claims are ``learner.claims`` (a tuple of
:class:`~harness.claims.Claim`; a property when they depend on parameters).
Entries whose parameters have no sensible default (a switch budget, an inner
learner) carry ``example_params``; :func:`example` builds them with it.
"""

from ..registry import Registry

REGISTRY = Registry("learner")

from . import experts  # noqa: E402,F401  (registers)
from . import low_switching  # noqa: E402,F401
from . import bandits  # noqa: E402,F401
from . import wrappers  # noqa: E402,F401
from . import flawed  # noqa: E402,F401
from .wrappers import budget_cap, epoch_restart  # noqa: E402


# Package-level registry calls: get(name, **params) builds one (registry name
# or module:Class), names() lists them, describe() gives (name, description,
# parameters) rows.
get = REGISTRY.get
names = REGISTRY.names
describe = REGISTRY.describe


def example(name: str):
    """A learner by registry name with its ``example_params`` (if any): what bench and demos run."""
    return get(name, **dict(getattr(REGISTRY.cls(name), "example_params", {})))
