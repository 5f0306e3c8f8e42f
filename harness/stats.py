"""Confidence bounds for the verdicts.

Each routine returns a small result object (estimate, interval, method,
reference), in the manner of scipy.stats.
"""

from __future__ import annotations

from dataclasses import dataclass

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
