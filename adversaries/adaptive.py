"""Adaptive adversaries: round t's losses are a function of rounds < t.

They see the learner only through :class:`harness.History` (last actions,
switch counts, per-action counts and cumulative losses), which the runner
hands them *before* the learner draws round t's action, so none of them can
react to the current round's randomness. All of these are deterministic given
the history; they accept the reset generator for the protocol's sake.
"""

from __future__ import annotations

import numpy as np

from harness import validate
from harness.protocol import Adversary

from . import REGISTRY


class _Adaptive(Adversary):
    adaptive = True
    memory = 1
    randomized = False

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._horizon, self._replicas, self._rng = n_actions, horizon, replicas, rng
        self._rows = np.arange(replicas)


@REGISTRY.register("chase", "loss `high` on the action each replica played last, `low` elsewhere")
class Chase(_Adaptive):
    """l_t(a_{t-1}) = high and l_t(i) = low for i != a_{t-1}; every loss is ``low`` at t = 0.

    A learner that stays put pays ``high`` every round; one that moves pays
    ``low`` but switches every round. Against any learner with few switches
    the regret is order (high - low) T (1 - 1/n) (the best action was chased
    only while the learner sat on it): the standard reason adaptive
    adversaries defeat regret against the best fixed action (common practice).
    """

    def __init__(self, high=1.0, low=0.0):
        self.high = validate.probability("high", high)
        self.low = validate.probability("low", low)

    def respond(self, t, history):
        out = np.full((self._replicas, self._n), self.low)
        last = history.last_action
        seen = last >= 0
        out[self._rows[seen], last[seen]] = self.high
        return out


@REGISTRY.register("leader-flip", "loss 1 on each replica's current leader of cumulative losses, 0 elsewhere")
class LeaderFlip(_Adaptive):
    """l_t(i) = 1 for i = argmin_j L_{t-1}(j) (lowest index on ties), 0 elsewhere.

    Every round the leader takes the loss, so the cumulative losses of all
    actions stay within 1 of each other and the leader moves on every round
    (round-robin from action 0): Follow the Leader pays 1 each round for
    regret about T (1 - 1/n), and lazy or low-temperature learners keep
    switching. Deterministic given the history.
    """

    def __init__(self):
        pass

    def respond(self, t, history):
        out = np.zeros((self._replicas, self._n))
        out[self._rows, np.argmin(history.cumulative, axis=1)] = 1.0
        return out


@REGISTRY.register("tie-keeper", "keeps the two leading cumulative losses within margin, loading the one "
                                 "the replica played")
class TieKeeper(_Adaptive):
    """The two leading actions stay within ``margin`` of each other; the learner's pick pays.

    With a the leader and b the runner-up of the cumulative losses (lowest
    index on ties) and c = L(b) - L(a) in [0, margin]: if the replica last
    played b and c + 1 <= margin, b takes loss 1; otherwise a (the leader)
    takes it and b loses 0 -- so the gap never exceeds max(margin, 1) and
    the lead keeps changing hands. A learner that stays on the leader pays 1
    every round; Follow the Leader pays 3 rounds in 4 at margin 1 (regret
    T/4; T/2 at margin 1/2), and lazy learners whose perturbation sits
    inside the margin switch with the lead. Every other action loses 1 each
    round, so it never catches up.
    """

    def __init__(self, margin=1.0):
        self.margin = validate.positive_real("margin", margin)

    def respond(self, t, history):
        cum = history.cumulative
        order = np.argsort(cum, axis=1, kind="stable")
        a, b = order[:, 0], order[:, 1]
        rows = self._rows
        gap = cum[rows, b] - cum[rows, a]
        hit_b = (history.last_action == b) & (gap + 1.0 <= self.margin)
        out = np.ones((self._replicas, self._n))
        out[rows, a] = np.where(hit_b, 0.0, 1.0)
        out[rows, b] = np.where(hit_b, 1.0, 0.0)
        return out


@REGISTRY.register("budget-drain", "chases the learner until its switches near the budget, then moves the "
                                   "best action away")
class BudgetDrain(_Adaptive):
    """Spend a budgeted learner's switches, then move the best action where it cannot follow.

    Phase 1 (replica's switches < budget - reserve): the action the replica
    played last loses 1, the others 0 (``chase``), so following the leader
    costs switches. Phase 2 (from the first round the replica's switch count
    reaches budget - reserve, per replica): the action the replica played
    least so far (lowest index on ties; never its last action) becomes the
    only one with loss 0, all others lose 1, for the rest of the horizon. A
    learner with at most S = ``budget`` switches has ``reserve`` switches
    left to find it among n - 1 candidates without information, so its
    regret grows linearly in the rest of the horizon.
    """

    def __init__(self, budget=10, reserve=1):
        self.budget = validate.positive_int("budget", budget)
        self.reserve = validate.nonneg_int("reserve", reserve)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._target = np.full(replicas, -1, dtype=np.int64)

    def respond(self, t, history):
        out = np.zeros((self._replicas, self._n))
        last = history.last_action
        start = (self._target < 0) & (history.switches >= max(0, self.budget - self.reserve)) & (last >= 0)
        if start.any():
            counts = history.counts[start].astype(float)
            counts[np.arange(int(start.sum())), last[start]] = np.inf
            self._target[start] = np.argmin(counts, axis=1)
        drained = self._target >= 0
        chase = ~drained & (last >= 0)
        out[self._rows[chase], last[chase]] = 1.0
        if drained.any():
            out[drained] = 1.0
            out[self._rows[drained], self._target[drained]] = 0.0
        return out
