"""The anytime-valid tests behind the verdicts, checked against closed forms and scipy."""

import math

import numpy as np
import pytest
from scipy import integrate, special, stats

from harness.errors import ConfigError
from harness.stats import (bonferroni, clopper_pearson, fixed_sample_size, mean_sequence, rate_prior,
                           rate_sequence, _log_mixture, _mean_bounds, _rate_interval)


def test_mixture_equals_the_beta_binomial_integral():
    """M_t(p) = integral of prod Bernoulli(q) likelihoods over Beta(a, b), divided by the likelihood at p:
    checked by numerical quadrature (scipy.integrate.quad) for a few (S, t, p)."""
    a, b = rate_prior(0.05)
    for s, t, p in [(0, 10, 0.05), (3, 10, 0.05), (7, 40, 0.1), (40, 40, 0.3)]:
        integral, _ = integrate.quad(lambda q: q ** s * (1 - q) ** (t - s) * stats.beta.pdf(q, a, b), 0, 1,
                                     points=[s / t], epsabs=0, epsrel=1e-11, limit=200)
        expected = math.log(integral) - s * math.log(p) - (t - s) * math.log1p(-p)
        assert float(_log_mixture(s, t, p, a, b)) == pytest.approx(expected, rel=1e-8, abs=1e-9)


@pytest.mark.parametrize("p", [0.01, 0.05, 0.3])
def test_mixture_is_a_martingale_with_mean_one(p):
    """E[M_t(p)] = 1 under rate p, exactly: summed over the Binomial(t, p) pmf (scipy.stats.binom),
    the property Ville's inequality needs (Ville 1939; Robbins 1970)."""
    a, b = rate_prior(0.05)
    for t in (1, 5, 50, 400):
        k = np.arange(t + 1)
        mean = np.sum(np.exp(stats.binom.logpmf(k, t, p) + _log_mixture(k, t, p, a, b)))
        assert mean == pytest.approx(1.0, rel=1e-9)


def test_interval_is_where_the_mixture_stays_below_the_level():
    x = np.zeros(400, dtype=bool)
    x[::25] = True  # 16 of 400
    res = rate_sequence(x, 0.2, confidence=0.99)
    a, b = rate_prior(0.2)
    level = math.log(100)
    k, n = int(x[:res.n].sum()), res.n
    assert res.decision == "below" and res.n < 400
    assert float(_log_mixture(k, n, res.low, a, b)) == pytest.approx(level, abs=1e-6)
    assert float(_log_mixture(k, n, res.high, a, b)) == pytest.approx(level, abs=1e-6)
    assert res.low < k / n < res.high < 0.2
    # stopping is at the first crossing: one observation earlier the threshold was still inside
    assert float(_log_mixture(int(x[:n - 1].sum()), n - 1, 0.2, a, b)) < level <= \
        float(_log_mixture(k, n, 0.2, a, b))


def test_anytime_interval_is_wider_than_the_fixed_sample_one():
    """Anytime validity costs width: at the same data and level, the confidence sequence contains the
    Clopper-Pearson interval (Clopper and Pearson 1934) in these cases (common practice to expect)."""
    a, b = rate_prior(0.05)
    for k, n in [(0, 500), (5, 500), (50, 500), (250, 500), (500, 500)]:
        low, high = _rate_interval(k, n, a, b, math.log(1 / 0.05))
        cp = clopper_pearson(k, n, 0.95)
        assert low <= cp.low + 1e-12 and high >= cp.high - 1e-12


def test_rate_sequence_edges_and_errors():
    empty = rate_sequence([], 0.1)
    assert empty.decision == "undecided" and empty.n == 0 and (empty.low, empty.high) == (0.0, 1.0)
    ones = rate_sequence(np.ones(50, dtype=bool), 0.1)
    assert ones.decision == "above" and ones.high == 1.0
    zeros = rate_sequence(np.zeros(5000, dtype=bool), 0.1)
    assert zeros.decision == "below" and zeros.low == 0.0 and zeros.estimate == 0.0
    assert rate_sequence([0, 1, 1], 0.5).available == 3
    with pytest.raises(ConfigError, match="threshold"):
        rate_sequence([True], 0.0)
    with pytest.raises(ConfigError, match="outcomes"):
        rate_sequence([0.5, 1], 0.1)


def test_mean_sequence_matches_a_round_by_round_computation():
    """The vectorised bounds equal the formula of Waudby-Smith and Ramdas (2024, PrPl-EB) computed one
    observation at a time in plain Python."""
    rng = np.random.default_rng(3)
    v = rng.beta(2, 5, 300) * 10 - 2          # in [-2, 8]
    x = (v + 2) / 10
    lows, highs = _mean_bounds(x, math.log(2 / 0.1), 0.75)
    level = math.log(2 / 0.1)
    s_lx = s_l = s_vpsi = s_x = s_dev = 0.0
    mu_prev, sig_prev = 0.5, 0.25
    lower, upper = 0.0, 1.0
    for t, xi in enumerate(x, start=1):
        if t > 1:
            assert (lows[t - 2], highs[t - 2]) == pytest.approx((lower, upper), abs=1e-12)
        lam = min(0.75, math.sqrt(2 * level / (sig_prev * t * math.log(1 + t))))
        s_lx += lam * xi
        s_l += lam
        s_vpsi += (xi - mu_prev) ** 2 * (-math.log(1 - lam) - lam)
        centre, margin = s_lx / s_l, (level + s_vpsi) / s_l
        lower, upper = max(lower, min(1, max(0, centre - margin))), min(upper, max(0, min(1, centre + margin)))
        s_x += xi
        mu = (0.5 + s_x) / (t + 1)
        s_dev += (xi - mu) ** 2
        mu_prev, sig_prev = mu, (0.25 + s_dev) / (t + 1)
    assert (lows[-1], highs[-1]) == pytest.approx((lower, upper), abs=1e-12)
    # mean_sequence stops at the first t whose bounds exclude the threshold, and reports them
    threshold = -2 + 10 * (lows[150] + highs[150]) / 2
    res = mean_sequence(v, threshold, -2.0, 8.0, confidence=0.9)
    first = np.flatnonzero((lows > (threshold + 2) / 10) | (highs < (threshold + 2) / 10))
    assert res.n == (first[0] + 1 if first.size else 300)
    assert (res.low, res.high) == pytest.approx((-2 + 10 * lows[res.n - 1], -2 + 10 * highs[res.n - 1]))
    assert res.estimate == pytest.approx(v[:res.n].mean())


def test_mean_sequence_decides_both_ways_and_checks_its_range():
    rng = np.random.default_rng(4)
    v = rng.normal(10, 3, 5000).clip(-100, 100)
    assert mean_sequence(v, 20, -100, 100).decision == "below"
    assert mean_sequence(v, 0, -100, 100).decision == "above"
    assert mean_sequence(v, -500, -100, 100).n == 1  # a threshold below the range: decided at once
    with pytest.raises(ConfigError, match="stated range"):
        mean_sequence([1.0, 200.0], 0, -100, 100)
    with pytest.raises(ConfigError, match="high"):
        mean_sequence([1.0], 0, 5, 5)


def test_mean_sequence_is_calibrated_at_the_threshold():
    """At mean exactly = threshold (Beta(2, 3) data, mean 0.4), a decision either way is an error; each
    direction has probability <= alpha/2 = 0.05 by construction. Measured over 400 fixed-seed streams of
    3000; the test fails only if a Clopper-Pearson 99.9% lower bound on the error share exceeds 0.1, which
    has probability <= 0.001 if the construction holds."""
    rng = np.random.default_rng(5)
    wrong = sum(mean_sequence(rng.beta(2, 3, 3000), 0.4, 0, 1, confidence=0.9).decision != "undecided"
                for _ in range(400))
    assert clopper_pearson(wrong, 400, 0.999, "greater").low <= 0.1


def test_bonferroni():
    assert bonferroni(0.95, 1) == pytest.approx(0.95)
    assert bonferroni(0.95, 50) == pytest.approx(1 - 0.001)
    with pytest.raises(ConfigError, match="tests"):
        bonferroni(0.95, 0)


@pytest.mark.parametrize("threshold, rate, confidence, power", [
    (0.05, 0.1, 0.95, 0.8), (0.05, 0.025, 0.95, 0.8), (0.2, 0.4, 0.99, 0.9), (0.2, 0.05, 0.9, 0.5),
])
def test_fixed_sample_size_against_binomtest(threshold, rate, confidence, power):
    """The exact test's rejection region is where scipy.stats.binomtest's one-sided p-value is <= alpha;
    the returned N is the first whose power (summed over the Binomial(N, rate) pmf) reaches ``power``."""
    alpha = 1 - confidence
    alternative = "greater" if rate > threshold else "less"

    def power_at(n):
        ks = np.arange(n + 1)
        reject = np.array([stats.binomtest(int(k), n, threshold, alternative=alternative).pvalue <= alpha
                           for k in ks])
        return float(np.sum(stats.binom.pmf(ks, n, rate)[reject]))

    n = fixed_sample_size(threshold, rate, confidence, power)
    assert power_at(n) >= power
    assert all(power_at(m) < power for m in range(max(1, n - 15), n))
    with pytest.raises(ConfigError, match="differ"):
        fixed_sample_size(0.1, 0.1)


def test_fixed_sample_size_matches_the_normal_approximation_roughly():
    """n ~ ((z_a sqrt(t(1-t)) + z_b sqrt(r(1-r))) / (r - t))^2 (common practice); the exact N is within 15%."""
    t, r, a, b = 0.05, 0.1, 0.01, 0.1
    z = special.ndtri
    approx = ((z(1 - a) * math.sqrt(t * (1 - t)) + z(1 - b) * math.sqrt(r * (1 - r))) / (r - t)) ** 2
    assert fixed_sample_size(t, r, 1 - a, 1 - b) == pytest.approx(approx, rel=0.15)
