"""Switch budgets that must hold on every sequence, and the epoch-restart wrapper."""

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from hypothesis.extra import numpy as hnp
from scipy import stats

import adversaries
from harness import ConfigError, run
from harness.bench import _SlowPath
from harness.cli import main
from harness.learners import REGISTRY, budget_cap, epoch_restart, get as get_learner, names as learner_names
from harness.stats import clopper_pearson

from helpers import Chase, Fixed, drive

CAPPED = [("blocked-hedge", {}), ("blocked-exp3", {}), ("budget-cap", dict(inner="hedge")),
          ("budget-cap", dict(inner="exp3")), ("budget-cap", dict(inner="ftl")),
          ("budget-cap", dict(inner="random-walk"))]


@st.composite
def capped_runs(draw):
    name, extra = draw(st.sampled_from(CAPPED))
    T = draw(st.integers(1, 40))
    n = draw(st.integers(2, 4))
    S = draw(st.integers(1, 6))
    kind = draw(st.sampled_from(["table", "bernoulli", "adaptive"]))
    if kind == "table":
        adv = Fixed(draw(hnp.arrays(np.float64, (T, n), elements=st.floats(0, 1))))
    elif kind == "bernoulli":
        adv = adversaries.get("bernoulli", p=draw(st.floats(0, 1)))
    else:
        adv = Chase()
    slow = draw(st.booleans())
    return name, extra, T, n, S, adv, slow, draw(st.integers(0, 2**16))


@settings(max_examples=120)
@given(capped_runs())
def test_budgeted_learners_never_exceed_their_budget(case):
    """Property (hypothesis, derandomized): blocked Hedge, blocked EXP3 and budget_cap around
    several learners switch at most S times on every sequence (tables, i.i.d., adaptive),
    on both paths; the blocked ones at most ceil(T / ceil(T/S)) - 1 <= S - 1."""
    name, extra, T, n, S, adv, slow, seed = case
    learner = get_learner(name, budget=S, **extra)
    res = run(_SlowPath(learner) if slow else learner, adv, T, n, replicas=12, seed=seed)
    assert res.switches.max() <= S
    if name.startswith("blocked"):
        assert res.switches.max() <= math.ceil(T / math.ceil(T / S)) - 1
    (cap,) = [c for c in learner.claims if c.kind == "always"]
    assert cap.metric == "switches" and cap.bound_at(T, n) == S


def test_budget_cap_plays_the_inner_learner_until_the_cap():
    """Until the S-th switch the capped play equals the inner learner's play from the same
    seed; from then on the action stays (checked on FTL, which is deterministic)."""
    t = np.arange(50)
    table = np.stack([(t % 2 == 0), (t % 2 == 1)], axis=1).astype(float)
    inner = drive(get_learner("ftl"), table, 3)
    capped = drive(budget_cap(get_learner("ftl"), 4), table, 3)
    assert np.array_equal(capped[:5], inner[:5])       # FTL switches every round: 4 switches by round 4
    assert np.all(capped[5:] == capped[4])


# -- epoch restarts ------------------------------------------------------------------------


# A fresh uniform action every round from its own generator (the adversary tests' subject).
from test_adversaries_properties import Uniform as Dice  # noqa: E402


def _epochs(wrapper, replicas, horizon):
    """Per replica, the list of epoch start rounds."""
    starts = [[0] for _ in range(replicas)]
    for t, rows in wrapper.restarts:
        for r in rows:
            starts[r].append(t)
    return [s + [horizon] for s in starts]


@pytest.mark.parametrize("inner", ["exp3", "shrinking-dartboard", "dice"])
@pytest.mark.parametrize("fast", [True, False], ids=["fast", "slow"])
def test_epoch_restart_spends_exactly_k_switches_per_epoch(rng, inner, fast):
    """Within every epoch of every replica the play switches exactly k times if the epoch
    ended early and at most k times in the last one; replicas restart at different rounds."""
    k, T, R = 4, 300, 64
    table = rng.random((T, 3))
    wrapper = epoch_restart(Dice() if inner == "dice" else get_learner(inner), k)
    actions = drive(wrapper, table, R, seed=5, fast=fast)
    starts = _epochs(wrapper, R, T)
    for r in range(R):
        for e, (lo, hi) in enumerate(zip(starts[r][:-1], starts[r][1:])):
            inside = int((actions[lo + 1:hi, r] != actions[lo:hi - 1, r]).sum())
            assert inside == k if hi < T else inside <= k
    assert np.array_equal(wrapper.epochs, [len(s) - 1 for s in starts])
    assert len({tuple(s) for s in starts}) > 1


def test_epochs_run_on_fresh_independent_randomness():
    """Dice (uniform action per round) restarted every 2 switches, 3000 replicas: the first
    action of a replica's second epoch is independent of the first action of its first
    epoch and uniform (chi-square tests, alpha = 1e-4 each, 2 tests: false-failure
    probability 2e-4). Reusing a generator state at restart would make them equal."""
    R, T, n = 3000, 40, 3
    wrapper = epoch_restart(Dice(), 2)
    actions = drive(wrapper, np.zeros((T, n)), R, seed=8)
    starts = _epochs(wrapper, R, T)
    pairs = np.array([(actions[0, r], actions[s[1], r]) for r, s in enumerate(starts) if len(s) > 2])
    assert len(pairs) > 0.95 * R
    table = np.zeros((n, n))
    np.add.at(table, (pairs[:, 0], pairs[:, 1]), 1)
    assert stats.chi2_contingency(table).pvalue > 1e-4
    assert stats.chisquare(table.sum(axis=0)).pvalue > 1e-4
    assert np.mean(pairs[:, 0] == pairs[:, 1]) < 0.45   # equal only by chance (1/3), never always


def test_epoch_restart_high_probability_switch_claim_holds():
    """The derived claim for epoch_restart(shrinking-dartboard, k=80) at T = 2000, n = 2:
    s = ln 2 + T ln(1/(1-eta)) ~ 38.3, q = s/k ~ 0.48, m = 5 epochs, bound 404 switches. The
    violation rate is not shown above delta = 0.05 (one-sided 99.99% Clopper-Pearson lower
    bound <= delta; false-failure probability <= 1e-4)."""
    wrapper = get_learner("epoch-restart", inner="shrinking-dartboard", switches_per_epoch=80)
    (claim,) = wrapper.claims
    T, n, R = 2000, 2, 1000
    bound = claim.bound_at(T, n)
    assert claim.kind == "high_probability" and bound == pytest.approx(404)
    res = run(wrapper, adversaries.get("alternating"), T, n, replicas=R, seed=2)
    k = int((res.switches > bound).sum())
    assert clopper_pearson(k, R, 0.9999, "greater").low <= claim.delta
    assert np.quantile(res.switches, 1 - claim.delta) <= bound


# -- construction by name, errors, command line ---------------------------------------------


def test_wrappers_by_registry_name_and_spec():
    cap = get_learner("budget-cap", inner="hedge", inner_params={"eta": 0.1}, budget=10)
    spec = json.loads(json.dumps(cap.spec()))
    assert spec["name"] == "budget-cap" and spec["params"]["inner"] == "hedge"
    assert spec["params"]["inner_params"] == {"eta": 0.1} and spec["params"]["budget"] == 10
    again = get_learner(spec["name"], **spec["params"])
    res = [run(x, adversaries.get("bernoulli"), 100, 3, replicas=20, seed=1) for x in (cap, again)]
    assert np.array_equal(res[0].regret, res[1].regret)
    restart = epoch_restart(get_learner("exp3", gamma=0.3), 5)
    spec = json.loads(json.dumps(restart.spec()))
    assert restart.feedback == "bandit" and spec["params"]["inner"]["name"] == "exp3"
    rebuilt = get_learner(spec["name"], **spec["params"])   # a recorded spec replays the same learner
    res = [run(x, adversaries.get("bernoulli"), 50, 3, replicas=8, seed=2) for x in (restart, rebuilt)]
    assert np.array_equal(res[0].switches, res[1].switches) and rebuilt.spec() == restart.spec()


@pytest.mark.parametrize("name, params, field", [
    ("budget-cap", dict(inner="hedge"), "budget"),
    ("budget-cap", dict(inner="hedge", budget=0), "budget"),
    ("budget-cap", dict(inner="hedge", budget=2.5), "budget"),
    ("budget-cap", dict(budget=3), "inner"),
    ("budget-cap", dict(inner="hedgee", budget=3), "did you mean 'hedge'"),
    ("budget-cap", dict(inner="hedge", budget=3, inner_params=[1]), "inner_params"),
    ("budget-cap", dict(inner="hedge", budget=3, inner_params={"etaa": 1}), "etaa"),
    ("budget-cap", dict(inner=object(), budget=3), "inner"),
    ("budget-cap", dict(inner={"params": {}}, budget=3), "inner"),
    ("epoch-restart", dict(inner="hedge"), "switches_per_epoch"),
    ("blocked-hedge", {}, "budget"),
    ("blocked-exp3", dict(budget=-1), "budget"),
    ("shrinking-dartboard", dict(eta=1.0), "eta"),
    ("lazy-ftpl", dict(eps=0), "eps"),
    ("exp3", dict(gamma=1.5), "gamma"),
    ("flawed-heavy-tail", dict(tail_prob=2), "tail_prob"),
    ("flawed-hot-hedge", dict(heat=0.5), "heat"),
])
def test_bad_parameters_give_one_line_naming_the_field(name, params, field):
    with pytest.raises(ConfigError) as info:
        get_learner(name, **params)
    assert field in str(info.value) and "\n" not in str(info.value)


def test_cli_runs_a_wrapper_by_name(capsys):
    args = ["run", "--adversary", "bernoulli", "--horizon", "60", "--actions", "3", "--replicas", "16"]
    assert main(args + ["--learner", "budget-cap", "--learner-param", "inner=exp3",
                        "--learner-param", "budget=3", "--learner-param", 'inner_params={"gamma": 0.2}']) == 0
    assert "budget-cap" in capsys.readouterr().out
    assert main(args + ["--learner", "budget-cap", "--learner-param", "inner=exp3"]) == 2
    err = capsys.readouterr().err.strip()
    assert "budget: required" in err and "\n" not in err


def test_wrappers_give_the_same_results_with_parallel_jobs():
    """The wrappers travel to worker processes (joblib) and replay bit for bit there."""
    learner = get_learner("epoch-restart", inner="budget-cap", inner_params=dict(inner="exp3", budget=9),
                          switches_per_epoch=4)
    args = (learner, adversaries.get("bernoulli", p=0.4), 200, 3)
    one = run(*args, replicas=300, seed=5, chunk=100)
    two = run(*args, replicas=300, seed=5, chunk=100, n_jobs=2)
    assert np.array_equal(one.regret, two.regret) and np.array_equal(one.switches, two.switches)


@pytest.mark.parametrize("name", learner_names())
def test_every_registered_learner_runs_from_the_command_line(name, capsys):
    """`boundbreaker run` builds each registry entry (with its example_params, passed as
    --learner-param KEY=JSON) and plays it; the table names the learner."""
    params = getattr(REGISTRY.cls(name), "example_params", {})
    argv = ["run", "--learner", name, "--adversary", "bernoulli", "--horizon", "30", "--actions", "3",
            "--replicas", "4"]
    for key, value in params.items():
        argv += ["--learner-param", f"{key}={json.dumps(value)}"]
    assert main(argv) == 0
    assert name in capsys.readouterr().out
