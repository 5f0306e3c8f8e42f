"""Replay a saved counterexample against a learner: does it still break the claim?"""

from __future__ import annotations

import os
from dataclasses import dataclass

from ..errors import ConfigError
from ..claims import metric_range as claim_metric_range
from .evaluate import judge, metric_range
from .files import Counterexample
from .sequence import Sequence


@dataclass(frozen=True)
class ReplayResult:
    """The outcome of a replay.

    ``still_violates`` applies the claim's test once, at the file's
    confidence (no multiplicity: one sequence, one test): for a
    high-probability claim the one-sided Clopper-Pearson lower bound on the
    violation rate exceeds delta; for "always" one replica exceeds the
    bound; for expectation the lower confidence bound on the mean exceeds
    it. ``rate`` is the fraction of replicas above the bound, ``ci`` the
    two-sided interval of the tested statistic (``mean`` for expectation).
    """

    still_violates: bool
    rate: float
    ci: tuple
    violations: int
    replicas: int
    seed: int
    confidence: float
    claim: object
    bound: float
    mean: float | None
    evidence: dict
    counterexample: Counterexample

    def __bool__(self):
        return self.still_violates

    def describe(self) -> str:
        verdict = "STILL VIOLATES" if self.still_violates else "no longer shown to violate"
        stat = (f"mean {self.mean:.4g} (interval {self.ci[0]:.4g}..{self.ci[1]:.4g})"
                if self.mean is not None else
                f"violation rate {self.rate:.3g} (interval {self.ci[0]:.3g}..{self.ci[1]:.3g})")
        return (f"{verdict}: claim {self.claim.name!r} ({self.claim.metric} <= {self.bound:.4g}, "
                f"{self.claim.kind}) at T={self.counterexample.horizon}, n={self.counterexample.n_actions}: "
                f"{stat}, {self.violations}/{self.replicas} replicas above the bound, seed {self.seed}")


def replay(counterexample, learner, replicas: int | None = None, seed: int | None = None,
           confidence: float | None = None, n_jobs: int = 1, adversary=None) -> ReplayResult:
    """Rerun ``learner`` on a saved counterexample (a path or a :class:`Counterexample`).

    By default the confirmation seed and replica count recorded in the file
    are reused, so an unchanged learner reproduces the recorded result
    exactly; pass ``seed`` for fresh replicas. An adaptive counterexample's
    adversary is rebuilt from the file when it is a registered name;
    otherwise pass it as ``adversary`` (boundbreaker never imports code
    named in a file).
    """
    from .. import validate
    from ..runner import run

    ce = counterexample if isinstance(counterexample, Counterexample) else \
        Counterexample.load(os.fspath(counterexample))
    replicas = ce.replicas if replicas is None else validate.positive_int("replicas", replicas)
    seed = ce.seeds["confirm"] if seed is None else validate.nonneg_int("seed", seed)
    confidence = ce.confidence if confidence is None else validate.real(
        "confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    if not callable(getattr(learner, "play_block", None)):
        raise ConfigError(f"learner: expected a harness.Learner, got {type(learner).__name__}")
    switching_cost = float(ce.settings.get("switching_cost") or 0.0)
    if ce.adversary is not None:
        if adversary is None:
            adversary = adversary_from_record(ce.adversary)
        elif not getattr(adversary, "adaptive", False):
            raise ConfigError("adversary: the counterexample is adaptive; pass the adaptive adversary it names")
        value_range = claim_metric_range(ce.claim.metric, ce.horizon, switching_cost)
    else:
        if adversary is not None:
            raise ConfigError("adversary: this counterexample is a fixed loss sequence; replay it without one")
        adversary = Sequence(ce.losses)
        value_range = metric_range(ce.losses, ce.claim.metric, switching_cost)
    result = run(learner, adversary, ce.horizon, ce.n_actions, replicas=replicas, seed=seed,
                 n_jobs=n_jobs, switching_cost=switching_cost)
    values = result.metric(ce.claim.metric)
    bound = ce.bound
    j = judge(ce.claim, values, bound, 1.0 - confidence, confidence, value_range)
    mean = float(values.mean()) if ce.claim.kind == "expectation" else None
    return ReplayResult(still_violates=j.violated, rate=j.violations / j.replicas, ci=j.interval,
                        violations=j.violations, replicas=j.replicas, seed=seed, confidence=confidence,
                        claim=ce.claim, bound=bound, mean=mean, evidence=j.evidence, counterexample=ce)


def learner_from_spec(spec: dict):
    """Rebuild the learner a counterexample file names: registered names only
    (:meth:`harness.registry.Registry.check_file_spec`)."""
    from ..learners import REGISTRY

    return REGISTRY.from_file_spec(spec, "--learner NAME|module:Class, or pass a learner")


def adversary_from_record(record: dict):
    """Rebuild an adaptive counterexample's adversary: registered names only
    (:meth:`harness.registry.Registry.check_file_spec`)."""
    import adversaries

    return adversaries.REGISTRY.from_file_spec(record, "pass adversary= to replay")
