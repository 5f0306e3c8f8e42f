"""``boundbreaker baseline`` and ``boundbreaker compare``: files, tables, exit codes 0 / 1 / 2."""

import json

import pytest

from harness.baseline import TailProfile
from harness.cli import main

CAMPAIGN = """
[campaign]
name = "edge fleet"
seed = 2

[learner]
name = "hedge"

[[adversaries]]
name = "alternating"
label = "flapping link"

[[adversaries]]
name = "bernoulli"
params = {{ p = 0.5, shared = true }}
label = "one bad day"

[grid]
horizons = [{horizon}]
n_actions = [2]

[baseline]
replicas = 500
reference_replicas = 400
quantiles = [0.5, 0.9, 0.99]
"""


def _cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def recorded(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fleet")
    campaign = folder / "fleet.toml"
    campaign.write_text(CAMPAIGN.format(horizon=60))
    assert main(["baseline", str(campaign), "--out", str(folder / "profile.json")]) == 0
    return campaign, folder / "profile.json"


def test_baseline_writes_a_profile_and_prints_the_quantiles(tmp_path, capsys):
    campaign = tmp_path / "fleet.toml"
    campaign.write_text(CAMPAIGN.format(horizon=40))
    code, out, err = _cli(capsys, "baseline", campaign, "--out", tmp_path / "p.json")
    assert code == 0, err
    assert "tail profile of hedge" in out and "q0.99" in out and f"wrote {tmp_path / 'p.json'}" in out
    profile = TailProfile.load(tmp_path / "p.json")
    assert profile.campaign["name"] == "edge fleet" and profile.replicas == 500 and len(profile.cells) == 2


def test_compare_with_the_same_learner_exits_0(recorded, capsys):
    """Hedge against its own profile: a false "regressed" has probability <= 0.05 (family-wise, Holm over the
    12 tests); seeds fixed, so the run is the same every time."""
    campaign, profile = recorded
    code, out, err = _cli(capsys, "compare", profile, campaign)
    assert code == 0, err
    assert "verdict: UNCHANGED" in out and "12 tests" in out and "not a proof" in out
    code, out, _ = _cli(capsys, "compare", profile)  # the profile's own learner and battery
    assert code == 0 and "compare hedge(eta=None) with the profile of hedge(eta=None)" in out


def test_a_regression_exits_1_and_names_it(recorded, capsys, tmp_path):
    """Hedge with 4x its learning rate chases the flapping link's last leader (regret grows towards FTL's
    linear regret there; Shalev-Shwartz 2012, Example 2.2): its median regret rises far beyond what 400
    reference replicas allow by chance. Seeds fixed."""
    campaign, profile = recorded
    code, out, _ = _cli(capsys, "compare", profile, campaign, "--learner", "flawed-hot-hedge",
                        "--learner-param", "heat=4", "--out", tmp_path / "c.json")
    assert code == 1
    assert "verdict: REGRESSED" in out and "regressed: flapping link, T=60, n=2: regret q=0.5" in out
    data = json.loads((tmp_path / "c.json").read_text())
    assert data["verdict"] == "regressed" and data["learner"]["name"] == "flawed-hot-hedge"
    # parameters without --learner change the default learner's
    code, out, _ = _cli(capsys, "compare", profile, "--learner-param", "eta=2.0")
    assert code == 1 and "compare hedge(eta=2.0)" in out


@pytest.mark.parametrize("edit, message", [
    (lambda t: t.replace("horizons = [60]", "horizons = [61]"),
     "battery mismatch with campaign {campaign}: horizons[0]: profile has 60, campaign has 61"),
    (lambda t: t.replace("quantiles = [0.5, 0.9, 0.99]", "quantiles = [0.5, 0.99]"),
     "battery mismatch with campaign {campaign}: quantiles"),
    (lambda t: t.replace("p = 0.5,", "p = 0.4,"),
     "battery mismatch with campaign {campaign}: adversaries[1]: profile has bernoulli(p=0.5"),
])
def test_a_campaign_with_another_battery_is_bad_input(recorded, capsys, tmp_path, edit, message):
    campaign, profile = recorded
    other = tmp_path / "other.toml"
    other.write_text(edit(campaign.read_text()))
    code, out, err = _cli(capsys, "compare", profile, other)
    assert code == 2 and out == ""
    assert err.startswith(f"boundbreaker: error: {profile}: ") and message.format(campaign=other) in err
    assert err.count("\n") == 1


def test_bad_input_exits_2_in_one_line(recorded, capsys, tmp_path):
    campaign, profile = recorded
    tampered = tmp_path / "tampered.json"
    tampered.write_text(profile.read_text().replace('"seed": 2,', '"seed": 3,', 1))
    truncated = tmp_path / "truncated.json"
    truncated.write_text(profile.read_text()[:500])
    cases = [
        (["compare", tampered], "checksum: does not match the content"),
        (["compare", truncated], "not valid JSON"),
        (["compare", tmp_path / "nope.json"], "no such tail profile file"),
        (["compare", profile, "--seed", "2"], "seed: 2 is the profile's own seed"),
        (["compare", profile, "--seed", "-1"], "--seed: must be at least 0"),
        (["compare", profile, "--replicas", "0"], "--replicas: must be at least 1"),
        (["compare", profile, "--learner", "hedgehog"], "--learner: learner: unknown name 'hedgehog'"),
        (["compare", profile, "--learner-param", "speed=3"], "--learner-param: learner 'hedge': unknown parameter "
                                                              "'speed'; its parameters are: eta"),
        (["compare", profile, "--jobs", "0"], "--jobs: must be a non-zero integer"),
        (["compare", profile, "--out", tmp_path / "missing" / "c.json"], "--out"),
        (["baseline", campaign], "the following arguments are required: --out"),
        (["baseline", tmp_path / "none.toml", "--out", tmp_path / "p.json"], "no such campaign file"),
    ]
    for argv, message in cases:
        code, out, err = _cli(capsys, *argv)
        assert code == 2, (argv, err)
        assert message in err and err.count("\n") == 1, (argv, err)


def test_a_users_learner_next_to_the_profile_is_found(recorded, capsys, tmp_path, monkeypatch):
    """module:Class learners are imported from the profile's folder (or the working folder), as campaign
    files find theirs: a subclass of Hedge with the default tuning is unchanged (a false regression has
    probability <= 0.05; seeds fixed)."""
    campaign, profile = recorded
    (profile.parent / "fleet_learners.py").write_text(
        "from harness.learners.experts import Hedge\n\n\nclass Candidate(Hedge):\n    pass\n")
    monkeypatch.chdir(tmp_path)
    code, out, err = _cli(capsys, "compare", profile, "--learner", "fleet_learners:Candidate", "--out", "c.json")
    assert code == 0, err
    assert "verdict: UNCHANGED" in out
    assert json.loads((tmp_path / "c.json").read_text())["learner"]["class"] == "fleet_learners:Candidate"


def test_a_profile_never_makes_compare_import_code(recorded, capsys, tmp_path):
    """A profile recorded from a user's class names it in the file; compare does not import it (as replay and
    reports do not): without --learner it refuses in one line, and a subclass recorded under its parent's
    registered name is not silently replaced by the parent."""
    campaign, profile = recorded
    (tmp_path / "fleet_user.py").write_text(
        "from harness.learners.experts import Hedge\n\n\nclass Mine(Hedge):\n    pass\n")
    user = tmp_path / "user.toml"
    user.write_text(campaign.read_text().replace('name = "hedge"', 'name = "fleet_user:Mine"'))
    assert main(["baseline", str(user), "--out", str(tmp_path / "mine.json")]) == 0
    capsys.readouterr()
    code, _, err = _cli(capsys, "compare", tmp_path / "mine.json")
    assert code == 2 and err.count("\n") == 1
    assert "'fleet_user:Mine' under the registered name 'hedge'" in err and "does not import code named in a file" in err
    code, out, err = _cli(capsys, "compare", tmp_path / "mine.json", user)  # the campaign names it: allowed
    assert code == 0, err
