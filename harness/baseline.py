"""Tail baselines: record a learner's tail profile once, compare every new version against it.

    from harness.baseline import record, compare, TailProfile
    profile = record(learner, adversaries, horizons, n_actions, replicas=4000, seed=0)
    profile.save("profile.json")                  # commit it
    result = compare(TailProfile.load("profile.json"), new_learner)
    result.verdict                                # "regressed" | "unchanged" | "improved"

**Profile.** For every cell (adversary, horizon, n_actions) of the battery,
``record`` plays ``replicas + reference_replicas`` replicas and splits them:

- the first ``replicas`` give, for each metric (regret, switches, and
  cost_regret when there is a switching cost) and each quantile level q, the
  sample quantile v_q (an observed value: the order statistic of rank
  ceil(R q)) with a distribution-free confidence interval from order
  statistics (:func:`harness.stats.quantile_interval`). A level is recorded
  only where the replicas allow it: where both ends of that interval are
  order statistics of the sample (R >= :func:`harness.stats.quantile_min_replicas`,
  e.g. 3688 replicas for 0.999 at confidence 0.95); the others are listed as
  omitted, with the replicas they need.
- the other ``reference_replicas`` count the baseline's exceedances of each
  v_q: how many replicas end strictly above it.

**Comparison.** ``compare`` replays the battery with fresh seeds and counts,
for each recorded v_q, how many new replicas end strictly above it. Per
(cell, metric, q) it tests whether the new exceedance rate is higher than
the baseline's (regressed) or lower (improved) with Fisher's exact test on
the two counts (:func:`harness.stats.exceedance_test`), and controls the
family-wise error over all cells, metrics and levels with Holm's step-down
(:func:`harness.stats.holm`), once for each direction: when nothing changed,
"regressed" is reported anywhere with probability at most 1 - confidence,
and so is "improved". Each test also states the smallest change the run
could have detected: the new exceedance rate it flags with probability
``power`` at the Bonferroni level (Holm's first step).

Why a second batch: v_q is chosen by the first batch. Counting the
baseline's exceedances in the same replicas that chose v_q makes the
baseline count a function of its own threshold (always R - ceil(R q) for
distinct values, and biased low when the metric has ties: switches are
integers, regret on a shared sequence takes few values), and every such
in-sample test we computed exceeds its level for some tie pattern (up to
1.2 alpha). With v_q fixed by the first batch, the reference count and the
new count are independent binomials with one rate when nothing changed,
whatever the ties, and "strictly above" is the same event for both: the
exact test is exact. A learner compared with itself is calibrated
(tests/test_baseline_calibration.py).

**Shared sequences.** A ``shared = True`` adversary draws one sequence for
all replicas, so its cells describe the learner's randomness on that one
sequence. The sequence is part of the battery: ``record`` draws it from the
cell's seed, stores that ``sequence_seed`` and a sha256 ``sequence_digest``
of the losses, and ``compare`` draws the same sequence from it (refusing to
compare if the digest differs, e.g. after a numpy or adversary change) while
the learner gets fresh seeds. Other adversaries (one sequence per replica,
adaptive ones) get fresh seeds too: their sequences are part of what is
sampled.

**Seeds.** Cell (a, T, n), with a the adversary's position, uses the seed
``SeedSequence(seed, spawn_key=(a, T, n)).generate_state(1)[0]`` as
certification does (harness.certify), and its replicas are those of
``harness.run(learner, adversary, T, n, replicas, seed=cell_seed)``: replica r
is row r % chunk of chunk r // chunk, the first ``replicas`` forming the
quantile batch. Results never depend on ``n_jobs``. ``compare`` uses another
root seed (default: the profile's plus one); the profile's own seed is
refused, since it would replay the baseline's replicas.

**File.** JSON meant to live in a repository: fixed key order, one line per
quantile, values to 12 significant digits (the stored value is the
threshold, so the reference counts are taken against exactly what is
stored), and a sha256 ``checksum`` of the content. ``TailProfile.load``
refuses, in one line, a file that is not a profile, of another format
version, truncated, inconsistent, or edited after recording.
"""

from __future__ import annotations

import copy
import hashlib
import math
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from . import jsonfile, stats, validate
from .certify import adversary_label, adversary_labels, group_seed
from .config import int_list, n_jobs as config_n_jobs, quantile_list
from .errors import ConfigError
from .protocol import Adversary
from .runner import BLOCK_ENTRIES, DEFAULT_CHUNK, _check_adversary, _check_learner, dispatch, versions

FORMAT = "boundbreaker-tail-profile"
FORMAT_VERSION = 1
QUANTILES = (0.5, 0.9, 0.95, 0.99, 0.999)
POWER = 0.8
VERDICTS = ("regressed", "unchanged", "improved")
DIGITS = 12  # significant digits kept for metric values in the file
STATEMENT = ("'unchanged' means no change this run could detect (see the detectable rates); it is not a proof "
             "that the tails are identical.")
MULTIPLICITY = "Holm over all cells, metrics and quantiles, for each direction"


# -- the profile ------------------------------------------------------------------------


@dataclass(frozen=True)
class QuantilePoint:
    """One recorded quantile: v = ``value`` with its interval, and the reference batch's count above v."""

    quantile: float
    value: float
    low: float
    high: float
    reference_exceedances: int

    def as_dict(self) -> dict:
        return {"quantile": self.quantile, "value": self.value, "low": self.low, "high": self.high,
                "reference_exceedances": self.reference_exceedances}


@dataclass(frozen=True)
class ProfileCell:
    """The tail profile of one (adversary, horizon, n_actions): per metric, its quantile points.

    ``metrics`` maps a metric name to ``{"mean": .., "max": .., "quantiles":
    (QuantilePoint, ...)}`` (mean and max of the quantile batch, for people).
    ``sequence_seed``/``sequence_digest`` are set for shared sequences only.
    """

    index: int
    adversary_label: str
    adversary_index: int
    horizon: int
    n_actions: int
    shared_sequence: bool
    adaptive: bool
    seed: int
    sequence_seed: int | None
    sequence_digest: str | None
    metrics: dict

    @property
    def where(self) -> str:
        return f"{self.adversary_label}, T={self.horizon}, n={self.n_actions}"

    def as_dict(self) -> dict:
        out = {"index": self.index, "adversary": self.adversary_label, "adversary_index": self.adversary_index,
               "horizon": self.horizon, "n_actions": self.n_actions, "shared_sequence": self.shared_sequence,
               "adaptive": self.adaptive, "seed": self.seed, "sequence_seed": self.sequence_seed,
               "sequence_digest": self.sequence_digest}
        for name, m in self.metrics.items():
            out[name] = {"mean": m["mean"], "max": m["max"], "quantiles": [p.as_dict() for p in m["quantiles"]]}
        return out


@dataclass(frozen=True)
class TailProfile:
    """A learner's recorded tails on a battery. ``save``/``load`` write and read JSON (module docstring)."""

    learner: dict
    adversaries: tuple
    horizons: tuple
    n_actions: tuple
    switching_cost: float
    metrics: tuple
    quantiles: tuple
    omitted: tuple
    replicas: int
    reference_replicas: int
    confidence: float
    power: float
    seed: int
    chunk: int
    campaign: dict
    versions: dict
    created: str
    wall_time_s: float
    cells: tuple
    method: str = stats.QUANTILE_METHOD
    reference: str = stats.QUANTILE_REFERENCE

    @property
    def battery(self) -> dict:
        """What a comparison must replay: the adversaries, grid, metrics and quantile levels."""
        return {"adversaries": [dict(a) for a in self.adversaries], "horizons": list(self.horizons),
                "n_actions": list(self.n_actions), "switching_cost": self.switching_cost,
                "metrics": list(self.metrics), "quantiles": list(self.quantiles)}

    def settings(self) -> dict:
        """What ``boundbreaker baseline`` takes from a campaign besides the learner (see :func:`check_campaign`)."""
        return {"adversaries": [dict(a) for a in self.adversaries], "horizons": list(self.horizons),
                "n_actions": list(self.n_actions), "switching_cost": self.switching_cost, "seed": self.seed,
                "confidence": self.confidence, "replicas": self.replicas,
                "reference_replicas": self.reference_replicas,
                "quantiles": sorted(list(self.quantiles) + [o["quantile"] for o in self.omitted]),
                "power": self.power}

    def to_dict(self) -> dict:
        body = {
            "format": FORMAT, "format_version": FORMAT_VERSION, "created": self.created,
            "campaign": dict(self.campaign), "learner": self.learner, "versions": dict(self.versions),
            "seed": self.seed, "chunk": self.chunk, "replicas": self.replicas,
            "reference_replicas": self.reference_replicas, "confidence": self.confidence, "power": self.power,
            "quantiles": list(self.quantiles), "omitted": [dict(o) for o in self.omitted],
            "metrics": list(self.metrics), "switching_cost": self.switching_cost,
            "horizons": list(self.horizons), "n_actions": list(self.n_actions),
            "adversaries": [dict(a) for a in self.adversaries], "method": self.method, "reference": self.reference,
            "wall_time_s": self.wall_time_s, "cells": [c.as_dict() for c in self.cells],
        }
        body["checksum"] = _checksum(body)
        return body

    def save(self, path) -> Path:
        """Write the profile as JSON (atomically); returns the path."""
        return jsonfile.write(path, jsonfile.dumps(self.to_dict(), width=120))

    @classmethod
    def load(cls, path) -> "TailProfile":
        data = jsonfile.read(path, "tail profile",
                             "the file is truncated or damaged; re-record it with `boundbreaker baseline`")
        return cls.from_dict(data, source=str(Path(path)))

    @classmethod
    def from_dict(cls, data, source: str = "profile") -> "TailProfile":
        """Rebuild from :meth:`to_dict` output, checking every field and the checksum."""
        return _read_profile(data, source)

    def table(self) -> str:
        return format_profile(self)


# -- recording ------------------------------------------------------------------------------


def record(learner, adversaries, horizons, n_actions, replicas=4000, seed=0, *, reference_replicas=None,
           quantiles=QUANTILES, confidence=0.95, power=POWER, switching_cost=0.0, labels=None, n_jobs=1,
           chunk=DEFAULT_CHUNK, progress=False, campaign=None) -> TailProfile:
    """Record ``learner``'s tail profile on every (adversary, horizon, n_actions) of the battery.

    ``adversaries`` are Adversary objects, registry names or spec dicts;
    ``horizons`` and ``n_actions`` integers or lists of them. ``replicas``
    per cell go to the quantiles, ``reference_replicas`` (default: as many)
    to the exceedance counts the comparison tests against. ``confidence``
    is that of each quantile interval, and the family-wise confidence
    ``compare`` uses by default; ``power`` the one at which ``compare``
    states the smallest detectable change. See the module docstring.
    """
    started = time.perf_counter()
    _check_learner(learner)
    adversaries = _battery_adversaries(adversaries)
    labels = adversary_labels(labels, adversaries)
    horizons = int_list("horizons", horizons, minimum=1)
    n_actions = int_list("n_actions", n_actions, minimum=2)
    replicas = validate.positive_int("replicas", replicas)
    reference_replicas = replicas if reference_replicas is None else \
        validate.positive_int("reference_replicas", reference_replicas)
    seed = validate.nonneg_int("seed", seed)
    levels = quantile_list("quantiles", list(quantiles))
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    power = validate.real("power", power, low=0.0, high=1.0, low_open=True, high_open=True)
    switching_cost = validate.real("switching_cost", switching_cost, low=0.0)
    chunk = validate.positive_int("chunk", chunk)
    n_jobs = config_n_jobs("n_jobs", n_jobs)

    kept, omitted = [], []
    for q in levels:
        need = stats.quantile_min_replicas(q, confidence)
        if replicas >= need:
            kept.append(q)
        else:
            omitted.append({"quantile": q, "reason": f"needs at least {need} replicas for its interval at "
                                                     f"confidence {confidence:g}; recorded with {replicas}"})
    if not kept:
        fewest = min(stats.quantile_min_replicas(q, confidence) for q in levels)
        raise ConfigError(f"replicas: {replicas} allow none of the quantiles {levels} at confidence "
                          f"{confidence:g} (the lowest needs {fewest}); raise replicas")
    metrics = _metrics(switching_cost)
    plans = []
    for a, adversary in enumerate(adversaries):
        for T in horizons:
            for n in n_actions:
                cell_seed = group_seed(seed, a, T, n)
                plans.append(_Plan(a, labels[a], adversary, T, n, cell_seed,
                                   cell_seed if _shared(adversary) else None))
    outcomes = _play(learner, plans, replicas + reference_replicas, n_jobs, chunk, progress)
    cells = []
    for plan, (regret, switches) in zip(plans, outcomes):
        values = _metric_values(regret, switches, switching_cost)
        per_metric = {}
        for name in metrics:
            head, tail = values[name][:replicas], values[name][replicas:]
            points = []
            for q in kept:
                qi = stats.quantile_interval(head, q, confidence)
                v = _round(qi.estimate)
                points.append(QuantilePoint(q, v, _round(qi.low), _round(qi.high), int(np.count_nonzero(tail > v))))
            per_metric[name] = {"mean": _round(float(head.mean()), 6), "max": _round(float(head.max())),
                                "quantiles": tuple(points)}
        cells.append(ProfileCell(
            index=len(cells), adversary_label=plan.label, adversary_index=plan.adversary_index,
            horizon=plan.horizon, n_actions=plan.n_actions, shared_sequence=plan.sequence_seed is not None,
            adaptive=bool(plan.adversary.adaptive), seed=plan.seed, sequence_seed=plan.sequence_seed,
            sequence_digest=_plan_digest(plan), metrics=per_metric))
    specs = []
    for adv, label in zip(adversaries, labels):
        spec = dict(adv.spec())
        spec["label"] = label
        specs.append(spec)
    return TailProfile(
        learner=learner.spec(), adversaries=tuple(specs), horizons=tuple(horizons), n_actions=tuple(n_actions),
        switching_cost=switching_cost, metrics=metrics, quantiles=tuple(kept), omitted=tuple(omitted),
        replicas=replicas, reference_replicas=reference_replicas, confidence=confidence, power=power, seed=seed,
        chunk=chunk, campaign=dict(campaign or {}), versions=versions(),
        created=datetime.now(timezone.utc).isoformat(timespec="seconds"),
        wall_time_s=round(time.perf_counter() - started, 3), cells=tuple(cells))


def record_campaign(campaign, n_jobs=None, progress=False) -> TailProfile:
    """Record the tail profile of a :class:`harness.config.Campaign` (its learner, battery and [baseline])."""
    b = campaign.baseline
    return record(campaign.build_learner(), campaign.build_adversaries(), campaign.horizons, campaign.n_actions,
                  replicas=b["replicas"], seed=campaign.seed, reference_replicas=b["reference_replicas"],
                  quantiles=b["quantiles"], confidence=campaign.confidence, power=b["power"],
                  switching_cost=campaign.switching_cost, labels=[s["label"] for s in campaign.adversary_specs],
                  n_jobs=campaign.n_jobs if n_jobs is None else n_jobs, progress=progress,
                  campaign={"name": campaign.name, "digest": campaign.digest})


# -- comparing ---------------------------------------------------------------------------------


@dataclass(frozen=True)
class QuantileComparison:
    """One test: did the rate of ending strictly above the baseline's ``value`` change?

    ``base_exceedances`` of ``base_replicas`` (the profile's reference batch)
    against ``new_exceedances`` of ``new_replicas``. ``p_regressed`` and
    ``p_improved`` are the one-sided exact p-values; ``verdict`` follows
    Holm in each direction. ``detectable_rate``: the new exceedance rate the
    run flags as regressed with probability ``power`` (None if none);
    ``detectable_ratio`` that over the base rate (None when the base rate is 0).
    """

    cell: int
    adversary_label: str
    horizon: int
    n_actions: int
    metric: str
    quantile: float
    value: float
    base_exceedances: int
    base_replicas: int
    new_exceedances: int
    new_replicas: int
    p_regressed: float
    p_improved: float
    verdict: str
    detectable_rate: float | None
    detectable_ratio: float | None

    @property
    def base_rate(self) -> float:
        return self.base_exceedances / self.base_replicas

    @property
    def new_rate(self) -> float:
        return self.new_exceedances / self.new_replicas

    @property
    def where(self) -> str:
        return f"{self.adversary_label}, T={self.horizon}, n={self.n_actions}: {self.metric} q={self.quantile:g}"

    def summary(self) -> str:
        """One line: the rates, the p-value of the direction seen, the verdict."""
        direction = self.p_regressed if self.new_rate >= self.base_rate else self.p_improved
        return (f"P[{self.metric} > {self.value:.6g}] {_pct(self.base_rate)} -> {_pct(self.new_rate)} "
                f"({self.base_exceedances}/{self.base_replicas} -> {self.new_exceedances}/{self.new_replicas}, "
                f"p = {direction:.3g}): {self.verdict}")

    def as_dict(self) -> dict:
        out = dict(self.__dict__)
        out.update(base_rate=self.base_rate, new_rate=self.new_rate)
        return out


@dataclass(frozen=True)
class CellComparison:
    """All tests of one cell; ``verdict`` is regressed if any is, else improved if any is, else unchanged."""

    index: int
    adversary_label: str
    horizon: int
    n_actions: int
    quantiles: tuple

    @property
    def verdict(self) -> str:
        return _combine(q.verdict for q in self.quantiles)

    @property
    def where(self) -> str:
        return f"{self.adversary_label}, T={self.horizon}, n={self.n_actions}"

    def as_dict(self) -> dict:
        return {"index": self.index, "adversary": self.adversary_label, "horizon": self.horizon,
                "n_actions": self.n_actions, "verdict": self.verdict,
                "quantiles": [q.as_dict() for q in self.quantiles]}


@dataclass(frozen=True)
class Comparison:
    """The outcome of :func:`compare`: a verdict per test, per cell and overall."""

    cells: tuple
    confidence: float
    power: float
    seed: int
    replicas: int
    tests: int
    learner: dict
    profile: dict
    versions: dict
    created: str
    wall_time_s: float
    statement: str = STATEMENT
    multiplicity: str = MULTIPLICITY
    method: str = stats.EXCEEDANCE_METHOD
    reference: str = stats.EXCEEDANCE_REFERENCE

    @property
    def verdict(self) -> str:
        return _combine(c.verdict for c in self.cells)

    @property
    def points(self) -> list:
        return [q for c in self.cells for q in c.quantiles]

    def regressions(self) -> list:
        return [q for q in self.points if q.verdict == "regressed"]

    def improvements(self) -> list:
        return [q for q in self.points if q.verdict == "improved"]

    def to_dict(self) -> dict:
        return {"format": "boundbreaker-tail-comparison", "format_version": FORMAT_VERSION,
                "verdict": self.verdict, "statement": self.statement, "confidence": self.confidence,
                "multiplicity": self.multiplicity, "power": self.power, "seed": self.seed,
                "replicas": self.replicas, "tests": self.tests, "method": self.method, "reference": self.reference,
                "learner": self.learner, "profile": self.profile, "versions": self.versions,
                "created": self.created, "wall_time_s": self.wall_time_s, "cells": [c.as_dict() for c in self.cells]}

    def save(self, path) -> Path:
        return jsonfile.write(path, jsonfile.dumps(self.to_dict(), width=120))

    def table(self) -> str:
        return format_comparison(self)


def compare(profile, learner, seed=None, *, replicas=None, confidence=None, power=None, adversaries=None,
            n_jobs=1, progress=False) -> Comparison:
    """Replay ``profile``'s battery with ``learner`` on fresh seeds and test every recorded quantile.

    ``profile`` is a :class:`TailProfile` or the path of a saved one.
    ``seed`` (default: the profile's seed + 1) must differ from the
    profile's. ``replicas`` per cell default to the profile's reference
    batch; ``confidence`` (family-wise, each direction) and ``power`` to the
    profile's. ``adversaries`` (objects, in the profile's order) replace the
    ones rebuilt from the profile's specs, e.g. for classes that cannot be
    imported by name; their specs must match. See the module docstring.
    """
    started = time.perf_counter()
    if not isinstance(profile, TailProfile):
        profile = TailProfile.load(profile)
    _check_learner(learner)
    seed = profile.seed + 1 if seed is None else validate.nonneg_int("seed", seed)
    if seed == profile.seed:
        raise ConfigError(f"seed: {seed} is the profile's own seed, which would replay the baseline's replicas; "
                          f"give another seed")
    replicas = profile.reference_replicas if replicas is None else validate.positive_int("replicas", replicas)
    confidence = profile.confidence if confidence is None else \
        validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    power = profile.power if power is None else \
        validate.real("power", power, low=0.0, high=1.0, low_open=True, high_open=True)
    n_jobs = config_n_jobs("n_jobs", n_jobs)
    advs = _profile_adversaries(profile, adversaries)

    plans = []
    for cell in profile.cells:
        adv = advs[cell.adversary_index]
        if cell.shared_sequence != _shared(adv):
            raise ConfigError(f"adversaries[{cell.adversary_index}]: shares one sequence "
                              f"{'only in the profile' if cell.shared_sequence else 'only now'}; re-record the "
                              f"profile")
        plan = _Plan(cell.adversary_index, cell.adversary_label, adv, cell.horizon, cell.n_actions,
                     group_seed(seed, cell.adversary_index, cell.horizon, cell.n_actions), cell.sequence_seed)
        if cell.sequence_digest is not None and _plan_digest(plan) != cell.sequence_digest:
            raise ConfigError(f"profile: cell {cell.index} ({cell.where}): the shared sequence drawn from "
                              f"sequence_seed {cell.sequence_seed} is not the recorded one (the adversary or numpy "
                              f"changed since: profile versions {_short_versions(profile.versions)}); re-record "
                              f"the profile")
        plans.append(plan)
    outcomes = _play(learner, plans, replicas, n_jobs, profile.chunk, progress)

    rows = []  # (cell, metric, point, new count, p_regressed, p_improved)
    for cell, (regret, switches) in zip(profile.cells, outcomes):
        values = _metric_values(regret, switches, profile.switching_cost)
        for name in profile.metrics:
            for point in cell.metrics[name]["quantiles"]:
                new = int(np.count_nonzero(values[name] > point.value))
                base = point.reference_exceedances
                up = stats.exceedance_test(new, replicas, base, profile.reference_replicas, "greater").pvalue
                down = stats.exceedance_test(new, replicas, base, profile.reference_replicas, "less").pvalue
                rows.append((cell, name, point, new, up, down))
    alpha = 1.0 - confidence
    worse = stats.holm([r[4] for r in rows], alpha)
    better = stats.holm([r[5] for r in rows], alpha)
    per_test = alpha / len(rows)
    by_cell = {}
    for (cell, name, point, new, up, down), w, b in zip(rows, worse, better):
        base = point.reference_exceedances
        mde = stats.exceedance_detectable(base, profile.reference_replicas, replicas, per_test, power)
        base_rate = base / profile.reference_replicas
        by_cell.setdefault(cell.index, []).append(QuantileComparison(
            cell=cell.index, adversary_label=cell.adversary_label, horizon=cell.horizon, n_actions=cell.n_actions,
            metric=name, quantile=point.quantile, value=point.value, base_exceedances=base,
            base_replicas=profile.reference_replicas, new_exceedances=new, new_replicas=replicas, p_regressed=up,
            p_improved=down, verdict="regressed" if w else "improved" if b else "unchanged",
            detectable_rate=mde, detectable_ratio=(mde / base_rate) if mde is not None and base else None))
    cells = tuple(CellComparison(c.index, c.adversary_label, c.horizon, c.n_actions, tuple(by_cell[c.index]))
                  for c in profile.cells)
    return Comparison(
        cells=cells, confidence=confidence, power=power, seed=seed, replicas=replicas, tests=len(rows),
        learner=learner.spec(),
        profile={"learner": profile.learner, "seed": profile.seed, "created": profile.created,
                 "campaign": dict(profile.campaign), "versions": dict(profile.versions)},
        versions=versions(), created=datetime.now(timezone.utc).isoformat(timespec="seconds"),
        wall_time_s=round(time.perf_counter() - started, 3))


def check_campaign(profile, campaign, profile_name: str = "profile") -> None:
    """Refuse, in one line, a profile that ``boundbreaker baseline`` would not record from ``campaign``
    (the learner aside): another battery, seed, confidence or [baseline] setting."""
    want = record_settings(campaign)
    have = profile.settings()
    for key in have:
        if have[key] != want[key]:
            detail = _first_difference(have[key], want[key])
            raise ConfigError(f"{profile_name}: battery mismatch with campaign {campaign.path}: {key}{detail}; "
                              f"re-record it with `boundbreaker baseline {campaign.path} --out {profile_name}` or "
                              f"compare without the campaign")


def record_settings(campaign) -> dict:
    """What :meth:`TailProfile.settings` would be for a profile recorded from ``campaign``."""
    advs = []
    for adversary, spec in zip(campaign.build_adversaries(), campaign.adversary_specs):
        s = dict(adversary.spec())
        s["label"] = spec["label"]
        advs.append(s)
    b = campaign.baseline
    return {"adversaries": advs, "horizons": list(campaign.horizons), "n_actions": list(campaign.n_actions),
            "switching_cost": campaign.switching_cost, "seed": campaign.seed, "confidence": campaign.confidence,
            "replicas": b["replicas"], "reference_replicas": b["reference_replicas"],
            "quantiles": list(b["quantiles"]), "power": b["power"]}


def _first_difference(have, want) -> str:
    if isinstance(have, list) and isinstance(want, list) and len(have) == len(want):
        for i, (h, w) in enumerate(zip(have, want)):
            if h != w:
                return f"[{i}]: profile has {_show(h)}, campaign has {_show(w)}"
    return f": profile has {_show(have)}, campaign has {_show(want)}"


def _show(value) -> str:
    if isinstance(value, dict) and "label" in value:
        return adversary_label(value) + (f" labelled {value['label']!r}" if value["label"] != adversary_label(value)
                                         else "")
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


# -- playing ---------------------------------------------------------------------------------


@dataclass
class _Plan:
    adversary_index: int
    label: str
    adversary: object
    horizon: int
    n_actions: int
    seed: int
    sequence_seed: int | None
    player: object = field(default=None)

    def __post_init__(self):
        self.player = (PinnedSequence(self.adversary, self.sequence_seed) if self.sequence_seed is not None
                       else self.adversary)


class PinnedSequence(Adversary):
    """A shared adversary whose one sequence comes from ``sequence_seed``, not from the run's seed.

    The runner hands a ``shared = True`` adversary ``default_rng(SeedSequence(seed))``
    in every chunk; this wrapper ignores that generator and uses
    ``default_rng(SeedSequence(sequence_seed))`` instead, so a run with a
    fresh seed refreshes the learner's randomness and keeps the sequence.
    With ``sequence_seed == seed`` it plays exactly what the adversary alone
    would. Everything else is the wrapped adversary's.
    """

    def __init__(self, inner, sequence_seed: int):
        self.inner = inner
        self.sequence_seed = validate.nonneg_int("sequence_seed", sequence_seed)
        self.registry_name = getattr(inner, "registry_name", None)
        self.adaptive = bool(getattr(inner, "adaptive", False))
        self.shared = True
        self.memory = getattr(inner, "memory", 1)

    def reset(self, n_actions, horizon, replicas, rng):
        pinned = np.random.default_rng(np.random.SeedSequence(self.sequence_seed))
        self.inner.reset(n_actions, horizon, replicas, pinned)

    def losses(self, t0, t1):
        return self.inner.losses(t0, t1)

    def respond(self, t, history):
        return self.inner.respond(t, history)

    def spec(self) -> dict:
        return self.inner.spec()


def sequence_digest(adversary, horizon: int, n_actions: int, sequence_seed: int) -> str:
    """sha256 of the (horizon, n_actions) float64 losses a shared adversary draws from ``sequence_seed``.

    Drawn in time blocks (a shared sequence does not depend on how the
    horizon is cut), so memory stays bounded.
    """
    adv = copy.deepcopy(adversary)
    adv.reset(n_actions, horizon, 1, np.random.default_rng(np.random.SeedSequence(sequence_seed)))
    h = hashlib.sha256()
    step = max(1, BLOCK_ENTRIES // n_actions)
    for t0 in range(0, horizon, step):
        block = np.ascontiguousarray(adv.losses(t0, min(horizon, t0 + step)), dtype="<f8")
        h.update(block.tobytes())
    return h.hexdigest()


def _plan_digest(plan) -> str | None:
    if plan.sequence_seed is None or plan.adversary.adaptive:
        return None
    return sequence_digest(plan.adversary, plan.horizon, plan.n_actions, plan.sequence_seed)


def _shared(adversary) -> bool:
    return bool(getattr(adversary, "shared", False))


def _play(learner, plans, total, n_jobs, chunk, progress) -> list:
    """(regret, switches) of ``total`` replicas per plan, as ``run(..., seed=plan.seed)`` would give them."""
    calls = []
    for i, p in enumerate(plans):
        for k in range(math.ceil(total / chunk)):
            size = min(chunk, total - k * chunk)
            calls.append(((i, k), (learner, p.player, p.horizon, p.n_actions, p.seed, k, size)))
    found = {}
    for key, regret, switches in dispatch(calls, n_jobs, progress):
        found[key] = (regret, switches)
    out = []
    for i in range(len(plans)):
        keys = sorted(k for k in found if k[0] == i)
        out.append((np.concatenate([found[k][0] for k in keys]).astype(float),
                    np.concatenate([found[k][1] for k in keys]).astype(np.int64)))
    return out


def _metrics(switching_cost: float) -> tuple:
    return ("regret", "switches") + (("cost_regret",) if switching_cost > 0 else ())


def _metric_values(regret, switches, switching_cost) -> dict:
    out = {"regret": regret, "switches": switches.astype(float)}
    if switching_cost > 0:
        out["cost_regret"] = regret + switching_cost * switches
    return out


def _battery_adversaries(adversaries) -> list:
    import adversaries as registry

    if isinstance(adversaries, (str, dict, Adversary)):
        adversaries = [adversaries]
    out = []
    for i, adv in enumerate(adversaries or ()):
        if isinstance(adv, dict):
            adv = {k: v for k, v in adv.items() if k != "label"}
        adv = registry.from_spec(adv, f"adversaries[{i}]")
        _check_adversary(adv)
        out.append(adv)
    if not out:
        raise ConfigError("adversaries: give at least one adversary (an Adversary, a registry name or a spec)")
    return out


def rebuild(spec: dict, kind: str, option: str):
    """The learner or adversary a profile names, rebuilt from its spec: registered names only
    (:meth:`harness.registry.Registry.check_file_spec`); ``option`` says how to give it instead."""
    import adversaries

    from .learners import REGISTRY as LEARNERS

    registry = LEARNERS if kind == "learner" else adversaries.REGISTRY
    return registry.from_file_spec({k: v for k, v in spec.items() if k != "label"}, option)


def _profile_adversaries(profile, given) -> list:
    if given is None:
        return [rebuild(spec, "adversary", "pass adversaries=[...] to compare, or compare with the campaign file")
                for spec in profile.adversaries]
    given = _battery_adversaries(given)
    if len(given) != len(profile.adversaries):
        raise ConfigError(f"adversaries: the profile has {len(profile.adversaries)}, got {len(given)}; give them "
                          f"in the profile's order")
    for i, (adv, spec) in enumerate(zip(given, profile.adversaries)):
        recorded = {k: v for k, v in spec.items() if k != "label"}
        if adv.spec() != recorded:
            raise ConfigError(f"adversaries[{i}]: battery mismatch: profile has {adversary_label(recorded)}, got "
                              f"{adversary_label(adv.spec())}; give the profile's adversaries or re-record")
    return given


def _combine(verdicts) -> str:
    found = set(verdicts)
    return "regressed" if "regressed" in found else "improved" if "improved" in found else "unchanged"


def _round(x: float, digits: int = DIGITS) -> float:
    value = float(f"{x:.{digits}g}")
    return 0.0 if value == 0 else value  # no -0.0 in files


def _pct(rate: float) -> str:
    return f"{100 * rate:.3g}%"


def _short_versions(v: dict) -> str:
    return ", ".join(f"{k} {v[k]}" for k in ("numpy", "boundbreaker") if k in v)


def _checksum(body: dict) -> str:
    return jsonfile.digest({k: v for k, v in body.items() if k != "checksum"})


# -- output ------------------------------------------------------------------------------------


def format_profile(profile) -> str:
    """What ``boundbreaker baseline`` prints: the recorded quantiles per cell and metric."""
    levels = list(profile.quantiles)
    head = [f"tail profile of {adversary_label(profile.learner)}: {len(profile.cells)} cells, {profile.replicas} "
            f"replicas per cell (+ {profile.reference_replicas} reference), seed {profile.seed}, intervals at "
            f"confidence {profile.confidence:g}"]
    for o in profile.omitted:
        head.append(f"  quantile {o['quantile']:g} omitted: {o['reason']}")
    cols = ["adversary", "T", "n", "metric", "mean"] + [f"q{q:g}" for q in levels]
    rows = []
    for c in profile.cells:
        for name in profile.metrics:
            m = c.metrics[name]
            rows.append([c.adversary_label, str(c.horizon), str(c.n_actions), name, f"{m['mean']:.4g}"]
                        + [f"{p.value:.4g} [{p.low:.4g}, {p.high:.4g}]" for p in m["quantiles"]])
    return "\n".join(head + [""] + _grid(cols, rows, left={0, 3}))


_COMPARE_HEAD = ["#", "adversary", "T", "n", "metric", "q", "threshold", "base rate", "new rate", "p",
                 "detects", "verdict"]


def format_comparison(result) -> str:
    """What ``boundbreaker compare`` prints: every test, the verdict, and the regressions spelt out."""
    rows = []
    for q in result.points:
        p = q.p_regressed if q.new_rate >= q.base_rate else q.p_improved
        detects = "-" if q.detectable_rate is None else f">={_pct(q.detectable_rate)}"
        rows.append([str(q.cell), q.adversary_label, str(q.horizon), str(q.n_actions), q.metric, f"{q.quantile:g}",
                     f"{q.value:.6g}", _pct(q.base_rate), _pct(q.new_rate), f"{p:.2g}", detects,
                     q.verdict.upper() if q.verdict == "regressed" else q.verdict])
    head = [f"compare {adversary_label(result.learner)} with the profile of "
            f"{adversary_label(result.profile['learner'])} (recorded {result.profile['created']}): "
            f"{result.tests} tests, confidence {result.confidence:g} family-wise ({result.multiplicity}), "
            f"{result.replicas} new replicas per cell, seed {result.seed}", ""]
    body = _grid(_COMPARE_HEAD, rows, left={1, 4, 11})
    regressed, improved = result.regressions(), result.improvements()
    tail = ["", f"verdict: {result.verdict.upper()}  ({len(regressed)} regressed, {len(improved)} improved, "
                f"{result.tests - len(regressed) - len(improved)} unchanged of {result.tests} tests)"]
    for q in regressed[:10]:
        tail.append(f"  regressed: {q.where}: {q.summary()}")
    if len(regressed) > 10:
        tail.append(f"  ... and {len(regressed) - 10} more")
    tail.append(f"'detects': the new exceedance rate each test flags with probability {result.power:g}. "
                + result.statement)
    return "\n".join(head + body + tail)


def _grid(head, rows, left) -> list:
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(head)]

    def line(cells):
        return "  ".join(c.ljust(w) if i in left else c.rjust(w) for i, (c, w) in enumerate(zip(cells, widths)))

    return [line(head), line(["-" * w for w in widths])] + [line(r) for r in rows]


# -- loading and checking ---------------------------------------------------------------------------

_TOP = {
    "format": str, "format_version": int, "created": str, "campaign": dict, "learner": dict, "versions": dict,
    "seed": int, "chunk": int, "replicas": int, "reference_replicas": int, "confidence": float, "power": float,
    "quantiles": list, "omitted": list, "metrics": list, "switching_cost": float, "horizons": list,
    "n_actions": list, "adversaries": list, "method": str, "reference": str, "wall_time_s": float, "cells": list,
    "checksum": str,
}
_CELL = {
    "index": int, "adversary": str, "adversary_index": int, "horizon": int, "n_actions": int,
    "shared_sequence": bool, "adaptive": bool, "seed": int, "sequence_seed": (int, None),
    "sequence_digest": (str, None),
}
_METRIC = {"mean": float, "max": float, "quantiles": list}
_POINT = {"quantile": float, "value": float, "low": float, "high": float, "reference_exceedances": int}
WHAT = "tail profile"


def _fields(source, data, types, what="") -> dict:
    if not isinstance(data, dict):
        raise ConfigError(f"{source}: must be a JSON object; the file is not a {WHAT} boundbreaker wrote")
    out = {}
    for key, want in types.items():
        if key not in data:
            raise ConfigError(f"{source}: {key}: missing; the file is not a complete {WHAT} (truncated or edited)")
        out[key] = jsonfile.typed(source, key, data[key], want, WHAT)
    return out


def _extra(source, data, allowed):
    extra = set(data) - set(allowed)
    if extra:
        raise ConfigError(f"{source}: {sorted(extra)[0]}: unknown field; the file was edited or comes from another "
                          f"version")


def _read_profile(data, source) -> TailProfile:
    if not isinstance(data, dict):
        raise ConfigError(f"{source}: must hold a JSON object; record profiles with `boundbreaker baseline`")
    if data.get("format") != FORMAT:
        raise ConfigError(f"{source}: format: not a boundbreaker tail profile (expected format {FORMAT!r})")
    version = data.get("format_version")
    if isinstance(version, int) and not isinstance(version, bool) and version != FORMAT_VERSION:
        age = "older" if version < FORMAT_VERSION else "newer"
        raise ConfigError(f"{source}: format_version {version} is {age} than the one this boundbreaker reads "
                          f"({FORMAT_VERSION}); re-record the profile with `boundbreaker baseline`"
                          + (" or upgrade boundbreaker" if age == "newer" else ""))
    top = _fields(source, data, _TOP)
    _extra(source, data, _TOP)
    if top["checksum"] != _checksum(data):
        raise ConfigError(f"{source}: checksum: does not match the content; the file was edited after recording "
                          f"(re-record it with `boundbreaker baseline`)")
    try:
        levels = quantile_list("quantiles", top["quantiles"])
        metrics = tuple(top["metrics"])
        horizons = int_list("horizons", top["horizons"], minimum=1)
        n_actions = int_list("n_actions", top["n_actions"], minimum=2)
        for key in ("replicas", "reference_replicas", "chunk"):
            validate.positive_int(key, top[key])
        validate.real("confidence", top["confidence"], low=0.0, high=1.0, low_open=True, high_open=True)
        validate.real("power", top["power"], low=0.0, high=1.0, low_open=True, high_open=True)
    except ConfigError as exc:
        raise ConfigError(f"{source}: {exc}") from None
    if metrics != _metrics(top["switching_cost"]):
        raise ConfigError(f"{source}: metrics: must be {list(_metrics(top['switching_cost']))} for switching_cost "
                          f"{top['switching_cost']:g}, got {list(metrics)}")
    adversaries = top["adversaries"]
    for i, spec in enumerate(adversaries):
        if not isinstance(spec, dict) or not isinstance(spec.get("label"), str):
            raise ConfigError(f"{source}: adversaries[{i}]: must be an adversary spec with a label")
    expected = [(a, T, n) for a in range(len(adversaries)) for T in horizons for n in n_actions]
    if len(top["cells"]) != len(expected):
        raise ConfigError(f"{source}: cells: {len(top['cells'])} cells for a battery of {len(expected)}; the file "
                          f"is truncated or edited")
    cells = []
    for i, (raw, (a, T, n)) in enumerate(zip(top["cells"], expected)):
        cells.append(_read_cell(f"{source}: cells[{i}]", raw, i, (a, T, n), adversaries, metrics, levels, top))
    return TailProfile(
        learner=top["learner"], adversaries=tuple(adversaries), horizons=horizons, n_actions=n_actions,
        switching_cost=top["switching_cost"], metrics=metrics, quantiles=tuple(levels),
        omitted=tuple(_read_omitted(source, top["omitted"])), replicas=top["replicas"],
        reference_replicas=top["reference_replicas"], confidence=top["confidence"], power=top["power"],
        seed=top["seed"], chunk=top["chunk"], campaign=top["campaign"], versions=top["versions"],
        created=top["created"], wall_time_s=top["wall_time_s"], cells=tuple(cells), method=top["method"],
        reference=top["reference"])


def _read_omitted(source, rows) -> list:
    out = []
    for j, o in enumerate(rows):
        if not isinstance(o, dict) or set(o) != {"quantile", "reason"}:
            raise ConfigError(f"{source}: omitted[{j}]: must hold exactly quantile and reason")
        out.append({"quantile": jsonfile.typed(f"{source}: omitted[{j}]", "quantile", o["quantile"], float, WHAT),
                    "reason": jsonfile.typed(f"{source}: omitted[{j}]", "reason", o["reason"], str, WHAT)})
    return out


def _read_cell(source, raw, index, where, adversaries, metrics, levels, top) -> ProfileCell:
    c = _fields(source, raw, _CELL)
    _extra(source, raw, list(_CELL) + list(metrics))
    a, T, n = where
    if (c["index"], c["adversary_index"], c["horizon"], c["n_actions"]) != (index, a, T, n):
        raise ConfigError(f"{source}: is ({c['adversary_index']}, T={c['horizon']}, n={c['n_actions']}) where the "
                          f"battery order puts ({a}, T={T}, n={n}); the file was edited")
    if c["adversary"] != adversaries[a]["label"]:
        raise ConfigError(f"{source}: adversary: {c['adversary']!r} is not adversaries[{a}]'s label")
    if c["shared_sequence"] != (c["sequence_seed"] is not None):
        raise ConfigError(f"{source}: sequence_seed: must be given exactly for shared sequences")
    per_metric = {}
    for name in metrics:
        m = _fields(f"{source}.{name}", raw.get(name), _METRIC)
        _extra(f"{source}.{name}", raw[name], _METRIC)
        if len(m["quantiles"]) != len(levels):
            raise ConfigError(f"{source}.{name}.quantiles: {len(m['quantiles'])} entries for {len(levels)} levels")
        points = []
        for j, (p, q) in enumerate(zip(m["quantiles"], levels)):
            where_p = f"{source}.{name}.quantiles[{j}]"
            v = _fields(where_p, p, _POINT)
            _extra(where_p, p, _POINT)
            if v["quantile"] != q:
                raise ConfigError(f"{where_p}: quantile: {v['quantile']:g} where the levels say {q:g}")
            if not v["low"] <= v["value"] <= v["high"]:
                raise ConfigError(f"{where_p}: value {v['value']:g} lies outside its interval "
                                  f"[{v['low']:g}, {v['high']:g}]")
            if not 0 <= v["reference_exceedances"] <= top["reference_replicas"]:
                raise ConfigError(f"{where_p}: reference_exceedances: must lie in [0, {top['reference_replicas']}]")
            if points and v["value"] < points[-1].value:
                raise ConfigError(f"{where_p}: value: below the previous level's; quantiles never decrease")
            points.append(QuantilePoint(**v))
        per_metric[name] = {"mean": m["mean"], "max": m["max"], "quantiles": tuple(points)}
    return ProfileCell(index=index, adversary_label=c["adversary"], adversary_index=a, horizon=T, n_actions=n,
                       shared_sequence=c["shared_sequence"], adaptive=c["adaptive"], seed=c["seed"],
                       sequence_seed=c["sequence_seed"], sequence_digest=c["sequence_digest"], metrics=per_metric)


__all__ = ["record", "record_campaign", "compare", "check_campaign", "rebuild", "TailProfile", "ProfileCell", "QuantilePoint",
           "Comparison", "CellComparison", "QuantileComparison", "PinnedSequence", "sequence_digest", "VERDICTS"]
