"""Lower-bound constructions force the published orders of regret.

- block-random (lower_bounds.BlockRandom): any learner with at most S switches pays order T ln n / S
  for S below sqrt(T ln n) (Altschuler and Talwar 2018, COLT, minimax Theta(T ln n / S), from memory;
  the blocking derivation in the docstring is what is checked): the slope of log mean regret against
  log S is -1.
- multi-scale walk (Dekel, Ding, Koren and Peres 2014, STOC, construction from memory): a bandit
  learner's regret with unit switching cost grows like T^(2/3) (up to log T): the slope of log cost
  regret against log T is 2/3, and blocked EXP3 cannot find the better action (its regret stays at
  epsilon T (1 - 1/n), epsilon = n^(1/3) T^(-1/3) / (9 log2 T)).

Reference learners from harness.learners are used when registered (blocked-hedge, budget-cap,
blocked-exp3 come with the learner zoo); small test subjects below run in any case. Slopes are fitted
by least squares on means over replicas with fixed seeds, so each check is deterministic; the stated
tolerances are several times the spread measured across seeds.
"""

import math

import numpy as np
import pytest

import adversaries
from harness import Learner, run
from harness.learners import get as get_learner, names as learner_names

from test_adversaries_constructions import Stubborn, exact_block_bound


class BlockedExp3(Learner):
    """Test subject: EXP3 (Auer, Cesa-Bianchi, Freund and Schapire 2002, Exp3 with gamma) on blocks of
    B rounds: one action per block, updated with the block's mean gain as one round of a T/B-round game."""

    feedback = "bandit"

    def __init__(self, budget):
        self.budget = budget

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._r, self._rng = n_actions, replicas, rng
        self._B = math.ceil(horizon / self.budget)
        K = math.ceil(horizon / self._B)
        self._gamma = min(1.0, math.sqrt(n_actions * math.log(n_actions) / ((math.e - 1) * K)))
        self._logw = np.zeros((replicas, n_actions))
        self._t, self._gain = 0, np.zeros(replicas)

    def _p(self):
        w = np.exp(self._logw - self._logw.max(axis=1, keepdims=True))
        return (1 - self._gamma) * w / w.sum(axis=1, keepdims=True) + self._gamma / self._n

    def act(self):
        if self._t % self._B == 0:
            p = self._p()
            u = self._rng.random(self._r)
            self._a = np.minimum((np.cumsum(p, axis=1) <= u[:, None]).sum(axis=1), self._n - 1)
            self._pa = p[np.arange(self._r), self._a]
        return self._a.astype(np.int64)

    def update(self, actions, losses):
        self._gain += 1.0 - losses
        self._t += 1
        if self._t % self._B == 0:
            rows = np.arange(self._r)
            self._logw[rows, self._a] += self._gamma / self._n * (self._gain / self._B) / self._pa
            self._gain[:] = 0.0


def _registered(*names):
    return all(n in learner_names() for n in names)


BUDGETED = [  # (label, factory S -> learner, whether it spends its budget so the slope is -1)
    ("stubborn-ftl (test subject)", Stubborn, True),
    ("blocked-exp3 (test subject)", BlockedExp3, True),
    ("blocked-hedge", lambda S: get_learner("blocked-hedge", budget=S), True),
    ("budget-cap(hedge)", lambda S: get_learner("budget-cap", inner="hedge", budget=S), True),
    ("budget-cap(lazy-ftpl)", lambda S: get_learner("budget-cap", inner="lazy-ftpl", budget=S), True),
    ("budget-cap(mw-ftpl)", lambda S: get_learner("budget-cap", inner="mw-ftpl", budget=S), False),
    ("blocked-exp3", lambda S: get_learner("blocked-exp3", budget=S), True),
]
NEEDS = {"blocked-hedge": ("blocked-hedge",), "budget-cap(hedge)": ("budget-cap",),
         "budget-cap(lazy-ftpl)": ("budget-cap", "lazy-ftpl"), "budget-cap(mw-ftpl)": ("budget-cap", "mw-ftpl"),
         "blocked-exp3": ("blocked-exp3",)}


def _block_random_slope(make, T, n, budgets, replicas):
    means, sds, bounds = [], [], []
    adv = adversaries.get("block-random")
    for S in budgets:
        res = run(make(S), adversaries.get("block-random", budget=S), T, n, replicas=replicas, seed=S)
        assert res.switches.max() <= S
        means.append(res.regret.mean())
        sds.append(res.regret.std(ddof=1) / math.sqrt(replicas))
        bounds.append(exact_block_bound(T, n, adv.default_blocks(S, n, T), S))
    slope = np.polyfit(np.log(budgets), np.log(means), 1)[0]
    return slope, np.array(means), np.array(sds), np.array(bounds)


@pytest.mark.parametrize("label, make, spends", BUDGETED, ids=[b[0] for b in BUDGETED])
def test_block_random_regret_falls_like_one_over_s(label, make, spends):
    """T = 20000, n = 4, S in {5, 10, 20, 40} (all below sqrt(T ln n) = 166), 200 replicas per S.
    Every mean regret is at least the exact blocking bound minus 5 standard errors (false-failure
    probability < 1e-6 each if the bound holds); for learners that spend their budget the fitted slope
    of log mean regret against log S lies in [-1.25, -0.75] (measured: stubborn-ftl -0.95, blocked-hedge
    -0.93, budget-cap(hedge) -1.04, budget-cap(lazy-ftpl) -1.00, blocked-exp3 -0.95; budget-cap(mw-ftpl),
    which rarely uses its budget, -0.74: above the bound, so shallower)."""
    if label in NEEDS and not _registered(*NEEDS[label]):
        pytest.skip(f"{label} is not registered in this checkout (it comes with the learner zoo, issue 3)")
    slope, means, sds, bounds = _block_random_slope(make, 20_000, 4, [5, 10, 20, 40], 200)
    assert np.all(means >= bounds - 5 * sds)
    if spends:
        assert -1.25 <= slope <= -0.75, slope


@pytest.mark.slow
@pytest.mark.parametrize("label, make, spends", BUDGETED, ids=[b[0] for b in BUDGETED])
def test_block_random_slope_full_study(label, make, spends):
    """T = 10^5, n = 8, S from 5 to 160 (sqrt(T ln n) = 456), 1000 replicas: slope within 0.15 of -1."""
    if label in NEEDS and not _registered(*NEEDS[label]):
        pytest.skip(f"{label} is not registered in this checkout")
    slope, means, sds, bounds = _block_random_slope(make, 100_000, 8, [5, 10, 20, 40, 80, 160], 1000)
    assert np.all(means >= bounds - 5 * sds)
    if spends:
        assert abs(slope + 1) <= 0.15, slope


MULTISCALE = [("blocked-exp3 (test subject)", BlockedExp3),
              ("blocked-exp3", lambda S: get_learner("blocked-exp3", budget=S))]


def _multiscale(make, horizons, n, replicas, epsilon=None):
    rows = []
    for T in horizons:
        S = math.ceil(T ** (2 / 3))  # blocks of T^(1/3): the switching-cost tuning
        res = run(make(S), adversaries.get("multiscale-walk", epsilon=epsilon), T, n, replicas=replicas,
                  seed=T, switching_cost=1.0)
        eps = epsilon if epsilon is not None else adversaries.get("multiscale-walk").default_epsilon(n, T)
        rows.append((T, res.regret.mean(), res.cost_regret.mean(), eps * T * (1 - 1 / n)))
    return np.array(rows)


@pytest.mark.parametrize("label, make", MULTISCALE, ids=[m[0] for m in MULTISCALE])
def test_multiscale_walk_forces_t_two_thirds(label, make):
    """T = 2^10 .. 2^16, n = 2, 200 replicas, budget T^(2/3), unit switching cost. Fitted slopes:
    log(cost regret) on log T in [0.57, 0.77] (2/3 +- 0.1; measured 0.68), and log(regret * log2 T) on
    log T in [0.57, 0.77] (measured 0.66): regret ~ T^(2/3) / log T as the construction's epsilon
    dictates. Blocked EXP3 cannot find the better action: mean regret within 10% of epsilon T (1 - 1/n)
    at every T (measured ratios 0.99-1.01)."""
    if label == "blocked-exp3" and not _registered("blocked-exp3"):
        pytest.skip("blocked-exp3 is not registered in this checkout (it comes with the learner zoo, issue 3)")
    rows = _multiscale(make, [2 ** 10, 2 ** 12, 2 ** 14, 2 ** 16], 2, 200)
    T, regret, cost, blind = rows.T
    assert 0.57 <= np.polyfit(np.log(T), np.log(cost), 1)[0] <= 0.77
    assert 0.57 <= np.polyfit(np.log(T), np.log(regret * np.log2(T)), 1)[0] <= 0.77
    np.testing.assert_allclose(regret, blind, rtol=0.1)


def test_the_multiscale_check_has_power():
    """Control: with a large fixed gap (epsilon = 0.2, T = 2^14) blocked EXP3 learns the better action,
    so its regret falls well outside the 10% band of epsilon T (1 - 1/n) used above (measured ratio
    0.55; checked < 0.8): the 'cannot find it' check is not automatic."""
    rows = _multiscale(BlockedExp3, [2 ** 14], 2, 100, epsilon=0.2)
    assert rows[0, 1] < 0.8 * rows[0, 3]
