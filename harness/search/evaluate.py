"""Scoring candidates and accepting counterexamples, with the error controlled.

Two stages, so the many candidates a search looks at cannot manufacture a
false counterexample:

1. **Screening.** Each candidate sequence is played by ``replicas`` replicas
   on a seed derived from the search seed and the candidate itself (so the
   same candidate always gets the same outcome, which Hypothesis' shrinker
   needs). The outcome gives a *score* that guides the search (how far the
   metric's (1 - delta) quantile, maximum or mean lies above the bound, in
   units of the bound) and a *screen*: the per-candidate test below at the
   search's confidence, with no correction. Screening decides only which
   candidates are worth confirming; its data never enter a verdict.
2. **Confirmation.** A screened-in candidate is played again on
   ``confirm_replicas`` fresh replicas, from a seed stream disjoint from
   every screening seed, and accepted only if the same test passes at level
   alpha_j = alpha * 6 / (pi^2 j^2) for the j-th confirmation of the search
   (alpha = 1 - confidence). Because the candidate is fixed before its
   confirmation data exist, each confirmation errs with probability at most
   alpha_j when the claim holds on that sequence, and sum_j alpha_j = alpha
   (Basel series), so by the union bound a search on a learner whose claim
   holds on every sequence returns a false counterexample with probability
   at most alpha, however many candidates it screened (a Bonferroni-type
   alpha-spending argument: common practice).

The test, by claim kind:

- ``high_probability`` (P[metric > bound] <= delta): the one-sided exact
  Clopper-Pearson lower bound on the violation rate exceeds delta.
- ``always``: one replica with metric > bound. This needs no statistics:
  the violating replica is replayable from its seed, so the screening run is
  its own evidence and the error probability is zero.
- ``expectation`` (E[metric] <= bound): the anytime-valid lower confidence
  bound on the mean metric (empirical-Bernstein confidence sequence,
  :func:`harness.stats.mean_sequence`) exceeds the bound; it needs the
  metric's range, which on a fixed sequence is known before play (see
  :func:`metric_range`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .. import stats
from ..claims import metric_range as claim_metric_range
from ..errors import ConfigError
from ..runner import run
from .sequence import Sequence

MAX_SEED = (1 << 63) - 1


def spend(alpha: float, j: int) -> float:
    """Level of the j-th confirmation (j = 1, 2, ...): alpha 6/(pi^2 j^2), summing to alpha."""
    return alpha * 6.0 / (math.pi ** 2 * j * j)


def derived_seed(seed: int, *key: int) -> int:
    """An integer run seed from the search seed and a key, via SeedSequence (common practice)."""
    state = np.random.SeedSequence(seed, spawn_key=tuple(int(k) for k in key)).generate_state(2, np.uint32)
    return int((int(state[0]) << 32 | int(state[1])) & MAX_SEED)


def metric_range(losses: np.ndarray, metric: str, switching_cost: float) -> tuple[float, float]:
    """Where a metric must lie on this sequence, whatever the learner does.

    Played loss lies between sum_t min_i l_t(i) and sum_t max_i l_t(i); the
    best action's loss is fixed by the sequence; switches lie in [0, T - 1].
    """
    best = float(losses.sum(axis=0).min())
    low = float(losses.min(axis=1).sum()) - best
    high = float(losses.max(axis=1).sum()) - best
    switches = (0.0, float(losses.shape[0] - 1))
    if metric == "regret":
        return low, high
    if metric == "switches":
        return switches
    return low, high + switching_cost * switches[1]


@dataclass(frozen=True)
class Judgement:
    """The outcome of the acceptance test on one batch of replicas."""

    violated: bool
    estimate: float          # violation rate, or mean metric for expectation claims
    violations: int
    replicas: int
    interval: tuple          # two-sided interval for reporting
    evidence: dict           # what the decision rests on (test, level, bound, threshold)


def judge(claim, values: np.ndarray, bound: float, level: float, confidence: float,
          value_range: tuple[float, float]) -> Judgement:
    """Apply the acceptance test at ``level`` (the chance of a false acceptance allowed)."""
    values = np.asarray(values, dtype=float)
    m = int(values.size)
    k = int(np.count_nonzero(values > bound))
    if claim.kind == "expectation":
        return _judge_mean(values, bound, level, confidence, value_range, k)
    two_sided = stats.clopper_pearson(k, m, confidence=confidence)
    if claim.kind == "always":
        evidence = {"test": "observed violation (replayable from the seed)", "level": 0.0,
                    "max": float(values.max()), "threshold": bound}
        return Judgement(k > 0, k / m, k, m, (two_sided.low, two_sided.high), evidence)
    lower = stats.clopper_pearson(k, m, confidence=1.0 - level, alternative="greater")
    evidence = {"test": lower.method, "reference": lower.reference, "level": level,
                "lower": lower.low, "threshold": claim.delta}
    return Judgement(lower.low > claim.delta, k / m, k, m, (two_sided.low, two_sided.high), evidence)


def _judge_mean(values, bound, level, confidence, value_range, k) -> Judgement:
    """Lower confidence bound on the mean metric against the bound.

    Uses the anytime-valid empirical-Bernstein confidence sequence of
    :func:`harness.stats.mean_sequence` over the metric's known range; its
    lower side errs with probability at most alpha/2, so it is run at
    confidence 1 - 2 * level for a one-sided test at ``level``. Values are
    clipped to the range first: the range is exact, so only rounding in the
    sums can take a value outside it.
    """
    low, high = value_range
    slack = 1e-9 * max(1.0, high - low)
    low, high = low - slack, high + slack
    if not high > low:
        high = low + 1.0
    x = np.clip(values, low, high)
    test = stats.mean_sequence(x, bound, low, high, confidence=1.0 - 2.0 * level)
    # the interval to report: centred on the sample mean, so it rarely stops before the last replica
    report = stats.mean_sequence(x, float(x.mean()), low, high, confidence=confidence)
    evidence = {"test": test.method, "reference": test.reference, "level": level, "lower": test.low,
                "threshold": bound, "range": [low, high], "replicas_read": test.n}
    return Judgement(test.decision == "above", float(x.mean()), k, int(x.size), (report.low, report.high),
                     evidence)


def score(claim, values: np.ndarray, bound: float) -> float:
    """How far the claim is from breaking, in units of the bound (> 0: broken on this sample).

    The (1 - delta) quantile for high-probability claims, the maximum for
    "always" claims, the mean for expectation claims; a continuous guide
    even when no replica violates yet.
    """
    values = np.asarray(values, dtype=float)
    if claim.kind == "high_probability":
        stat = float(np.quantile(values, 1.0 - claim.delta, method="higher"))
    elif claim.kind == "always":
        stat = float(values.max())
    else:
        stat = float(values.mean())
    return (stat - bound) / max(abs(bound), 1.0)


@dataclass
class Screen:
    """A candidate's screening outcome."""

    score: float
    passed: bool
    judgement: Judgement
    seed: int
    evaluation: int          # 1-based index of this evaluation in the search


@dataclass
class Evaluator:
    """Plays candidates (genomes or adaptive adversaries) for one (learner, claim, horizon, n)."""

    learner: object
    claim: object
    horizon: int
    n_actions: int
    replicas: int
    confirm_replicas: int
    seed: int
    confidence: float
    switching_cost: float = 0.0
    n_jobs: int = 1
    evaluations: int = 0
    confirmations: list = field(default_factory=list)
    best: tuple | None = None        # (score, candidate, Screen)
    last_values: object = None       # the metric values of the last confirmation
    unshrunk: object = None          # hypothesis: the candidate as first found, before shrinking
    _memo: dict = field(default_factory=dict)

    def __post_init__(self):
        self.bound = self.claim.bound_at(self.horizon, self.n_actions)
        self.alpha = 1.0 - self.confidence

    def adversary_of(self, candidate):
        """(adversary, range of the metric) for a candidate."""
        from .genome import Genome, expand

        if isinstance(candidate, Genome):
            losses = expand(candidate, self.horizon)
            return Sequence(losses), metric_range(losses, self.claim.metric, self.switching_cost)
        return candidate.build(), claim_metric_range(self.claim.metric, self.horizon, self.switching_cost)

    def _play(self, candidate, seed: int, replicas: int):
        adversary, value_range = self.adversary_of(candidate)
        result = run(self.learner, adversary, self.horizon, self.n_actions, replicas=replicas,
                     seed=seed, n_jobs=self.n_jobs, switching_cost=self.switching_cost)
        return result.metric(self.claim.metric), value_range

    def screen(self, candidate, budget_left: bool = True) -> Screen | None:
        """Screen a candidate (memoised by its key); None when the budget forbids a new run."""
        key = candidate.key()
        if key in self._memo:
            return self._memo[key]
        if not budget_left:
            return None
        seed = derived_seed(self.seed, 1, int(key[:15], 16))
        values, value_range = self._play(candidate, seed, self.replicas)
        self.evaluations += 1
        judgement = judge(self.claim, values, self.bound, self.alpha, self.confidence, value_range)
        result = Screen(score(self.claim, values, self.bound), judgement.violated, judgement, seed,
                        self.evaluations)
        self._memo[key] = result
        if self.best is None or result.score > self.best[0]:
            self.best = (result.score, candidate, result)
        return result

    def confirm(self, candidate, screen: Screen) -> tuple[bool, Judgement, int, float]:
        """Confirm on fresh replicas at the next level of the alpha-spending sequence.

        Returns (accepted, judgement, seed, level). An "always" claim needs no
        fresh replicas: the screening run's violation is replayed from its seed.
        """
        j = len(self.confirmations) + 1
        if self.claim.kind == "always":
            seed, replicas, level = screen.seed, self.replicas, 0.0
        else:
            seed, replicas, level = derived_seed(self.seed, 2, j), self.confirm_replicas, spend(self.alpha, j)
        values, value_range = self._play(candidate, seed, replicas)
        self.last_values = values
        judgement = judge(self.claim, values, self.bound, level if level else self.alpha, self.confidence,
                          value_range)
        self.confirmations.append({"attempt": j, "accepted": judgement.violated, "level": level,
                                   "seed": seed, "replicas": replicas})
        return judgement.violated, judgement, seed, level

    @property
    def spent(self) -> float:
        """Chance of a false counterexample spent so far (sum of confirmation levels)."""
        return float(sum(c["level"] for c in self.confirmations))


def check_claim_learner(learner, claim):
    """The claim to search: a Claim, or the name of one the learner declares."""
    from ..claims import Claim

    if isinstance(claim, Claim):
        return claim
    if isinstance(claim, str):
        for c in getattr(learner, "claims", ()):
            if c.name == claim:
                return c
        names = ", ".join(repr(c.name) for c in getattr(learner, "claims", ())) or "none"
        raise ConfigError(f"claim: learner declares no claim named {claim!r}; its claims: {names}")
    raise ConfigError(f"claim: must be a harness.Claim or the name of one of the learner's claims, "
                      f"got {type(claim).__name__}")
