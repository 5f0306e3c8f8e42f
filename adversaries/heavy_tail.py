"""Sequences whose switch counts have heavy upper tails.

Both constructions move the cumulative-loss difference D_t = L_t(1) - L_t(0)
of two leading actions by one unit per round (losses (0, 1) raise it, (1, 0)
lower it; every other action loses 1 each round and never leads). A *lazy*
perturbation learner -- one perturbation Z drawn once, a_t = argmin_i
(L_{t-1}(i) - Z_i / eta), as in Kalai and Vempala (2005) -- plays action 1
exactly while D < theta = (Z_1 - Z_0) / eta, so its switch count is the
number of times the path of D crosses the random level theta. The paths are
built so that this crossing count, as a function of theta, has a power-law
tail; with ``shared = True`` the tail is over the learner's randomness alone.

Fresh-perturbation learners (FTPL redrawn each round, sampled Hedge) switch
independently from round to round given the sequence, so on one shared
sequence their switch counts concentrate; with ``shared = False`` the tails
below also appear across sequences for them (the switch count follows the
total time spent near a tie, itself heavy-tailed).
"""

from __future__ import annotations

import math

import numpy as np

from harness import validate

from . import REGISTRY
from .oblivious import RandomOblivious, pareto_length


class _TwoLeaderWalk(RandomOblivious):
    """Shared machinery: D moves by one unit per round; subclasses decide the direction."""

    _uniforms_per_round = 2

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._d = np.zeros(self._rows, dtype=np.int64)

    def _step(self, u: np.ndarray) -> np.ndarray:
        """Direction (+1 / -1) of D for one round, per row, given this round's uniforms (rows, k)."""
        raise NotImplementedError

    def losses(self, t0, t1):
        steps = t1 - t0
        u = self._uniforms(steps, self._uniforms_per_round)
        out = np.ones((steps, self._rows, self._n))
        up = np.empty((steps, self._rows), dtype=bool)
        for s in range(steps):
            direction = self._step(u[s])
            self._d += direction
            up[s] = direction > 0
        out[:, :, 0] = up           # D rises: action 0 loses 1, action 1 loses 0
        out[:, :, 1] = ~up
        return self._emit(out)


@REGISTRY.register("pareto-oscillations", "two leaders' loss gap swings with Pareto amplitudes: lazy learners' "
                                          "switch counts get a power-law tail")
class ParetoOscillations(_TwoLeaderWalk):
    r"""The gap D swings between +A_1, -A_2, +A_3, ... with Pareto amplitudes.

    Leg k moves D one unit per round to the turning point (-1)^(k+1) A_k,
    A_k = min(cap, ceil(scale (1-U)^(-1/alpha))) i.i.d., so
    P[A > a] = (scale/a)^alpha up to the cap (default cap ceil(sqrt(T))).

    Why the tail is heavy: a lazy learner with level theta switches once for
    every leg that crosses theta, so its switch count is about
    N(theta) = 2 (legs) P[A > |theta|] ~ (T / E[A]) (scale / |theta|)^alpha
    (a leg of amplitude A takes about 2A rounds). theta = (Z_1 - Z_0)/eta has
    a density f_0 > 0 around 0 (Laplace(1/eta) for exponential Z), hence

        P[N > x] = P[|theta| < scale (T / (E[A] x))^(1/alpha)] ~ 2 f_0 scale (T / (E[A] x))^(1/alpha),

    a Pareto tail of index 1/alpha in x: for alpha >= 1 the tail is as heavy
    as a Cauchy's or heavier, truncated only by the cap. Most learners (|theta|
    of order 1/eta) switch a few times; the few whose theta lands near 0
    switch on nearly every leg, "crossing rarely, but then repeatedly".
    One uniform per (round, row) decides a new leg's amplitude when one starts.
    """

    _uniforms_per_round = 1

    def __init__(self, alpha=1.0, scale=1.0, cap=None, shared=False):
        super().__init__(shared)
        self.alpha = validate.positive_real("alpha", alpha)
        self.scale = validate.real("scale", scale, low=1.0)
        self.cap = None if cap is None else validate.positive_int("cap", cap)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._cap = self.cap if self.cap is not None else math.ceil(math.sqrt(horizon))
        self._target = np.zeros(self._rows, dtype=np.int64)
        self._sign = np.full(self._rows, -1, dtype=np.int64)  # the first leg goes up

    def _step(self, u):
        turn = self._d == self._target
        if turn.any():
            self._sign[turn] = -self._sign[turn]
            amp = pareto_length(u[turn, 0], self.scale, self.alpha, self._cap)
            self._target[turn] = self._sign[turn] * amp
        return np.sign(self._target - self._d)


@REGISTRY.register("tie-stretches", "exact ties of Pareto-distributed length at random levels of the loss gap: "
                                    "heavy-tailed switch counts")
class TieStretches(_TwoLeaderWalk):
    r"""Tie stretches of Pareto length, each at a fresh random level of the gap D.

    The sequence alternates travel and tie phases. Travel: D moves one unit
    per round to a level c drawn uniformly from [-spread, spread] (default
    spread ceil(sqrt(T))). Tie: for L = ceil(scale (1-U)^(-1/alpha)) rounds
    D alternates between c + 1 and c (the two leaders are tied every other
    round), then a new level is drawn.

    Why the tail is heavy: a lazy learner with level theta in (c, c + 1)
    switches on every round of that stretch, and on nothing but the
    travel crossings otherwise. Every stretch offers a window of width 1,
    so the stretch a learner lands in is (up to the density of theta) a
    uniform pick among the stretches, and its switch count follows the law
    of the Pareto(alpha) lengths: a power-law tail of index alpha above the
    travel baseline (the learners whose theta misses every window form the
    median). Follow the Leader,
    whose level is 0, switches every round of every stretch held at c = -1
    or 0; across sequences (``shared = False``) any learner that switches
    often near ties (FTL, fresh FTPL, Hedge) sums Pareto lengths, heavy for
    alpha < 2. Two uniforms per (round, row): a new level and a new length.
    """

    def __init__(self, alpha=1.2, scale=10.0, spread=None, shared=False):
        super().__init__(shared)
        self.alpha = validate.positive_real("alpha", alpha)
        self.scale = validate.real("scale", scale, low=1.0)
        self.spread = None if spread is None else validate.nonneg_int("spread", spread)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._spread = self.spread if self.spread is not None else math.ceil(math.sqrt(horizon))
        self._left = np.zeros(self._rows, dtype=np.int64)   # tie rounds left; 0 while travelling
        self._travel = np.ones(self._rows, dtype=bool)
        self._level = self._draw_level(rng.random(self._rows))  # the first level: one draw per row

    def _step(self, u):
        arrive = self._travel & (self._d == self._level)
        if arrive.any():
            self._travel[arrive] = False
            self._left[arrive] = pareto_length(u[arrive, 1], self.scale, self.alpha, self._horizon + 1)
        direction = np.where(self._d > self._level, -1, 1)        # travel toward the level
        tie = ~self._travel
        direction[tie] = np.where(self._d[tie] == self._level[tie], 1, -1)  # c -> c+1 -> c ...
        self._left[tie] -= 1
        done = tie & (self._left == 0)
        if done.any():
            self._travel[done] = True
            self._level[done] = self._draw_level(u[done, 0])
        return direction

    def _draw_level(self, u):
        width = 2 * self._spread + 1
        return np.minimum((u * width).astype(np.int64), width - 1) - self._spread
