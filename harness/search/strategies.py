"""Hypothesis strategies over sequence genomes.

Small and composable, in the manner of ``hypothesis.strategies``:
``param(p)`` draws one parameter, ``segments(pattern)`` one segment,
``genomes(n_actions)`` a whole genome. Every choice is written so that
Hypothesis' shrinker moves toward the plain description: a parameter is
``one_of(just(plain), range)`` (``one_of`` shrinks to its first branch), the
pattern is a ``one_of`` over :data:`~harness.search.genome.PATTERNS` in
order from plainest, lists shrink to fewer segments, integers to their
lower end, and the permutation to the identity.
"""

from __future__ import annotations

from hypothesis import strategies as st

from .genome import MAX_CYCLES, MAX_WEIGHT, PATTERNS, Genome, Param, Segment


def param(p: Param) -> st.SearchStrategy:
    """One parameter: its plain value, or anything in its range."""
    if p.integer:
        body = st.integers(int(p.low), int(p.high))
    else:
        body = st.floats(p.low, p.high, allow_nan=False, allow_infinity=False)
    return st.one_of(st.just(int(p.plain) if p.integer else float(p.plain)), body)


def segments(pattern: str | None = None, max_weight: int = MAX_WEIGHT) -> st.SearchStrategy:
    """A segment of the given pattern, or of any pattern (plainest first)."""
    if pattern is None:
        return st.one_of(*(segments(name, max_weight) for name in PATTERNS))
    spec = PATTERNS[pattern]
    return st.builds(lambda params, weight: Segment(pattern, tuple(params), weight),
                     st.tuples(*(param(p) for p in spec.params)), st.integers(1, max_weight))


def genomes(n_actions: int, max_segments: int = 4, max_cycles: int = MAX_CYCLES,
            patterns=None) -> st.SearchStrategy:
    """Genomes over ``n_actions`` actions with 1..max_segments segments.

    ``patterns`` restricts the patterns drawn (default: all of them).
    """
    names = list(PATTERNS) if patterns is None else [p for p in PATTERNS if p in set(patterns)]
    seg = st.one_of(*(segments(name) for name in names))
    return st.builds(
        lambda segs, perm, cycles, rest: Genome(tuple(segs), tuple(perm), cycles, rest),
        st.lists(seg, min_size=1, max_size=max_segments),
        st.permutations(list(range(n_actions))),
        st.integers(1, max_cycles),
        param(Param("rest", 0.0, 1.0, 1.0)),
    )
