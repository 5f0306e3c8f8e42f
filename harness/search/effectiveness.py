"""How many evaluations each search method needs to find a planted defect.

A benchmark, not a test: ``python -m harness.search.effectiveness`` (or the
``bench``-marked test in tests/test_search_bench.py) runs every method on
every planted defect over several seeds and prints, per (defect, method),
how many searches found it within the budget and the evaluations they
needed (median, mean and the individual runs; a run that did not find it
counts as "> budget").

Planted defects (:data:`SUBJECTS`) are learners that break a published
claim on some sequences, with the claim they break.
"""

from __future__ import annotations

import argparse
import json
import math
import time
from dataclasses import dataclass
from typing import Callable

import numpy as np

from .. import kernels
from ..learners.experts import cumulative_before, hedge_cdf
from ..protocol import Learner

# "hypothesis-generated": the Hypothesis method without the plain pattern examples tried first
# (plain_first=False), to show what generation, targeting and shrinking do on their own.
METHODS = ("hypothesis", "hypothesis-generated", "cem", "random")


@dataclass(frozen=True)
class Subject:
    name: str
    learner: Callable
    claim: object
    horizon: int
    n_actions: int
    note: str = ""


class StaleHedge(Learner):
    """PLANTED DEFECT: Hedge whose weights are refreshed only every ``batch`` rounds.

    In round t it draws from p(i) ~ exp(-eta L_s(i)) with s = batch * floor(t / batch) the last
    refresh (a service that recomputes its policy once per batch of requests); eta is Hedge's
    default sqrt(8 ln n / T). On i.i.d. or fast-alternating losses it behaves like Hedge; a
    sequence whose leader changes in step with the refreshes makes it follow the stale leader
    every round, for regret linear in T. Not a published algorithm: a bench subject.
    """

    def __init__(self, batch=16):
        self.batch = batch

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._replicas, self._rng, self._t = n_actions, replicas, rng, 0
        self._eta = math.sqrt(8 * math.log(n_actions) / horizon)
        self._cum = np.zeros(n_actions)       # shared state until a per-replica block arrives
        self._stale = np.zeros(n_actions)

    def _per_replica(self):
        if self._cum.ndim == 1:
            self._cum = np.tile(self._cum, (self._replicas, 1))
            self._stale = np.tile(self._stale, (self._replicas, 1))

    def act(self):
        self._per_replica()
        cdf = hedge_cdf(self._stale, self._eta)
        u = self._rng.random(self._replicas)
        return np.minimum((cdf < u[:, None]).sum(axis=1), self._n - 1).astype(np.int64)

    def update(self, actions, losses):
        self._per_replica()
        self._cum = self._cum + losses
        self._t += 1
        if self._t % self.batch == 0:
            self._stale = self._cum.copy()

    def play_block(self, losses):
        if losses.ndim != 2 or self._cum.ndim != 1:
            return super().play_block(losses)
        steps = losses.shape[0]
        before, after = cumulative_before(self._cum, losses)
        t = self._t + np.arange(steps)
        refresh = (t // self.batch) * self.batch - self._t     # index of the last refresh in this block
        stale = np.where((refresh >= 0)[:, None], before[np.maximum(refresh, 0)], self._stale)
        actions = kernels.sample_rows(hedge_cdf(stale, self._eta), self._rng.random((steps, self._replicas)))
        end = self._t + steps
        last = (end // self.batch) * self.batch - self._t
        self._stale = (after if last == steps else before[last]) if last >= 0 else self._stale
        self._cum, self._t = after, end
        return actions


def _hedge_claim():
    from ..claims import Claim

    # Cesa-Bianchi and Lugosi 2006, Theorem 2.2 (mixture regret), plus Hoeffding-Azuma for the draws.
    return Claim("regret", "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", delta=0.05,
                 name="hedge regret, high probability",
                 source="Cesa-Bianchi and Lugosi 2006, Thm 2.2, plus Hoeffding-Azuma")


def _hot_hedge(c: float, horizon: int, n: int):
    def build():
        from ..learners import get

        return get("hedge", eta=c * math.sqrt(8 * math.log(n) / horizon))
    return build


def _registered(name: str):
    from ..learners import get

    return get(name)


def subjects() -> list[Subject]:
    out = [
        Subject("hedge-hot-10x (n=2)", _hot_hedge(10, 1000, 2), _hedge_claim(), 1000, 2,
                "eta ten times sqrt(8 ln n / T)"),
        Subject("hedge-hot-6x (n=4)", _hot_hedge(6, 1000, 4), _hedge_claim(), 1000, 4,
                "eta six times sqrt(8 ln n / T)"),
        Subject("flawed-heavy-tail (n=2)", lambda: _registered("flawed-heavy-tail"),
                _registered("flawed-heavy-tail").claims[1], 1000, 2,
                "learners issue: 1% of replicas switch every round from a random onset; claims delta 0.001"),
        Subject("stale-hedge (batch 16)", lambda: StaleHedge(16), _hedge_claim(), 1000, 2,
                "weights refreshed every 16 rounds; only leader changes in step with the refreshes hurt it"),
    ]
    return out


def measure(subject: Subject, method: str, seeds, budget: int, replicas: int = 256) -> dict:
    from . import search

    runs = []
    started = time.perf_counter()
    for seed in seeds:
        options = {"method": "hypothesis", "plain_first": False} if method == "hypothesis-generated" else \
            {"method": method}
        found = search(subject.learner(), subject.claim, subject.horizon, subject.n_actions, max_examples=budget,
                       replicas=replicas, seed=seed, **options)
        runs.append(found.evaluations_to_find if found else None)
    hits = [r for r in runs if r is not None]
    return {"subject": subject.name, "method": method, "budget": budget, "seeds": list(seeds),
            "found": len(hits), "runs": runs,
            "median": float(np.median([r if r is not None else math.inf for r in runs])),
            "mean_found": float(np.mean(hits)) if hits else None,
            "wall_s": time.perf_counter() - started}


def main(seeds=range(10), budget: int = 300, methods=METHODS, names=None) -> list[dict]:
    rows = []
    for subject in subjects():
        if names and subject.name not in names:
            continue
        for method in methods:
            rows.append(measure(subject, method, list(seeds), budget))
    return rows


def format_rows(rows) -> str:
    lines = [f"{'defect':<24}{'method':<22}{'found':>8}{'median':>9}{'mean(found)':>13}  runs"]
    for r in rows:
        median = "> budget" if math.isinf(r["median"]) else f"{r['median']:.0f}"
        mean = "-" if r["mean_found"] is None else f"{r['mean_found']:.1f}"
        runs = " ".join("-" if x is None else str(x) for x in r["runs"])
        lines.append(f"{r['subject']:<24}{r['method']:<22}{r['found']:>4}/{len(r['runs']):<3}{median:>9}"
                     f"{mean:>13}  {runs}")
    return "\n".join(lines)


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=10)
    parser.add_argument("--budget", type=int, default=300)
    parser.add_argument("--methods", default=",".join(METHODS))
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()
    result = main(range(args.seeds), args.budget, args.methods.split(","))
    print(json.dumps(result, indent=2) if args.json else format_rows(result))
