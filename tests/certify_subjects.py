"""Test-local learners for the certification tests (not part of the product)."""

import math

import numpy as np

from harness import Claim, Learner
from harness.learners.experts import Hedge


class CoinSwitch(Learner):
    """Plays action 0, then at round 1 moves to action 1 with probability p and stays.

    So switches ~ Bernoulli(p) per replica, independently: a learner whose
    violation rate of the claim "switches <= 0" is exactly p.
    """

    feedback = "full"

    def __init__(self, p=0.05):
        self.p = p

    def reset(self, n_actions, horizon, replicas, rng):
        self._target = (rng.random(replicas) < self.p).astype(np.int64)
        self._t = 0

    def act(self):
        return np.zeros_like(self._target) if self._t == 0 else self._target.copy()

    def update(self, actions, losses):
        self._t += 1


class RareCapBreaker(Learner):
    """Promises at most ``budget`` switches, always; keeps it except in about a
    ``p_break`` share of replicas, where it switches once more.

    Switches on rounds 1..budget (0, 1, 0, 1, ...), then holds; a breaking
    replica adds one switch right after. Claims ride on the instance: the
    budget claim depends on the parameter.
    """

    feedback = "full"

    def __init__(self, budget=3, p_break=0.001):
        self.budget = budget
        self.p_break = p_break

    @property
    def claims(self):
        return (Claim("switches", self.budget, kind="always", name="switch-budget",
                      source="the learner's own promise (test subject)"),)

    def reset(self, n_actions, horizon, replicas, rng):
        self._breaks = rng.random(replicas) < self.p_break
        self._t = 0
        self._replicas = replicas

    def act(self):
        t = self._t
        a = np.full(self._replicas, min(t, self.budget) % 2, dtype=np.int64)
        if t == self.budget + 1:
            a[self._breaks] = 1 - a[self._breaks]
        elif t > self.budget + 1:
            a[self._breaks] = (self.budget + 1) % 2
        return a

    def update(self, actions, losses):
        self._t += 1


def hedge_regret_claims():
    """Hedge's published claims at its default tuning eta = sqrt(8 ln n / T).

    Expected regret <= sqrt(T ln n / 2) (Cesa-Bianchi and Lugosi 2006,
    Theorem 2.2); with probability 1 - delta, regret <= sqrt(T ln n / 2) +
    sqrt(T ln(1/delta) / 2) (the same with the Hoeffding-Azuma step of
    their Lemma 4.1; Corollary 4.2, numbering from memory).
    """
    return [Claim("regret", "sqrt(T * ln(n) / 2)", kind="expectation", name="regret-mean",
                  source="Cesa-Bianchi and Lugosi 2006, Theorem 2.2"),
            Claim("regret", "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", delta=0.05, name="regret-95",
                  source="Cesa-Bianchi and Lugosi 2006, Corollary 4.2 (from memory)")]


class OvereagerHedge(Hedge):
    """Hedge with a learning rate 20 times its tuning: a flawed learner for the tests."""

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._eta = 20 * math.sqrt(8 * math.log(n_actions) / horizon)
