"""certify() end to end: verdicts, shared runs, seeds and replay, certificates, assert_claim."""

import dataclasses
import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))

import adversaries  # noqa: E402
from harness import Certificate, Claim, certify, run  # noqa: E402
from harness.certify import STATEMENT, replay_replica  # noqa: E402
from harness.errors import ConfigError  # noqa: E402
from harness.learners import get as get_learner  # noqa: E402
from harness.runner import play_chunk  # noqa: E402
from harness.testing import assert_claim  # noqa: E402

from certify_subjects import CoinSwitch, OvereagerHedge, RareCapBreaker, hedge_regret_claims  # noqa: E402


@pytest.fixture(scope="module")
def hedge_cert():
    """Hedge at its default tuning on two adversaries, with its published claims and a too-tight one."""
    claims = hedge_regret_claims() + [
        Claim("regret", "sqrt(T * ln(n) / 2)", delta=0.05, name="too-tight-95",
              source="the expectation bound restated as a 95% bound: not a published claim")]
    return certify(get_learner("hedge"), claims, [adversaries.get("bernoulli", p=0.5), "alternating"],
                   [600], [2, 4], max_replicas=6000, seed=7)


def test_compliant_hedge_passes_its_published_claims(hedge_cert):
    """Hedge with eta = sqrt(8 ln n / T): E[regret] <= sqrt(T ln n / 2) (Cesa-Bianchi and Lugosi 2006,
    Theorem 2.2) and the 95% bound adding sqrt(T ln(1/delta) / 2) (their Corollary 4.2, numbering from
    memory) both pass on every cell. Family-wise error <= 0.05 by construction; seed fixed."""
    published = [c for c in hedge_cert.cells if c.claim_name in ("regret-mean", "regret-95")]
    assert len(published) == 8
    assert all(c.verdict == "pass" for c in published), [c.summary() for c in published]
    for c in published:
        if c.kind == "expectation":
            assert c.mean_high < c.bound and c.mean_low <= c.mean <= c.mean_high
            assert c.ci_low is None and c.metric_range == (-600.0, 600.0)
        else:
            assert c.ci_high < c.delta and c.ci_low <= c.rate <= c.ci_high


def test_too_tight_claim_fails_with_a_replayable_violation(hedge_cert):
    tight = [c for c in hedge_cert.cells if c.claim_name == "too-tight-95"]
    assert tight and all(c.verdict == "fail" for c in tight)
    assert hedge_cert.verdict == "fail"
    learner = get_learner("hedge")
    for c in tight:
        assert c.ci_low > c.delta and c.violations > 0 and c.replay
        r = c.replay[0]
        assert replay_replica(c, learner) == pytest.approx(r["value"])
        assert r["value"] > c.bound


def test_claims_on_one_cell_share_their_runs(hedge_cert):
    by_group = {}
    for c in hedge_cert.cells:
        by_group.setdefault((c.adversary_index, c.horizon, c.n_actions), []).append(c)
    for cells in by_group.values():
        assert len({c.seed for c in cells}) == 1 and len({c.replicas_run for c in cells}) == 1
        assert all(c.replicas <= c.replicas_run for c in cells)
    assert len({cells[0].seed for cells in by_group.values()}) == len(by_group)


def test_a_claims_verdict_does_not_depend_on_its_neighbours():
    """One claim alone at confidence 0.975 and beside a second claim at 0.95 (so both run each cell at
    0.975): the first claim's cell is identical, because claims share the prefix of one stream of
    replicas and each stops on its own."""
    hp = Claim("regret", 20.0, delta=0.1, name="hp")
    mean = Claim("regret", "sqrt(T * ln(n) / 2)", kind="expectation", name="mean")
    alone = certify(get_learner("ftpl"), hp, "bernoulli", 300, 3, confidence=0.975, max_replicas=4000, seed=3)
    both = certify(get_learner("ftpl"), [hp, mean], "bernoulli", 300, 3, confidence=0.95, max_replicas=4000,
                   seed=3)
    a, b = alone.cells[0], both.cells[0]
    assert alone.cell_confidence == pytest.approx(both.cell_confidence)
    for name in ("replicas", "violations", "rate", "ci_low", "ci_high", "verdict", "seed", "replay"):
        assert getattr(a, name) == getattr(b, name), name


def test_overeager_learning_rate_fails_the_published_bound():
    """Hedge with eta 20x its tuning is close to Follow the Leader on the alternating sequence, whose
    regret grows linearly (Shalev-Shwartz 2012, Example 2.2): its published 95% bound fails."""
    claims = hedge_regret_claims()
    cert = certify(OvereagerHedge(), claims, "alternating", [1000], [2], max_replicas=4000, seed=1)
    assert [c.verdict for c in cert.cells] == ["fail", "fail"]
    assert cert.cells[0].mean_low > cert.cells[0].bound


def test_ftl_on_the_alternating_sequence_fails_in_expectation_and_always():
    """FTL's regret on the alternating sequence is T/2 - 1/2 at even T with ties to the lowest index
    (closed form: it loses every round but the first, where it pays 1/2, while the best action loses
    T/2 - 1/2... ; Shalev-Shwartz 2012, Example 2.2). Every replica equals it."""
    T = 200
    ftl_regret = run(get_learner("ftl"), adversaries.get("alternating"), T, 2, replicas=1, seed=0).regret[0]
    assert ftl_regret == pytest.approx(T / 2 - 0.5, abs=1.0)
    claims = [Claim("regret", "sqrt(T)", kind="expectation", name="mean"),
              Claim("regret", "T / 4", kind="always", name="cap")]
    cert = certify(get_learner("ftl"), claims, "alternating", T, 2, max_replicas=2000)
    mean, cap = cert.cells
    assert mean.verdict == "fail" and mean.mean == pytest.approx(ftl_regret)
    assert cap.verdict == "fail" and cap.replicas == 1 and cap.replay[0]["replica"] == 0


def test_a_hard_cap_broken_once_is_caught_and_replayed():
    """A learner keeps its switch budget S = 3 except in about 0.1% of replicas, where it switches once
    more. Its own "always" claim fails, the first breaking replica is recorded, and replaying that chunk
    from the recorded seed reproduces S + 1 switches exactly, also through harness.run with the group
    seed. With 6000 replicas, missing every break has probability (1 - 0.001)^6000 < 0.003; seed fixed."""
    learner = RareCapBreaker(budget=3, p_break=0.001)
    cert = certify(learner, None, "alternating", 30, 2, max_replicas=6000, seed=5)
    (cell,) = cert.cells
    assert cell.claim_name == "switch-budget" and cell.verdict == "fail"
    assert cell.violations == 1 and cell.replicas == cell.replay[0]["replica"] + 1
    r = cell.replay[0]
    assert r["value"] == 4.0
    assert replay_replica(cell, learner) == 4.0
    assert replay_replica(json.loads(json.dumps(cell.as_dict())), learner) == 4.0
    regret, switches = play_chunk(learner, adversaries.get("alternating"), 30, 2, seed=cell.seed,
                                  index=r["chunk_index"], replicas=r["chunk_replicas"])
    assert switches[r["row"]] == 4 and np.count_nonzero(switches[:r["row"]] > 3) == 0
    whole = run(learner, adversaries.get("alternating"), 30, 2, replicas=cell.replicas_run, seed=cell.seed)
    assert whole.switches[r["replica"]] == 4 and np.flatnonzero(whole.switches > 3)[0] == r["replica"]


def test_an_always_claim_kept_passes_after_the_budget():
    cert = certify(RareCapBreaker(budget=3, p_break=0.0), None, "alternating", 30, 2, max_replicas=1000)
    (cell,) = cert.cells
    assert cell.verdict == "pass" and cell.replicas == 1000 and cell.violations == 0
    assert 0 < cell.ci_high < 0.01 and cell.ci_low == 0.0


def test_inconclusive_when_the_replicas_settle_nothing():
    """Violation rate exactly delta: with only 500 replicas neither side can be shown."""
    cert = certify(CoinSwitch(0.1), Claim("switches", 0.5, delta=0.1), "alternating", 2, 2, max_replicas=500,
                   seed=2)
    assert cert.verdict == "inconclusive" and cert.cells[0].replicas == 500
    assert cert.cells[0].ci_low < 0.1 < cert.cells[0].ci_high


def test_results_do_not_depend_on_n_jobs():
    claims = [Claim("regret", 15.0, delta=0.2, name="hp"), Claim("switches", 40, kind="always", name="cap")]
    kw = dict(horizons=[100], n_actions=[2, 3], max_replicas=1500, seed=9)
    one = certify(get_learner("hedge"), claims, ["bernoulli", "alternating"], n_jobs=1, **kw)
    two = certify(get_learner("hedge"), claims, ["bernoulli", "alternating"], n_jobs=2, **kw)
    assert [c.as_dict() for c in one.cells] == [c.as_dict() for c in two.cells]


def test_certificate_round_trip_and_contents(tmp_path, hedge_cert):
    path = hedge_cert.save(tmp_path / "sub" / "cert.json")
    back = Certificate.load(path)
    assert back == hedge_cert
    data = json.loads(path.read_text())
    assert data["statement"] == STATEMENT and "never a proof" in data["statement"]
    assert data["verdict"] == "fail" and data["counts"]["fail"] == 4
    assert data["versions"]["numpy"] == np.__version__
    assert len(data["campaign"]["digest"]) == 64 and data["seed"] == 7
    assert data["learner"]["name"] == "hedge" and data["adversaries"][0]["label"].startswith("bernoulli")
    assert set(data["cells"][0]) >= {"adversary", "adversary_label", "horizon", "n_actions", "claim", "replicas",
                                     "violations", "rate", "ci_low", "ci_high", "verdict", "method", "seed",
                                     "replay", "mean", "mean_low", "mean_high"}
    assert hedge_cert.markdown().startswith("# certification: fail")
    assert "too-tight-95" in hedge_cert.table() and STATEMENT in hedge_cert.table()


def test_digest_follows_the_battery():
    kw = dict(horizons=[50], n_actions=[2], max_replicas=300)
    a = certify(get_learner("hedge"), Claim("regret", 30.0), "bernoulli", seed=1, **kw)
    b = certify(get_learner("hedge"), Claim("regret", 30.0), "bernoulli", seed=1, **kw)
    c = certify(get_learner("hedge"), Claim("regret", 31.0), "bernoulli", seed=1, **kw)
    assert a.digest == b.digest != c.digest


def _edit(data, path, value):
    node = data
    for key in path[:-1]:
        node = node[key]
    if value is _DELETE:
        del node[path[-1]]
    else:
        node[path[-1]] = value


_DELETE = object()

MALFORMED = [
    (("format",), "other", "not a boundbreaker certificate"),
    (("format_version",), 99, "format_version 99 is not supported"),
    (("cells", 0, "verdict"), "maybe", "cells[0].verdict: must be pass, fail or inconclusive"),
    (("cells", 0, "replicas"), "many", "replicas: must be integer"),
    (("cells", 0, "rate"), _DELETE, "cells[0].rate: missing"),
    (("cells", 0, "extra"), 1, "unknown field 'extra'"),
    (("cells", 0, "replay"), [{"replica": 1}], "replay[0]: must hold exactly"),
    (("cells", 1, "index"), 7, "cells[1].index: is 7"),
    (("verdict",), "pass", "verdict: says 'pass' but its cells give 'fail'"),
    (("seed",), _DELETE, "seed: missing"),
    (("cells",), {}, "cells: must be list"),
    (("surprise",), 1, "surprise: unknown field"),
]


@pytest.mark.parametrize("path, value, message", MALFORMED)
def test_load_refuses_malformed_files_in_one_line(tmp_path, hedge_cert, path, value, message):
    data = hedge_cert.to_dict()
    _edit(data, path, value)
    file = tmp_path / "bad.json"
    file.write_text(json.dumps(data))
    with pytest.raises(ConfigError) as err:
        Certificate.load(file)
    text = str(err.value)
    assert message in text and "\n" not in text and str(file) in text


def test_load_refuses_non_json_and_missing_files(tmp_path):
    bad = tmp_path / "x.json"
    bad.write_text("{not json")
    with pytest.raises(ConfigError, match="not valid JSON"):
        Certificate.load(bad)
    with pytest.raises(ConfigError, match="no such certificate"):
        Certificate.load(tmp_path / "none.json")
    bad.write_text("[1, 2]")
    with pytest.raises(ConfigError, match="must hold a JSON object"):
        Certificate.load(bad)


def test_overall_verdict_order(hedge_cert):
    cells = [dataclasses.replace(c, verdict="pass") for c in hedge_cert.cells]
    base = dataclasses.replace(hedge_cert, cells=tuple(cells))
    assert base.verdict == "pass"
    some = list(cells)
    some[1] = dataclasses.replace(some[1], verdict="inconclusive")
    assert dataclasses.replace(base, cells=tuple(some)).verdict == "inconclusive"
    some[2] = dataclasses.replace(some[2], verdict="fail")
    assert dataclasses.replace(base, cells=tuple(some)).verdict == "fail"


BAD_CALLS = [
    (dict(claims=[]), "claims: the list is empty"),
    (dict(claims=[Claim("regret", 1.0, name="a"), Claim("regret", 2.0, name="a")]), "two claims are named 'a'"),
    (dict(claims=["regret <= 3"]), "claims[0]: must be a harness.Claim"),
    (dict(adversaries=[]), "adversaries: give at least one"),
    (dict(adversaries=["bernouli"]), "did you mean 'bernoulli'"),
    (dict(horizons=(100, 100)), "horizons: 100 appears twice"),
    (dict(horizons=[0]), "horizons[0]"),
    (dict(n_actions=1), "n_actions[0]: must be an integer >= 2"),
    (dict(horizons="100"), "horizons: must be an integer or a non-empty list"),
    (dict(confidence=1.0), "confidence"),
    (dict(max_replicas=0), "max_replicas"),
    (dict(n_jobs=0), "n_jobs"),
    (dict(claims=Claim("regret", "exp(700) * exp(700)")), "bound is inf"),
    (dict(claims=Claim("regret", "ln(n - 2)")), "bound failed at T=100, n=2"),
]


@pytest.mark.parametrize("change, message", BAD_CALLS)
def test_bad_arguments_are_one_line_errors(change, message):
    kw = dict(claims=Claim("regret", 10.0), adversaries="bernoulli", horizons=100, n_actions=2)
    kw.update(change)
    with pytest.raises(ConfigError) as err:
        certify(get_learner("hedge"), kw.pop("claims"), kw.pop("adversaries"), kw.pop("horizons"),
                kw.pop("n_actions"), **kw)
    assert message in str(err.value) and "\n" not in str(err.value)


def test_learner_without_claims_needs_some():
    with pytest.raises(ConfigError, match="carries none"):
        certify(CoinSwitch(0.1), None, "bernoulli", 10, 2)


# -- assert_claim ------------------------------------------------------------------------------------


def test_assert_claim_passes_and_returns_the_certificate():
    cert = assert_claim(get_learner("hedge"), hedge_regret_claims()[1], adversaries=["alternating"],
                        horizons=[400], n_actions=[2], max_replicas=2000)
    assert cert.verdict == "pass"


def test_assert_claim_names_the_failing_cell_and_its_replay():
    learner = RareCapBreaker(budget=3, p_break=0.001)
    with pytest.raises(AssertionError) as err:
        assert_claim(learner, learner.claims[0], adversaries=["alternating"], horizons=[30], n_actions=[2],
                     max_replicas=6000, seed=5)
    text = str(err.value)
    assert "1 of 1 cells fail" in text and "claim 'switch-budget' on alternating(), T=30, n=2" in text
    assert "harness.runner.play_chunk(learner, adversary, 30, 2, seed=" in text and " row " in text


def test_assert_claim_refuses_inconclusive_unless_allowed():
    claim = Claim("switches", 0.5, delta=0.1)
    with pytest.raises(AssertionError, match="inconclusive after at most 500 replicas"):
        assert_claim(CoinSwitch(0.1), claim, adversaries="alternating", horizons=2, n_actions=2,
                     max_replicas=500, seed=2)
    cert = assert_claim(CoinSwitch(0.1), claim, adversaries="alternating", horizons=2, n_actions=2,
                        max_replicas=500, seed=2, allow_inconclusive=True)
    assert cert.verdict == "inconclusive"


def test_learner_claims_that_depend_on_parameters_are_used():
    cert = certify(RareCapBreaker(budget=5, p_break=0.0), None, "alternating", 20, 2, max_replicas=300)
    assert cert.cells[0].bound == 5.0 and cert.cells[0].verdict == "pass"
    assert math.isclose(cert.cells[0].rate, 0.0)
