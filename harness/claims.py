"""Claims: what a learner's authors promise, in a form the harness can test.

A :class:`Claim` bounds one metric of a run (``regret``, ``switches`` or
``cost_regret``) in one of three senses:

- ``"high_probability"``: P[metric > bound] <= delta;
- ``"expectation"``: E[metric] <= bound (``delta`` unused);
- ``"always"``: metric <= bound on every replica (a hard cap).

``bound`` is a number or a function ``bound(horizon, n_actions, delta)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Union

import numpy as np

from . import validate
from .errors import ConfigError

METRICS = ("regret", "switches", "cost_regret")
KINDS = ("high_probability", "expectation", "always")

Bound = Union[float, Callable[[int, int, float], float]]


@dataclass(frozen=True)
class Claim:
    """One claimed bound. See the module docstring for the three kinds."""

    metric: str
    bound: Bound
    delta: float = 0.05
    kind: str = "high_probability"
    name: str = ""
    source: str = ""  # where the bound is published (author, year, theorem)

    def __post_init__(self):
        validate.choice("claim.metric", self.metric, METRICS)
        validate.choice("claim.kind", self.kind, KINDS)
        if not callable(self.bound):
            object.__setattr__(self, "bound", validate.real("claim.bound", self.bound))
        if self.kind == "high_probability":
            validate.real("claim.delta", self.delta, low=0.0, high=1.0, low_open=True, high_open=True)
        if not self.name:
            object.__setattr__(self, "name", f"{self.metric} {self.kind}")

    def bound_at(self, horizon: int, n_actions: int) -> float:
        """The numeric bound for this horizon and number of actions."""
        if not callable(self.bound):
            return float(self.bound)
        try:
            value = float(self.bound(horizon, n_actions, self.delta))
        except Exception as exc:
            raise ConfigError(f"claim {self.name!r}: bound failed at T={horizon}, n={n_actions}: "
                              f"{type(exc).__name__}: {exc}") from None
        if math.isnan(value):
            raise ConfigError(f"claim {self.name!r}: bound is NaN at T={horizon}, n={n_actions}")
        return value

    def violations(self, values: np.ndarray, horizon: int, n_actions: int) -> np.ndarray:
        """Boolean per replica: metric > bound (meaningful for the per-replica kinds)."""
        return np.asarray(values) > self.bound_at(horizon, n_actions)

    def spec(self) -> dict:
        bound = self.bound
        if callable(bound):
            bound = getattr(bound, "expression", None) or \
                f"{getattr(bound, '__module__', '?')}:{getattr(bound, '__qualname__', repr(bound))}"
        return {"metric": self.metric, "bound": bound, "delta": self.delta, "kind": self.kind,
                "name": self.name, "source": self.source}
