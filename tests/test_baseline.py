"""Tail profiles: what record stores, how compare replays, profile files, refusals, assert_no_tail_regression."""

import json
import sys
from pathlib import Path

import numpy as np
import pytest

import adversaries
from harness import run
from harness.baseline import (PinnedSequence, TailProfile, _checksum, check_campaign, compare, record,
                              record_campaign, record_settings, sequence_digest)
from harness.certify import group_seed
from harness.config import parse_campaign
from harness.errors import ConfigError
from harness.learners import get as get_learner
from harness.stats import quantile_interval
from harness.testing import assert_no_tail_regression

sys.path.insert(0, str(Path(__file__).parent))
from helpers import Fixed  # noqa: E402

R, REF, T = 400, 300, 40


def battery():
    return [adversaries.get("alternating"), adversaries.get("bernoulli", p=0.5, shared=True),
            adversaries.get("bernoulli", p=0.3)]


@pytest.fixture(scope="module")
def profile():
    return record(get_learner("hedge"), battery(), [T], [2, 3], replicas=R, seed=11, reference_replicas=REF,
                  labels=["flapping", "one bad day", "noisy"])


@pytest.fixture(scope="module")
def saved(profile, tmp_path_factory):
    return profile.save(tmp_path_factory.mktemp("profiles") / "hedge.json")


def test_quantiles_are_order_statistics_of_the_cells_runs(profile):
    """Cell (a, T, n) replays as run(learner, adversary, T, n, replicas=R + REF, seed=cell seed): the first R
    replicas give each quantile and its interval (harness.stats.quantile_interval), the rest the reference
    counts of replicas strictly above the recorded value."""
    assert len(profile.cells) == 6 and profile.metrics == ("regret", "switches")
    assert profile.quantiles == (0.5, 0.9, 0.95, 0.99)
    for cell in profile.cells:
        adv = battery()[cell.adversary_index]
        assert cell.seed == group_seed(11, cell.adversary_index, cell.horizon, cell.n_actions)
        res = run(get_learner("hedge"), adv, cell.horizon, cell.n_actions, replicas=R + REF, seed=cell.seed)
        for name, values in (("regret", res.regret), ("switches", res.switches.astype(float))):
            for point in cell.metrics[name]["quantiles"]:
                qi = quantile_interval(values[:R], point.quantile, 0.95)
                assert (point.value, point.low, point.high) == pytest.approx((qi.estimate, qi.low, qi.high))
                assert point.reference_exceedances == int(np.count_nonzero(values[R:] > point.value))
            assert cell.metrics[name]["max"] == pytest.approx(values[:R].max())


def test_levels_the_replicas_do_not_allow_are_listed_as_omitted(profile):
    """0.999 needs 3688 replicas for a two-sided interval at 0.95 (q^n <= 0.025); 400 do not allow it."""
    (omitted,) = profile.omitted
    assert omitted["quantile"] == 0.999 and "3688" in omitted["reason"]
    with pytest.raises(ConfigError, match="^replicas: 5 allow none of the quantiles"):
        record(get_learner("hedge"), "alternating", 10, 2, replicas=5, quantiles=[0.9, 0.99])


def test_record_and_compare_do_not_depend_on_n_jobs():
    """Chunks finish in any order when parallel (threads here, to spare process start-up in CI)."""
    from joblib import parallel_config

    args = (get_learner("hedge"), battery()[1:], [T], [2])
    one = record(*args, replicas=600, seed=3, quantiles=[0.5, 0.9])
    with parallel_config(backend="threading"):
        two = record(*args, replicas=600, seed=3, quantiles=[0.5, 0.9], n_jobs=3)
        parallel = compare(one, get_learner("ftpl"), n_jobs=3)
    assert one.cells == two.cells
    assert compare(one, get_learner("ftpl")).cells == parallel.cells


def test_a_profile_round_trips_through_its_file(profile, saved):
    loaded = TailProfile.load(saved)
    assert loaded == profile
    assert loaded.to_dict() == json.loads(saved.read_text())
    text = saved.read_text()
    again = loaded.save(saved.with_name("again.json")).read_text()
    assert again == text  # stable: the same profile gives the same bytes
    # readable diffs: one line per recorded quantile, fixed key order, format first and checksum last
    lines = [line for line in text.splitlines() if '"quantile": ' in line and '"reference_exceedances"' in line]
    assert len(lines) == len(profile.cells) * len(profile.metrics) * len(profile.quantiles)
    keys = list(json.loads(text))
    assert keys[:2] == ["format", "format_version"] and keys[-1] == "checksum"


def test_values_are_stored_without_noise_digits():
    """Regret on real-valued losses: values keep 12 significant digits, and the reference counts are taken
    against exactly the stored value."""
    prof = record(get_learner("hedge"), adversaries.get("stochastic-gap", gap=0.05), 30, 2, replicas=400, seed=1)
    cell = prof.cells[0]
    res = run(get_learner("hedge"), adversaries.get("stochastic-gap", gap=0.05), 30, 2, replicas=800, seed=cell.seed)
    for point in cell.metrics["regret"]["quantiles"]:
        assert point.value == float(f"{point.value:.12g}")
        assert point.reference_exceedances == int(np.count_nonzero(res.regret[400:] > point.value))


def test_a_shared_sequence_is_kept_while_the_learner_gets_fresh_seeds(profile):
    """FTL is deterministic, so its regret is a function of the sequence alone: pinned to the profile's
    sequence seed, a run with another seed gives FTL the recorded sequence (the same regret), while the bare
    adversary under that seed draws another sequence. With sequence_seed = seed the wrapper plays exactly
    the bare adversary."""
    cell = profile.cells[2]  # one bad day (shared), T = 40, n = 2
    adv = battery()[1]
    assert cell.shared_sequence and cell.sequence_seed == cell.seed
    assert cell.sequence_digest == sequence_digest(adv, T, 2, cell.seed) != sequence_digest(adv, T, 2, cell.seed + 1)
    ftl = get_learner("ftl")

    def outcome(adversary, seed):
        res = run(ftl, adversary, 300, 3, replicas=4, seed=seed)
        return np.concatenate([res.regret, res.switches])

    recorded = outcome(adv, cell.seed)
    assert np.array_equal(outcome(PinnedSequence(adv, cell.seed), cell.seed + 1), recorded)
    assert not np.array_equal(outcome(adv, cell.seed + 1), recorded)
    hedge = get_learner("hedge")
    same = run(hedge, PinnedSequence(adv, 5), T, 2, replicas=300, seed=5)
    bare = run(hedge, adv, T, 2, replicas=300, seed=5)
    assert np.array_equal(same.regret, bare.regret) and np.array_equal(same.switches, bare.switches)
    assert [c.shared_sequence for c in profile.cells] == [True, True, True, True, False, False]  # alternating is shared


def test_compare_replays_the_battery_with_fresh_seeds(profile):
    """Counts of new replicas above each recorded value are those of run(learner, adversary (pinned when
    shared), T, n, replicas, seed=SeedSequence(seed, spawn_key=(a, T, n))-derived); the reference counts
    are the profile's; the same learner is unchanged (family-wise error <= 0.05; seeds fixed)."""
    result = compare(profile, get_learner("hedge"), seed=12, replicas=350)
    assert result.verdict == "unchanged" and result.tests == 6 * 2 * 4 and result.seed == 12
    for cell_result, cell in zip(result.cells, profile.cells):
        adv = battery()[cell.adversary_index]
        if cell.shared_sequence:
            adv = PinnedSequence(adv, cell.sequence_seed)
        res = run(get_learner("hedge"), adv, cell.horizon, cell.n_actions, replicas=350,
                  seed=group_seed(12, cell.adversary_index, cell.horizon, cell.n_actions))
        for q in cell_result.quantiles:
            values = res.regret if q.metric == "regret" else res.switches
            assert q.new_exceedances == int(np.count_nonzero(values > q.value))
            point = next(p for p in cell.metrics[q.metric]["quantiles"] if p.quantile == q.quantile)
            assert (q.base_exceedances, q.base_replicas, q.new_replicas) == (point.reference_exceedances, REF, 350)
            assert 0 <= q.p_regressed <= 1 and 0 <= q.p_improved <= 1 and q.detectable_rate > q.base_rate
    json.dumps(result.to_dict(), allow_nan=False)


def test_worse_and_better_learners_are_told_apart(profile):
    """Hedge with a learning rate five times its tuning chases the flapping link's last leader: its regret
    tails there are far heavier (Shalev-Shwartz 2012, Example 2.2, for the limit FTL), so the comparison
    regresses and names those cells; against a profile of that hot learner, Hedge is an improvement."""
    hot = compare(profile, get_learner("flawed-hot-hedge", heat=5.0))
    assert hot.verdict == "regressed"
    flagged = {(q.adversary_label, q.metric) for q in hot.regressions()}
    assert ("flapping", "regret") in flagged
    assert all(q.new_rate > q.base_rate for q in hot.regressions())
    hot_profile = record(get_learner("flawed-hot-hedge", heat=5.0), "alternating", T, 2, replicas=R, seed=2)
    better = compare(hot_profile, get_learner("hedge"))
    assert better.verdict == "improved" and not better.regressions()
    assert "REGRESSED" in hot.table() and "regressed: flapping, T=40" in hot.table()


def test_assert_no_tail_regression(saved):
    """Passes for Hedge itself (a false failure has probability <= 0.05, family-wise; seeds fixed) and fails
    for the hot variant, naming the cells and quantiles."""
    result = assert_no_tail_regression(saved, get_learner("hedge"))
    assert result.verdict in ("unchanged", "improved")
    with pytest.raises(AssertionError) as err:
        assert_no_tail_regression(saved, get_learner("flawed-hot-hedge", heat=5.0))
    text = str(err.value)
    assert text.splitlines()[0].endswith("(confidence 0.95 family-wise, seed 12):")
    assert "regressed against" in text and "flapping, T=40, n=2: regret q=0.5: P[regret > " in text


def test_a_switching_cost_adds_cost_regret():
    prof = record(get_learner("hedge"), "alternating", 20, 2, replicas=100, seed=0, switching_cost=0.5,
                  quantiles=[0.5, 0.9])
    assert prof.metrics == ("regret", "switches", "cost_regret")
    assert compare(prof, get_learner("hedge")).tests == 6


def test_compare_refuses_what_it_cannot_compare(profile):
    with pytest.raises(ConfigError, match="^seed: 11 is the profile's own seed"):
        compare(profile, get_learner("hedge"), seed=11)
    with pytest.raises(ConfigError, match=r"^adversaries\[1\]: battery mismatch: profile has bernoulli\(p=0.5"):
        compare(profile, get_learner("hedge"), adversaries=[battery()[0], adversaries.get("bernoulli", p=0.4,
                                                                                               shared=True),
                                                               battery()[2]])
    with pytest.raises(ConfigError, match="^adversaries: the profile has 3, got 1"):
        compare(profile, get_learner("hedge"), adversaries=["alternating"])
    with pytest.raises(ConfigError, match="^learner: "):
        compare(profile, object())
    with pytest.raises(ConfigError, match="^replicas: "):
        compare(profile, get_learner("hedge"), replicas=0)


def test_adversaries_the_file_names_by_class_are_given_not_imported():
    """A user's adversary (here the tests' Fixed table, named helpers:Fixed in the file) is never imported
    from the profile: compare asks for it, and takes it when given with the recorded spec."""
    table = np.tile([[0.0, 1.0], [1.0, 0.0]], (10, 1))
    prof = record(get_learner("hedge"), Fixed(table), 20, 2, replicas=100, seed=0, quantiles=[0.5, 0.9])
    with pytest.raises(ConfigError, match="^adversary: the file names 'helpers:Fixed', not a registered adversary"):
        compare(prof, get_learner("hedge"))
    assert compare(prof, get_learner("hedge"), adversaries=[Fixed(table)]).tests == 4
    with pytest.raises(ConfigError, match=r"^adversaries\[0\]: battery mismatch"):
        compare(prof, get_learner("hedge"), adversaries=[Fixed(1 - table)])


def test_a_shared_sequence_that_changed_is_refused(profile):
    """As if numpy or the adversary had changed since recording: the sequence drawn from the recorded seed no
    longer has the recorded digest."""
    data = profile.to_dict()
    data["cells"][2]["sequence_digest"] = "0" * 64
    data["checksum"] = _checksum(data)
    changed = TailProfile.from_dict(data)
    with pytest.raises(ConfigError, match=r"cell 2 \(one bad day, T=40, n=2\): the shared sequence drawn from "):
        compare(changed, get_learner("hedge"))


# -- refusing damaged, edited and foreign files ----------------------------------------------------------


def _refused(path, pattern):
    with pytest.raises(ConfigError, match=pattern) as err:
        TailProfile.load(path)
    assert "\n" not in str(err.value)
    return str(err.value)


def _edited(profile, tmp_path, edit, name="edited.json", rechecksum=True):
    data = profile.to_dict()
    edit(data)
    if rechecksum:
        data["checksum"] = _checksum(data)
    path = tmp_path / name
    path.write_text(json.dumps(data, indent=2))
    return path


def test_tampered_profiles_are_refused(profile, saved, tmp_path):
    """Any change of content (not of layout) breaks the checksum; edits that also rewrite the checksum are
    caught by the consistency checks."""
    text = saved.read_text()
    line = next(x for x in text.splitlines() if '"quantile": 0.9,' in x)
    hand = tmp_path / "hand.json"
    hand.write_text(text.replace(line, line.replace('"reference_exceedances": ', '"reference_exceedances": 1')))
    assert "re-record it" in _refused(hand, "checksum: does not match the content; the file was edited after")
    relaid = tmp_path / "relaid.json"
    relaid.write_text(json.dumps(json.loads(text), indent=4))  # layout is not content
    assert TailProfile.load(relaid) == profile

    def outside(d):
        d["cells"][1]["switches"]["quantiles"][0]["value"] = 1e6
    _refused(_edited(profile, tmp_path, outside), r"cells\[1\]\.switches\.quantiles\[0\]: value 1e\+06 lies outside")

    def unordered(d):
        d["cells"][3]["n_actions"] = 2
    _refused(_edited(profile, tmp_path, unordered), r"cells\[3\]: is \(1, T=40, n=2\) where the battery order puts")

    def extra(d):
        d["note"] = "hello"
    _refused(_edited(profile, tmp_path, extra), "note: unknown field")

    def too_many(d):
        d["cells"][0]["regret"]["quantiles"][0]["reference_exceedances"] = REF + 1
    _refused(_edited(profile, tmp_path, too_many), r"reference_exceedances: must lie in \[0, 300\]")


def test_truncated_and_foreign_files_are_refused(profile, saved, tmp_path):
    text = saved.read_text()
    cut = tmp_path / "cut.json"
    cut.write_text(text[: len(text) // 2])
    _refused(cut, r"not valid JSON \(line \d+, column \d+: .*\); the file is truncated or damaged")

    def drop_cells(d):
        d["cells"] = d["cells"][:4]
    _refused(_edited(profile, tmp_path, drop_cells), "cells: 4 cells for a battery of 6; the file is truncated")

    def drop_field(d):
        del d["cells"][0]["switches"]
    _refused(_edited(profile, tmp_path, drop_field), r"cells\[0\]\.switches: must be a JSON object")
    _refused(tmp_path / "missing.json", "no such tail profile file")
    other = tmp_path / "cert.json"
    other.write_text(json.dumps({"format": "boundbreaker-certificate", "format_version": 1}))
    _refused(other, "format: not a boundbreaker tail profile")
    listing = tmp_path / "list.json"
    listing.write_text("[1, 2]")
    _refused(listing, "must hold a JSON object")


def test_other_format_versions_are_refused(profile, tmp_path):
    for version, word in ((0, "older"), (2, "newer")):
        def edit(d, v=version):
            d["format_version"] = v
        message = _refused(_edited(profile, tmp_path, edit), f"format_version {version} is {word} than")
        assert "re-record the profile with `boundbreaker baseline`" in message


# -- campaigns ------------------------------------------------------------------------------------------

CAMPAIGN = {
    "campaign": {"name": "router", "seed": 4},
    "learner": {"name": "hedge"},
    "adversaries": [{"name": "alternating", "label": "flapping"},
                    {"name": "bernoulli", "params": {"p": 0.5, "shared": True}}],
    "grid": {"horizons": [30], "n_actions": [2]},
    "baseline": {"replicas": 400, "reference_replicas": 200, "quantiles": [0.5, 0.9, 0.99, 0.999]},
}


def _campaign(**changes):
    data = json.loads(json.dumps(CAMPAIGN))
    for path, value in changes.items():
        section, key = path.split("__")
        if section == "adversaries":
            data["adversaries"][0][key] = value
        else:
            data.setdefault(section, {})[key] = value
    return parse_campaign(data, source="router.toml")


def test_the_baseline_section_has_defaults_and_checks():
    plain = parse_campaign({k: v for k, v in CAMPAIGN.items() if k != "baseline"})
    assert plain.baseline == {"replicas": 4000, "reference_replicas": 4000,
                              "quantiles": [0.5, 0.9, 0.95, 0.99, 0.999], "power": 0.8}
    assert _campaign().baseline["reference_replicas"] == 200
    assert _campaign().digest != _campaign(baseline__replicas=401).digest
    for key, value, pattern in (("quantiles", [0.5, 0.5], "appears twice"), ("quantiles", [0.5, 1.0], r"\(0, 1\)"),
                                ("quantiles", [], "non-empty list"), ("power", 1.0, r"must lie in \(0, 1\)"),
                                ("replicas", 0, "must be an integer >= 1"),
                                ("replica", 10, "did you mean 'replicas'")):
        with pytest.raises(ConfigError, match=f"^router.toml: baseline.{key}.*{pattern}"):
            _campaign(**{f"baseline__{key}": value})


def test_a_campaign_records_what_it_says_and_mismatches_are_named():
    campaign = _campaign()
    prof = record_campaign(campaign)
    assert prof.replicas == 400 and prof.reference_replicas == 200 and prof.seed == 4
    assert [o["quantile"] for o in prof.omitted] == [0.999]
    assert prof.campaign == {"name": "router", "digest": campaign.digest}
    assert prof.settings() == record_settings(campaign)
    check_campaign(prof, campaign, "p.json")  # its own campaign: no complaint
    check_campaign(prof, _campaign(learner__name="ftl"), "p.json")  # the learner may differ: that is the point
    for change, field in ((dict(grid__horizons=[31]), "horizons[0]: profile has 30, campaign has 31"),
                          (dict(adversaries__label="flap"), "adversaries[0]: profile has alternating() labelled "
                                                            "'flapping', campaign has alternating() labelled 'flap'"),
                          (dict(campaign__seed=5), "seed: profile has 4, campaign has 5"),
                          (dict(baseline__quantiles=[0.5, 0.9]), "quantiles: profile has"),
                          (dict(campaign__confidence=0.9), "confidence: profile has 0.95, campaign has 0.9")):
        with pytest.raises(ConfigError, match="^p.json: battery mismatch with campaign router.toml: ") as err:
            check_campaign(prof, _campaign(**change), "p.json")
        assert field in str(err.value) and "re-record it with `boundbreaker baseline" in str(err.value)
