"""`boundbreaker search CAMPAIGN.toml` and its exit codes; the saved file replays."""

import json
import math

import pytest

from helpers import run_cli

HOT_ETA = 10 * math.sqrt(8 * math.log(2) / 1000)

CAMPAIGN = """
[campaign]
name = "uplink-router"
seed = 1

[learner]
name = "hedge"
params = {{ eta = {eta} }}

[[claims]]
name = "regret-95"
metric = "regret"
kind = "high_probability"
delta = 0.05
bound = "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)"
source = "Cesa-Bianchi and Lugosi 2006, Thm 2.2, plus Hoeffding-Azuma"

[[adversaries]]
name = "bernoulli"

[grid]
horizons = [1000]
n_actions = [2]

[search]
max_examples = {budget}
replicas = 128
"""


def _campaign(tmp_path, eta=HOT_ETA, budget=40, name="c.toml"):
    path = tmp_path / name
    path.write_text(CAMPAIGN.format(eta=eta, budget=budget))
    return path


def test_search_finds_saves_and_the_file_replays(tmp_path, capsys):
    out_file = tmp_path / "found.npz"
    code, out, err = run_cli(capsys, "search", _campaign(tmp_path), "--out", out_file)
    assert code == 1 and "COUNTEREXAMPLE" in out and out_file.exists()
    assert f"boundbreaker replay {out_file}" in out
    code, out, _ = run_cli(capsys, "replay", out_file)
    assert code == 1 and "STILL VIOLATES" in out
    code, out, _ = run_cli(capsys, "replay", out_file, "--learner", "hedge")
    assert code == 0


def test_search_json_and_method_override(tmp_path, capsys):
    code, out, _ = run_cli(capsys, "search", _campaign(tmp_path), "--json", "--out", tmp_path / "x.npz")
    data = json.loads(out)
    assert code == 1 and data["found"] and data["path"] == str(tmp_path / "x.npz")
    assert data["cells"] == [{"claim": "regret-95", "horizon": 1000, "n_actions": 2, "found": True,
                              "method": "hypothesis", "evaluations": data["cells"][0]["evaluations"],
                              "evaluations_to_find": data["counterexample"]["search"]["evaluations_to_find"]}]
    assert data["counterexample"]["claim"]["name"] == "regret-95"
    code, out, _ = run_cli(capsys, "search", _campaign(tmp_path, budget=5), "--method", "random", "--json",
                        "--out", tmp_path / "y.npz")
    assert json.loads(out)["cells"][0]["method"] == "random"


def test_search_on_a_compliant_learner_exits_0(tmp_path, capsys):
    """Hedge at its published tuning: a false counterexample has probability <= 0.05 (fixed seed)."""
    path = tmp_path / "ok.toml"
    path.write_text(CAMPAIGN.format(eta=math.sqrt(8 * math.log(2) / 1000), budget=15))
    code, out, _ = run_cli(capsys, "search", path, "--out", tmp_path / "none.npz")
    assert code == 0 and "no counterexample" in out and not (tmp_path / "none.npz").exists()


@pytest.mark.parametrize("extra, text", [
    (["--claim", "nope"], "--claim"),
    (["--method", "grid"], "--method"),
])
def test_search_bad_options_exit_2(tmp_path, capsys, extra, text):
    code, out, err = run_cli(capsys, "search", _campaign(tmp_path), *extra)
    assert code == 2 and out == "" and err.count("\n") == 1 and text in err


def test_search_bad_campaign_exit_2(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text(CAMPAIGN.format(eta=-1, budget=10))
    code, out, err = run_cli(capsys, "search", bad)
    assert code == 2 and err.count("\n") == 1 and "eta" in err
    code, _, err = run_cli(capsys, "search", tmp_path / "missing.toml")
    assert code == 2 and err.count("\n") == 1


def test_demo_finds_saves_and_replays_the_flawed_learner(tmp_path, capsys):
    """The bundled demo: flawed-hot-hedge with its own (false) claims; replay with the fixed learner passes."""
    out_file = tmp_path / "fleet.npz"
    code, out, _ = run_cli(capsys, "search", "--demo", "--out", out_file)
    assert code == 1 and "flawed-hot-hedge" in out and out_file.exists()
    code, out, _ = run_cli(capsys, "replay", out_file)
    assert code == 1 and "STILL VIOLATES" in out
    code, out, _ = run_cli(capsys, "replay", out_file, "--learner", "hedge")
    assert code == 0 and "no longer shown to violate" in out


@pytest.mark.parametrize("argv", [["search"], ["search", "--demo", "x.toml"]])
def test_search_needs_exactly_one_campaign(capsys, argv):
    code, out, err = run_cli(capsys, *argv)
    assert code == 2 and err.count("\n") == 1 and "--demo" in err
