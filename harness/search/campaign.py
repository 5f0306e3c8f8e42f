"""``boundbreaker search CAMPAIGN.toml``: search every (claim, horizon, n) cell of a campaign.

The campaign's [learner], [[claims]] (and the learner's own claims when
[campaign] use_learner_claims is true), [grid] (horizons, n_actions,
switching_cost) and [search] (max_examples, replicas, method) sections set
the searches; the adaptive adversaries among [[adversaries]] have their
parameters searched too (oblivious ones are covered by the genome space);
[campaign] seed and confidence set the seeds and the error level. The chance of any false counterexample across the whole command is
kept at 1 - confidence by giving each of the k cells searched the level
(1 - confidence) / k (Bonferroni). Cells are searched in order (claims as
listed, then horizons, then n) and the command stops at the first
counterexample, which it saves.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

from ..errors import ConfigError
from .evaluate import derived_seed

@dataclass
class CampaignSearch:
    """The outcome of searching a campaign: the counterexample (or None) and every cell's result."""

    campaign: str
    found: object = None
    path: str | None = None
    cells: list = field(default_factory=list)   # (claim name, horizon, n, outcome)

    def describe(self) -> str:
        lines = []
        for name, horizon, n, outcome in self.cells:
            lines.append(f"{name} T={horizon} n={n}: " + (
                f"COUNTEREXAMPLE found after {outcome.evaluations_to_find} evaluations "
                f"({outcome.evaluations} in all)" if outcome else
                f"none in {outcome.evaluations} evaluations"))
        if self.found:
            lines += ["", self.found.describe(), f"saved to {self.path}",
                      f"replay: boundbreaker replay {self.path}"]
        else:
            lines += ["", f"no counterexample found in campaign {self.campaign!r} (this is not a proof "
                          f"that the claims hold; only that this search did not break them)"]
        return "\n".join(lines)

    def as_dict(self) -> dict:
        cells = [{"claim": name, "horizon": horizon, "n_actions": n, "found": bool(outcome), "method": outcome.method,
                  "evaluations": outcome.evaluations, "evaluations_to_find": outcome.evaluations_to_find}
                 for name, horizon, n, outcome in self.cells]
        out = {"campaign": self.campaign, "found": bool(self.found), "path": self.path, "cells": cells}
        if self.found:
            out["counterexample"] = self.found.metadata()
        return out


def demo_path():
    """The bundled search demo (``boundbreaker search --demo``)."""
    from pathlib import Path

    return Path(__file__).resolve().parent.parent / "demos" / "model-fleet.toml"


def search_campaign(path, claim: str | None = None, method: str | None = None, out: str | None = None,
                    progress=None) -> CampaignSearch:
    import adversaries

    from .. import stats
    from ..config import load_campaign

    from . import search

    campaign = load_campaign(os.fspath(path))
    name = str(getattr(campaign, "name", "") or os.path.splitext(os.path.basename(os.fspath(path)))[0])
    claims = tuple(campaign.claims)  # the file's, then the learner's when use_learner_claims is set
    if claim is not None:
        claims = tuple(c for c in claims if c.name == claim)
        if not claims:
            known = ", ".join(repr(c.name) for c in campaign.claims) or "none"
            raise ConfigError(f"--claim: campaign has no claim named {claim!r}; its claims: {known}")
    if not claims:
        raise ConfigError("claims: the campaign lists no claims to search; add a [[claims]] table")
    options = dict(getattr(campaign, "search", None) or {})
    method = method or options.get("method") or "hypothesis"
    adaptive = sorted({spec["name"] for spec in getattr(campaign, "adversary_specs", ())
                       if getattr(adversaries.REGISTRY.cls(spec["name"]), "adaptive", False)})
    horizons = _as_tuple(campaign.horizons)
    sizes = _as_tuple(campaign.n_actions)
    costs = _as_tuple(getattr(campaign, "switching_cost", 0.0) or 0.0)
    switching_cost = float(costs[0])
    cells = [(c, T, n) for c in claims for T in horizons for n in sizes]
    confidence = stats.bonferroni(float(campaign.confidence), len(cells))
    result = CampaignSearch(campaign=name)
    for index, (c, T, n) in enumerate(cells):
        outcome = search(campaign.build_learner(), c, T, n,
                         max_examples=options.get("max_examples", 200), replicas=options.get("replicas", 256),
                         seed=derived_seed(int(campaign.seed), 5, index), method=method, confidence=confidence,
                         switching_cost=switching_cost, adaptive=adaptive or None)
        result.cells.append((c.name, T, n, outcome))
        if progress:
            progress(result.cells[-1])
        if outcome:
            result.found = outcome
            result.path = outcome.save(out or f"{_safe(name)}-counterexample.npz")
            break
    return result


def _as_tuple(value):
    return tuple(value) if isinstance(value, (list, tuple)) else (value,)


def _safe(text: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "-_" else "-" for ch in text) or "campaign"
