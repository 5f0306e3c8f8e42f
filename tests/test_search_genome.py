"""Sequence genomes: deterministic expansion, closed-form patterns, strategies that shrink to plain."""

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st, find

from harness.errors import ConfigError
from harness.search.genome import PATTERNS, Genome, Segment, boundaries, expand
from harness.search.strategies import genomes, segments


def G(*segs, perm=(0, 1), cycles=1, rest=1.0):
    return Genome(tuple(segs), perm, cycles, rest)


def test_plain_alternating_is_the_textbook_sequence():
    """alternating(period=1, low=0): rows (1,0), (0,1), ... exactly (closed form)."""
    x = expand(G(Segment.plain("alternating")), 6)
    assert np.array_equal(x, [[1, 0], [0, 1]] * 3)


def test_alternating_period_and_low_level():
    x = expand(G(Segment.plain("alternating", period=2, low=0.25)), 8)
    assert np.array_equal(x[:, 0], [0.75, 0.75, 0.25, 0.25] * 2)
    assert np.array_equal(x[:, 0] + x[:, 1], np.ones(8))


def test_rotate_moves_the_good_action_through_all_actions():
    x = expand(G(Segment.plain("rotate"), perm=(0, 1, 2)), 6)
    assert np.array_equal(np.argmin(x, axis=1), [0, 1, 2, 0, 1, 2])
    assert np.array_equal(np.sort(x, axis=1), [[0, 1, 1]] * 6)


def test_shift_swaps_the_better_role_at_the_cut():
    x = expand(G(Segment.plain("shift", gap=0.5, at=0.25)), 8)
    assert np.array_equal(x[:2], [[0.25, 0.75]] * 2) and np.array_equal(x[2:], [[0.75, 0.25]] * 6)


def test_weights_cycles_rest_and_permutation():
    g = G(Segment.plain("constant", a=0.0, b=1.0, weight=1), Segment.plain("constant", a=1.0, b=0.0, weight=3),
          perm=(2, 0, 1), cycles=2, rest=0.5)
    x = expand(g, 16)
    # role 0 -> action 2, role 1 -> action 0, role 2 (rest) -> action 1
    assert np.array_equal(x[:, 1], np.full(16, 0.5))
    assert np.array_equal(x[:, 2], [0, 0, 1, 1, 1, 1, 1, 1] * 2)
    assert np.array_equal(x[:, 0], 1 - x[:, 2])
    assert list(boundaries(10, [1, 3])) == [0, 2, 10]  # round(10 * 1/4) = 2


def test_random_patterns_are_deterministic_and_differ_by_seed():
    a = expand(G(Segment.plain("random", p0=0.3, p1=0.7, seed=5)), 2000)
    b = expand(G(Segment.plain("random", p0=0.3, p1=0.7, seed=5)), 2000)
    c = expand(G(Segment.plain("random", p0=0.3, p1=0.7, seed=6)), 2000)
    assert np.array_equal(a, b) and not np.array_equal(a, c)
    # Bernoulli means within 5 standard errors (sd <= 0.5/sqrt(2000) = 0.011): false failure < 1e-6
    assert abs(a[:, 0].mean() - 0.3) < 0.055 and abs(a[:, 1].mean() - 0.7) < 0.055


@settings(max_examples=60)
@given(st.integers(2, 5).flatmap(lambda n: st.tuples(st.just(n), genomes(n))), st.integers(1, 300))
def test_every_genome_expands_to_a_valid_table_and_round_trips(pair, horizon):
    n, g = pair
    x = expand(g, horizon)
    assert x.shape == (horizon, n) and x.dtype == np.float64
    assert np.all((x >= 0) & (x <= 1))
    assert np.array_equal(x, expand(g, horizon))
    again = Genome.from_dict(g.as_dict())
    assert again == g and again.key() == g.key()


def test_shrinking_reaches_the_plain_description():
    """Hypothesis' minimal genome with an alternating segment is one plain alternating segment."""
    g = find(genomes(3), lambda g: any(s.pattern == "alternating" for s in g.segments),
             settings=settings(database=None, max_examples=200))
    assert g == G(Segment.plain("alternating"), perm=(0, 1, 2))
    s = find(segments(), lambda s: s.pattern == "random" and s.params[0] > 0.5,
             settings=settings(database=None, max_examples=300))
    assert s.weight == 1 and s.params[1:] == (0.5, 0)


BAD = [
    ({"segments": [], "permutation": [0, 1], "cycles": 1, "rest": 1.0}, "segments"),
    ({"segments": [{"pattern": "zigzag", "weight": 1, "params": {}}], "permutation": [0, 1], "cycles": 1,
      "rest": 1.0}, "pattern"),
    ({"segments": [{"pattern": "constant", "weight": 1, "params": {"a": 0, "b": 2}}], "permutation": [0, 1],
      "cycles": 1, "rest": 1.0}, "b: must lie in [0, 1]"),
    ({"segments": [{"pattern": "constant", "weight": 1, "params": {"a": 0, "b": 1, "c": 3}}],
      "permutation": [0, 1], "cycles": 1, "rest": 1.0}, "unknown field 'c'"),
    ({"segments": [{"pattern": "constant", "weight": 0, "params": {"a": 0, "b": 1}}], "permutation": [0, 1],
      "cycles": 1, "rest": 1.0}, "weight"),
    ({"segments": [{"pattern": "constant", "weight": 1, "params": {"a": 0, "b": 1}}], "permutation": [0, 0],
      "cycles": 1, "rest": 1.0}, "permutation"),
    ({"segments": [{"pattern": "alternating", "weight": 1, "params": {"period": 1.5, "low": 0}}],
      "permutation": [0, 1], "cycles": 1, "rest": 1.0}, "integer"),
    ({"segments": [{"pattern": "constant", "weight": 1, "params": {"a": 0, "b": 1}}], "permutation": [0, 1],
      "cycles": 1, "rest": float("nan")}, "rest"),
    ({"segments": [{"pattern": "constant", "weight": 1, "params": {"a": 0, "b": 1}}], "permutation": [0, 1],
      "cycles": 1}, "missing field 'rest'"),
]


@pytest.mark.parametrize("data, text", BAD)
def test_bad_genome_records_are_refused_in_one_line(data, text):
    with pytest.raises(ConfigError) as err:
        Genome.from_dict(data)
    assert text in str(err.value) and "\n" not in str(err.value)


def test_every_pattern_has_a_plain_value_inside_its_range():
    for spec in PATTERNS.values():
        for p in spec.params:
            assert p.low <= p.plain <= p.high
            assert p.from_unit(0.0) >= p.low and p.from_unit(1.0) <= p.high
