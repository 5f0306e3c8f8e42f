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

Generation starts with the plain form of every pattern as a one-segment
genome (explicit examples, ``plain_first``): the textbook adversarial
sequences cost at most six evaluations to rule in or out.

Reproducibility: recent Hypothesis versions also draw literal constants
found in whichever *local* modules happen to be imported, which would make
a seeded search depend on what else the process has loaded. The search
turns that pool off for the duration of its run (and restores it), so the
outcome depends only on the seed, the arguments and the Hypothesis version.
That switch is process-wide: do not run other Hypothesis tests in other
threads at the same time.
"""

from __future__ import annotations

from contextlib import contextmanager

from hypothesis import HealthCheck, Phase, Verbosity, example, given, reject, settings, target
from hypothesis import seed as hypothesis_seed

from hypothesis import strategies as st

from . import adaptive
from .evaluate import derived_seed
from .strategies import genomes


@contextmanager
def stable_constants():
    """Run Hypothesis without the pool of constants harvested from loaded local modules."""
    try:
        from hypothesis.internal.conjecture import providers
        original, cache, empty = providers._get_local_constants, providers.CONSTANTS_CACHE.cache, \
            providers.Constants()
    except (ImportError, AttributeError):  # a Hypothesis without that pool: nothing to do
        yield
        return
    providers._get_local_constants = lambda: empty
    cache.clear()
    try:
        yield
    finally:
        providers._get_local_constants = original
        cache.clear()


def plain_examples(n_actions: int, patterns=None):
    """Every pattern in its plain form, one segment, identity permutation."""
    from .genome import PATTERNS, Genome, Segment

    names = [p for p in PATTERNS if patterns is None or p in patterns]
    return [Genome((Segment.plain(name),), tuple(range(n_actions))) for name in names]


class _Interesting(Exception):
    """Raised inside the probe so Hypothesis records (and shrinks) the example."""


def candidates(n_actions: int, max_segments: int, patterns, families, oblivious: bool):
    """Genomes first (plainest), then each adaptive family: shrinking prefers earlier branches."""
    parts = [genomes(n_actions, max_segments=max_segments, patterns=patterns)] if oblivious else []
    parts += [adaptive.strategy(f) for f in families]
    return st.one_of(*parts)


def run(ev, max_examples: int, seed: int, max_segments: int, shrink_budget: int,
        max_confirmations: int, patterns=None, families=(), oblivious=True, plain_first=True):
    """Returns (candidate, screen, judgement, confirm_seed, level, evaluations_to_find) or None."""
    strategy = candidates(ev.n_actions, max_segments, patterns, families, oblivious)
    rejected: set[str] = set()
    remaining = max_examples
    for round_ in range(max_confirmations):
        if remaining <= 0 or len(ev.confirmations) >= max_confirmations:
            break
        state = {"first_at": None, "first": None, "last": None}
        start = ev.evaluations

        def probe(genome):
            if genome.key() in rejected:
                return
            allow = state["first_at"] is None or ev.evaluations - state["first_at"] < shrink_budget
            allow = allow and (state["first_at"] is not None or ev.evaluations - start < remaining)
            try:
                screen = ev.screen(genome, budget_left=allow)
            except adaptive.InvalidCandidate:
                reject()
            if screen is None:
                return
            target(screen.score, label="score (metric statistic - bound) / bound")
            if screen.passed:
                if state["first_at"] is None:
                    # the count now, not screen.evaluation: a memoised screen may date from an earlier round
                    state["first_at"], state["first"] = ev.evaluations, genome
                state["last"] = genome
                raise _Interesting()

        configured = settings(
            database=None, deadline=None, derandomize=False, max_examples=remaining,
            phases=(Phase.explicit, Phase.generate, Phase.target, Phase.shrink), verbosity=Verbosity.quiet,
            suppress_health_check=list(HealthCheck), report_multiple_bugs=False, print_blob=False,
        )
        probe_test = given(strategy)(probe)
        if plain_first and oblivious and round_ == 0:
            for genome in reversed(plain_examples(ev.n_actions, patterns)):
                probe_test = example(genome)(probe_test)
        probe_test = hypothesis_seed(derived_seed(seed, 4, round_))(configured(probe_test))
        try:
            with stable_constants():
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
            screen = ev.screen(genome)
            accepted, judgement, cseed, level = ev.confirm(genome, screen)
            if accepted:
                ev.unshrunk = state["first"]
                return genome, screen, judgement, cseed, level, state["first_at"]
            rejected.add(key)
    return None
