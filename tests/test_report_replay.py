"""The report's per-replica values come from exact replay of the certificate's groups."""

import copy

import numpy as np
import pytest

import adversaries
from harness import Claim, certify, run
from harness.certify import Certificate
from harness.learners import get as get_learner
from harness.report.replay import replay_distributions, trace_cell, trace_replica

from report_subjects import small_certificate


@pytest.fixture(scope="module")
def cert():
    return small_certificate()


def test_replay_gives_the_replicas_the_verdicts_rest_on(cert):
    dists = replay_distributions(cert)
    assert dists.consistent and not dists.problems
    for c in cert.cells:
        g = dists.group(c)
        assert g.replicas == c.replicas_run
        values = g.values(c.metric)
        assert int(np.count_nonzero(values[:c.replicas] > c.bound)) == c.violations
        for r in c.replay:
            assert values[r["replica"]] == r["value"]


def test_a_limited_replay_is_an_exact_prefix(cert):
    """With limit 300 and chunks of 256, each group replays its first whole chunk: the same values as
    the full replay's first 256."""
    full = replay_distributions(cert)
    cut = replay_distributions(cert, limit=300)
    assert not cut.problems
    for key, g in cut.groups.items():
        assert g.replicas == 256
        np.testing.assert_array_equal(g.regret, full.groups[key].regret[:256])
        np.testing.assert_array_equal(g.switches, full.groups[key].switches[:256])


def test_a_replay_that_does_not_reproduce_the_certificate_says_so(cert):
    """The check has power: the same certificate with Hedge's eta changed replays to other values."""
    data = copy.deepcopy(cert.to_dict())  # to_dict shares the specs of the cached certificate
    data["learner"]["params"] = {"eta": 2.0}
    dists = replay_distributions(Certificate.from_dict(data))
    assert dists.problems and not dists.consistent
    assert any("replays to" in p or "violations" in p for p in dists.problems)


def test_an_adversary_named_by_module_path_is_not_rebuilt_and_its_groups_are_left_out(cert):
    data = copy.deepcopy(cert.to_dict())  # to_dict shares the specs of the cached certificate
    data["adversaries"][1] = {"name": None, "class": "no_such_module_xyz:Adv", "params": {}, "label": "x"}
    dists = replay_distributions(Certificate.from_dict(data))
    assert {key[0] for key in dists.groups} == {0, 2} and not dists.problems
    assert any("not a registered adversary" in note for note in dists.notes)
    # given by the caller, it is used
    given = replay_distributions(Certificate.from_dict(data), get_learner("hedge"),
                                 adversaries=[adversaries.get("alternating"), adversaries.get("bernoulli", p=0.5),
                                              adversaries.get("chase")])
    assert {key[0] for key in given.groups} == {0, 1, 2} and not given.problems


@pytest.mark.parametrize("adversary", ["bernoulli", "shared", "chase", "alternating"])
def test_trace_replica_records_the_exact_play(adversary):
    """The traced row's losses and actions recompute its regret and switches, and equal the runner's
    values for that row (per-replica, shared, adaptive and deterministic sequences)."""
    adv = {"bernoulli": adversaries.get("bernoulli", p=0.4, shared=False),
           "shared": adversaries.get("bernoulli", p=0.4, shared=True),
           "chase": adversaries.get("chase"), "alternating": adversaries.get("alternating")}[adversary]
    learner = get_learner("hedge")
    result = run(learner, adv, 150, 3, replicas=40, seed=9, chunk=16)
    row = 5  # replica 21 = chunk 1, row 5
    trace = trace_replica(learner, adv, 150, 3, seed=9, index=1, replicas=16, row=row)
    assert trace.losses.shape == (150, 3) and trace.actions.shape == (150,)
    played = trace.losses[np.arange(150), trace.actions].sum()
    assert trace.regret == pytest.approx(played - trace.losses.sum(axis=0).min(), abs=1e-9)
    assert trace.switches == int(np.count_nonzero(np.diff(trace.actions)))
    assert trace.regret == result.regret[16 + row] and trace.switches == result.switches[16 + row]


def test_trace_cell_replays_a_recorded_violation():
    claim = Claim("switches", 3, kind="always", name="cap")
    cert = certify(get_learner("hedge"), claim, [adversaries.get("bernoulli", p=0.5)], horizons=80, n_actions=2,
                   max_replicas=256, seed=3)
    cell = cert.cells[0]
    trace = trace_cell(cell, get_learner("hedge"), adversaries.get("bernoulli", p=0.5))
    assert trace.switches == cell.replay[0]["value"] > 3
