"""Counterexample search: find a loss sequence that breaks a claim, shrink it, save it, replay it.

    found = search(learner, claim, horizon, n_actions, max_examples=200, replicas=256, seed=0,
                   method="hypothesis")   # or "cem", or "random" (the baseline)
    if found:                             # a Counterexample (truthy) or a NoCounterexample (falsy)
        found.losses, found.rate, found.ci, found.claim, found.genome
        found.save("x.npz")
    Counterexample.load("x.npz")
    replay("x.npz", learner).still_violates

Candidates are sequence genomes (:mod:`.genome`): short descriptions that
expand into a (T, n) loss array shared by every replica, so the learners'
shared fast paths apply. Every candidate is screened on ``replicas``
replicas; one that looks like a violation is confirmed on fresh replicas
with an alpha-spending rule, so that whatever the number of candidates, a
search on a learner whose claim holds returns a false counterexample with
probability at most ``1 - confidence`` (:mod:`.evaluate` gives the
argument). "always" claims are broken by one replayable violation.

Both outcomes carry ``evaluations`` (candidates played) and the best
candidate seen; a Counterexample also has ``evaluations_to_find``.
"""

from __future__ import annotations

import numpy as np

from .. import validate
from ..errors import ConfigError
from ..protocol import Learner
from .evaluate import Evaluator, check_claim_learner
from .files import Counterexample, NoCounterexample
from .genome import PATTERNS, Genome, Segment, expand
from .replay import ReplayResult, replay
from .sequence import Sequence

METHODS = ("hypothesis", "cem", "random")

__all__ = ["search", "Counterexample", "NoCounterexample", "replay", "ReplayResult", "Genome", "Segment",
           "PATTERNS", "expand", "Sequence", "METHODS"]


def search(learner, claim, horizon, n_actions, max_examples=200, replicas=256, seed=0, method="hypothesis",
           *, confidence=0.95, confirm_replicas=None, switching_cost=0.0, max_segments=4, shrink_budget=None,
           max_confirmations=5, patterns=None, adaptive=None, oblivious=True, plain_first=True, n_jobs=1):
    """Search for a loss sequence on which ``learner`` breaks ``claim``.

    Parameters beyond the design contract's: ``confidence`` (the chance of
    no false counterexample, default 0.95), ``confirm_replicas`` (fresh
    replicas per confirmation, default 4 * replicas), ``switching_cost``
    (for cost_regret claims), ``max_segments`` (per genome),
    ``shrink_budget`` (new candidates Hypothesis may play while shrinking,
    default max_examples), ``max_confirmations`` (attempts before giving
    up), ``patterns`` (restrict the genome patterns), ``adaptive``
    (adaptive adversaries whose parameters are searched too: names, or
    ``{name: {param: (low, high) | [choices]}}``; see :mod:`.adaptive`),
    ``oblivious`` (False: search only the adaptive adversaries),
    ``plain_first`` (hypothesis: try each pattern's plain one-segment genome
    first), ``n_jobs``.

    Returns a :class:`Counterexample` when one is confirmed, else a falsy
    :class:`NoCounterexample` with the evaluations spent and the best
    candidate seen.

    Cost: at most ``max_examples`` candidates are generated; Hypothesis'
    shrinking adds at most ``shrink_budget`` per screened-in candidate, and
    each confirmation plays ``confirm_replicas`` more replicas.
    """
    if not isinstance(learner, Learner) and not callable(getattr(learner, "play_block", None)):
        raise ConfigError(f"learner: expected a harness.Learner, got {type(learner).__name__}")
    claim = check_claim_learner(learner, claim)
    horizon = validate.positive_int("horizon", horizon)
    n_actions = validate.positive_int("n_actions", n_actions, minimum=2)
    max_examples = validate.positive_int("max_examples", max_examples)
    replicas = validate.positive_int("replicas", replicas)
    seed = validate.nonneg_int("seed", seed)
    validate.choice("method", method, METHODS)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    confirm_replicas = 4 * replicas if confirm_replicas is None else \
        validate.positive_int("confirm_replicas", confirm_replicas)
    switching_cost = validate.real("switching_cost", switching_cost, low=0.0)
    max_segments = validate.positive_int("max_segments", max_segments)
    shrink_budget = max_examples if shrink_budget is None else validate.nonneg_int("shrink_budget", shrink_budget)
    max_confirmations = validate.positive_int("max_confirmations", max_confirmations)
    if patterns is not None:
        unknown = [p for p in patterns if p not in PATTERNS]
        if unknown or not patterns:
            raise ConfigError(f"patterns: must be a non-empty list of {', '.join(PATTERNS)}; got {patterns!r}")
    if claim.kind == "expectation":
        if confidence <= 0.5:
            raise ConfigError(f"confidence: expectation claims are tested one-sided with a two-sided confidence "
                              f"sequence, so confidence must exceed 0.5; got {confidence}")
    from . import adaptive as adaptive_mod
    families = adaptive_mod.families(adaptive)
    oblivious = validate.boolean("oblivious", oblivious)
    if not oblivious and not families:
        raise ConfigError("oblivious: False leaves nothing to search; name adaptive adversaries (adaptive=...)")

    ev = Evaluator(learner, claim, horizon, n_actions, replicas, confirm_replicas, seed, confidence,
                   switching_cost=switching_cost, n_jobs=n_jobs)
    if method == "hypothesis":
        from . import guided
        found = guided.run(ev, max_examples, seed, max_segments, shrink_budget, max_confirmations, patterns,
                           families, oblivious, validate.boolean("plain_first", plain_first))
    else:
        from . import cem
        if patterns is not None:
            raise ConfigError("patterns: only method='hypothesis' restricts patterns")
        found = cem.run(ev, max_examples, seed, max_confirmations, learn=(method == "cem"), families=families,
                        oblivious=oblivious)

    settings = {"max_examples": max_examples, "replicas": replicas, "confirm_replicas": confirm_replicas,
                "confirmations": len(ev.confirmations), "error_probability": ev.alpha,
                "switching_cost": switching_cost}
    if found is None:
        best = ev.best
        return NoCounterexample(claim=claim, method=method, evaluations=ev.evaluations, horizon=horizon,
                                n_actions=n_actions, best=None if best is None else best[1],
                                best_score=None if best is None else best[0],
                                best_rate=None if best is None else best[2].judgement.estimate,
                                confirmations=len(ev.confirmations), error_probability=ev.alpha)
    cand, screen, judgement, confirm_seed, level, to_find = found
    from ..runner import DEFAULT_CHUNK, versions

    if isinstance(cand, Genome):
        genome, record, losses = cand, None, expand(cand, horizon)
    else:
        # what the first violating replica of the confirmation run faced, replayed from its chunk
        replica = int(np.flatnonzero(np.asarray(ev.last_values) > ev.bound)[0]) \
            if judgement.violations else 0
        losses = adaptive_mod.realized_losses(learner, cand.build(), horizon, n_actions, confirm_seed, replica,
                                              judgement.replicas, DEFAULT_CHUNK)
        spec = cand.build().spec()
        genome, record = None, {"name": cand.name, "class": spec.get("class"), "params": dict(cand.params),
                                "replica": replica}
    return Counterexample(
        losses=losses, claim=claim, rate=judgement.violations / judgement.replicas,
        ci=judgement.interval, confidence=confidence, violations=judgement.violations,
        replicas=judgement.replicas, learner=learner.spec(), method=method,
        seeds={"search": seed, "screen": screen.seed, "confirm": confirm_seed},
        evidence=judgement.evidence, mean=judgement.estimate if claim.kind == "expectation" else None,
        genome=genome, adversary=record, evaluations=ev.evaluations, evaluations_to_find=to_find,
        settings=settings, versions=versions(), unshrunk=ev.unshrunk)
