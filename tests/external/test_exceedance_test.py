"""The two-sample exceedance test, Holm's procedure and the detectable rates, against scipy and closed forms.

Sources outside the project: scipy.stats.fisher_exact and scipy.stats.boschloo_exact (Fisher 1935; Boschloo
1970, Statistica Neerlandica 24:1-35), exact binomial sums with scipy.stats.binom, and the worked example of
Holm (1979, Scand. J. Statist. 6:65-70) recomputed by hand.
"""

import numpy as np
import pytest
from scipy import stats

from harness.errors import ConfigError
from harness.stats import (bonferroni, exceedance_critical, exceedance_detectable, exceedance_test, holm,
                           quantile_rank)

TABLES = [(0, 50, 0, 50), (3, 40, 0, 60), (12, 100, 4, 100), (5, 1000, 5, 1000), (40, 4000, 22, 4000),
          (9, 300, 15, 300), (250, 500, 200, 500), (1, 7, 6, 9), (4000, 4000, 3990, 4000)]


@pytest.mark.parametrize("new, new_n, base, base_n", TABLES)
def test_pvalues_equal_scipy_fisher_exact(new, new_n, base, base_n):
    for alternative in ("greater", "less"):
        ours = exceedance_test(new, new_n, base, base_n, alternative)
        table = [[new, new_n - new], [base, base_n - base]]
        want = stats.fisher_exact(table, alternative=alternative).pvalue
        assert ours.pvalue == pytest.approx(want, rel=1e-9, abs=1e-300)
        assert ours.new_rate == new / new_n and ours.base_rate == base / base_n


def test_never_less_conservative_than_boschloo():
    """Boschloo's test is uniformly more powerful than Fisher's (Boschloo 1970): its p-value is never larger.
    Checked on small tables with scipy.stats.boschloo_exact (a finer grid than its default for the sup)."""
    for new, new_n, base, base_n in [(7, 15, 2, 15), (3, 20, 0, 20), (10, 30, 4, 25), (1, 12, 5, 12)]:
        for alternative in ("greater", "less"):
            ours = exceedance_test(new, new_n, base, base_n, alternative).pvalue
            theirs = stats.boschloo_exact([[new, base], [new_n - new, base_n - base]], alternative=alternative,
                                          n=64).pvalue
            assert ours >= theirs - 1e-9


@pytest.mark.parametrize("new_n, base_n, alpha", [(40, 60, 0.05), (200, 200, 0.01), (1000, 1000, 0.001)])
def test_exact_size_is_at_most_alpha_for_every_common_rate(new_n, base_n, alpha):
    """Two independent binomials with one rate s and a threshold fixed in advance: P[reject] summed exactly
    over both counts (scipy.stats.binom) stays <= alpha for s on a fine grid, in both directions."""
    crit_up = np.array([exceedance_critical(new_n, b, base_n, alpha, "greater") or new_n + 1
                        for b in range(base_n + 1)])
    crit_down = np.array([-1 if (d := exceedance_critical(new_n, b, base_n, alpha, "less")) is None else d
                          for b in range(base_n + 1)])
    b = np.arange(base_n + 1)
    for s in np.concatenate([np.geomspace(1e-4, 0.5, 60), 1 - np.geomspace(1e-4, 0.5, 60)]):
        pb = stats.binom.pmf(b, base_n, s)
        up = float(pb @ stats.binom.sf(crit_up - 1, new_n, s))
        down = float(pb @ np.where(crit_down >= 0, stats.binom.cdf(crit_down, new_n, s), 0.0))
        assert up <= alpha * (1 + 1e-9) and down <= alpha * (1 + 1e-9), s


def test_critical_counts_bound_the_rejection_region():
    """Every count from c up rejects and c - 1 does not (and the mirror image for "less"), checked against the
    p-values of scipy.stats.fisher_exact."""
    for base in (0, 3, 40, 400):
        c = exceedance_critical(1000, base, 1000, 0.001, "greater")
        d = exceedance_critical(1000, base, 1000, 0.001, "less")

        def p(a, alt, base=base):
            return stats.fisher_exact([[a, 1000 - a], [base, 1000 - base]], alternative=alt).pvalue

        assert p(c, "greater") <= 0.001 < p(c - 1, "greater") and p(1000, "greater") <= 0.001
        if d is None:
            assert p(0, "less") > 0.001
        else:
            assert p(d, "less") <= 0.001 < p(d + 1, "less") and p(0, "less") <= 0.001


@pytest.mark.parametrize("base, alternative", [(0, "greater"), (10, "greater"), (400, "greater"),
                                               (40, "less"), (400, "less")])
def test_detectable_rate_has_exactly_the_stated_power(base, alternative):
    """At the detectable rate the exact power (scipy.stats.binom over the rejection region) is the stated 0.8;
    a rate 2% closer to the baseline's has less."""
    n, alpha = 4000, 0.05 / 40
    s = exceedance_detectable(base, n, n, alpha, 0.8, alternative)
    crit = exceedance_critical(n, base, n, alpha, alternative)

    def power(rate):
        return stats.binom.sf(crit - 1, n, rate) if alternative == "greater" else stats.binom.cdf(crit, n, rate)

    assert power(s) == pytest.approx(0.8, abs=1e-9)
    closer = s - 0.02 * (s - base / n)
    assert power(closer) < 0.8


def test_detectable_rate_edges():
    """No improvement is detectable from a base count of 0; a base count of 0 of 4000 makes about ten new
    exceedances significant at 0.001 (closed form: the hypergeometric p-value of a new exceedances and none in
    the base is C(4000, a) / C(8000, a) ~ 2^-a)."""
    assert exceedance_detectable(0, 4000, 4000, 0.001, alternative="less") is None
    assert exceedance_critical(4000, 0, 4000, 0.001) == 10  # 2^-10 < 0.001 < 2^-9
    assert exceedance_detectable(0, 4000, 4000, 0.001) == pytest.approx(stats.beta.ppf(0.8, 10, 3991))


def test_holm_matches_a_hand_worked_example_and_contains_bonferroni():
    """Holm (1979): p = (0.01, 0.04, 0.03, 0.005) at alpha = 0.05: sorted 0.005 <= 0.0125, 0.01 <= 0.0167,
    0.03 > 0.025 stops: the first and fourth are rejected. Holm rejects all Bonferroni rejects."""
    assert holm([0.01, 0.04, 0.03, 0.005], 0.05).tolist() == [True, False, False, True]
    assert holm([0.01, 0.02, 0.03, 0.04], 0.1).tolist() == [True, True, True, True]
    rng = np.random.default_rng(1979)
    for _ in range(200):
        p = rng.random(12) ** 4
        assert np.all(holm(p, 0.05) >= (p <= 1 - bonferroni(0.95, 12)))
    assert holm([], 0.05).size == 0


def test_fisher_on_in_sample_thresholds_exceeds_its_level_under_ties():
    """Why profiles count exceedances in a second batch. If the baseline's count came from the same replicas
    that chose the threshold v (the sample median), Fisher's test would exceed its level on tied data: for a
    normal metric rounded to steps of 2 sd (two atoms hold 95% of the mass, the median sits between them),
    1000 + 1000 replicas, alpha = 0.05, the exact size (summed over the multinomial counts below, at and
    above each atom with scipy.stats.binom) is 0.0603, 1.21 alpha."""
    n, alpha, q = 1000, 0.05, 0.5
    edges = np.arange(-8.0, 10.0, 2.0)
    pmf = np.diff(stats.norm.cdf(edges))
    k = quantile_rank(n, q)
    crit = np.array([exceedance_critical(n, b, n, alpha) or n + 1 for b in range(n - k + 1)])
    top = np.cumsum(pmf)
    size = 0.0
    b = np.arange(n - k + 1)
    for mass, upto in zip(pmf, top):
        above = max(0.0, 1.0 - upto)
        # the k-th smallest baseline value is this atom, with b baseline values above it
        p_b = stats.binom.pmf(b, n, above) * stats.binom.sf(n - b - k, n - b, min(1.0, mass / upto))
        size += float(p_b @ stats.binom.sf(crit - 1, n, above))
    assert size == pytest.approx(0.0603, abs=5e-4)


def test_bad_counts_are_refused_in_one_line():
    for call, field in ((lambda: exceedance_test(5, 4, 0, 10), "new"), (lambda: exceedance_test(1, 4, 11, 10), "base"),
                        (lambda: exceedance_test(1, 0, 1, 10), "new_n"),
                        (lambda: exceedance_test(1, 4, 1, 10, "two-sided"), "alternative"),
                        (lambda: holm([0.5, 1.5], 0.05), "pvalues"),
                        (lambda: exceedance_detectable(1, 10, 10, 0.05, power=1.0), "power")):
        with pytest.raises(ConfigError, match=f"^{field}:"):
            call()
