"""Deliberately flawed learners, for demos and for testing the harness.

Each carries a claim that is FALSE on purpose, in a way an honest-looking
benchmark would miss: the harness must catch it.

- ``flawed-heavy-tail``: Shrinking Dartboard whose replicas, with small
  probability, start switching every round. Expected switches stay
  moderate; the high-probability switch claim fails.
- ``flawed-hot-hedge``: Hedge with a learning rate several times too large.
  Its (copied) regret claim holds on i.i.d. sequences and fails on the
  alternating one.
"""

from __future__ import annotations

import numpy as np

from .. import validate
from ..claims import Claim
from ..protocol import Learner
from . import REGISTRY
from .experts import Hedge, hedge_claims
from .low_switching import _DEFAULT_DARTBOARD_ETA, ShrinkingDartboard


@REGISTRY.register("flawed-heavy-tail", "FLAWED ON PURPOSE: good expected switches, heavy switching tail")
class FlawedHeavyTail(Learner):
    """FLAWED ON PURPOSE: Shrinking Dartboard with a rare per-replica breakdown.

    Each replica independently breaks with probability ``tail_prob``; a
    broken replica, from a uniformly drawn onset round on, plays t mod n in
    round t, so it switches every round. Before the onset (and in replicas
    that never break) it plays Shrinking Dartboard with its default tuning.

    So E[switches] <= (dartboard's) + tail_prob * T / 2 roughly: the mean
    looks fine, while the probability of exceeding the dartboard's bound
    ln n + T ln(1/(1 - eta)) is about tail_prob (1 - bound / T), far above
    the claimed delta = 0.001 once T is a few times the bound.

    Claims: the expected-switches bound (true on sequences where the
    dartboard stays well below its bound) and the same bound "with
    probability 0.999" (false on purpose).
    """

    def __init__(self, tail_prob=0.01):
        self.tail_prob = validate.probability("tail_prob", tail_prob)

    @property
    def claims(self):
        e = _DEFAULT_DARTBOARD_ETA
        bound = f"ln(n) + T * ln(1 / (1 - {e}))"
        source = "deliberately false: harness.learners.flawed.FlawedHeavyTail (for testing the harness)"
        return (Claim(metric="switches", bound=bound, kind="expectation", source=source,
                      name="flawed-heavy-tail: expected switches <= ln n + T ln(1/(1-eta))"),
                Claim(metric="switches", bound=bound, delta=0.001, kind="high_probability", source=source,
                      name="flawed-heavy-tail: switches <= ln n + T ln(1/(1-eta)) w.p. 0.999 (FALSE on purpose)"))

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._replicas = n_actions, replicas
        u = rng.random((2, replicas))
        self.broken = u[0] < self.tail_prob
        self._onset = np.where(self.broken, np.floor(u[1] * horizon).astype(np.int64), horizon)
        self._t = 0
        self._inner = ShrinkingDartboard()
        self._inner.reset(n_actions, horizon, replicas, rng)

    def _override(self, actions, t0):
        steps = actions.shape[0]
        t = t0 + np.arange(steps)[:, None]
        return np.where(t >= self._onset[None], t % self._n, actions).astype(np.int64)

    def act(self):
        out = self._override(self._inner.act()[None], self._t)[0]
        return out

    def update(self, actions, losses):
        self._inner.update(actions, losses)
        self._t += 1

    def play_block(self, losses):
        out = self._override(self._inner.play_block(losses), self._t)
        self._t += out.shape[0]
        return out


@REGISTRY.register("flawed-hot-hedge", "FLAWED ON PURPOSE: Hedge with a learning rate `heat` times too large")
class FlawedHotHedge(Hedge):
    """FLAWED ON PURPOSE: Hedge with eta = heat * sqrt(8 ln n / T) (default heat 10).

    It carries Hedge's claims for the default tuning (Cesa-Bianchi and
    Lugosi 2006, Theorem 2.2 and Corollary 4.2), which it does not satisfy:
    on the alternating sequence the hot weights chase the last leader and
    the regret grows linearly (at heat 10, T = 10^4, n = 2 the exact mixture
    regret is several times sqrt(T ln n / 2)). On i.i.d. sequences the
    learner can do no worse than chance, and the claims hold.
    """

    def __init__(self, heat=10.0):
        self.heat = validate.real("heat", heat, low=1.0)
        self.eta = None

    @property
    def claims(self):
        return tuple(Claim(metric=c.metric, bound=c.bound, delta=c.delta, kind=c.kind, scope=c.scope,
                           name=c.name + " (FALSE on purpose)",
                           source="deliberately false: Hedge's claim for the default eta, "
                                  "attached to a hot eta (harness.learners.flawed)")
                     for c in hedge_claims(None, label="flawed-hot-hedge"))

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._eta = self.heat * self._eta
