"""stats.quantile_interval, the landscape's intervals, against scipy's reference implementation.

scipy.stats.quantile_test(...).confidence_interval() (Conover 1999, Section 3.2; Thompson 1936) picks the
same order statistics; where there are too few values for an end scipy gives nan and we give +-inf.
"""

import math

import numpy as np
import pytest
from scipy import stats

from harness.errors import ConfigError
from harness.stats import quantile_interval


@pytest.mark.parametrize("n", [1, 7, 40, 301])
@pytest.mark.parametrize("q", [0.05, 0.5, 0.9, 0.99])
@pytest.mark.parametrize("alternative", ["two-sided", "less", "greater"])
def test_matches_scipy_quantile_test(n, q, alternative):
    rng = np.random.default_rng(n)
    for x in (rng.normal(size=n), rng.integers(0, 5, size=n).astype(float)):  # continuous and with ties
        for confidence in (0.8, 0.95):
            mine = quantile_interval(x, q, confidence, alternative)
            ref = stats.quantile_test(x, q=0.0, p=q, alternative=alternative).confidence_interval(confidence)
            for got, want in ((mine.low, ref.low), (mine.high, ref.high)):
                if math.isnan(want):
                    assert math.isinf(got)
                else:
                    assert got == want
            assert mine.estimate == float(np.quantile(x, q, method="inverted_cdf"))


def test_coverage_is_at_least_the_confidence():
    """Exact: for continuous data the two-sided interval misses the true quantile with probability
    B(l-1; N, q) + 1 - B(u; N, q) <= 1 - confidence (binomial counts, Conover 1999). Checked for the
    0.9-quantile of 128 exponentials from scipy.stats.binom, then by 2000 seeded draws: the observed miss
    rate lies within 4 standard errors of the exact value (false-failure probability < 1e-4)."""
    n, q, confidence = 128, 0.9, 0.95
    rng = np.random.default_rng(2024)
    truth = -math.log(1 - q)
    misses = 0
    for _ in range(2000):
        ci = quantile_interval(rng.exponential(size=n), q, confidence)
        misses += not (ci.low <= truth <= ci.high)
    dist = stats.binom(n, q)
    lo = int(dist.ppf(0.025))          # 1-based rank of the lower end
    hi = int(dist.isf(0.025)) + 1      # 1-based rank of the upper end
    exact_miss = dist.cdf(lo - 1) + dist.sf(hi - 1)
    assert exact_miss <= 1 - confidence
    se = math.sqrt(exact_miss * (1 - exact_miss) / 2000)
    assert abs(misses / 2000 - exact_miss) <= 4 * se


@pytest.mark.parametrize("args, text", [(([], 0.5), "at least one"), (([1.0, np.nan], 0.5), "finite"),
                                        (([1.0], 1.0), "q"), (([1.0], 0.5, 1.0), "confidence")])
def test_bad_input(args, text):
    with pytest.raises(ConfigError, match=text):
        quantile_interval(*args)
