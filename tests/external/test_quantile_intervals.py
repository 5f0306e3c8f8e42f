"""Order-statistic quantile intervals against scipy and the binomial construction of the references.

The sources outside the project:
- scipy.stats.quantile_test(x, p=q).confidence_interval(confidence), which implements the interval of
  Thompson (1936, Ann. Math. Statist. 7:122-128) as presented by Conover (1999, Practical Nonparametric
  Statistics, 3rd ed.) and David and Nagaraja (2003, Order Statistics, Section 7.1);
- the defining binomial inequalities of that construction, evaluated with scipy.stats.binom;
- closed forms: the extreme ranks need q^n <= alpha/2 (upper end) and (1 - q)^n <= alpha/2 (lower end).
"""

import math

import numpy as np
import pytest
from scipy import stats

from harness.errors import ConfigError
from harness.stats import order_statistic_ranks, quantile_interval, quantile_min_replicas, quantile_rank

SIZES = [1, 2, 5, 9, 20, 37, 100, 368, 1000, 3687, 3688, 4000]
LEVELS = [0.05, 0.25, 0.5, 0.75, 0.9, 0.95, 0.99, 0.999]


def _scipy_interval(x, q, confidence, alternative):
    ci = stats.quantile_test(x, p=q, alternative=alternative).confidence_interval(confidence)
    return float(ci.low), float(ci.high)


@pytest.mark.parametrize("n", SIZES)
def test_intervals_equal_scipy_quantile_test_on_continuous_data(n):
    """Every size, level and confidence, two-sided and one-sided: the same ends as scipy.stats.quantile_test
    (nan there where the sample cannot give an end; -inf/inf here, with the rank None)."""
    x = np.random.default_rng(n).standard_normal(n)
    for q in LEVELS:
        for confidence in (0.8, 0.95, 0.99):
            for alternative in ("two-sided", "less", "greater"):
                ours = quantile_interval(x, q, confidence, alternative)
                low, high = _scipy_interval(x, q, confidence, alternative)
                assert (ours.low == low) if not math.isnan(low) else (ours.low == -math.inf), (n, q, confidence)
                assert (ours.high == high) if not math.isnan(high) else (ours.high == math.inf), (n, q, confidence)
                if alternative == "two-sided":
                    assert ours.complete == (not math.isnan(low) and not math.isnan(high))


@pytest.mark.parametrize("values", [np.arange(6), np.array([0.0, 1.0]), np.arange(60) % 7 * 0.5])
def test_intervals_equal_scipy_quantile_test_on_tied_data(values):
    """Switch counts and regret on a shared sequence take few values: the ends still match scipy."""
    x = np.random.default_rng(7).choice(values, size=500)
    for q in LEVELS:
        ours = quantile_interval(x, q, 0.95)
        low, high = _scipy_interval(x, q, 0.95, "two-sided")
        assert (ours.low, ours.high) == (low if not math.isnan(low) else -math.inf,
                                         high if not math.isnan(high) else math.inf)


@pytest.mark.parametrize("n", [10, 100, 1000, 4000])
def test_ranks_satisfy_the_binomial_construction_and_are_the_tightest(n):
    """David and Nagaraja (2003), Section 7.1: P[X_(l) <= x_q] >= P[Bin(n, q) >= l] and P[X_(u) >= x_q] >=
    P[Bin(n, q) <= u - 1]; each side keeps at least 1 - alpha/2, and moving either end inwards by one rank
    breaks it."""
    for q in LEVELS:
        a = 0.025
        low, high = order_statistic_ranks(n, q, 0.95)
        if low is not None:
            assert stats.binom.sf(low - 1, n, q) >= 1 - a
            assert low == n or stats.binom.sf(low, n, q) < 1 - a
        else:
            assert stats.binom.sf(0, n, q) < 1 - a
        if high is not None:
            assert stats.binom.cdf(high - 1, n, q) >= 1 - a
            assert high == 1 or stats.binom.cdf(high - 2, n, q) < 1 - a
        else:
            assert stats.binom.cdf(n - 1, n, q) < 1 - a


def test_minimum_replicas_follow_the_closed_form():
    """The 0.999 quantile needs q^n <= 0.025, n >= ln(0.025)/ln(0.999) = 3687.1, so 3688 replicas at 0.95
    two-sided; the 0.99 quantile ln(0.025)/ln(0.99) = 367.0 -> 368; the median max(ln 0.025 / ln 0.5) -> 6.
    One replica fewer leaves the interval open (closed form; the ranks are checked above)."""
    for q, want in ((0.999, 3688), (0.99, 368), (0.5, 6), (0.9, 36)):
        assert quantile_min_replicas(q, 0.95) == want == math.ceil(math.log(0.025) / math.log(max(q, 1 - q)))
        assert all(r is not None for r in order_statistic_ranks(want, q, 0.95))
        assert None in order_statistic_ranks(want - 1, q, 0.95)
    assert quantile_min_replicas(0.999, 0.95, "greater") == math.ceil(math.log(0.05) / math.log(0.001))


def test_coverage_by_simulation_on_continuous_and_integer_data():
    """The interval covers the true quantile in at least 95% of 4000 samples of 200 (exponential: x_q =
    -ln(1 - q); Poisson(3): scipy.stats.poisson.ppf). The test fails only if a 99.9% Clopper-Pearson upper
    bound on the coverage falls below 0.95 (probability <= 0.001 if the construction holds; seed fixed)."""
    from harness.stats import clopper_pearson

    rng = np.random.default_rng(36)
    for draw, truth, q in ((lambda size: rng.exponential(size=size), lambda q: -math.log1p(-q), 0.9),
                           (lambda size: rng.poisson(3.0, size=size), lambda q: stats.poisson.ppf(q, 3.0), 0.9),
                           (lambda size: rng.poisson(3.0, size=size), lambda q: stats.poisson.ppf(q, 3.0), 0.5)):
        samples = draw((4000, 200))
        low, high = order_statistic_ranks(200, q, 0.95)
        ordered = np.sort(samples, axis=1)
        covered = (ordered[:, low - 1] <= truth(q)) & (ordered[:, high - 1] >= truth(q))
        assert clopper_pearson(int(covered.sum()), covered.size, 0.999, "less").high >= 0.95


def test_the_estimate_is_the_order_statistic_of_rank_ceil_n_q():
    """Hyndman and Fan (1996), definition 1 (the inverse of the empirical distribution function), which is
    numpy's method="inverted_cdf"; ranks are read in decimal, so 4000 * 0.9 is rank 3600."""
    x = np.random.default_rng(1).standard_normal(4000)
    for q in LEVELS:
        assert quantile_interval(x, q).estimate == np.quantile(x, q, method="inverted_cdf")
    assert quantile_rank(4000, 0.9) == 3600 and quantile_rank(10, 0.05) == 1 and quantile_rank(3, 0.999) == 3


def test_bad_arguments_are_refused_in_one_line():
    for call, field in ((lambda: quantile_interval([], 0.5), "values"),
                        (lambda: quantile_interval([1.0, np.nan], 0.5), "values"),
                        (lambda: quantile_interval([1.0], 1.0), "q"),
                        (lambda: quantile_interval([1.0], 0.5, confidence=1.0), "confidence"),
                        (lambda: order_statistic_ranks(0, 0.5), "n"),
                        (lambda: quantile_interval([1.0], 0.5, alternative="both"), "alternative")):
        with pytest.raises(ConfigError, match=f"^{field}:") as err:
            call()
        assert "\n" not in str(err.value)
