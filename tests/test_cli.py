"""The command line: tables, JSON, and one-line errors with exit code 2."""

import json
import subprocess
import sys

import pytest

from harness.cli import main


def _cli(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_run_prints_a_tail_table(capsys):
    code, out, err = _cli(capsys, "run", "--learner", "hedge", "--adversary", "bernoulli", "--horizon", "200",
                          "--actions", "3", "--replicas", "50", "--seed", "1")
    assert code == 0 and err == ""
    assert "regret" in out and "switches" in out and "p99" in out and "one sequence per replica" in out


def test_run_json_matches_the_api(capsys):
    from harness import run
    from harness.learners import get
    import adversaries

    code, out, _ = _cli(capsys, "run", "--learner", "ftpl", "--learner-param", "eta=0.2", "--adversary", "bernoulli",
                        "--adversary-param", "p=0.3", "--adversary-param", "shared=true", "--horizon", "100",
                        "--actions", "4", "--replicas", "30", "--seed", "2", "--switching-cost", "0.5", "--json")
    data = json.loads(out)
    direct = run(get("ftpl", eta=0.2), adversaries.get("bernoulli", p=0.3, shared=True), 100, 4, replicas=30,
                 seed=2, switching_cost=0.5)
    assert code == 0
    assert data["summary"]["regret"]["mean"] == pytest.approx(direct.regret.mean())
    assert data["summary"]["cost_regret"]["max"] == pytest.approx(direct.cost_regret.max())
    assert data["meta"]["adversary"]["params"] == {"p": 0.3, "shared": True}


BAD = [
    (["--learner", "hedgehog"], "--learner"),
    (["--adversary", "bernouli"], "did you mean 'bernoulli'"),
    (["--horizon", "-5"], "--horizon"),
    (["--actions", "1"], "--actions"),
    (["--replicas", "0"], "--replicas"),
    (["--seed", "-2"], "--seed"),
    (["--adversary-param", "p=1.5"], "--adversary-param"),
    (["--adversary-param", "p"], "KEY=VALUE"),
    (["--learner-param", "eta=-1"], "eta"),
    (["--horizon", "ten"], "--horizon"),
    (["--switching-cost", "-1"], "--switching-cost"),
    (["--learner", "no_such_module:Thing"], "cannot import module"),
]


@pytest.mark.parametrize("change, text", BAD)
def test_bad_input_is_one_line_and_exit_2(capsys, change, text):
    argv = {"--learner": "hedge", "--adversary": "bernoulli", "--horizon": "50", "--actions": "3",
            "--replicas": "5"}
    extra = []
    for i in range(0, len(change), 2):
        if change[i] in argv:
            argv[change[i]] = change[i + 1]
        else:
            extra += change[i:i + 2]
    args = ["run"] + [x for kv in argv.items() for x in kv] + extra
    code, out, err = _cli(capsys, *args)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith("boundbreaker: error:") and text in err
    assert "Traceback" not in err


def test_unknown_command_and_missing_option(capsys):
    code, _, err = _cli(capsys, "frobnicate")
    assert code == 2 and err.count("\n") == 1
    code, _, err = _cli(capsys, "run", "--learner", "hedge")
    assert code == 2 and "required" in err and err.count("\n") == 1


def test_list_shows_every_registered_name(capsys):
    from harness.learners import names
    import adversaries

    code, out, _ = _cli(capsys, "list")
    assert code == 0
    for name in names() + adversaries.names():
        assert f"  {name} " in out


def test_console_script_entry_point_runs():
    """The installed module entry point gives the same exit code contract."""
    proc = subprocess.run([sys.executable, "-m", "harness", "run", "--learner", "ftl", "--adversary", "alternating",
                           "--horizon", "10", "--actions", "2", "--replicas", "-1"], capture_output=True, text=True)
    assert proc.returncode == 2 and "--replicas" in proc.stderr and "Traceback" not in proc.stderr


def test_bench_quick_reports_each_learner(capsys):
    from harness.learners import names

    code, out, _ = _cli(capsys, "bench", "--quick", "--horizon", "400", "--replicas", "32", "--json")
    report = json.loads(out)
    assert code == 0 and [r["learner"] for r in report["learners"]] == names()
    assert all(r["shared_rps"] > 0 and r["naive_rps"] > 0 for r in report["learners"])


def test_bench_studies_runs_the_slow_and_bench_markers(capsys, monkeypatch):
    """`bench --studies` hands the checkout's tests to pytest with the markers CI skips."""
    import subprocess

    seen = {}
    monkeypatch.setattr(subprocess, "call", lambda cmd, cwd=None: seen.update(cmd=cmd, cwd=cwd) or 0)
    code, out, _ = _cli(capsys, "bench", "--studies")
    assert code == 0 and "running:" in out
    assert seen["cmd"][seen["cmd"].index("-m", 3) + 1] == "slow or bench"
    assert seen["cmd"][3].endswith("tests")
