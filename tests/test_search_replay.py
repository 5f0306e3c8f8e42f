"""replay(), the replay CLI, and the regression-test helper."""

import json
import math
import shutil

import numpy as np
import pytest

from harness.claims import Claim
from harness.errors import ConfigError
from harness.learners import get
from harness.search import Counterexample, replay, search
from harness.search.replay import learner_from_spec
from harness.search.regression import check_fixed, counterexample_files, regression_tests
from helpers import run_cli

T, N = 1000, 2
CLAIM = Claim("regret", "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", delta=0.05, name="hedge hp",
              source="Cesa-Bianchi and Lugosi 2006, Thm 2.2, plus Hoeffding-Azuma")
HOT_ETA = 10 * math.sqrt(8 * math.log(N) / T)


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    found = search(get("hedge", eta=HOT_ETA), CLAIM, T, N, max_examples=60, replicas=128, seed=0)
    assert found
    folder = tmp_path_factory.mktemp("regressions")
    return found, found.save(folder / "hot-hedge.npz")


def test_replay_reproduces_the_recorded_result_exactly(saved):
    found, path = saved
    again = replay(path, get("hedge", eta=HOT_ETA))
    assert again.still_violates and again
    assert (again.violations, again.replicas, again.seed) == (found.violations, found.replicas,
                                                              found.seeds["confirm"])
    assert again.rate == found.rate and again.ci == pytest.approx(found.ci)


def test_replay_with_fresh_seed_and_the_fixed_learner(saved):
    """The published tuning is not broken there: P[regret > bound] <= 0.05 on every sequence, so the
    one-sided test at 95% wrongly says "still violates" with probability <= 0.05 (fixed seed)."""
    _, path = saved
    fresh = replay(path, get("hedge", eta=HOT_ETA), seed=12345, replicas=300)
    assert fresh.still_violates and fresh.replicas == 300 and fresh.seed == 12345
    fixed = replay(path, get("hedge"))
    assert not fixed.still_violates and not fixed and fixed.rate < 0.05
    assert "no longer shown to violate" in fixed.describe()
    with pytest.raises(ConfigError, match="learner"):
        replay(path, "hedge")


def test_regression_helper_passes_fixed_and_fails_returning_defects(saved, tmp_path):
    found, path = saved
    shutil.copy(path, tmp_path / "a.npz")
    assert [p.name for p in counterexample_files(tmp_path)] == ["a.npz"]
    check_fixed(tmp_path / "a.npz", learner=get("hedge"))                   # fixed: passes
    with pytest.raises(AssertionError, match="a.npz: STILL VIOLATES"):
        check_fixed(tmp_path / "a.npz")                                      # rebuilt from the file: hot
    with pytest.raises(AssertionError):
        check_fixed(tmp_path / "a.npz", learner=lambda ce: get("hedge", eta=ce.learner["params"]["eta"]))
    test = regression_tests(tmp_path, learner=get("hedge"))
    marks = [m for m in test.pytestmark if m.name == "parametrize"]
    assert marks and [p.name for p in marks[0].args[1]] == ["a.npz"]
    test(tmp_path / "a.npz")
    with pytest.raises(ConfigError, match="not a directory"):
        regression_tests(tmp_path / "missing")


def test_generated_regression_tests_run_under_pytest(saved, tmp_path):
    """A test module that uses the helper collects one test per file; the fixed learner passes."""
    _, path = saved
    folder = tmp_path / "counterexamples"
    folder.mkdir()
    shutil.copy(path, folder / "hot-hedge.npz")
    (tmp_path / "test_generated.py").write_text(
        "from harness.learners import get\n"
        "from harness.search.regression import regression_tests\n"
        f"test_fixed = regression_tests({str(folder)!r}, learner=get('hedge'))\n"
        f"test_returned = regression_tests({str(folder)!r})\n")

    class Collect:
        def __init__(self):
            self.outcomes = {}

        def pytest_runtest_logreport(self, report):
            if report.when == "call":
                self.outcomes[report.nodeid.split("::")[-1]] = (report.outcome, str(report.longrepr or ""))

    seen = Collect()
    code = pytest.main(["-q", "-p", "no:cacheprovider", "-o", "addopts=", str(tmp_path / "test_generated.py")],
                       plugins=[seen])
    assert code == pytest.ExitCode.TESTS_FAILED
    assert seen.outcomes["test_fixed[hot-hedge.npz]"][0] == "passed"
    outcome, text = seen.outcomes["test_returned[hot-hedge.npz]"]
    assert outcome == "failed" and "STILL VIOLATES" in text


def test_replay_cli_exit_codes(saved, capsys):
    _, path = saved
    code, out, err = run_cli(capsys, "replay", path)
    assert code == 1 and "STILL VIOLATES" in out and err == ""
    code, out, _ = run_cli(capsys, "replay", path, "--learner", "hedge")
    assert code == 0 and "no longer shown to violate" in out
    code, out, _ = run_cli(capsys, "replay", path, "--learner", "hedge", "--learner-param", f"eta={HOT_ETA}",
                        "--json", "--replicas", "200", "--seed", "4")
    data = json.loads(out)
    assert code == 1 and data["still_violates"] and data["replicas"] == 200 and data["seed"] == 4


@pytest.mark.parametrize("argv, text", [
    (["replay", "missing.npz"], "no such counterexample file"),
    (["replay", "{path}", "--learner", "hedgehog"], "--learner"),
    (["replay", "{path}", "--learner", "hedge", "--learner-param", "eta=-1"], "eta"),
    (["replay", "{path}", "--learner-param", "eta=1"], "give --learner too"),
    (["replay", "{path}", "--replicas", "0"], "--replicas"),
    (["replay", "{path}", "--seed", "-1"], "--seed"),
    (["replay"], "required"),
])
def test_replay_cli_bad_input_is_one_line_exit_2(saved, capsys, tmp_path, argv, text):
    argv = [a.replace("{path}", str(saved[1])) for a in argv]
    code, out, err = run_cli(capsys, *argv)
    assert code == 2 and out == "" and err.count("\n") == 1 and text in err


@pytest.mark.parametrize("learner", [
    {"name": None, "class": "os:system", "params": {"command": "echo pwned"}},
    {"name": "os:system", "class": "os:system", "params": {}},
    {"name": "budget-cap", "class": "harness.learners.wrappers:BudgetCap",
     "params": {"learner": {"name": None, "class": "os:system", "params": {}}, "budget": 3}},
    {"name": "budget-cap", "class": "harness.learners.wrappers:BudgetCap",
     "params": {"learner": "os:system", "budget": 3}},
])
def test_replay_never_imports_code_named_in_a_file(saved, tmp_path, capsys, learner):
    """A file that names module:Class (at the top or inside a wrapper) is not rebuilt from the file."""
    found = Counterexample.load(saved[1])
    found.learner = learner
    path = found.save(tmp_path / "evil.npz")
    with pytest.raises(ConfigError, match="does not import code named in a file"):
        learner_from_spec(Counterexample.load(path).learner)
    code, out, err = run_cli(capsys, "replay", path)
    assert code == 2 and "does not import code" in err and err.count("\n") == 1
    assert "pwned" not in out + err


def test_replay_cli_refuses_a_hostile_file(tmp_path, capsys):
    bad = tmp_path / "bad.npz"
    np.savez(bad, losses=np.full((3, 2), np.nan), metadata=np.array("{}"))
    code, out, err = run_cli(capsys, "replay", bad)
    assert code == 2 and "bad.npz" in err and err.count("\n") == 1
