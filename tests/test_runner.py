"""The runner: seeding, determinism, streaming, input checks and fault reports."""

import numpy as np
import pytest

import adversaries
from harness import ConfigError, LearnerFault, AdversaryFault, per_replica, run, runner
from harness.learners import get as get_learner

from helpers import Chase, Faulty, Fixed

ALL = ["hedge", "ftl", "ftpl"]


def _same(a, b):
    return np.array_equal(a.regret, b.regret) and np.array_equal(a.switches, b.switches)


@pytest.mark.parametrize("name", ALL)
@pytest.mark.parametrize("adv", [dict(name="bernoulli", shared=True), dict(name="bernoulli", shared=False),
                                 dict(name="alternating")])
def test_results_do_not_depend_on_n_jobs(name, adv):
    """Same seed -> bit-identical RunResult with n_jobs=1 and n_jobs=2 (chunk k always uses child k)."""
    params = {k: v for k, v in adv.items() if k != "name"}
    args = (get_learner(name), adversaries.get(adv["name"], **params), 300, 4)
    one = run(*args, replicas=600, seed=11, n_jobs=1, chunk=128)
    two = run(*args, replicas=600, seed=11, n_jobs=2, chunk=128)
    assert _same(one, two)


def test_adaptive_results_do_not_depend_on_n_jobs():
    args = (get_learner("hedge"), Chase(), 200, 3)
    assert _same(run(*args, replicas=300, seed=5, chunk=100), run(*args, replicas=300, seed=5, chunk=100, n_jobs=2))


@pytest.mark.parametrize("name", ALL)
def test_different_seeds_differ(name):
    adv = adversaries.get("bernoulli", shared=False)
    a = run(get_learner(name), adv, 200, 4, replicas=200, seed=1)
    b = run(get_learner(name), adv, 200, 4, replicas=200, seed=2)
    assert not _same(a, b)


@pytest.mark.parametrize("name", ALL)
@pytest.mark.parametrize("shared", [True, False])
def test_block_size_does_not_change_results(name, shared, monkeypatch):
    """Streaming in blocks of any size plays the same sequence the same way."""
    adv = adversaries.get("bernoulli", p=0.4, shared=shared)
    big = run(get_learner(name), adv, 500, 5, replicas=64, seed=3)
    monkeypatch.setattr(runner, "BLOCK_ENTRIES", 7)  # forces one-round blocks
    small = run(get_learner(name), adv, 500, 5, replicas=64, seed=3)
    assert np.array_equal(big.switches, small.switches)
    np.testing.assert_allclose(big.regret, small.regret, rtol=0, atol=1e-9)


def test_shared_sequence_is_the_same_in_every_chunk():
    """With shared=True every replica faces one sequence: FTL (deterministic) then
    has the same regret in every replica, across chunks."""
    res = run(get_learner("ftl"), adversaries.get("bernoulli", shared=True), 400, 3, replicas=700, chunk=64, seed=9)
    assert np.all(res.regret == res.regret[0]) and np.all(res.switches == res.switches[0])
    res = run(get_learner("ftl"), adversaries.get("bernoulli", shared=False), 400, 3, replicas=700, chunk=64, seed=9)
    assert len(np.unique(res.regret)) > 10


def test_regret_and_switches_on_a_hand_checked_sequence():
    """FTL on a 4-round table: actions 0,1,0,0 -> loss 1+1+0+0=2; best action 1 loses 1;
    2 switches (closed form by hand)."""
    table = [[1, 0], [0, 1], [0, 0], [0, 0]]
    res = run(get_learner("ftl"), Fixed(table), 4, 2, replicas=3, switching_cost=0.5)
    # round 0: tie -> 0 (loss 1); round 1: cum (1,0) -> 1 (loss 1); round 2: cum (1,1) -> 0; round 3: 0
    assert res.regret.tolist() == [1.0, 1.0, 1.0]
    assert res.switches.tolist() == [2, 2, 2]
    assert res.cost_regret.tolist() == [2.0, 2.0, 2.0]


def test_meta_records_what_replays_the_run():
    res = run(get_learner("hedge", eta=0.3), adversaries.get("bernoulli", p=0.2), 50, 3, replicas=10, seed=4)
    m = res.meta
    assert m["seed"] == 4 and m["horizon"] == 50 and m["n_actions"] == 3 and m["replicas"] == 10
    assert m["learner"] == {"name": "hedge", "class": "harness.learners.experts:Hedge", "params": {"eta": 0.3}}
    assert m["adversary"]["params"] == {"p": 0.2, "shared": False}
    assert m["versions"]["numpy"] == np.__version__ and m["wall_time_s"] > 0
    assert set(res.summary()) == {"regret", "switches"}


def test_callers_objects_are_not_mutated():
    learner = get_learner("hedge")
    run(learner, adversaries.get("bernoulli"), 20, 3, replicas=4)
    assert not hasattr(learner, "_cum")


# -- bad input -------------------------------------------------------------------

BAD_RUN_ARGS = [
    (dict(horizon=0), "horizon"), (dict(horizon=-3), "horizon"), (dict(horizon=2.5), "horizon"),
    (dict(horizon="10"), "horizon"), (dict(n_actions=1), "n_actions"), (dict(replicas=0), "replicas"),
    (dict(seed=-1), "seed"), (dict(switching_cost=-1.0), "switching_cost"),
    (dict(switching_cost=float("nan")), "switching_cost"), (dict(n_jobs=0), "n_jobs"),
    (dict(chunk=0), "chunk"), (dict(learner=object()), "learner"), (dict(adversary=object()), "adversary"),
]


@pytest.mark.parametrize("change, field", BAD_RUN_ARGS)
def test_bad_run_arguments_name_the_field(change, field):
    args = dict(learner=get_learner("hedge"), adversary=adversaries.get("bernoulli"), horizon=10,
                n_actions=3, replicas=4)
    args.update(change)
    with pytest.raises(ConfigError) as info:
        run(**args)
    message = str(info.value)
    assert message.startswith(field) and "\n" not in message


@pytest.mark.parametrize("params, field", [(dict(p=1.5), "p"), (dict(p=-0.1), "p"), (dict(p="x"), "p"),
                                           (dict(shared="yes"), "shared"), (dict(q=0.1), "q")])
def test_bad_adversary_parameters(params, field):
    with pytest.raises(ConfigError, match=field):
        adversaries.get("bernoulli", **params)


def test_per_action_p_must_match_n():
    with pytest.raises(ConfigError, match="3 entries but the run has 4 actions"):
        run(get_learner("ftl"), adversaries.get("bernoulli", p=[0.1, 0.2, 0.3]), 5, 4, replicas=2)


def test_unknown_names_suggest_the_close_match():
    with pytest.raises(ConfigError, match="did you mean 'hedge'"):
        get_learner("hedgee")
    with pytest.raises(ConfigError, match="unknown parameter 'etaa'; its parameters are: eta"):
        get_learner("hedge", etaa=1)
    with pytest.raises(ConfigError, match="eta: must lie in"):
        get_learner("hedge", eta=-1)


# -- faulty learners and adversaries ------------------------------------------------

FAULTS = [("raise", "raised ZeroDivisionError: boom"), ("shape", "shape (9,)"),
          ("float", "dtype float64"), ("nan", "NaN"), ("range", "action 3 outside [0, 3)"),
          ("negative", "action -1 outside"), ("list", "returned list")]


@pytest.mark.parametrize("how, text", FAULTS)
@pytest.mark.parametrize("adversary", [adversaries.get("bernoulli", shared=True),
                                       adversaries.get("bernoulli"), Chase()], ids=["shared", "per-replica", "adaptive"])
def test_faulty_learner_is_stopped_with_round_and_seed(how, text, adversary):
    with pytest.raises(LearnerFault) as info:
        run(Faulty(how, at=5), adversary, 20, 3, replicas=8 + 0, seed=7, chunk=8)
    message = str(info.value)
    assert "\n" not in message and text in message
    assert "at round 5" in message and "seed=7" in message and "index=0" in message


def test_fault_in_update_names_the_round():
    with pytest.raises(LearnerFault, match=r"raised KeyError: 'lost state' at round 4"):
        run(Faulty("raise", at=4, where="update"), adversaries.get("bernoulli"), 20, 3, replicas=8)


def test_fault_in_a_later_chunk_names_that_chunk():
    class LateFault(Faulty):
        def reset(self, n_actions, horizon, replicas, rng):
            super().reset(n_actions, horizon, replicas, rng)
            self.at = 2 if replicas == 5 else -1   # only the last, short chunk fails
    with pytest.raises(LearnerFault, match=r"at round 2 in chunk 2 .*index=2, replicas=5"):
        run(LateFault("range"), adversaries.get("bernoulli"), 10, 3, replicas=21, chunk=8)


def test_fault_from_a_per_replica_learner():
    class Plain:
        def __init__(self, n, horizon, rng):
            self.t = 0

        def act(self):
            return float("nan") if self.t == 3 else 0

        def update(self, action, losses):
            self.t += 1

    with pytest.raises(LearnerFault, match="NaN actions at round 3"):
        run(per_replica(Plain), adversaries.get("bernoulli"), 10, 2, replicas=3)


def test_faulty_adversaries_are_named():
    class OutOfRange(Fixed):
        pass
    table = np.zeros((10, 2))
    table[6, 1] = 1.5
    with pytest.raises(AdversaryFault, match=r"loss 1.5 outside \[0, 1\] at round 6"):
        run(get_learner("ftl"), OutOfRange(table), 10, 2, replicas=2)
    with pytest.raises(AdversaryFault, match=r"shape \(10, 3\).*expected \(10, 2\)"):
        run(get_learner("ftl"), Fixed(np.zeros((10, 3))), 10, 2, replicas=2)
    nan = np.zeros((10, 2))
    nan[2, 0] = np.nan
    with pytest.raises(AdversaryFault, match="loss nan outside"):
        run(get_learner("ftl"), Fixed(nan), 10, 2, replicas=2)


def test_adaptive_adversary_sees_read_only_history_of_past_rounds_only():
    """The adversary commits before the learner draws; history.t counts completed rounds."""
    seen = []

    class Spy(Chase):
        def respond(self, t, history):
            seen.append((t, history.t, history.last_action.flags.writeable, history.cumulative.flags.writeable))
            with pytest.raises(ValueError):
                history.counts[0, 0] = 5
            return super().respond(t, history)

    run(get_learner("hedge"), Spy(), 6, 3, replicas=4)
    assert [s[:2] for s in seen] == [(t, t) for t in range(6)]
    assert not any(s[2] or s[3] for s in seen)


def test_history_totals_match_the_result():
    final = {}

    class Recorder(Chase):
        def respond(self, t, history):
            final.update(switches=history.switches.copy(), played=history.played.copy(),
                         counts=history.counts.copy(), recent=history.recent.copy())
            return super().respond(t, history)

    rec = Recorder()
    rec.memory = 3
    res = run(get_learner("ftpl"), rec, 30, 4, replicas=16, seed=2)
    assert final["counts"].sum(axis=1).tolist() == [29] * 16   # history before the last round
    assert final["recent"].shape == (16, 3) and (final["recent"] >= 0).all()
    assert (final["switches"] <= res.switches).all() and (res.switches - final["switches"] <= 1).all()
