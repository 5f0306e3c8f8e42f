"""Every learner's fast path (play_block) plays the same distribution as its act/update loop,
draws randomness in a block-invariant order, and (bandits) never looks at unplayed losses."""

import numpy as np
import pytest
from scipy import stats

import adversaries
from harness import run, runner
from harness.bench import _SlowPath
from harness.learners import example, get as get_learner, names

from helpers import Fixed, drive

OLD = {"hedge", "ftl", "ftpl"}  # tests/test_experts.py covers these
CASES = [(name, {}) for name in names() if name not in OLD] + [
    ("budget-cap", dict(inner="exp3", budget=15)),
    ("epoch-restart", dict(inner="exp3", switches_per_epoch=70)),
    ("epoch-restart", dict(inner="lazy-ftpl", switches_per_epoch=4)),
]
IDS = [name + ("(" + ",".join(f"{v}" for v in p.values()) + ")" if p else "") for name, p in CASES]

# Play is a deterministic function of the same draws in both paths for these (see their docstrings).
IDENTICAL = {"random-walk", "mw-ftpl", "blocked-hedge", "shrinking-dartboard", "lazy-ftpl", "flawed-heavy-tail",
             "budget-cap", "epoch-restart"}


def _build(name, params):
    return get_learner(name, **params) if params else example(name)


def _table(rng, T, n):
    return (rng.random((T, n)) < np.linspace(0.42, 0.58, n)).astype(float)


@pytest.mark.parametrize("name, params", CASES, ids=IDS)
@pytest.mark.parametrize("shared", [True, False], ids=["shared", "per-replica"])
def test_fast_and_slow_paths_agree_in_distribution(name, params, shared):
    """Two-sample Kolmogorov-Smirnov tests on regret and switches, 2000 replicas per path
    (1000 for epoch-restart, whose slow path runs one copy per restart cohort), independent
    seeds, T = 300, n = 4. alpha = 1e-4 per test; 17 learners x 2 sequence kinds
    x 2 metrics = 68 tests: false-failure probability < 0.7% (KS is conservative on the
    discrete switch counts)."""
    rng = np.random.default_rng(300)
    adv = Fixed(_table(rng, 300, 4)) if shared else adversaries.get("bernoulli", p=[0.42, 0.47, 0.53, 0.58])
    replicas = 1000 if name == "epoch-restart" else 2000
    fast = run(_build(name, params), adv, 300, 4, replicas=replicas, seed=11)
    slow = run(_SlowPath(_build(name, params)), adv, 300, 4, replicas=replicas, seed=12)
    for metric in ("regret", "switches"):
        a, b = getattr(fast, metric), getattr(slow, metric)
        if np.all(a == a[0]) and np.all(b == b[0]):
            assert a[0] == b[0], metric
            continue
        assert stats.ks_2samp(a, b).pvalue > 1e-4, metric


@pytest.mark.parametrize("name, params", [c for c in CASES if c[0] in IDENTICAL],
                         ids=[i for c, i in zip(CASES, IDS) if c[0] in IDENTICAL])
@pytest.mark.parametrize("shared", [True, False], ids=["shared", "per-replica"])
def test_fast_and_slow_paths_play_identically_from_one_seed(name, params, shared):
    """For these learners both paths consume the same draws in the same order, so one seed
    gives the same actions round by round (a stronger check than the distributional one)."""
    rng = np.random.default_rng(5)
    table = _table(rng, 120, 3) if shared else (rng.random((120, 64, 3)) < 0.5).astype(float)
    fast = drive(_build(name, params), table, 64, seed=3, fast=True)
    slow = drive(_build(name, params), table, 64, seed=3, fast=False)
    assert np.array_equal(fast, slow)


@pytest.mark.parametrize("name, params", CASES, ids=IDS)
@pytest.mark.parametrize("shared", [True, False], ids=["shared", "per-replica"])
def test_block_size_does_not_change_results(name, params, shared, monkeypatch):
    """Any cut of the horizon into blocks plays the same sequence the same way (DEVELOPERS.md)."""
    adv = adversaries.get("bernoulli", p=0.45, shared=shared)
    big = run(_build(name, params), adv, 240, 4, replicas=48, seed=4)
    monkeypatch.setattr(runner, "BLOCK_ENTRIES", 7 * (1 if shared else 48))  # small, uneven blocks
    small = run(_build(name, params), adv, 240, 4, replicas=48, seed=4)
    assert np.array_equal(big.switches, small.switches)
    np.testing.assert_allclose(big.regret, small.regret, rtol=0, atol=1e-9)


BANDITS = [("exp3", {}), ("exp3-ix", {}), ("blocked-exp3", dict(budget=7)),
           ("budget-cap", dict(inner="exp3-ix", budget=5)), ("epoch-restart", dict(inner="exp3", switches_per_epoch=9))]


@pytest.mark.parametrize("name, params", BANDITS, ids=[b[0] for b in BANDITS])
@pytest.mark.parametrize("shared", [True, False], ids=["shared", "per-replica"])
@pytest.mark.parametrize("fast", [True, False], ids=["fast", "slow"])
def test_bandit_play_ignores_losses_of_unplayed_actions(name, params, shared, fast):
    """Replace every loss that no replica played by NaN: the same seed gives the same actions,
    so unplayed losses influence nothing (NaN would poison any arithmetic that read them)."""
    rng = np.random.default_rng(9)
    T, R, n = 80, 32, 4
    table = rng.random((T, n) if shared else (T, R, n))
    first = drive(get_learner(name, **params), table, R, seed=1, fast=fast)
    masked = np.full_like(table, np.nan)
    if shared:
        rounds = np.repeat(np.arange(T)[:, None], R, axis=1)
        masked[rounds, first] = table[rounds, first]
    else:
        idx = (np.arange(T)[:, None], np.arange(R)[None], first)
        masked[idx] = table[idx]
    second = drive(get_learner(name, **params), masked, R, seed=1, fast=fast)
    assert np.array_equal(first, second)
