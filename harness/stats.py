"""Confidence bounds for the verdicts.

Each routine returns a small result object (estimate, interval, method,
reference), in the manner of scipy.stats.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize as _optimize
from scipy import special as _special
from scipy import stats as _st

from . import validate
from .errors import ConfigError

ALTERNATIVES = ("two-sided", "greater", "less")


@dataclass(frozen=True)
class Interval:
    """An estimate with a confidence interval.

    ``alternative="greater"`` gives a lower bound (``high`` = the parameter's
    upper limit), ``"less"`` an upper bound (``low`` = its lower limit).
    """

    estimate: float
    low: float
    high: float
    confidence: float
    method: str
    reference: str

    def as_dict(self) -> dict:
        return {"estimate": self.estimate, "low": self.low, "high": self.high, "confidence": self.confidence,
                "method": self.method, "reference": self.reference}


def clopper_pearson(k: int, n: int, confidence: float = 0.95, alternative: str = "two-sided") -> Interval:
    """Exact (Clopper-Pearson) interval for a binomial proportion from k successes in n trials.

    Two-sided: [B(a/2; k, n-k+1), B(1-a/2; k+1, n-k)] with B the beta quantile
    and a = 1 - confidence; one-sided bounds put all of a on one side
    (Clopper and Pearson 1934, Biometrika 26:404-413). Coverage is at least
    ``confidence`` for every true proportion.
    """
    n = validate.positive_int("n", n)
    k = validate.nonneg_int("k", k)
    if k > n:
        raise ConfigError(f"k: must be at most n={n}, got {k}")
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    validate.choice("alternative", alternative, ALTERNATIVES)
    alpha = 1.0 - confidence
    tail = alpha / 2 if alternative == "two-sided" else alpha
    low = 0.0 if k == 0 or alternative == "less" else float(_st.beta.ppf(tail, k, n - k + 1))
    high = 1.0 if k == n or alternative == "greater" else float(_st.beta.ppf(1 - tail, k + 1, n - k))
    return Interval(estimate=k / n, low=low, high=high, confidence=confidence,
                    method=f"Clopper-Pearson exact ({alternative})",
                    reference="Clopper and Pearson (1934), Biometrika 26:404-413")


# -- multiplicity ---------------------------------------------------------------


def bonferroni(confidence: float, tests: int) -> float:
    """Per-test confidence so that ``tests`` statements hold together with
    probability at least ``confidence``: 1 - (1 - confidence) / tests.

    Valid under any dependence between the tests (Bonferroni's inequality,
    the union bound; Dunn 1961, JASA 56:52-64).
    """
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    tests = validate.positive_int("tests", tests)
    return 1.0 - (1.0 - confidence) / tests


# -- anytime-valid sequential tests -------------------------------------------------

DECISIONS = ("above", "below", "undecided")


@dataclass(frozen=True)
class SequentialTest(Interval):
    """An anytime-valid confidence interval, and what it says about a threshold.

    Observations are read in order; sampling stops at the first ``n`` where
    the confidence sequence excludes ``threshold``. ``decision`` is
    ``"above"`` (the parameter is shown above the threshold), ``"below"``, or
    ``"undecided"`` when all ``available`` observations were used without
    excluding it. ``[low, high]`` is the confidence sequence at ``n``: it
    covers the parameter with probability at least ``confidence`` whatever
    rule chose ``n``, so stopping early inflates no error.
    """

    threshold: float
    decision: str
    n: int
    available: int

    def as_dict(self) -> dict:
        out = super().as_dict()
        out.update(threshold=self.threshold, decision=self.decision, n=self.n, available=self.available)
        return out


RATE_METHOD = "beta-binomial mixture confidence sequence"
RATE_REFERENCE = ("Robbins (1970), Ann. Math. Statist. 41:1397-1409; Lai (1976), Ann. Statist. 4:265-280; "
                  "Howard, Ramdas, McAuliffe and Sekhon (2021), Ann. Statist. 49:1055-1080")


def rate_prior(threshold: float) -> tuple[float, float]:
    """The mixing prior Beta(1, (1 - threshold) / threshold): mean ``threshold``.

    Any prior gives a valid test; this one puts its mass where rates that
    matter lie (near the threshold, a few times above or below), which by
    simulation needs the fewest replicas to decide at 2x and 1/2x the
    threshold among Beta(k*threshold, k*(1-threshold)) priors, k in 2..400,
    and Beta(1/2, 1/2) or Beta(1, 1).
    """
    return 1.0, (1.0 - threshold) / threshold


def _log_mixture(successes, trials, p, a, b):
    """log M_t(p): the Beta(a, b) mixture of binomial likelihoods over the likelihood at p."""
    return (_special.betaln(a + successes, b + trials - successes) - _special.betaln(a, b)
            - _special.xlogy(successes, p) - _special.xlog1py(trials - successes, -p))


def rate_sequence(outcomes, threshold: float, confidence: float = 0.95, prior=None,
                  stop: bool = True) -> SequentialTest:
    r"""Anytime-valid test of a Bernoulli rate against ``threshold``, stopping at the first decision.

    With S_t successes in t trials and a Beta(a, b) prior,

        M_t(p) = B(a + S_t, b + t - S_t) / B(a, b) / (p^S_t (1 - p)^(t - S_t))

    is a nonnegative martingale with mean 1 when the rate is p, so by Ville's
    inequality P[exists t: M_t(p) >= 1/alpha] <= alpha (Robbins 1970; Lai
    1976; Howard et al. 2021, beta-binomial mixture). The confidence sequence
    is C_t = {p : M_t(p) < 1/alpha}, an interval around S_t/t because log M_t
    is convex in p with its minimum (<= 0) at S_t/t.

    Sampling stops at the first t with M_t(threshold) >= 1/alpha, i.e. the
    first t at which C_t excludes ``threshold``. The direction follows S_t/t.
    A wrong "below" when the rate is >= threshold (or a wrong "above" when it
    is <= threshold) implies M_t(rate) >= M_t(threshold) >= 1/alpha, so each
    has probability at most alpha = 1 - confidence, and at the threshold
    itself both together have at most alpha: one alpha buys both directions.

    ``stop=False`` reads every observation and reports C_n at the end (a
    fixed time is a stopping time too, so it is as valid).
    """
    x = np.asarray(outcomes)
    if x.dtype != bool:
        if x.size and not np.isin(x, (0, 1)).all():
            raise ConfigError("outcomes: must be booleans or 0/1")
        x = x.astype(bool)
    x = x.ravel()
    threshold = validate.real("threshold", threshold, low=0.0, high=1.0, low_open=True, high_open=True)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    a, b = rate_prior(threshold) if prior is None else prior
    level = math.log(1.0 / (1.0 - confidence))
    available = int(x.size)
    if available == 0:
        return SequentialTest(estimate=math.nan, low=0.0, high=1.0, confidence=confidence, method=RATE_METHOD,
                              reference=RATE_REFERENCE, threshold=threshold, decision="undecided", n=0,
                              available=0)
    trials = np.arange(1, available + 1)
    successes = np.cumsum(x)
    evidence = _log_mixture(successes, trials, threshold, a, b)
    hits = np.flatnonzero(evidence >= level) if stop else np.flatnonzero(evidence[-1:] >= level) + available - 1
    n = int(hits[0]) + 1 if hits.size else available
    k = int(successes[n - 1])
    decision = "undecided" if not hits.size else ("above" if k > threshold * n else "below")
    low, high = _rate_interval(k, n, a, b, level)
    return SequentialTest(estimate=k / n, low=low, high=high, confidence=confidence, method=RATE_METHOD,
                          reference=RATE_REFERENCE, threshold=threshold, decision=decision, n=n,
                          available=available)


def _rate_interval(k: int, n: int, a: float, b: float, level: float) -> tuple[float, float]:
    """{p : log M_n(p) < level}, found by bracketing on each side of k/n."""
    def f(p):
        return float(_log_mixture(k, n, p, a, b)) - level

    tiny = 1e-300
    centre = k / n
    low = 0.0 if k == 0 else _optimize.brentq(f, tiny, centre, xtol=1e-15, rtol=1e-12)
    high = 1.0 if k == n else _optimize.brentq(f, centre, 1.0 - 1e-16, xtol=1e-15, rtol=1e-12)
    return float(low), float(high)


MEAN_METHOD = "predictable plug-in empirical Bernstein confidence sequence"
MEAN_REFERENCE = ("Waudby-Smith and Ramdas (2024), J. R. Statist. Soc. B 86:1-27, PrPl-EB confidence sequence; "
                  "Howard, Ramdas, McAuliffe and Sekhon (2021), Ann. Statist. 49:1055-1080")
# Largest bet. Waudby-Smith and Ramdas suggest 1/2 or 3/4; regret and switch
# counts scaled to [0, 1] by their worst-case range have tiny variance, where
# the bet sits at this cap, so the larger suggested value decides sooner.
MEAN_TRUNCATION = 0.75


def mean_sequence(values, threshold: float, low: float, high: float, confidence: float = 0.95,
                  truncation: float = MEAN_TRUNCATION) -> SequentialTest:
    r"""Anytime-valid test of a bounded mean against ``threshold``, stopping at the first decision.

    Values must lie in the known range [low, high]; they are scaled to
    x_i in [0, 1]. With the predictable plug-in bets

        lambda_t = min(c, sqrt(2 ln(2/alpha) / (sigma2_{t-1} t ln(1 + t)))),
        mu_t = (1/2 + sum_{i<=t} x_i) / (t + 1),
        sigma2_t = (1/4 + sum_{i<=t} (x_i - mu_i)^2) / (t + 1),

    the empirical-Bernstein confidence sequence is

        sum lambda_i x_i / sum lambda_i
            +- (ln(2/alpha) + sum (x_i - mu_{i-1})^2 psi(lambda_i)) / sum lambda_i,
        psi(l) = -ln(1 - l) - l,

    each side at level alpha/2 (Waudby-Smith and Ramdas 2024, predictable
    plug-in empirical Bernstein CS, from the supermartingale of Howard et al.
    2021). The running intersection is kept. Sampling stops at the first t
    where it excludes ``threshold``; a wrong direction has probability at
    most alpha/2 and the interval covers the mean with probability at least
    ``confidence`` at any stopping time.
    """
    v = np.asarray(values, dtype=float).ravel()
    low = validate.real("low", low)
    high = validate.real("high", high)
    if not high > low:
        raise ConfigError(f"high: must exceed low={low:g}, got {high:g}")
    threshold = validate.real("threshold", threshold)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    truncation = validate.real("truncation", truncation, low=0.0, high=1.0, low_open=True, high_open=True)
    if v.size and not (np.all(np.isfinite(v)) and v.min() >= low and v.max() <= high):
        raise ConfigError(f"values: must lie in the stated range [{low:g}, {high:g}]")
    width = high - low
    available = int(v.size)
    if available == 0:
        return SequentialTest(estimate=math.nan, low=low, high=high, confidence=confidence, method=MEAN_METHOD,
                              reference=MEAN_REFERENCE, threshold=threshold, decision="undecided", n=0,
                              available=0)
    x = (v - low) / width
    theta = (threshold - low) / width
    lower, upper = _mean_bounds(x, math.log(2.0 / (1.0 - confidence)), truncation)
    above = np.flatnonzero(lower > theta)
    below = np.flatnonzero(upper < theta)
    first = min(above[0] if above.size else available, below[0] if below.size else available)
    decided = first < available
    n = int(first) + 1 if decided else available
    decision = "undecided" if not decided else ("above" if above.size and above[0] == first else "below")
    return SequentialTest(estimate=float(v[:n].mean()), low=low + width * float(lower[n - 1]),
                          high=low + width * float(upper[n - 1]), confidence=confidence, method=MEAN_METHOD,
                          reference=MEAN_REFERENCE, threshold=threshold, decision=decision, n=n,
                          available=available)


def _mean_bounds(x: np.ndarray, level: float, truncation: float) -> tuple[np.ndarray, np.ndarray]:
    """Running-intersection PrPl-EB bounds for x in [0, 1] at every t (see :func:`mean_sequence`);
    ``level`` = ln(2/alpha)."""
    t = np.arange(1, x.size + 1, dtype=float)
    mu = (0.5 + np.cumsum(x)) / (t + 1)
    sigma2 = (0.25 + np.cumsum((x - mu) ** 2)) / (t + 1)
    mu_prev = np.concatenate(([0.5], mu[:-1]))
    sigma2_prev = np.concatenate(([0.25], sigma2[:-1]))
    lam = np.minimum(truncation, np.sqrt(2.0 * level / (sigma2_prev * t * np.log1p(t))))
    psi = -np.log1p(-lam) - lam
    weight = np.cumsum(lam)
    centre = np.cumsum(lam * x) / weight
    margin = (level + np.cumsum((x - mu_prev) ** 2 * psi)) / weight
    lower = np.maximum.accumulate(np.clip(centre - margin, 0.0, 1.0))
    upper = np.minimum.accumulate(np.clip(centre + margin, 0.0, 1.0))
    return lower, upper


def fixed_sample_size(threshold: float, rate: float, confidence: float = 0.95, power: float = 0.9,
                      limit: int = 10_000_000) -> int:
    """Smallest N at which the exact one-sided binomial test of rate = threshold,
    at level 1 - confidence, detects ``rate`` with probability at least ``power``.

    The test rejects "rate <= threshold" when K >= c_N (c_N the smallest count
    with P[Bin(N, threshold) >= c_N] <= alpha) if ``rate`` > threshold, and
    "rate >= threshold" when K <= c_N (the largest count with
    P[Bin(N, threshold) <= c_N] <= alpha) otherwise. Power is not monotone in
    N (the sawtooth of discrete tests), so every N up to the first that
    reaches ``power`` is checked. This is the fixed-sample design the
    sequential tests are compared with (common practice).
    """
    threshold = validate.real("threshold", threshold, low=0.0, high=1.0, low_open=True, high_open=True)
    rate = validate.real("rate", rate, low=0.0, high=1.0)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    power = validate.real("power", power, low=0.0, high=1.0, low_open=True, high_open=True)
    if rate == threshold:
        raise ConfigError("rate: must differ from threshold; no test has power at the threshold itself")
    alpha = 1.0 - confidence

    def powers(ns):
        if rate > threshold:
            k = _st.binom.isf(alpha, ns, threshold)          # P[K > k] <= alpha
            k = np.where(_st.binom.sf(k - 1, ns, threshold) <= alpha, k - 1, k)  # isf may be one step high
            return _st.binom.sf(k, ns, rate)
        k = _st.binom.ppf(alpha, ns, threshold)              # smallest k with P[K <= k] >= alpha
        k = np.where(_st.binom.cdf(k, ns, threshold) <= alpha, k, k - 1)
        return _st.binom.cdf(k, ns, rate)

    hi = 1
    while powers(np.array([hi]))[0] < power:
        hi *= 2
        if hi > limit:
            raise ConfigError(f"power: not reached with up to {limit} trials")
    ns = np.arange(1, hi + 1)
    return int(ns[np.argmax(powers(ns) >= power)])


# -- quantiles -----------------------------------------------------------------------

QUANTILE_METHOD = "order-statistic interval (distribution-free, binomial counts)"
QUANTILE_REFERENCE = ("Thompson (1936), Ann. Math. Statist. 7:122-128; Conover (1999), Practical Nonparametric "
                      "Statistics, 3rd ed., Section 3.2")


def quantile_interval(values, q: float, confidence: float = 0.95, alternative: str = "two-sided") -> Interval:
    """Distribution-free confidence interval for the q-quantile from i.i.d. values.

    With X_(1) <= ... <= X_(N) sorted and B ~ Binomial(N, q), the lower end is
    X_(l) with l the smallest k such that P[B <= k] >= a (a = 1 - confidence,
    halved when two-sided), and the upper end is X_(u + 1) with u the
    smallest k such that P[B > k] <= a. Then P[X_(l) > xi_q] < a and
    P[X_(u+1) < xi_q] <= a for every distribution, continuous or not
    (Thompson 1936; Conover 1999, Section 3.2). These are the indices
    ``scipy.stats.quantile_test(...).confidence_interval()`` uses; where
    there are too few values for an end, it is -inf or +inf (scipy gives
    nan). ``estimate`` is the sample quantile ``numpy.quantile(values, q,
    method="inverted_cdf")`` (an order statistic, like the ends).
    """
    x = np.sort(np.asarray(values, dtype=float).ravel())
    if x.size == 0 or not np.all(np.isfinite(x)):
        raise ConfigError("values: give at least one finite value")
    q = validate.real("q", q, low=0.0, high=1.0, low_open=True, high_open=True)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    validate.choice("alternative", alternative, ALTERNATIVES)
    n = x.size
    tail = (1.0 - confidence) / (2 if alternative == "two-sided" else 1)
    dist = _st.binom(n, q)
    low, high = -math.inf, math.inf
    if alternative in ("two-sided", "greater"):
        k = int(dist.ppf(tail)) - 1          # 0-based index of X_(l)
        low = float(x[k]) if k >= 0 else -math.inf
    if alternative in ("two-sided", "less"):
        k = int(dist.isf(tail))               # 0-based index of X_(u+1)
        high = float(x[k]) if k < n else math.inf
    return Interval(estimate=float(np.quantile(x, q, method="inverted_cdf")), low=low, high=high,
                    confidence=confidence, method=f"{QUANTILE_METHOD} ({alternative})", reference=QUANTILE_REFERENCE)
