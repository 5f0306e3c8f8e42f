"""Regret accounting against published order-statistic values.

On i.i.d. Bernoulli(1/2) losses no learner can beat chance, so E[played loss] =
T/2 exactly and E[regret] = E[max_i (T/2 - L_T(i))] with L_T(i) ~ Bin(T, 1/2)
independent. As T grows this tends to (sqrt(T)/2) E[max of n standard
normals]. Checked three ways against sources outside the project:
- Harter (1961), "Expected values of normal order statistics", Biometrika 48,
  Table 1: E[max of n] = 0.5642 (n=2), 1.5388 (n=10), 2.5076 (n=100);
- the same expectation by scipy numerical integration;
- the exact finite-T value from scipy.stats.binom.
"""

import math

import numpy as np
import pytest
from scipy import integrate, stats

import adversaries
from harness import run
from harness.learners import get as get_learner

HARTER_1961 = {2: 0.5642, 10: 1.5388, 100: 2.5076}  # Harter 1961, Table 1


def expected_max_normal(n: int) -> float:
    f = lambda x: x * n * stats.norm.pdf(x) * stats.norm.cdf(x) ** (n - 1)  # noqa: E731
    return integrate.quad(f, -12, 12, limit=200)[0]


def exact_expected_regret(T: int, n: int) -> float:
    """E[T/2 - min_i L_i] with L_i iid Bin(T, 1/2): E[min] = sum_k P[min > k] = sum_k sf(k)^n."""
    k = np.arange(T + 1)
    return T / 2 - float(np.sum(stats.binom.sf(k, T, 0.5) ** n))


@pytest.mark.parametrize("n", [2, 10, 100])
def test_harter_table_equals_numerical_integration(n):
    assert abs(expected_max_normal(n) - HARTER_1961[n]) < 5e-5


@pytest.mark.parametrize("n", [2, 10, 100])
def test_exact_binomial_value_tends_to_the_normal_limit(n):
    """At T = 10^4 the finite-T value is within 1% of (sqrt(T)/2) E[max] (Harter 1961)."""
    T = 10_000
    assert exact_expected_regret(T, n) == pytest.approx(math.sqrt(T) / 2 * HARTER_1961[n], rel=0.01)


CASES = [("hedge", 2, 2000), ("ftl", 2, 2000), ("ftpl", 2, 2000), ("hedge", 10, 2000), ("ftl", 10, 2000),
         ("ftpl", 10, 2000), ("ftl", 100, 1200), ("hedge", 100, 600)]


@pytest.mark.parametrize("name, n, replicas", CASES)
def test_mean_regret_matches_order_statistics(name, n, replicas):
    """T = 10^4, one sequence per replica. The replicas' mean regret must lie within
    4 standard errors of the exact value (false-failure probability 6e-5 per case, 5e-4
    for the 8 cases) and within 4 SE + 1% of the normal-limit value from Harter (1961)."""
    T = 10_000
    res = run(get_learner(name), adversaries.get("bernoulli", p=0.5, shared=False), T, n,
              replicas=replicas, seed=1961 + n)
    mean = res.regret.mean()
    se = res.regret.std(ddof=1) / math.sqrt(replicas)
    assert abs(mean - exact_expected_regret(T, n)) <= 4 * se
    limit = math.sqrt(T) / 2 * HARTER_1961[n]
    assert abs(mean - limit) <= 4 * se + 0.01 * limit
