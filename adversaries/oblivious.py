"""Oblivious adversaries: the whole sequence is fixed before play starts.

Randomised ones take ``shared``: False (default) draws one sequence per
replica, so probabilities are over the sequence and the learner; True draws
one sequence for all replicas, so probabilities are over the learner's
randomness on that fixed sequence. Draws are made in time-major order with a
fixed number of uniforms per entry, so the sequence does not depend on how
the runner cuts the horizon into blocks; constructions with random segment
lengths keep their segment state across blocks for the same reason.
"""

from __future__ import annotations

import numpy as np

from harness import kernels, validate
from harness.kernels import pareto_length  # noqa: F401  (the heavy-tail walks' kernels share it)
from harness.kernels.sequences import OtherLabel, SegmentSchedule  # noqa: F401  (regime shifts' twin)
from harness.errors import ConfigError
from harness.protocol import Adversary

from . import REGISTRY


class RandomOblivious(Adversary):
    """Base for randomised oblivious adversaries: handles ``shared`` and shapes.

    Internally every construction works on ``rows`` independent sequences
    (1 when shared, else one per replica), drawn as ``(steps, rows, k)``
    uniforms in time-major order; ``_emit`` drops the row axis when shared.
    """

    randomized = True

    def __init__(self, shared=False):
        self.shared = validate.boolean("shared", shared)

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._horizon, self._replicas, self._rng = n_actions, horizon, replicas, rng
        self._rows = 1 if self.shared else replicas

    def _shape(self, steps: int) -> tuple:
        return (steps, self._n) if self.shared else (steps, self._replicas, self._n)

    def _uniforms(self, steps: int, per_entry: int) -> np.ndarray:
        """``per_entry`` uniforms for every (round, row): (steps, rows, per_entry)."""
        return self._rng.random((steps, self._rows, per_entry))

    def _emit(self, losses: np.ndarray) -> np.ndarray:
        """(steps, rows, n) -> the runner's shape."""
        return losses[:, 0, :] if self.shared else losses


def gap_and_base(gap, base) -> tuple[float, float]:
    """A gap in (0, 1] below a base mean in [0, 1], leaving the better mean base - gap >= 0."""
    gap = validate.real("gap", gap, low=0.0, high=1.0, low_open=True)
    base = validate.probability("base", base)
    if base - gap < 0:
        raise ConfigError(f"gap: base - gap must be >= 0 (base={base:g}), got {gap:g}; lower gap or raise base")
    return gap, base


# -- i.i.d. ------------------------------------------------------------------------


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


@REGISTRY.register("uniform", "i.i.d. Uniform[low, high] losses")
class Uniform(RandomOblivious):
    """l_t(i) = low + (high - low) U_t(i), U uniform on [0, 1), one uniform per entry."""

    def __init__(self, low=0.0, high=1.0, shared=False):
        super().__init__(shared)
        self.low = validate.probability("low", low)
        self.high = validate.probability("high", high)
        if self.high < self.low:
            raise ConfigError(f"high: must be >= low ({self.low:g}), got {self.high:g}; swap them")

    def losses(self, t0, t1):
        return self.low + (self.high - self.low) * self._rng.random(self._shape(t1 - t0))


@REGISTRY.register("bounded-noise", "per-action mean plus i.i.d. uniform noise of half-width width")
class BoundedNoise(RandomOblivious):
    """l_t(i) = mean_i + width (2 U_t(i) - 1): bounded, symmetric noise around fixed means.

    ``mean`` is one number or one per action; every mean must lie in
    [width, 1 - width] so that no loss is clipped (clipping would move the
    means and hide the gap a test intends).
    """

    def __init__(self, mean=0.5, width=0.25, shared=False):
        super().__init__(shared)
        self.width = validate.real("width", width, low=0.0, high=0.5)
        arr = validate.probability_vector("mean", mean)
        if np.any(arr < self.width) or np.any(arr > 1.0 - self.width):
            raise ConfigError(f"mean: every mean must lie in [width, 1 - width] = [{self.width:g}, "
                              f"{1 - self.width:g}] so no loss is clipped; got {mean!r}")
        self.mean = float(arr) if arr.ndim == 0 else arr.tolist()

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._mean = validate.probability_vector("mean", self.mean, n_actions)

    def losses(self, t0, t1):
        return self._mean + self.width * (2.0 * self._rng.random(self._shape(t1 - t0)) - 1.0)


@REGISTRY.register("stochastic-gap", "i.i.d. Bernoulli losses, one action better by gap in mean")
class StochasticGap(RandomOblivious):
    """Bernoulli losses with mean ``base`` for every action but ``best``, whose mean is base - gap.

    The classic stochastic instance with suboptimality gap Delta = gap
    (e.g. Lattimore and Szepesvari 2020, *Bandit Algorithms*, ch. 4): the
    pseudo-regret of a learner is gap times the rounds it spends off ``best``.
    """

    def __init__(self, gap=0.1, base=0.5, best=0, shared=False):
        super().__init__(shared)
        self.gap, self.base = gap_and_base(gap, base)
        self.best = validate.nonneg_int("best", best)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        if self.best >= n_actions:
            raise ConfigError(f"best: must be an action in [0, {n_actions}), got {self.best}")
        self._p = np.full(n_actions, self.base)
        self._p[self.best] -= self.gap

    def losses(self, t0, t1):
        return (self._rng.random(self._shape(t1 - t0)) < self._p).astype(np.float64)


# -- deterministic -------------------------------------------------------------------


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
    randomized = False

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


# -- non-stationary --------------------------------------------------------------------


@REGISTRY.register("regime-shift", "Bernoulli losses whose best action moves after Pareto-distributed gaps")
class RegimeShift(RandomOblivious):
    """Piecewise-stationary Bernoulli losses; the best action changes at heavy-tailed times.

    Segments have i.i.d. lengths L = ceil(scale * (1-U)^(-1/alpha)), a
    Pareto(scale, alpha) law (P[L > x] = (scale/x)^alpha), so most regimes
    are short but a few last a large share of the horizon. In each segment
    one action, drawn uniformly among the others than the previous best, has
    mean ``base - gap``; every other action has mean ``base``. Each
    (round, row) draws n + 2 uniforms (n losses, the length and the label of
    a segment that starts there), and the open segment is carried across
    blocks, so the block cut never changes the sequence.
    """

    def __init__(self, gap=0.2, base=0.5, alpha=1.5, scale=50, shared=False):
        super().__init__(shared)
        self.gap, self.base = gap_and_base(gap, base)
        self.alpha = validate.positive_real("alpha", alpha)
        self.scale = validate.real("scale", scale, low=1.0)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._remaining = np.zeros(self._rows, dtype=np.int64)   # rounds left in each row's segment
        self._best = np.full(self._rows, -1, dtype=np.int64)     # each row's better action, -1 before any

    def _block(self, t0, t1):
        """(losses (steps, rows, n), the better action of each round (steps, rows))."""
        u = self._uniforms(t1 - t0, self._n + 2)
        return kernels.regime_shift(u, self._remaining, self._best, float(self.base), float(self.gap),
                                    float(self.scale), float(self.alpha), int(self._horizon + 1))

    def losses(self, t0, t1):
        return self._emit(self._block(t0, t1)[0])


@REGISTRY.register("near-tie", "leading actions' cumulative losses kept within margin, so leaders keep changing")
class NearTie(RandomOblivious):
    """The ``leaders`` first actions stay within ``margin`` of each other in cumulative loss.

    Each round the leaders draw losses v = 1/2 + margin (U - 1/2), and the
    largest goes to the action with the least cumulative loss, the next to
    the second least, and so on (anti-sorted). For two leaders with
    cumulative gap c in [-margin, margin] the new gap is c + (v1 - v2) with
    v1 - v2 of the opposite sign to c, so it stays in [-margin, margin]; the
    same pairwise argument holds for any number of leaders. The leader
    therefore changes often and unpredictably, which piles up leader changes
    for FTL and for lazy learners whose perturbation falls inside the
    margin. Every other action loses 1 each round. n uniforms per (round, row).
    """

    def __init__(self, leaders=2, margin=1.0, shared=False):
        super().__init__(shared)
        self.leaders = validate.positive_int("leaders", leaders, minimum=2)
        self.margin = validate.real("margin", margin, low=0.0, high=1.0, low_open=True)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        if self.leaders > n_actions:
            raise ConfigError(f"leaders: must be at most the number of actions ({n_actions}), got {self.leaders}")
        self._cum = np.zeros((self._rows, self.leaders))

    def losses(self, t0, t1):
        u = self._uniforms(t1 - t0, self._n)
        return self._emit(kernels.near_tie(u, float(self.margin), self._cum))
