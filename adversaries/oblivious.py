"""Oblivious adversaries: the whole sequence is fixed before play starts.

Randomised ones take ``shared``: False (default) draws one sequence per
replica, so probabilities are over the sequence and the learner; True draws
one sequence for all replicas, so probabilities are over the learner's
randomness on that fixed sequence. Draws are made in time-major order with a
fixed number of uniforms per entry, so the sequence does not depend on how
the runner cuts the horizon into blocks.
"""

from __future__ import annotations

import numpy as np

from harness import validate
from harness.protocol import Adversary

from . import REGISTRY


class RandomOblivious(Adversary):
    """Base for randomised oblivious adversaries: handles ``shared`` and shapes."""

    def __init__(self, shared=False):
        self.shared = validate.boolean("shared", shared)

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._horizon, self._replicas, self._rng = n_actions, horizon, replicas, rng

    def _shape(self, steps: int) -> tuple:
        return (steps, self._n) if self.shared else (steps, self._replicas, self._n)


@REGISTRY.register("bernoulli", "i.i.d. Bernoulli(p) losses, p one number or one per action")
class Bernoulli(RandomOblivious):
    """Each loss is 1 with probability p, independently (p per action allowed).

    Loss l_t(i) = 1[U_t(i) < p_i] with U uniform on [0, 1), one uniform per
    entry in time-major order.
    """

    def __init__(self, p=0.5, shared=False):
        super().__init__(shared)
        self.p = validate.probability_vector("p", p)
        self.p = float(self.p) if self.p.ndim == 0 else self.p.tolist()

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._p = validate.probability_vector("p", self.p, n_actions)

    def losses(self, t0, t1):
        return (self._rng.random(self._shape(t1 - t0)) < self._p).astype(np.float64)


@REGISTRY.register("alternating", "FTL's worst case: the leader always takes loss 1 next round")
class Alternating(Adversary):
    """The sequence that makes Follow the Leader lose every round.

    Round 0: loss 1/2 on action 0, 0 on action 1. From round 1 on, actions 0
    and 1 alternate: odd rounds (0, 1), even rounds (1, 0). Actions 2..n-1,
    if any, lose 1 every round. FTL (ties to the lowest index) then plays the
    action that is about to lose 1 in every round, for regret T/2 at even T,
    while the best action loses about T/2 (the experts form of Shalev-Shwartz
    2012, Example 2.2). Deterministic, so shared by all replicas.
    """

    shared = True

    def __init__(self):
        pass

    def reset(self, n_actions, horizon, replicas, rng):
        self._n = n_actions

    def losses(self, t0, t1):
        t = np.arange(t0, t1)
        out = np.ones((t1 - t0, self._n))
        odd = (t % 2 == 1)
        out[:, 0] = np.where(odd, 0.0, 1.0)
        out[:, 1] = np.where(odd, 1.0, 0.0)
        out[t == 0, 0] = 0.5
        out[t == 0, 1] = 0.0
        return out
