"""Bandit learners: each replica sees only the loss of the action it played.

- ``exp3``: EXP3 (Auer, Cesa-Bianchi, Freund and Schapire 2002);
- ``exp3-ix``: EXP3 with implicit exploration (Neu 2015), high-probability regret;
- ``blocked-exp3``: EXP3 over blocks of ceil(T/S) rounds, at most S switches
  (the blocking of Arora, Dekel and Tewari 2012).

All three are exponential weights on importance-weighted estimates of the
played action's loss (or gain). The slow path (act/update) is a plain
numpy transcription with log-weights; the fast path runs the compiled
``kernels.bandit_weights`` loop on the block. Neither path reads the loss of
an action a replica did not play: on a shared sequence the kernel is handed
a broadcast view and indexes only ``losses[t, r, a_r]``.
"""

from __future__ import annotations

import math

import numpy as np

from .. import kernels, validate
from ..claims import Claim
from ..protocol import Learner
from . import REGISTRY
from .experts import sample_each
from .low_switching import BLOCKING_SOURCE, block_length, required_budget

AUER_2002 = ("Auer, Cesa-Bianchi, Freund and Schapire 2002, 'The nonstochastic multiarmed bandit problem', "
             "SIAM J. Comput. 32:48-77")
NEU_2015 = ("Neu 2015, 'Explore no more: improved high-probability regret bounds for non-stochastic bandits', "
            "NIPS 28")


def default_exp3_gamma(n_actions: int, rounds: int) -> float:
    """min(1, sqrt(n ln n / ((e - 1) g))) with g = rounds >= the best total gain
    (Auer et al. 2002, Corollary 3.2)."""
    return min(1.0, math.sqrt(n_actions * math.log(n_actions) / ((math.e - 1.0) * rounds)))


def default_ix_eta(n_actions: int, horizon: int) -> float:
    """eta = sqrt(2 ln n / (n T)), and gamma = eta / 2 (Neu 2015, Theorem 1)."""
    return math.sqrt(2.0 * math.log(n_actions) / (n_actions * horizon))


class _ExpWeightsBandit(Learner):
    """Exponential weights on importance-weighted estimates, optionally in blocks.

    Subclasses set, in ``_configure(n, T)``: ``_block`` (rounds per block),
    ``_mix`` (uniform exploration mixed into p), ``_rate`` (step),
    ``_ix`` (implicit-exploration bias added to p in the estimate) and
    ``_gain`` (True: EXP3's reward form with gains 1 - loss).
    """

    feedback = "bandit"

    def _configure(self, n_actions, horizon):
        raise NotImplementedError

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._horizon, self._replicas, self._rng = n_actions, horizon, replicas, rng
        self._configure(n_actions, horizon)
        self._t = 0
        self._logw = np.zeros((replicas, n_actions))      # slow path state
        self._w = np.ones((replicas, n_actions))          # fast path state
        self._cur = np.zeros(replicas, dtype=np.int64)
        self._acc = np.zeros(replicas)
        self._p_cur = np.ones(replicas)
        self._mode = None                                 # "slow" or "fast", fixed by the first call

    def _enter(self, mode):
        # The paths keep the weights differently (log-weights / rescaled
        # weights); convert when a caller switches between them.
        if self._mode == "slow" and mode == "fast":
            self._w = np.exp(self._logw - self._logw.max(axis=1, keepdims=True))
        elif self._mode == "fast" and mode == "slow":
            with np.errstate(divide="ignore"):
                self._logw = np.log(self._w)
            self._p_cur = self._probabilities()[np.arange(self._replicas), self._cur]
        self._mode = mode

    # -- slow path: a direct transcription --------------------------------------------

    def _probabilities(self) -> np.ndarray:
        w = np.exp(self._logw - self._logw.max(axis=1, keepdims=True))
        return (1.0 - self._mix) * w / w.sum(axis=1, keepdims=True) + self._mix / self._n

    def act(self):
        self._enter("slow")
        if self._t % self._block == 0:
            p = self._probabilities()
            u = self._rng.random(self._replicas)
            self._cur = sample_each(np.cumsum(p, axis=1), u)
            self._p_cur = p[np.arange(self._replicas), self._cur]
            self._acc[:] = 0.0
        return self._cur.copy()

    def update(self, actions, losses):
        self._enter("slow")
        self._acc += losses
        self._t += 1
        if self._t % self._block == 0:
            y = self._acc / self._block
            rows = np.arange(self._replicas)
            if self._gain:
                self._logw[rows, self._cur] += self._rate * (1.0 - y) / (self._p_cur + self._ix)
            else:
                self._logw[rows, self._cur] -= self._rate * y / (self._p_cur + self._ix)

    # -- fast path ----------------------------------------------------------------------

    def play_block(self, losses):
        self._enter("fast")
        steps = losses.shape[0]
        shape = (steps, self._replicas, self._n)
        if losses.ndim == 2:
            losses = np.broadcast_to(losses[:, None, :], shape)
        starts = np.flatnonzero((self._t + np.arange(steps)) % self._block == 0)
        u = np.zeros((steps, self._replicas))
        u[starts] = self._rng.random((starts.size, self._replicas))  # the slow path's draws, same rounds
        pos = np.array([self._t % self._block], dtype=np.int64)
        out = kernels.bandit_weights(losses, self._w, u, self._cur, self._acc, pos, self._block,
                                     self._mix, self._rate, self._ix, self._gain)
        self._t += steps
        return out


@REGISTRY.register("exp3", "EXP3: exponential weights on importance-weighted gains, gamma-uniform exploration")
class Exp3(_ExpWeightsBandit):
    r"""EXP3 (Auer, Cesa-Bianchi, Freund and Schapire 2002, Figure/Section 3).

    With gains x = 1 - loss and weights w_t(i),

        p_t(i) = (1 - gamma) w_t(i) / W_t + gamma / n,
        xhat_t(i) = x_t(i) / p_t(i) if i was played, else 0,
        w_{t+1}(i) = w_t(i) exp(gamma xhat_t(i) / n).

    Default gamma = min(1, sqrt(n ln n / ((e - 1) T))) (Corollary 3.2 with
    g = T). Claim: E[regret] <= 2 sqrt(e - 1) sqrt(T n ln n) (Corollary
    3.2; regret in gains equals regret in losses). With a fixed gamma:
    (e - 1) gamma T + n ln(n) / gamma (Theorem 3.1 with G_max <= T). Both
    as quoted in the issue / from memory.
    """

    def __init__(self, gamma=None):
        self.gamma = None if gamma is None else validate.real("gamma", gamma, low=0.0, high=1.0, low_open=True)

    @property
    def claims(self):
        if self.gamma is None:
            bound, where = "2 * sqrt(e - 1) * sqrt(T * n * ln(n))", "Corollary 3.2"
        else:
            bound, where = f"(e - 1) * {self.gamma!r} * T + n * ln(n) / {self.gamma!r}", "Theorem 3.1"
        return (Claim(metric="regret", bound=bound, kind="expectation", name=f"exp3: expected regret <= {bound}",
                      source=f"{AUER_2002}, {where} (from memory)"),)

    def _configure(self, n_actions, horizon):
        gamma = self.gamma if self.gamma is not None else default_exp3_gamma(n_actions, horizon)
        self._block, self._mix, self._rate, self._ix, self._gain = 1, gamma, gamma / n_actions, 0.0, True


@REGISTRY.register("exp3-ix", "EXP3-IX: exponential weights, implicit exploration, high-probability regret")
class Exp3IX(_ExpWeightsBandit):
    r"""EXP3-IX (Neu 2015, "Explore no more", NIPS 28).

        p_t(i) = w_t(i) / W_t                      (no forced exploration)
        lhat_t(i) = loss_t(i) / (p_t(i) + gamma) if i was played, else 0,
        w_{t+1}(i) = w_t(i) exp(-eta lhat_t(i)).

    The bias gamma in the denominator ("implicit exploration") makes the
    estimates optimistic enough for a high-probability bound. Default
    eta = 2 gamma = sqrt(2 ln n / (n T)). Claim (Neu 2015, Theorem 1, from
    memory): with probability at least 1 - delta,

        regret <= 2 sqrt(2 n T ln n) + (sqrt(2 n T / ln n) + 1) ln(2 / delta).

    No claim is attached for non-default eta or gamma.
    """

    def __init__(self, eta=None, gamma=None):
        self.eta = None if eta is None else validate.positive_real("eta", eta)
        self.gamma = None if gamma is None else validate.real("gamma", gamma, low=0.0)

    @property
    def claims(self):
        if self.eta is not None or self.gamma is not None:
            return ()
        bound = "2 * sqrt(2 * n * T * ln(n)) + (sqrt(2 * n * T / ln(n)) + 1) * ln(2 / delta)"
        return (Claim(metric="regret", bound=bound, delta=0.05, kind="high_probability",
                      name="exp3-ix: regret <= 2 sqrt(2nT ln n) + (sqrt(2nT/ln n) + 1) ln(2/delta) w.p. 1 - delta",
                      source=f"{NEU_2015}, Theorem 1 (from memory)"),)

    def _configure(self, n_actions, horizon):
        eta = self.eta if self.eta is not None else default_ix_eta(n_actions, horizon)
        gamma = self.gamma if self.gamma is not None else eta / 2.0
        self._block, self._mix, self._rate, self._ix, self._gain = 1, 0.0, eta, gamma, False


@REGISTRY.register("blocked-exp3", "EXP3 over blocks of ceil(T/S) rounds: at most S switches, always")
class BlockedExp3(_ExpWeightsBandit):
    r"""EXP3 played in blocks, for a switch budget S (``budget``).

    Blocks of B = ceil(T / S) rounds (K = ceil(T / B) <= S of them): an
    action is drawn at each block start and kept for the block; at its end
    EXP3 is updated with the block's mean gain 1 - (block loss)/B, as one
    round of a K-round game (the blocking of Arora, Dekel and Tewari 2012,
    which turns regret into policy regret against bounded-memory adaptive
    adversaries). At most K - 1 < S switches on every sequence.

    Default gamma as EXP3's for K rounds. Claims: at most S switches
    (construction) and E[regret] <= B 2 sqrt(e - 1) sqrt(K n ln n) (Auer et
    al. 2002, Corollary 3.2, on the block game, scaled back by B).
    """

    example_params = {"budget": 20}

    def __init__(self, budget=None, gamma=None):
        self.budget = required_budget(budget)
        self.gamma = None if gamma is None else validate.real("gamma", gamma, low=0.0, high=1.0, low_open=True)

    @property
    def claims(self):
        S = self.budget
        B, K = f"ceil(T / {S})", f"ceil(T / ceil(T / {S}))"
        if self.gamma is None:
            regret, where = f"{B} * 2 * sqrt(e - 1) * sqrt({K} * n * ln(n))", "Corollary 3.2"
        else:
            regret, where = f"{B} * ((e - 1) * {self.gamma!r} * {K} + n * ln(n) / {self.gamma!r})", "Theorem 3.1"
        return (Claim(metric="switches", bound=float(S), kind="always", name=f"blocked-exp3: at most {S} switches",
                      source="construction (one draw per block of ceil(T/S) rounds)"),
                Claim(metric="regret", bound=regret, kind="expectation",
                      name=f"blocked-exp3: expected regret <= {regret}",
                      source=f"{AUER_2002}, {where}, on block losses (from memory); {BLOCKING_SOURCE}"))

    def _configure(self, n_actions, horizon):
        block = block_length(horizon, self.budget)
        blocks = -(-horizon // block)
        gamma = self.gamma if self.gamma is not None else default_exp3_gamma(n_actions, blocks)
        self._block, self._mix, self._rate, self._ix, self._gain = block, gamma, gamma / n_actions, 0.0, True
