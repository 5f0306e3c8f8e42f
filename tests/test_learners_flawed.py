"""The deliberately flawed learners are flawed where designed and fine on the benign case."""

import math

import numpy as np
import pytest

import adversaries
from harness import run
from harness.learners import get as get_learner
from harness.learners.experts import default_hedge_eta, hedge_probabilities
from harness.stats import clopper_pearson

from helpers import Fixed, drive


def _alternating(T, n):
    t = np.arange(T)
    alt = np.ones((T, n))
    alt[:, 0], alt[:, 1] = (t % 2 == 0), (t % 2 == 1)
    alt[0, :2] = (0.5, 0.0)
    return alt


@pytest.mark.parametrize("n", [2, 5])
def test_hot_hedge_breaks_its_expected_regret_claim_on_the_alternating_sequence(n):
    """Exact mixture regret (no sampling) of Hedge at 10x the default rate against the claim
    sqrt(T ln n / 2) (Cesa-Bianchi and Lugosi 2006, Theorem 2.2, for the default rate): about
    5x over at T = 10^4. The sampled runs agree: their mean is above the bound by > 10 SE."""
    T = 10_000
    learner = get_learner("flawed-hot-hedge")
    claim = next(c for c in learner.claims if c.kind == "expectation")
    losses = _alternating(T, n)
    p = hedge_probabilities(losses, 10 * default_hedge_eta(n, T))
    exact = float((p * losses).sum() - losses.sum(axis=0).min())
    assert exact > 4 * claim.bound_at(T, n)
    res = run(learner, Fixed(losses), T, n, replicas=300, seed=1)
    se = res.regret.std(ddof=1) / math.sqrt(300)
    assert abs(res.regret.mean() - exact) <= 4.5 * se      # false-failure probability < 7e-6
    assert res.regret.mean() - 10 * se > claim.bound_at(T, n)


def test_hot_hedge_claims_hold_on_iid_sequences():
    """Benign case: i.i.d. Bernoulli(1/2) losses, one sequence per replica. No learner can do
    worse than chance there, so E[regret] = E[T/2 - min_i L_T(i)] ~ 0.28 sqrt(T) (n = 2),
    below sqrt(T ln 2 / 2) ~ 0.59 sqrt(T); the high-probability claim's violation rate is
    not shown above delta (one-sided 99.99% Clopper-Pearson; false-failure prob. <= 1e-4)."""
    T, n, R = 10_000, 2, 1000
    learner = get_learner("flawed-hot-hedge")
    expected, high = sorted(learner.claims, key=lambda c: c.kind)
    res = run(learner, adversaries.get("bernoulli", p=0.5), T, n, replicas=R, seed=3)
    assert res.regret.mean() <= expected.bound_at(T, n)
    k = int(high.violations(res.regret, T, n).sum())
    assert clopper_pearson(k, R, 0.9999, "greater").low <= high.delta


def test_heavy_tail_breaks_its_high_probability_switch_claim():
    """T = 5000, n = 10, one i.i.d. sequence shared by 4000 replicas (probabilities over the
    learner's randomness): about 1% of replicas break down and
    switch every round, so the rate above the bound is shown to exceed delta = 0.001 (the
    one-sided 99.99% Clopper-Pearson lower bound is above it; false-failure probability
    <= 1e-4 given a true rate of ~0.01). The expected-switches claim holds: the mean stays
    below the bound (about 67 against 111)."""
    T, n, R = 5000, 10, 4000
    learner = get_learner("flawed-heavy-tail")
    expected, high = sorted(learner.claims, key=lambda c: c.kind)
    res = run(learner, adversaries.get("bernoulli", p=0.5, shared=True), T, n, replicas=R, seed=4)
    k = int(high.violations(res.switches, T, n).sum())
    assert clopper_pearson(k, R, 0.9999, "greater").low > high.delta
    assert res.switches.mean() <= expected.bound_at(T, n)


def test_heavy_tail_without_the_breakdown_is_the_dartboard():
    """Benign case: tail_prob = 0 plays exactly Shrinking Dartboard from the same seed (the
    two uniforms of the breakdown are drawn first), and no replica breaks the claim."""
    rng = np.random.default_rng(1)
    table = (rng.random((400, 4)) < 0.5).astype(float)
    flawed = get_learner("flawed-heavy-tail", tail_prob=0.0)
    honest = get_learner("shrinking-dartboard")
    a = drive(flawed, table, 200, seed=6)
    r = np.random.default_rng(6)
    r.random((2, 200))
    honest.reset(4, 400, 200, r)
    assert np.array_equal(a, honest.play_block(table))
    broken = drive(get_learner("flawed-heavy-tail", tail_prob=1.0), table, 50, seed=6)
    assert np.all((broken[1:] != broken[:-1]).sum(axis=0) >= 1)
