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


def subjects() -> list[Subject]:
    out = [
        Subject("hedge-hot-10x (n=2)", _hot_hedge(10, 1000, 2), _hedge_claim(), 1000, 2,
                "eta ten times sqrt(8 ln n / T)"),
        Subject("hedge-hot-6x (n=4)", _hot_hedge(6, 1000, 4), _hedge_claim(), 1000, 4,
                "eta six times sqrt(8 ln n / T)"),
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
