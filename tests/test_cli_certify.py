"""``boundbreaker certify``: verdict table, certificate files, exit codes 0 / 1 / 3 and 2."""

import json

import pytest

from harness import Certificate
from harness.cli import main

CAMPAIGN = """
[campaign]
name = "cli check"
seed = 1
max_replicas = {max_replicas}

[learner]
name = "hedge"

[[claims]]
name = "regret-95"
metric = "regret"
bound = "{bound}"
delta = 0.05
source = "Cesa-Bianchi and Lugosi 2006, Corollary 4.2 (from memory)"

[[adversaries]]
name = "alternating"

[grid]
horizons = [300]
n_actions = [2]
"""

PUBLISHED = "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)"


def _campaign(tmp_path, bound=PUBLISHED, max_replicas=3000, name="c.toml"):
    path = tmp_path / name
    path.write_text(CAMPAIGN.format(bound=bound, max_replicas=max_replicas))
    return path


def _cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_a_passing_campaign_exits_0_and_writes_the_default_report(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    code, out, err = _cli(capsys, "certify", _campaign(tmp_path))
    assert code == 0, err
    assert "regret-95" in out and "verdict: PASS" in out and "never a proof" in out
    cert = Certificate.load(tmp_path / "reports" / "cli-check" / "certificate.json")
    assert cert.verdict == "pass" and cert.campaign["name"] == "cli check"
    assert (tmp_path / "reports" / "cli-check" / "summary.md").read_text().startswith("# cli check: pass")


def test_a_failing_campaign_exits_1_and_names_the_replay(tmp_path, capsys):
    out_file = tmp_path / "cert.json"
    code, out, _ = _cli(capsys, "certify", _campaign(tmp_path, bound="sqrt(T) / 10"), "--out", out_file)
    assert code == 1
    assert "verdict: FAIL" in out and "harness.runner.play_chunk(learner, adversary, 300, 2, seed=" in out
    assert json.loads(out_file.read_text())["verdict"] == "fail"
    assert not (tmp_path / "reports").exists()


def test_an_inconclusive_campaign_exits_3(tmp_path, capsys):
    # 40 replicas settle nothing at per-cell confidence 0.95: the rate could be anything near delta
    code, out, _ = _cli(capsys, "certify", _campaign(tmp_path, bound="15", max_replicas=40), "--report",
                        tmp_path / "r")
    assert code == 3 and "verdict: INCONCLUSIVE" in out
    assert (tmp_path / "r" / "certificate.json").exists() and (tmp_path / "r" / "summary.md").exists()


def test_jobs_do_not_change_the_certificate(tmp_path, capsys):
    path = _campaign(tmp_path, bound="sqrt(T) / 10")
    path.write_text(path.read_text().replace("n_actions = [2]", "n_actions = [2, 3, 4]"))  # parallel groups
    _cli(capsys, "certify", path, "--out", tmp_path / "a.json")
    _cli(capsys, "certify", path, "--out", tmp_path / "b.json", "--jobs", "2")
    a, b = (json.loads((tmp_path / f).read_text()) for f in ("a.json", "b.json"))
    assert a["cells"] == b["cells"] and a["campaign"]["digest"] == b["campaign"]["digest"]


@pytest.mark.parametrize("argv, text", [
    (["certify"], "give a campaign file (CAMPAIGN.toml) or --demo"),
    (["certify", "{c}", "--demo"], "not both"),
    (["certify", "{t}/missing.toml"], "no such campaign file"),
    (["certify", "{c}", "--jobs", "0"], "--jobs"),
    (["certify", "{c}", "--out", "{t}/no/such/dir/c.json"], "does not exist"),
    (["certify", "{c}", "--out", "{t}"], "is a directory"),
    (["certify", "{bad}"], "claims[0].bound: unknown name 'x'"),
    (["certify", "{empty}"], "claims: the campaign has none"),
])
def test_bad_input_exits_2_with_one_line(tmp_path, capsys, argv, text):
    good = _campaign(tmp_path)
    bad = _campaign(tmp_path, bound="sqrt(x)", name="bad.toml")
    empty = tmp_path / "empty.toml"
    empty.write_text(CAMPAIGN.format(bound="", max_replicas=10).split("[[claims]]")[0] + "[[adversaries]]\nname = \"alternating\"\n"
                     "[grid]\nhorizons = 10\nn_actions = 2\n")
    argv = [a.format(c=good, t=tmp_path, bad=bad, empty=empty) for a in argv]
    code, out, err = _cli(capsys, *argv)
    assert code == 2 and text in err and err.count("\n") == 1 and out == ""


def test_the_demo_prints_a_verdict_table_and_writes_a_certificate(tmp_path, capsys, monkeypatch):
    """The README's main job: Hedge's published claims pass, the two invented vendor claims fail."""
    monkeypatch.chdir(tmp_path)
    code, out, _ = _cli(capsys, "certify", "--demo")
    assert code == 1 and "edge-router" in out and "verdict: FAIL" in out
    cert = Certificate.load(tmp_path / "reports" / "edge-router" / "certificate.json")
    verdicts = {}
    for c in cert.cells:
        verdicts.setdefault(c.claim_name, set()).add(c.verdict)
    assert verdicts == {"regret-mean": {"pass"}, "regret-95": {"pass"}, "datasheet-95": {"fail"},
                        "link-changes-cap": {"fail"}}
    assert f"wrote {'reports/edge-router/certificate.json'}" in out
