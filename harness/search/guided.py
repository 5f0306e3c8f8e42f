"""search(method="hypothesis"): Hypothesis draws genomes, targets the score, shrinks.

Hypothesis runs inside a library call here, so its settings are fixed in
code, not taken from the caller's profile: no example database, no
deadline, seeded from the search seed (``hypothesis.seed``), quiet, every
health check off (a slow, large, or nested run is expected: search may be
called from inside a test, even a Hypothesis test).

A candidate is *interesting* to Hypothesis when its screening passes (see
:mod:`harness.search.evaluate`); Hypothesis then stops generating and
shrinks it toward fewer, shorter, plainer segments. Screening is memoised
per genome, so a genome always gets the same outcome (Hypothesis checks
that), and shrinking may play at most ``shrink_budget`` new candidates:
past it, unseen genomes count as uninteresting, which ends shrinking
without contradicting any earlier outcome. The shrunk genome is then
confirmed on fresh replicas; if that fails, the genome first found; if that
fails too, a new round of generation starts (new Hypothesis seed, the
generation budget reduced by what was spent) with the rejected genomes
treated as uninteresting.
"""

from __future__ import annotations

from hypothesis import HealthCheck, Phase, Verbosity, given, settings, target
from hypothesis import seed as hypothesis_seed

from .evaluate import derived_seed
from .genome import expand
from .strategies import genomes


class _Interesting(Exception):
    """Raised inside the probe so Hypothesis records (and shrinks) the example."""


def run(ev, max_examples: int, seed: int, max_segments: int, shrink_budget: int,
        max_confirmations: int, patterns=None):
    """Returns (genome, screen, judgement, confirm_seed, level, evaluations_to_find) or None."""
    horizon = ev.horizon
    strategy = genomes(ev.n_actions, max_segments=max_segments, patterns=patterns)
    rejected: set[str] = set()
    remaining = max_examples
    for round_ in range(max_confirmations):
        if remaining <= 0 or len(ev.confirmations) >= max_confirmations:
            break
        state = {"first_at": None, "first": None, "last": None}
        start = ev.evaluations

        def probe(genome):
            key = genome.key()
            if key in rejected:
                return
            allow = state["first_at"] is None or ev.evaluations - state["first_at"] < shrink_budget
            allow = allow and (state["first_at"] is not None or ev.evaluations - start < remaining)
            screen = ev.screen(genome, key, lambda g: expand(g, horizon), budget_left=allow)
            if screen is None:
                return
            target(screen.score, label="score (metric statistic - bound) / bound")
            if screen.passed:
                if state["first_at"] is None:
                    state["first_at"], state["first"] = screen.evaluation, genome
                state["last"] = genome
                raise _Interesting()

        configured = settings(
            database=None, deadline=None, derandomize=False, max_examples=remaining,
            phases=(Phase.generate, Phase.target, Phase.shrink), verbosity=Verbosity.quiet,
            suppress_health_check=list(HealthCheck), report_multiple_bugs=False, print_blob=False,
        )
        probe_test = hypothesis_seed(derived_seed(seed, 4, round_))(configured(given(strategy)(probe)))
        try:
            probe_test()
        except _Interesting:
            pass
        if state["first_at"] is None:
            return None
        remaining -= state["first_at"] - start
        tried = []
        for genome in (state["last"], state["first"]):
            key = genome.key()
            if key in rejected or key in tried or len(ev.confirmations) >= max_confirmations:
                continue
            tried.append(key)
            screen = ev.screen(genome, key, None)
            accepted, judgement, cseed, level = ev.confirm(expand(genome, horizon), screen)
            if accepted:
                return genome, screen, judgement, cseed, level, state["first_at"]
            rejected.add(key)
    return None
