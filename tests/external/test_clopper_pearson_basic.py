"""Clopper-Pearson bounds against scipy.stats.binomtest(...).proportion_ci(method="exact")."""

import pytest
from scipy import stats

from harness.stats import clopper_pearson


@pytest.mark.parametrize("k, n", [(0, 1), (0, 50), (3, 50), (25, 50), (50, 50), (7, 1000), (999, 1000)])
@pytest.mark.parametrize("confidence", [0.9, 0.95, 0.999])
def test_two_sided_matches_scipy(k, n, confidence):
    ref = stats.binomtest(k, n).proportion_ci(confidence_level=confidence, method="exact")
    got = clopper_pearson(k, n, confidence)
    assert got.low == pytest.approx(ref.low, abs=1e-12) and got.high == pytest.approx(ref.high, abs=1e-12)


@pytest.mark.parametrize("alternative", ["greater", "less"])
def test_one_sided_matches_scipy(alternative):
    for k, n in [(0, 30), (4, 30), (30, 30)]:
        ref = stats.binomtest(k, n, alternative=alternative).proportion_ci(confidence_level=0.95, method="exact")
        got = clopper_pearson(k, n, 0.95, alternative)
        assert got.low == pytest.approx(ref.low, abs=1e-12) and got.high == pytest.approx(ref.high, abs=1e-12)


def test_rule_of_three():
    """Zero events in N trials: the one-sided 95% upper bound is 1 - 0.05**(1/N) exactly
    (closed form), close to 3/N (Hanley and Lippman-Hand 1983): within 2% for N >= 100."""
    for N in (100, 1000, 10_000):
        high = clopper_pearson(0, N, 0.95, "less").high
        assert high == pytest.approx(1 - 0.05 ** (1 / N), rel=1e-10)
        assert high == pytest.approx(3 / N, rel=0.02)


def test_grid_matches_scipy_exact():
    """k for n in a grid (every k up to n = 20), at several confidences and all three alternatives, equals
    scipy.stats.binomtest(k, n).proportion_ci(method="exact") (Clopper and Pearson 1934)."""
    for n in (1, 2, 3, 7, 20, 201):
        for k in (range(n + 1) if n <= 20 else (0, 1, 2, 17, 100, 199, 200, 201)):
            for confidence in (0.8, 0.95, 0.99):
                for alternative in ("two-sided", "greater", "less"):
                    ref = stats.binomtest(k, n, alternative=alternative).proportion_ci(
                        confidence_level=confidence, method="exact")
                    got = clopper_pearson(k, n, confidence, alternative)
                    assert (got.low, got.high) == pytest.approx((ref.low, ref.high), abs=1e-10), (k, n)


def test_closed_forms_at_the_edges():
    """k = 0: upper = 1 - (alpha/2)^(1/n); k = n: lower = (alpha/2)^(1/n) (closed forms of the beta
    quantiles with one parameter 1; Clopper and Pearson 1934)."""
    for n in (1, 10, 500):
        assert clopper_pearson(0, n, 0.95).high == pytest.approx(1 - 0.025 ** (1 / n), rel=1e-10)
        assert clopper_pearson(n, n, 0.95).low == pytest.approx(0.025 ** (1 / n), rel=1e-10)
