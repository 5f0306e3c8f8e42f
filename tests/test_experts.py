"""Hedge, FTL and FTPL: published bounds, exact distributions, fast path = slow path."""

import math

import numpy as np
import pytest
from scipy import integrate, stats

import adversaries
from harness import Learner, per_replica, run
from harness.learners import get as get_learner
from harness.learners.experts import default_hedge_eta, ftpl_probabilities, hedge_probabilities

from helpers import Fixed


def _sequences(rng, T, n):
    alt = np.ones((T, n))
    t = np.arange(T)
    alt[:, 0] = np.where(t % 2 == 1, 0.0, 1.0)
    alt[:, 1] = np.where(t % 2 == 1, 1.0, 0.0)
    alt[0, :2] = (0.5, 0.0)
    switch_half = np.zeros((T, n))
    switch_half[: T // 2, 0] = 1.0       # action 0 bad first, then action 1
    switch_half[T // 2:, 1:] = 1.0
    return {"alternating": alt, "bernoulli": (rng.random((T, n)) < 0.5).astype(float),
            "uniform": rng.random((T, n)), "switch-half": switch_half,
            "gap": (rng.random((T, n)) < np.linspace(0.3, 0.6, n)).astype(float)}


@pytest.mark.parametrize("n", [2, 5, 20])
@pytest.mark.parametrize("T", [100, 5000])
def test_hedge_mixture_regret_within_published_bound(rng, n, T):
    """Exact mixture regret sum_t <p_t, l_t> - min_i L_T(i) <= sqrt(T ln n / 2) with
    eta = sqrt(8 ln n / T) (Cesa-Bianchi and Lugosi 2006, Theorem 2.2)."""
    bound = math.sqrt(T * math.log(n) / 2)
    for name, losses in _sequences(rng, T, n).items():
        p = hedge_probabilities(losses, default_hedge_eta(n, T))
        regret = float((p * losses).sum() - losses.sum(axis=0).min())
        assert regret <= bound, (name, regret, bound)


def test_hedge_bound_is_not_vacuous_on_switch_half():
    """The check above can fail: with eta 20x the default the bound breaks on the same kind
    of sequence (so the assertion has teeth)."""
    T, n = 5000, 2
    losses = np.zeros((T, n))
    t = np.arange(T)
    losses[:, 0] = (t % 2 == 0)
    losses[:, 1] = (t % 2 == 1)
    losses[0] = (0.5, 0.0)
    p = hedge_probabilities(losses, 20 * default_hedge_eta(n, T))
    assert (p * losses).sum() - losses.sum(axis=0).min() > math.sqrt(T * math.log(n) / 2)


@pytest.mark.parametrize("name, probabilities", [("hedge", hedge_probabilities),
                                                 ("ftpl", lambda L, eta: _ftpl_mixture(L, eta))])
def test_sampled_regret_matches_exact_mixture_regret(rng, name, probabilities):
    """On a shared sequence the replicas' mean played loss estimates the exact mixture loss;
    the difference must lie within 4.5 standard errors (false-failure probability < 1e-5)."""
    T, n = 2000, 5
    losses = rng.random((T, n))
    eta = 0.05
    res = run(get_learner(name, eta=eta), Fixed(losses), T, n, replicas=2000, seed=3)
    exact = float((probabilities(losses, eta) * losses).sum() - losses.sum(axis=0).min())
    se = res.regret.std(ddof=1) / math.sqrt(res.regret.size)
    assert abs(res.regret.mean() - exact) <= 4.5 * se


def _ftpl_mixture(losses, eta):
    before = np.cumsum(np.vstack([np.zeros(losses.shape[1]), losses[:-1]]), axis=0)
    return ftpl_probabilities(before, eta)


def test_ftl_on_the_alternating_sequence_has_regret_T_over_2():
    """FTL's regret on the alternating sequence is T/2 (the standard counterexample,
    Shalev-Shwartz 2012, Example 2.2), and it switches every round."""
    for T in (10, 11, 1000):
        res = run(get_learner("ftl"), adversaries.get("alternating"), T, 2, replicas=5)
        assert np.all(res.regret == T / 2) and np.all(res.switches == T - 1)
    res = run(get_learner("ftl"), adversaries.get("alternating"), 1000, 4, replicas=2)
    assert np.all(res.regret == 500)


@pytest.mark.parametrize("cum, eta", [([0.0, 0.0], 1.0), ([0.0, 1.0, 2.5], 0.7), ([3.0, 0.0, 0.1, 7.0, 0.2], 2.0),
                                     (list(np.linspace(0, 3, 21)), 1.3)])
def test_ftpl_probabilities_equal_numerical_integration(cum, eta):
    """Gauss-Legendre values against scipy.integrate.quad of the defining integral
    P[i] = int_{x} f_i(x) prod_{j!=i} F_j(x) dx, X_j = Exp(1)/eta - cum_j (closed-form densities)."""
    cum = np.asarray(cum)
    c = -eta * cum

    def integrand(x, i):
        # density of Z_i + c_i at x, times P[Z_j + c_j <= x] for j != i
        if x < c[i]:
            return 0.0
        others = [1 - math.exp(-(x - c[j])) if x >= c[j] else 0.0 for j in range(len(c)) if j != i]
        return math.exp(-(x - c[i])) * math.prod(others)

    expected = [integrate.quad(integrand, c.max(), c.max() + 60, args=(i,), limit=200, epsabs=1e-13)[0]
                for i in range(len(c))]
    np.testing.assert_allclose(ftpl_probabilities(cum[None, :], eta)[0], expected, atol=1e-9)
    if np.all(cum == cum[0]):
        np.testing.assert_allclose(expected, 1 / len(c), atol=1e-9)


def test_ftpl_probabilities_match_drawn_perturbations(rng):
    """Frequencies of argmin(cum - Z/eta) over 400k draws within 5 standard errors."""
    cum, eta = np.array([0.0, 0.4, 0.4, 1.5, 3.0, 0.1]), 1.7
    z = rng.standard_exponential((400_000, cum.size))
    freq = np.bincount(np.argmin(cum - z / eta, axis=1), minlength=cum.size) / z.shape[0]
    p = ftpl_probabilities(cum[None, :], eta)[0]
    assert np.all(np.abs(freq - p) <= 5 * np.sqrt(p * (1 - p) / z.shape[0]))


class _SlowPath(Learner):
    """Hides a learner's play_block, so the runner uses the act/update loop."""

    def __init__(self, inner):
        self.inner = inner
        self.feedback = inner.feedback

    def reset(self, *args):
        self.inner.reset(*args)

    def act(self):
        return self.inner.act()

    def update(self, actions, losses):
        self.inner.update(actions, losses)


@pytest.mark.parametrize("name", ["hedge", "ftpl", "ftl"])
@pytest.mark.parametrize("shared", [True, False])
def test_fast_and_slow_paths_agree_in_distribution(name, shared):
    """play_block (fast path) and the act/update loop: two-sample KS tests on regret and
    switches, 3000 replicas each, independent seeds (a shared sequence is a fixed table,
    so only the learner's randomness differs). alpha = 1e-3 per test, 8 random tests:
    false-failure probability < 0.8% (KS is conservative on discrete data)."""
    rng = np.random.default_rng(77)
    if shared:
        adv = Fixed((rng.random((300, 4)) < [0.45, 0.5, 0.5, 0.55]).astype(float))
    else:
        adv = adversaries.get("bernoulli", p=[0.45, 0.5, 0.5, 0.55])
    fast = run(get_learner(name), adv, 300, 4, replicas=3000, seed=1)
    slow = run(_SlowPath(get_learner(name)), adv, 300, 4, replicas=3000, seed=1 if name == "ftl" else 2)
    if name == "ftl":  # deterministic: the same sequence gives the same play, exactly
        assert np.array_equal(fast.regret, slow.regret) and np.array_equal(fast.switches, slow.switches)
        return
    for metric in ("regret", "switches"):
        assert stats.ks_2samp(getattr(fast, metric), getattr(slow, metric)).pvalue > 1e-3, metric


class _PlainHedge:
    """Hedge for one replica, written the obvious way (numpy per round)."""

    def __init__(self, n, horizon, rng):
        self.eta = math.sqrt(8 * math.log(n) / horizon)
        self.cum = np.zeros(n)
        self.rng = rng

    def act(self):
        w = np.exp(-self.eta * (self.cum - self.cum.min()))
        return int(self.rng.choice(w.size, p=w / w.sum()))

    def update(self, action, losses):
        self.cum += losses


@pytest.mark.parametrize("shared", [True, False])
def test_per_replica_plain_learner_matches_native_hedge(shared):
    """per_replica(plain Hedge) and the batched Hedge: same distribution of regret and
    switches (KS, alpha = 1e-3 each, 4 tests: false-failure probability < 0.4%)."""
    rng = np.random.default_rng(5)
    adv = Fixed((rng.random((200, 3)) < [0.4, 0.5, 0.6]).astype(float)) if shared else \
        adversaries.get("bernoulli", p=[0.4, 0.5, 0.6])
    native = run(get_learner("hedge"), adv, 200, 3, replicas=1500, seed=8)
    plain = run(per_replica(_PlainHedge), adv, 200, 3, replicas=1500, seed=9)
    for metric in ("regret", "switches"):
        assert stats.ks_2samp(getattr(native, metric), getattr(plain, metric)).pvalue > 1e-3, metric
