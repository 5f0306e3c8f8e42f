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


def holm(pvalues, alpha: float) -> np.ndarray:
    """Holm's step-down rejections at family-wise level ``alpha``: sort the
    p-values, reject the i-th smallest (i = 1..m) while p_(i) <= alpha / (m - i + 1),
    and stop at the first that is not.

    Controls the family-wise error at ``alpha`` under any dependence, and
    rejects everything Bonferroni (alpha / m each) rejects (Holm 1979, Scand.
    J. Statist. 6:65-70). Meant for a family of hypotheses of one direction
    (the directional caveat in DEVELOPERS.md, "Certification", is about
    mixing both directions in one family). Returns a boolean array in the
    input order.
    """
    p = np.asarray(pvalues, dtype=float).ravel()
    alpha = validate.real("alpha", alpha, low=0.0, high=1.0, low_open=True, high_open=True)
    if p.size and not (np.all(p >= 0) and np.all(p <= 1)):
        raise ConfigError("pvalues: must lie in [0, 1]")
    order = np.argsort(p, kind="stable")
    levels = alpha / (p.size - np.arange(p.size))
    passed = p[order] <= levels
    stop = int(np.argmin(passed)) if not passed.all() else p.size
    out = np.zeros(p.size, dtype=bool)
    out[order[:stop]] = True
    return out


# -- order statistics: quantile intervals ---------------------------------------------

QUANTILE_METHOD = "order-statistic interval (distribution-free, binomial counts)"
QUANTILE_REFERENCE = ("Thompson (1936), Ann. Math. Statist. 7:122-128; Conover (1999), Practical Nonparametric "
                      "Statistics, 3rd ed., Section 3.2; David and Nagaraja (2003), Order Statistics, 3rd ed., "
                      "Section 7.1")


@dataclass(frozen=True)
class QuantileInterval(Interval):
    """A sample quantile with a distribution-free confidence interval from order statistics.

    ``estimate`` is the order statistic of rank ``rank`` = ceil(n q) (1-based:
    the smallest value with at least a share q of the sample at or below it,
    an observed value, never an interpolation). ``low`` and ``high`` are the
    order statistics of ranks ``low_rank`` and ``high_rank``; an end the
    sample cannot provide at this confidence is -inf/inf and its rank None
    (for a one-sided interval the open side; for too few replicas, see
    :func:`quantile_min_replicas`).
    """

    quantile: float
    n: int
    rank: int
    low_rank: int | None
    high_rank: int | None
    alternative: str

    @property
    def complete(self) -> bool:
        """Whether every end the alternative asks for lies inside the sample."""
        return ((self.low_rank is not None or self.alternative == "less")
                and (self.high_rank is not None or self.alternative == "greater"))

    def as_dict(self) -> dict:
        out = super().as_dict()
        out.update(quantile=self.quantile, n=self.n, rank=self.rank, low_rank=self.low_rank,
                   high_rank=self.high_rank, alternative=self.alternative)
        return out


def quantile_rank(n: int, quantile: float) -> int:
    """ceil(n q), the 1-based rank of the sample q-quantile (Hyndman and Fan 1996, definition 1).

    n q is rounded to 9 decimals first, so 4000 * 0.9 (3600.0000000000005 in
    floating point) gives rank 3600, as the decimal reading intends.
    """
    return max(1, math.ceil(round(n * quantile, 9)))


def order_statistic_ranks(n: int, quantile: float, confidence: float = 0.95,
                          alternative: str = "two-sided") -> tuple[int | None, int | None]:
    r"""Ranks (1-based) of the order statistics bounding the q-quantile x_q at ``confidence``.

    With K ~ Binomial(n, q) and a the error allowed on a side (alpha/2
    two-sided, alpha one-sided):

    - lower end X_(l), l = the smallest k with P[K <= k] >= a (the binomial
      quantile), so P[K <= l - 1] < a and P[X_(l) <= x_q] >= P[K >= l] > 1 - a;
    - upper end X_(u), u - 1 = the smallest k with P[K > k] <= a, so that
      P[X_(u) >= x_q] >= P[K <= u - 1] >= 1 - a.

    Both inequalities hold for every distribution, continuous or not,
    because #{X_i <= x_q} ~ Binomial(n, F(x_q)) with F(x_q) >= q and
    #{X_i < x_q} ~ Binomial(n, F(x_q-)) with F(x_q-) <= q (Thompson 1936;
    David and Nagaraja 2003, Section 7.1). An end with no such rank in
    1..n is None. The ranks are found with scipy.stats.binom's ppf and isf,
    as scipy.stats.quantile_test does, so the two agree exactly, including
    where a binomial tail equals a to the last bit.
    """
    n = validate.positive_int("n", n)
    quantile = validate.real("quantile", quantile, low=0.0, high=1.0, low_open=True, high_open=True)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    validate.choice("alternative", alternative, ALTERNATIVES)
    a = (1.0 - confidence) / (2 if alternative == "two-sided" else 1)
    low = high = None
    if alternative != "less":
        k = int(_st.binom.ppf(a, n, quantile))
        low = k if k >= 1 else None
    if alternative != "greater":
        k = int(_st.binom.isf(a, n, quantile)) + 1
        high = k if k <= n else None
    return low, high


def quantile_min_replicas(quantile: float, confidence: float = 0.95, alternative: str = "two-sided") -> int:
    """The fewest replicas for which :func:`order_statistic_ranks` finds every end it is asked for.

    The extreme ranks need P[K >= n] = q^n <= a (upper end X_(n)) and
    P[K <= 0] = (1 - q)^n <= a (lower end X_(1)), with a as in
    :func:`order_statistic_ranks`: 3688 replicas for the 0.999 quantile at
    confidence 0.95 two-sided.
    """
    quantile = validate.real("quantile", quantile, low=0.0, high=1.0, low_open=True, high_open=True)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    validate.choice("alternative", alternative, ALTERNATIVES)
    a = (1.0 - confidence) / (2 if alternative == "two-sided" else 1)
    need = []
    if alternative != "less":
        need.append(math.log(a) / math.log1p(-quantile))
    if alternative != "greater":
        need.append(math.log(a) / math.log(quantile))
    n = max(1, math.floor(max(need)) - 1)
    while True:  # settle the rounding of the logarithms on the exact condition
        low, high = order_statistic_ranks(n, quantile, confidence, alternative)
        if (low is not None or alternative == "less") and (high is not None or alternative == "greater"):
            return n
        n += 1


def quantile_interval(values, q: float, confidence: float = 0.95,
                      alternative: str = "two-sided") -> QuantileInterval:
    """The sample q-quantile of i.i.d. ``values`` with its distribution-free confidence interval.

    See :func:`order_statistic_ranks` for the construction and
    :class:`QuantileInterval` for the fields: the ends are those of
    ``scipy.stats.quantile_test(values, p=q).confidence_interval(confidence)``
    (-inf/inf where scipy gives nan), the estimate is
    ``numpy.quantile(values, q, method="inverted_cdf")``
    (tests/external/test_quantile_intervals.py, tests/test_landscape_quantiles.py).
    """
    x = np.sort(np.asarray(values, dtype=float).ravel())
    if not x.size:
        raise ConfigError("values: empty; a quantile needs at least one value")
    if not np.all(np.isfinite(x)):
        raise ConfigError("values: must be finite numbers")
    q = validate.real("q", q, low=0.0, high=1.0, low_open=True, high_open=True)
    n = int(x.size)
    low_rank, high_rank = order_statistic_ranks(n, q, confidence, alternative)
    rank = quantile_rank(n, q)
    return QuantileInterval(
        estimate=float(x[rank - 1]), low=float(x[low_rank - 1]) if low_rank else -math.inf,
        high=float(x[high_rank - 1]) if high_rank else math.inf, confidence=confidence,
        method=f"{QUANTILE_METHOD} ({alternative})", reference=QUANTILE_REFERENCE, quantile=q, n=n,
        rank=rank, low_rank=low_rank, high_rank=high_rank, alternative=alternative)


# -- two-sample exceedance counts -----------------------------------------------------

EXCEEDANCE_METHOD = "Fisher's exact test, one-sided, on exceedance counts"
EXCEEDANCE_REFERENCE = ("Fisher (1935), J. R. Statist. Soc. 98:39-82; Lehmann and Romano (2005), Testing "
                        "Statistical Hypotheses, 3rd ed., Section 4.5; as scipy.stats.fisher_exact")


@dataclass(frozen=True)
class ExceedanceTest:
    """An exact comparison of two exceedance rates (new against base), in the manner of scipy.stats.

    ``alternative="greater"`` asks whether the new rate is higher, ``"less"``
    whether it is lower. ``estimate`` is new_rate - base_rate; ``pvalue`` the
    test's p-value; ``statistic`` the new count.
    """

    estimate: float
    pvalue: float
    statistic: int
    new: int
    new_n: int
    base: int
    base_n: int
    alternative: str
    method: str
    reference: str

    @property
    def new_rate(self) -> float:
        return self.new / self.new_n

    @property
    def base_rate(self) -> float:
        return self.base / self.base_n

    def as_dict(self) -> dict:
        return {"estimate": self.estimate, "pvalue": self.pvalue, "statistic": self.statistic, "new": self.new,
                "new_n": self.new_n, "base": self.base, "base_n": self.base_n, "alternative": self.alternative,
                "method": self.method, "reference": self.reference}


def _counts(new, new_n, base, base_n):
    new_n = validate.positive_int("new_n", new_n)
    base_n = validate.positive_int("base_n", base_n)
    new = validate.nonneg_int("new", new)
    base = validate.nonneg_int("base", base)
    if new > new_n:
        raise ConfigError(f"new: must be at most new_n={new_n}, got {new}")
    if base > base_n:
        raise ConfigError(f"base: must be at most base_n={base_n}, got {base}")
    return new, new_n, base, base_n


def _fisher_pvalues(new, new_n, base, base_n, alternative):
    """One-sided Fisher p-values for new counts ``new`` (an int or an array) against a fixed base count.

    Given the total t = new + base, the new count is hypergeometric: t
    exceedances among new_n + base_n replicas, new_n of them drawn.
    """
    total = np.asarray(new) + base
    if alternative == "greater":
        return _st.hypergeom.sf(np.asarray(new) - 1, new_n + base_n, total, new_n)
    return _st.hypergeom.cdf(new, new_n + base_n, total, new_n)


def exceedance_test(new: int, new_n: int, base: int, base_n: int, alternative: str = "greater") -> ExceedanceTest:
    r"""Exact one-sided test that the new exceedance rate is higher (``"greater"``) or lower (``"less"``).

    ``new`` of ``new_n`` new replicas and ``base`` of ``base_n`` baseline
    replicas exceed one threshold fixed in advance. Under the null
    hypothesis the two counts are independent binomials with the same rate;
    given their total t, the new count is hypergeometric (t successes among
    new_n + base_n, new_n drawn), free of the unknown rate. The p-value is
    its upper (``"greater"``) or lower (``"less"``) tail at the observed
    count: Fisher's exact test, which also holds its level when the new rate
    is lower (resp. higher) than the base rate, since the conditional law is
    monotone in the odds ratio (Lehmann and Romano 2005, Section 4.5).
    Equals ``scipy.stats.fisher_exact([[new, new_n - new], [base, base_n -
    base]], alternative)``; Boschloo's unconditional test
    (``scipy.stats.boschloo_exact``) is never less powerful but costs a
    supremum over the rate for every table.
    """
    new, new_n, base, base_n = _counts(new, new_n, base, base_n)
    if alternative not in ("greater", "less"):
        raise ConfigError(f"alternative: must be greater or less, got {alternative!r}")
    p = float(np.clip(_fisher_pvalues(new, new_n, base, base_n, alternative), 0.0, 1.0))
    return ExceedanceTest(estimate=new / new_n - base / base_n, pvalue=p, statistic=new, new=new, new_n=new_n,
                          base=base, base_n=base_n, alternative=alternative,
                          method=f"{EXCEEDANCE_METHOD} ({alternative})", reference=EXCEEDANCE_REFERENCE)


def exceedance_critical(new_n: int, base: int, base_n: int, alpha: float, alternative: str = "greater"):
    """The new counts :func:`exceedance_test` rejects at level ``alpha``, given the base count.

    ``"greater"``: the smallest count c that rejects, and every count above
    it does too (None if none rejects); ``"less"``: the largest count d that
    rejects, and every count below it does too (None if none rejects). The
    p-value is monotone in the new count for a fixed base count: one more
    exceedance adds one success to the urn, which raises the hypergeometric
    count by at most one (a coupling), so P[H' >= a + 1] <= P[H >= a] and
    P[H' <= a + 1] >= P[H <= a]. Bisection finds the boundary.
    """
    _, new_n, base, base_n = _counts(0, new_n, base, base_n)
    alpha = validate.real("alpha", alpha, low=0.0, high=1.0, low_open=True, high_open=True)

    def rejects(count):
        return float(_fisher_pvalues(count, new_n, base, base_n, alternative)) <= alpha

    if alternative == "greater":
        if not rejects(new_n):
            return None
        lo, hi = -1, new_n          # rejects(hi) holds, rejects(lo) does not (lo = -1 by convention)
        while hi - lo > 1:
            mid = (lo + hi) // 2
            lo, hi = (lo, mid) if rejects(mid) else (mid, hi)
        return hi
    if not rejects(0):
        return None
    lo, hi = 0, new_n + 1           # rejects(lo) holds, rejects(hi) does not
    while hi - lo > 1:
        mid = (lo + hi) // 2
        lo, hi = (mid, hi) if rejects(mid) else (lo, mid)
    return lo


def exceedance_detectable(base: int, base_n: int, new_n: int, alpha: float, power: float = 0.8,
                          alternative: str = "greater") -> float | None:
    """The smallest change the test can detect: a minimum detectable exceedance rate.

    ``"greater"``: the smallest new rate s that :func:`exceedance_test`
    flags as higher with probability at least ``power``, given the base
    count; ``"less"``: the largest s it flags as lower with that
    probability. None when no rate is detected (e.g. no count can be low
    enough). With the critical count c, P[Binomial(new_n, s) >= c] =
    I_s(c, new_n - c + 1) (the binomial-beta identity; common practice), so
    s is a beta quantile.
    """
    power = validate.real("power", power, low=0.0, high=1.0, low_open=True, high_open=True)
    crit = exceedance_critical(new_n, base, base_n, alpha, alternative)
    if crit is None:
        return None
    if alternative == "greater":
        return 0.0 if crit == 0 else float(_st.beta.ppf(power, crit, new_n - crit + 1))
    # P[Binomial(new_n, s) <= d] = 1 - I_s(d + 1, new_n - d), decreasing in s
    return 1.0 if crit == new_n else float(_st.beta.ppf(1.0 - power, crit + 1, new_n - crit))
