"""certify(): judge a learner's claims on a battery of cells, and the Certificate it returns.

A *battery* is learner x claims x adversaries x horizons x n_actions; a *cell*
is one (adversary, horizon, n_actions, claim). Claims on the same
(adversary, horizon, n_actions) share one stream of replicas: one run, many
claims.

Verdicts (DESIGN.md, "Claim and certify"):

- ``high_probability`` (P[metric > bound] <= delta): the violation rate is
  followed by an anytime-valid confidence sequence
  (:func:`harness.stats.rate_sequence`). The cell *fails* once the rate is
  shown above delta, *passes* once it is shown below delta, and is
  *inconclusive* if ``max_replicas`` replicas settle neither.
- ``expectation`` (E[metric] <= bound): the same with the mean, through an
  empirical-Bernstein confidence sequence on the metric's known range
  (:func:`harness.stats.mean_sequence`, :func:`harness.claims.metric_range`).
- ``always`` (metric <= bound on every replica): one violating replica fails
  the cell, with the seed that replays it; with none in ``max_replicas``
  replicas the cell passes, and its interval bounds the violation rate.

Family-wise confidence: every cell's confidence sequence is run at
1 - (1 - confidence) / cells (Bonferroni), so with probability at least
``confidence`` every reported interval covers its cell's true rate or mean at
once, and no verdict is wrong, whatever rule stopped each cell.

Sampling: each (adversary, horizon, n_actions) group plays replicas in
growing rounds (one chunk, then half of what it has so far, in whole chunks)
until all its claims are decided or ``max_replicas`` is reached. A cell's
verdict rests on the replicas up to the first one at which its confidence
sequence decided (``replicas``); the rest of that round (``replicas_run``)
is not used for it.

Seeding (replayable): group (a, T, n), with a the adversary's position in
the battery, gets the integer seed

    SeedSequence(seed, spawn_key=(a, T, n)).generate_state(1)[0]

and its replicas are exactly those of ``harness.run(learner, adversary, T, n,
replicas=replicas_run, seed=group_seed)``: replica r lies in chunk
r // chunk of that run, which ``harness.runner.play_chunk(learner, adversary,
T, n, seed=group_seed, index=r // chunk, replicas=chunk_replicas)`` replays
alone (row r % chunk). A shared adversary therefore keeps one sequence for
the whole group. Results depend on (seed, battery, max_replicas, chunk) only,
never on ``n_jobs``.
"""

from __future__ import annotations

import json
import math
import sys
import time
from dataclasses import asdict, dataclass, field
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from . import jsonfile, stats, validate
from .claims import Claim, metric_range
from .config import int_list, n_jobs as config_n_jobs
from .errors import ConfigError
from .runner import DEFAULT_CHUNK, _check_adversary, _check_learner, dispatch, play_chunk, versions

FORMAT = "boundbreaker-certificate"
FORMAT_VERSION = 1
VERDICTS = ("pass", "fail", "inconclusive")
STATEMENT = ("A pass means that no violation was found on this battery (these adversaries, horizons and numbers "
             "of actions, at the stated confidence); it is never a proof that the claim holds.")
MULTIPLICITY = "Bonferroni over all cells"
NOT_APPLICABLE = "claim made for oblivious adversaries only; this adversary is adaptive"
REPLAYS_KEPT = 3  # violating replicas recorded per cell


# -- cells -------------------------------------------------------------------------


@dataclass(frozen=True)
class Cell:
    """One verdict: a claim on one (adversary, horizon, n_actions).

    ``replicas`` is how many replicas the verdict rests on (the stopping
    point), ``replicas_run`` how many were played. ``violations`` and
    ``rate`` count replicas with metric > bound among the first
    ``replicas``; ``ci_low``/``ci_high`` bound the violation rate
    (high_probability and always claims; None for expectation claims, whose
    verdict rests on ``mean``, ``mean_low``, ``mean_high``). ``replay`` lists
    recorded replicas (violating ones; for expectation claims the largest
    value), each ``{replica, chunk_index, chunk_replicas, row, value}``,
    replayable from ``seed`` as the module docstring says.
    """

    index: int
    adversary: dict
    adversary_label: str
    adversary_index: int
    shared_sequence: bool
    adaptive: bool
    horizon: int
    n_actions: int
    switching_cost: float
    claim: dict
    claim_name: str
    metric: str
    kind: str
    bound: float
    delta: float | None
    replicas: int
    replicas_run: int
    violations: int
    rate: float
    ci_low: float | None
    ci_high: float | None
    verdict: str
    method: str
    reference: str
    seed: int
    chunk: int
    replay: tuple = ()
    mean: float | None = None
    mean_low: float | None = None
    mean_high: float | None = None
    metric_range: tuple | None = None

    def as_dict(self) -> dict:
        out = asdict(self)
        out["replay"] = [dict(r) for r in self.replay]
        out["metric_range"] = list(self.metric_range) if self.metric_range is not None else None
        return out

    @property
    def where(self) -> str:
        """``claim 'x' on adversary, T=.., n=..``: names the cell in messages."""
        return f"claim {self.claim_name!r} on {self.adversary_label}, T={self.horizon}, n={self.n_actions}"

    def replay_hint(self, which: int = 0) -> str:
        """How to replay a recorded replica, as a line of Python."""
        if not self.replay:
            return "no replica recorded"
        r = self.replay[min(which, len(self.replay) - 1)]
        return (f"replica {r['replica']} ({self.metric}={r['value']:.6g}): harness.runner.play_chunk(learner, "
                f"adversary, {self.horizon}, {self.n_actions}, seed={self.seed}, index={r['chunk_index']}, "
                f"replicas={r['chunk_replicas']}) row {r['row']}")

    def summary(self) -> str:
        """One line: what was seen and what it means."""
        if self.kind == "expectation":
            return (f"mean {self.metric} {_num(self.mean)} in [{_num(self.mean_low)}, {_num(self.mean_high)}] "
                    f"vs bound {_num(self.bound)} over {self.replicas} replicas")
        if self.kind == "always":
            return (f"{self.violations} of {self.replicas} replicas exceed the bound {_num(self.bound)}"
                    + ("" if self.violations else f" (violation rate <= {_num(self.ci_high)})"))
        return (f"{self.violations} of {self.replicas} replicas exceed the bound {_num(self.bound)}: rate "
                f"{_num(self.rate)} in [{_num(self.ci_low)}, {_num(self.ci_high)}] vs delta {_num(self.delta)}")


def _num(x) -> str:
    return "-" if x is None else f"{x:.4g}"


# -- certificate ---------------------------------------------------------------------


@dataclass(frozen=True)
class Certificate:
    """The outcome of :func:`certify`: every cell, what was tested, and how to replay it.

    ``verdict`` is "fail" if any cell fails, else "inconclusive" if any is,
    else "pass". ``save``/``load`` write and read JSON (never pickle); load
    refuses a malformed file with a one-line error.
    """

    cells: tuple
    learner: dict
    adversaries: tuple
    claims: tuple
    horizons: tuple
    n_actions: tuple
    confidence: float
    cell_confidence: float
    max_replicas: int
    seed: int
    switching_cost: float
    chunk: int
    campaign: dict
    versions: dict
    created: str
    wall_time_s: float
    statement: str = STATEMENT
    multiplicity: str = MULTIPLICITY
    not_applicable: tuple = ()   # (adversary, claim) pairs not judged: see Claim.scope

    @property
    def verdict(self) -> str:
        found = {c.verdict for c in self.cells}
        return "fail" if "fail" in found else "inconclusive" if "inconclusive" in found else "pass"

    @property
    def counts(self) -> dict:
        return {v: sum(c.verdict == v for c in self.cells) for v in VERDICTS}

    @property
    def digest(self) -> str:
        return self.campaign.get("digest", "")

    def failures(self) -> list:
        return [c for c in self.cells if c.verdict == "fail"]

    def to_dict(self) -> dict:
        return {
            "format": FORMAT, "format_version": FORMAT_VERSION, "verdict": self.verdict,
            "statement": self.statement, "counts": self.counts,
            "confidence": self.confidence, "cell_confidence": self.cell_confidence,
            "multiplicity": self.multiplicity, "seed": self.seed, "max_replicas": self.max_replicas,
            "chunk": self.chunk, "switching_cost": self.switching_cost, "campaign": dict(self.campaign),
            "learner": self.learner, "adversaries": list(self.adversaries), "claims": list(self.claims),
            "horizons": list(self.horizons), "n_actions": list(self.n_actions), "versions": self.versions,
            "created": self.created, "wall_time_s": self.wall_time_s,
            "not_applicable": [dict(x) for x in self.not_applicable],
            "cells": [c.as_dict() for c in self.cells],
        }

    def save(self, path) -> Path:
        """Write the certificate as JSON (atomically); returns the path."""
        return jsonfile.write(path, json.dumps(self.to_dict(), indent=2, allow_nan=False))

    @classmethod
    def load(cls, path) -> "Certificate":
        data = jsonfile.read(path, "certificate", "save certificates with Certificate.save")
        return cls.from_dict(data, source=str(Path(path)))

    @classmethod
    def from_dict(cls, data, source: str = "certificate") -> "Certificate":
        """Rebuild from :meth:`to_dict` output, checking every field."""
        return _read_certificate(data, source)

    def table(self) -> str:
        return format_table(self)

    def markdown(self) -> str:
        return format_markdown(self)


# -- certify --------------------------------------------------------------------------


def certify(learner, claims, adversaries, horizons, n_actions, confidence=0.95, max_replicas=20000, seed=0,
            n_jobs=1, *, switching_cost=0.0, labels=None, chunk=DEFAULT_CHUNK, progress=False,
            campaign=None, checkpoint=None) -> Certificate:
    """Judge ``claims`` (a Claim, a list of them, or None for the learner's own
    ``claims``) on every (adversary, horizon, n_actions) of the battery.

    ``adversaries`` are Adversary objects or registry names; ``horizons`` and
    ``n_actions`` are integers or lists of them. ``confidence`` is family-wise
    over all cells. ``labels`` optionally names the adversaries in tables.
    ``campaign`` (used by :func:`certify_campaign`) records the campaign
    file's name, path and digest. ``checkpoint=DIR`` saves every finished
    chunk there; rerunning the same certification resumes from them and
    reaches the same certificate (see :mod:`harness.checkpoint`). See the
    module docstring for the sampling, the verdicts and the seeding.
    """
    started = time.perf_counter()
    _check_learner(learner)
    claims = _claims(learner, claims)
    adversaries = _adversaries(adversaries)
    labels = adversary_labels(labels, adversaries)
    horizons = int_list("horizons", horizons, minimum=1)
    n_actions = int_list("n_actions", n_actions, minimum=2)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    max_replicas = validate.positive_int("max_replicas", max_replicas)
    seed = validate.nonneg_int("seed", seed)
    chunk = validate.positive_int("chunk", chunk)
    switching_cost = validate.real("switching_cost", switching_cost, low=0.0)
    n_jobs = config_n_jobs("n_jobs", n_jobs)

    groups, not_applicable = [], []
    for a, adversary in enumerate(adversaries):
        applicable = tuple(c for c in claims if c.applies_to(adversary))
        not_applicable += [{"adversary_label": labels[a], "claim_name": c.name, "reason": NOT_APPLICABLE}
                           for c in claims if not c.applies_to(adversary)]
        for T in horizons:
            for n in n_actions:
                if applicable:
                    groups.append(_Group(a, adversary, labels[a], T, n, group_seed(seed, a, T, n), applicable,
                                         switching_cost))
    total_cells = sum(len(g.claims) for g in groups)
    if not total_cells:
        raise ConfigError("claims: none applies to any adversary of the battery (oblivious-only claims need "
                          "an oblivious adversary); add one")
    cell_confidence = stats.bonferroni(confidence, total_cells)
    for g in groups:
        g.prepare(cell_confidence, max_replicas, chunk)

    store = None
    if checkpoint is not None:
        from .checkpoint import ChunkStore
        store = ChunkStore(checkpoint, {"certify": {"learner": learner.spec(),
                                                    "adversaries": [a.spec() for a in adversaries],
                                                    "seed": seed, "chunk": chunk, "versions": versions()}})
    _play(learner, groups, n_jobs, progress, total_cells, store)

    cells = []
    for g in groups:
        for state in g.states:
            cells.append(g.cell(state, len(cells)))
    battery = _battery(learner, claims, adversaries, labels, horizons, n_actions, confidence, max_replicas, seed,
                       switching_cost)
    info = {"name": None, "path": None, "digest": _digest(battery)}
    if campaign:
        info.update(campaign)
    return Certificate(
        cells=tuple(cells), learner=battery["learner"], adversaries=tuple(battery["adversaries"]),
        claims=tuple(battery["claims"]), horizons=tuple(horizons), n_actions=tuple(n_actions),
        confidence=confidence, cell_confidence=cell_confidence, max_replicas=max_replicas, seed=seed,
        switching_cost=switching_cost, chunk=chunk, campaign=info, versions=versions(),
        created=datetime.now(timezone.utc).isoformat(timespec="seconds"),
        wall_time_s=round(time.perf_counter() - started, 3), not_applicable=tuple(not_applicable))


def certify_campaign(campaign, n_jobs=None, progress=False, checkpoint=None) -> Certificate:
    """Certify a :class:`harness.config.Campaign` (a loaded campaign file)."""
    learner = campaign.build_learner()
    return certify(learner, list(campaign.claims), campaign.build_adversaries(), campaign.horizons,
                   campaign.n_actions, confidence=campaign.confidence, max_replicas=campaign.max_replicas,
                   seed=campaign.seed, n_jobs=campaign.n_jobs if n_jobs is None else n_jobs,
                   switching_cost=campaign.switching_cost, labels=[s["label"] for s in campaign.adversary_specs],
                   progress=progress, checkpoint=checkpoint,
                   campaign={"name": campaign.name, "path": _portable(campaign.path), "digest": campaign.digest})


def _portable(path) -> str:
    """How a certificate names its campaign file: a bundled demo by its package path (the same on
    every machine), a user's file as the user gave it."""
    from .config import demo_path

    try:
        if Path(path).resolve().parent == demo_path().resolve().parent:
            return f"harness/demos/{Path(path).name}"
    except OSError:
        pass
    return str(path)


def group_seed(seed: int, adversary_index: int, horizon: int, n_actions: int) -> int:
    """The integer seed of group (adversary, T, n); see the module docstring."""
    ss = np.random.SeedSequence(seed, spawn_key=(adversary_index, horizon, n_actions))
    return int(ss.generate_state(1)[0])


def _claims(learner, claims) -> tuple:
    if claims is None:
        claims = getattr(learner, "claims", ()) or ()
        if not claims:
            raise ConfigError(f"claims: none given and learner {type(learner).__name__} carries none; pass "
                              f"harness.Claim objects")
    if isinstance(claims, Claim):
        claims = (claims,)
    try:
        claims = tuple(claims)
    except TypeError:
        raise ConfigError(f"claims: give a Claim or a list of them, got {type(claims).__name__}") from None
    if not claims:
        raise ConfigError("claims: the list is empty; give at least one harness.Claim")
    for i, c in enumerate(claims):
        if not isinstance(c, Claim):
            raise ConfigError(f"claims[{i}]: must be a harness.Claim, got {type(c).__name__}")
    names = [c.name for c in claims]
    for name in names:
        if names.count(name) > 1:
            raise ConfigError(f"claims: two claims are named {name!r}; give each a distinct name=")
    return claims


def _adversaries(adversaries) -> list:
    import adversaries as registry
    from .protocol import Adversary

    if isinstance(adversaries, (str, Adversary)):
        adversaries = [adversaries]
    out = []
    for i, adv in enumerate(adversaries or ()):
        if isinstance(adv, str):
            adv = registry.get(adv)
        _check_adversary(adv)
        out.append(adv)
    if not out:
        raise ConfigError("adversaries: give at least one adversary (an Adversary or a registry name)")
    return out


def adversary_labels(labels, adversaries) -> list:
    if labels is None:
        return [adversary_label(a.spec()) for a in adversaries]
    labels = [str(x) for x in labels]
    if len(labels) != len(adversaries):
        raise ConfigError(f"labels: give one per adversary ({len(adversaries)}), got {len(labels)}")
    return labels


def adversary_label(spec: dict) -> str:
    """``name(key=value, ...)`` from a spec."""
    params = ", ".join(f"{k}={v}" for k, v in (spec.get("params") or {}).items())
    name = spec.get("name") or str(spec.get("class", "?")).rpartition(":")[2]
    return f"{name}({params})"


def _battery(learner, claims, adversaries, labels, horizons, n_actions, confidence, max_replicas, seed,
             switching_cost) -> dict:
    advs = []
    for adv, label in zip(adversaries, labels):
        spec = dict(adv.spec())
        spec["label"] = label
        advs.append(spec)
    return {"learner": learner.spec(), "claims": [c.spec() for c in claims], "adversaries": advs,
            "horizons": list(horizons), "n_actions": list(n_actions), "confidence": confidence,
            "max_replicas": max_replicas, "seed": seed, "switching_cost": switching_cost}


def _digest(data) -> str:
    return jsonfile.digest(data)


# -- sampling --------------------------------------------------------------------------


@dataclass
class _State:
    claim: Claim
    bound: float
    test: object = None          # SequentialTest once decided (or at the end)
    verdict: str | None = None
    used: int = 0                # replicas the verdict rests on
    replay: tuple = ()


@dataclass
class _Group:
    """Replicas of one (adversary, horizon, n_actions), shared by its claims."""

    adversary_index: int
    adversary: object
    label: str
    horizon: int
    n_actions: int
    seed: int
    claims: tuple
    switching_cost: float
    states: list = field(default_factory=list)
    regret: list = field(default_factory=list)
    switches: list = field(default_factory=list)
    played: int = 0
    next_chunk: int = 0

    def prepare(self, cell_confidence, max_replicas, chunk):
        self.cell_confidence, self.max_replicas, self.chunk = cell_confidence, max_replicas, chunk
        for claim in self.claims:
            bound = claim.bound_at(self.horizon, self.n_actions)
            if not math.isfinite(bound):
                raise ConfigError(f"claim {claim.name!r}: bound is {bound} at T={self.horizon}, "
                                  f"n={self.n_actions}; give a finite bound")
            self.states.append(_State(claim, bound))

    @property
    def open(self) -> bool:
        return self.played < self.max_replicas and any(s.verdict is None for s in self.states)

    def next_batch(self) -> list:
        """(chunk index, replicas) of this round: one chunk first, then half of what was played."""
        want = self.chunk if self.played == 0 else max(self.chunk, math.ceil(self.played / 2 / self.chunk) * self.chunk)
        want = min(want, self.max_replicas - self.played)
        jobs, start = [], self.played
        while want > 0:
            size = min(self.chunk, want)
            jobs.append((start // self.chunk, size))
            start += size
            want -= size
        return jobs

    def add(self, results):
        for regret, switches in results:
            self.regret.append(np.asarray(regret, dtype=float))
            self.switches.append(np.asarray(switches, dtype=np.int64))
            self.played += len(regret)
        self.next_chunk += len(results)

    def values(self, metric) -> np.ndarray:
        regret = np.concatenate(self.regret)
        if metric == "regret":
            return regret
        switches = np.concatenate(self.switches).astype(float)
        return switches if metric == "switches" else regret + self.switching_cost * switches

    def judge(self):
        final = self.played >= self.max_replicas
        for s in self.states:
            if s.verdict is not None:
                continue
            values = self.values(s.claim.metric)
            if s.claim.kind == "high_probability":
                test = stats.rate_sequence(values > s.bound, s.claim.delta, self.cell_confidence)
                if test.decision != "undecided" or final:
                    s.verdict = {"above": "fail", "below": "pass"}.get(test.decision, "inconclusive")
                    s.test, s.used = test, test.n
            elif s.claim.kind == "always":
                hits = np.flatnonzero(values > s.bound)
                if hits.size or final:
                    s.used = int(hits[0]) + 1 if hits.size else self.played
                    s.verdict = "fail" if hits.size else "pass"
                    s.test = stats.rate_sequence(values[:s.used] > s.bound, _prior_centre(s.claim),
                                                 self.cell_confidence, stop=False)
            else:
                lo, hi = metric_range(s.claim.metric, self.horizon, self.switching_cost)
                hi = max(hi, lo + 1.0)  # T = 1 leaves switches no room; any width keeps the test valid
                # float sums can overshoot the exact range by an ulp
                test = stats.mean_sequence(np.clip(values, lo, hi), s.bound, lo, hi, self.cell_confidence)
                if test.decision != "undecided" or final:
                    s.verdict = {"above": "fail", "below": "pass"}.get(test.decision, "inconclusive")
                    s.test, s.used = test, test.n
            if s.verdict is not None:
                s.replay = self._replays(s, values[:s.used])

    def _replays(self, s, values) -> tuple:
        if s.claim.kind == "expectation":
            picked = [int(np.argmax(values))]
        else:
            picked = np.flatnonzero(values > s.bound)[:REPLAYS_KEPT].tolist()
        out = []
        for r in picked:
            k = r // self.chunk
            out.append({"replica": int(r), "chunk_index": int(k),
                        "chunk_replicas": int(min(self.chunk, self.max_replicas - k * self.chunk)),
                        "row": int(r - k * self.chunk), "value": float(values[r])})
        return tuple(out)

    def cell(self, s, index) -> Cell:
        values = self.values(s.claim.metric)[:s.used]
        violations = int(np.count_nonzero(values > s.bound))
        test = s.test
        expectation = s.claim.kind == "expectation"
        rng = metric_range(s.claim.metric, self.horizon, self.switching_cost)
        return Cell(
            index=index, adversary=self.adversary.spec(), adversary_label=self.label,
            adversary_index=self.adversary_index,
            shared_sequence=bool(getattr(self.adversary, "shared", False)) and not self.adversary.adaptive,
            adaptive=bool(self.adversary.adaptive), horizon=self.horizon, n_actions=self.n_actions,
            switching_cost=self.switching_cost, claim=s.claim.spec(), claim_name=s.claim.name,
            metric=s.claim.metric, kind=s.claim.kind, bound=float(s.bound),
            delta=float(s.claim.delta) if s.claim.kind == "high_probability" else None,
            replicas=int(s.used), replicas_run=int(self.played), violations=violations,
            rate=violations / s.used, ci_low=None if expectation else test.low,
            ci_high=None if expectation else test.high, verdict=s.verdict,
            method=("one violating replica disproves it; " if s.claim.kind == "always" else "") + test.method,
            reference=test.reference, seed=self.seed, chunk=self.chunk, replay=s.replay,
            mean=test.estimate if expectation else None, mean_low=test.low if expectation else None,
            mean_high=test.high if expectation else None, metric_range=rng if expectation else None)


def _chunk_name(group, index: int) -> str:
    return f"group-{group.adversary_index}-T{group.horizon}-n{group.n_actions}-chunk-{index:06d}"


def _prior_centre(claim) -> float:
    """Where the interval's mixing prior sits for an "always" claim (validity does not depend on it)."""
    d = claim.delta
    return d if isinstance(d, (int, float)) and 0 < d < 1 else 0.05


def _play(learner, groups, n_jobs, progress, total_cells, store=None):
    show = progress and sys.stderr.isatty()
    rounds = 0
    while True:
        active = [g for g in groups if g.open]
        if not active:
            break
        rounds += 1
        plan = [(g, k, size) for g in active for k, size in g.next_batch()]
        results, todo = [None] * len(plan), []
        for i, (g, k, size) in enumerate(plan):
            saved = store.get(_chunk_name(g, k), size) if store else None
            if saved is not None:
                results[i] = saved
            else:
                todo.append((i, (learner, g.adversary, g.horizon, g.n_actions, g.seed, k, size)))
        for i, regret, switches in dispatch(todo, n_jobs):
            if store is not None:
                g, k, _ = plan[i]
                store.save(_chunk_name(g, k), regret, switches)  # at once: an interruption loses nothing
            results[i] = (regret, switches)
        by_group = {}  # in plan order, so results never depend on which chunk finished first
        for (g, _, _), res in zip(plan, results):
            by_group.setdefault(id(g), (g, []))[1].append(res)
        for g, res in by_group.values():
            g.add(res)
            g.judge()
        if show:
            decided = sum(s.verdict is not None for g in groups for s in g.states)
            played = sum(g.played for g in groups)
            sys.stderr.write(f"\rround {rounds}: {decided}/{total_cells} cells decided, {played} replicas played ")
            sys.stderr.flush()
    if show:
        sys.stderr.write("\n")


# -- replay ------------------------------------------------------------------------------


def replay_replica(cell, learner, adversary=None, which: int = 0) -> float:
    """Replay a replica recorded in a cell and return its metric value.

    ``cell`` is a :class:`Cell` or its dict; ``adversary`` defaults to the
    one rebuilt from the cell's spec (registry name or ``module:Class``).
    The value equals the recorded one exactly.
    """
    if isinstance(cell, dict):
        cell = _read_cell(cell, "cell")
    if not cell.replay:
        raise ConfigError(f"{cell.where}: no replica was recorded for this cell")
    if not 0 <= which < len(cell.replay):
        raise ConfigError(f"which: must lie in [0, {len(cell.replay)}), got {which}")
    if adversary is None:
        adversary = build_from_spec(cell.adversary, "adversary")
    r = cell.replay[which]
    regret, switches = play_chunk(learner, adversary, cell.horizon, cell.n_actions, cell.seed, r["chunk_index"],
                                  r["chunk_replicas"])
    row = r["row"]
    if cell.metric == "regret":
        return float(regret[row])
    if cell.metric == "switches":
        return float(switches[row])
    return float(regret[row] + cell.switching_cost * switches[row])


def build_from_spec(spec: dict, kind: str):
    """Rebuild a learner or adversary from its spec (registry name, else ``module:Class``)."""
    if kind == "adversary":
        import adversaries
        return adversaries.from_spec({k: spec[k] for k in ("name", "class", "params") if k in spec})
    from .learners import get
    return get(spec.get("name") or spec.get("class"), **(spec.get("params") or {}))


# -- output ---------------------------------------------------------------------------------


_KIND_SHORT = {"high_probability": "w.p.", "expectation": "mean", "always": "always"}


def _rows(cert) -> list:
    rows = []
    for c in cert.cells:
        if c.kind == "expectation":
            seen = f"mean {_num(c.mean)} [{_num(c.mean_low)}, {_num(c.mean_high)}]"
        elif c.kind == "always":
            seen = f"{c.violations} viol." + ("" if c.violations else f" rate<={_num(c.ci_high)}")
        else:
            seen = f"rate {_num(c.rate)} [{_num(c.ci_low)}, {_num(c.ci_high)}]"
        kind = _KIND_SHORT[c.kind] + (f" 1-{c.delta:g}" if c.kind == "high_probability" else "")
        rows.append([str(c.index), c.adversary_label, str(c.horizon), str(c.n_actions), c.claim_name, kind,
                     _num(c.bound), str(c.replicas), seen, c.verdict.upper() if c.verdict == "fail" else c.verdict])
    return rows


_HEAD = ["#", "adversary", "T", "n", "claim", "kind", "bound", "replicas", "observed [interval]", "verdict"]


def format_table(cert) -> str:
    """The verdict table printed by ``boundbreaker certify``."""
    rows = _rows(cert)
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(_HEAD)]
    right = {0, 2, 3, 6, 7}

    def line(cells):
        return "  ".join(c.rjust(w) if i in right else c.ljust(w) for i, (c, w) in enumerate(zip(cells, widths)))

    name = cert.campaign.get("name") or "certify"
    counts = cert.counts
    head = [f"{name}: learner {adversary_label(cert.learner)}; {len(cert.cells)} cells, confidence "
            f"{cert.confidence:g} family-wise ({cert.multiplicity}: {cert.cell_confidence:.6g} per cell), "
            f"seed {cert.seed}",
            "", line(_HEAD), line(["-" * w for w in widths])]
    body = [line(r) for r in rows]
    tail = ["", f"verdict: {cert.verdict.upper()}  ({counts['pass']} pass, {counts['fail']} fail, "
                f"{counts['inconclusive']} inconclusive)"]
    for c in cert.failures()[:5]:
        tail.append(f"  fail: {c.where}: {c.summary()}")
        if c.replay:
            tail.append(f"        replay {c.replay_hint()}")
    if len(cert.failures()) > 5:
        tail.append(f"  ... and {len(cert.failures()) - 5} more failing cells (see the certificate)")
    tail += not_applicable_lines(cert)
    tail.append(cert.statement)
    return "\n".join(head + body + tail)


def not_applicable_lines(cert) -> list:
    """One line per claim that was not judged on some adversary (Claim.scope)."""
    return [f"  not judged: claim {row['claim_name']!r} on {row['adversary_label']}: {row['reason']}"
            for row in cert.not_applicable]


def format_markdown(cert) -> str:
    """A Markdown summary of the certificate (``summary.md`` of a report)."""
    name = cert.campaign.get("name") or "certification"
    counts = cert.counts
    out = [f"# {name}: {cert.verdict}", "",
           f"> {cert.statement}", "",
           f"- learner: `{adversary_label(cert.learner)}`",
           f"- cells: {len(cert.cells)} ({counts['pass']} pass, {counts['fail']} fail, "
           f"{counts['inconclusive']} inconclusive)",
           f"- confidence: {cert.confidence:g} family-wise ({cert.multiplicity}; {cert.cell_confidence:.6g} "
           f"per cell, anytime-valid so early stopping inflates no error)",
           f"- seed: {cert.seed}; max replicas per cell: {cert.max_replicas}; campaign digest: "
           f"`{cert.digest[:16]}`",
           f"- created: {cert.created}; wall time {cert.wall_time_s:.1f} s", "",
           "| " + " | ".join(_HEAD) + " |", "|" + "|".join("---" for _ in _HEAD) + "|"]
    for r in _rows(cert):
        out.append("| " + " | ".join(x.replace("|", "\\|") for x in r) + " |")
    if cert.failures():
        out += ["", "## Failing cells", ""]
        for c in cert.failures():
            out.append(f"- {c.where}: {c.summary()}.")
            if c.replay:
                out.append(f"  Replay {c.replay_hint()}.")
    if cert.not_applicable:
        out += ["", "## Not judged", ""]
        out += [f"- claim `{row['claim_name']}` on {row['adversary_label']}: {row['reason']}."
                for row in cert.not_applicable]
    out += ["", "## How to read this", "",
            "A high-probability claim fails when its violation rate is shown above delta, passes when it is "
            "shown below delta, and is inconclusive when the replicas settle neither. An expectation claim does "
            "the same with the mean, judged on the metric's worst-case range. An always claim fails on one "
            "violating replica and passes when none of the replicas violates it.",
            "Sequences: a shared adversary draws one sequence for all replicas (probabilities over the "
            "learner's randomness on it); otherwise one per replica.", ""]
    return "\n".join(out)


def write_report(cert, directory, **options) -> dict:
    """Write the report of ``cert`` into ``directory``; returns the paths written.

    ``certificate.json``, ``summary.md`` (Markdown), ``report.html`` (self-contained) and ``figures/``:
    see :func:`harness.report.write_report`, which takes the keyword ``options``.
    """
    from .report import write_report as write

    return write(cert, directory, **options)


# -- loading and checking ----------------------------------------------------------------------

_CELL_TYPES = {
    "index": int, "adversary": dict, "adversary_label": str, "adversary_index": int, "shared_sequence": bool,
    "adaptive": bool, "horizon": int, "n_actions": int, "switching_cost": float, "claim": dict,
    "claim_name": str, "metric": str, "kind": str, "bound": float, "delta": (float, None), "replicas": int,
    "replicas_run": int, "violations": int, "rate": float, "ci_low": (float, None), "ci_high": (float, None),
    "verdict": str, "method": str, "reference": str, "seed": int, "chunk": int, "replay": list,
    "mean": (float, None), "mean_low": (float, None), "mean_high": (float, None),
    "metric_range": (list, None),
}
_TOP_TYPES = {
    "format": str, "format_version": int, "verdict": str, "statement": str, "confidence": float,
    "cell_confidence": float, "multiplicity": str, "seed": int, "max_replicas": int, "chunk": int,
    "switching_cost": float, "campaign": dict, "learner": dict, "adversaries": list, "claims": list,
    "horizons": list, "n_actions": list, "versions": dict, "created": str, "wall_time_s": float, "cells": list,
    "not_applicable": list,
}
_REPLAY_KEYS = ("replica", "chunk_index", "chunk_replicas", "row", "value")


def _typed(source, key, value, want):
    return jsonfile.typed(source, key, value, want, "certificate")


def _read_cell(data, source) -> Cell:
    if not isinstance(data, dict):
        raise ConfigError(f"{source}: must be an object")
    values = {}
    for key, want in _CELL_TYPES.items():
        if key not in data:
            raise ConfigError(f"{source}.{key}: missing; the file is not a complete certificate")
        values[key] = _typed(source, key, data[key], want)
    extra = set(data) - set(_CELL_TYPES)
    if extra:
        raise ConfigError(f"{source}: unknown field {sorted(extra)[0]!r}; the file was edited or comes from "
                          f"another version")
    if values["verdict"] not in VERDICTS:
        raise ConfigError(f"{source}.verdict: must be pass, fail or inconclusive, got {values['verdict']!r}")
    if values["kind"] not in ("high_probability", "expectation", "always"):
        raise ConfigError(f"{source}.kind: unknown kind {values['kind']!r}")
    replay = []
    for j, r in enumerate(values["replay"]):
        if not isinstance(r, dict) or set(r) != set(_REPLAY_KEYS):
            raise ConfigError(f"{source}.replay[{j}]: must hold exactly {', '.join(_REPLAY_KEYS)}")
        replay.append({k: _typed(f"{source}.replay[{j}]", k, r[k], float if k == "value" else int)
                       for k in _REPLAY_KEYS})
    values["replay"] = tuple(replay)
    if values["metric_range"] is not None:
        values["metric_range"] = tuple(float(x) for x in values["metric_range"])
    return Cell(**values)


def _read_not_applicable(rows, source) -> tuple:
    keys = {"adversary_label", "claim_name", "reason"}
    for j, row in enumerate(rows):
        if not isinstance(row, dict) or set(row) != keys or not all(isinstance(v, str) for v in row.values()):
            raise ConfigError(f"{source}: not_applicable[{j}]: must hold the strings {', '.join(sorted(keys))}")
    return tuple(dict(r) for r in rows)


def _read_certificate(data, source) -> Certificate:
    if not isinstance(data, dict):
        raise ConfigError(f"{source}: must hold a JSON object; save certificates with Certificate.save")
    if data.get("format") != FORMAT:
        raise ConfigError(f"{source}: format: not a boundbreaker certificate (expected format {FORMAT!r})")
    extra = set(data) - set(_TOP_TYPES) - {"counts"}  # counts are derived from the cells
    if extra:
        raise ConfigError(f"{source}: {sorted(extra)[0]}: unknown field; the file was edited or comes from "
                          f"another version")
    values = {}
    for key, want in _TOP_TYPES.items():
        if key not in data:
            raise ConfigError(f"{source}: {key}: missing; the file is not a complete certificate")
        values[key] = _typed(source, key, data[key], want)
    if values["format_version"] != FORMAT_VERSION:
        raise ConfigError(f"{source}: format_version {values['format_version']} is not supported "
                          f"(this boundbreaker reads {FORMAT_VERSION}); certify again")
    cells = tuple(_read_cell(c, f"{source}: cells[{i}]") for i, c in enumerate(values["cells"]))
    for i, c in enumerate(cells):
        if c.index != i:
            raise ConfigError(f"{source}: cells[{i}].index: is {c.index}; cells must be in order")
    cert = Certificate(
        cells=cells, learner=values["learner"], adversaries=tuple(values["adversaries"]),
        claims=tuple(values["claims"]), horizons=tuple(values["horizons"]), n_actions=tuple(values["n_actions"]),
        confidence=values["confidence"], cell_confidence=values["cell_confidence"],
        max_replicas=values["max_replicas"], seed=values["seed"], switching_cost=values["switching_cost"],
        chunk=values["chunk"], campaign=values["campaign"], versions=values["versions"],
        created=values["created"], wall_time_s=values["wall_time_s"], statement=values["statement"],
        multiplicity=values["multiplicity"], not_applicable=_read_not_applicable(values["not_applicable"], source))
    if values["verdict"] != cert.verdict:
        raise ConfigError(f"{source}: verdict: says {values['verdict']!r} but its cells give {cert.verdict!r}; "
                          f"the file was edited")
    return cert


__all__ = ["certify", "certify_campaign", "Certificate", "Cell", "replay_replica", "write_report", "STATEMENT"]
