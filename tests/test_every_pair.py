"""Every reference learner runs against every registered adversary (issue 4's 'done when')."""

import numpy as np
import pytest

import adversaries
from harness import run
from harness.cli import main
from harness.learners import example, names as learner_names


@pytest.mark.parametrize("learner", learner_names())
def test_learner_runs_against_every_adversary(learner):
    for name in adversaries.names():
        res = run(example(learner), adversaries.get(name), 60, 3, replicas=6, seed=1)
        assert res.regret.shape == (6,) and np.all(np.isfinite(res.regret)), name
        assert np.all((res.switches >= 0) & (res.switches <= 59)), name
        assert np.all(np.abs(res.regret) <= 60), name   # regret lies in [-T, T]


@pytest.mark.parametrize("adversary", adversaries.names())
def test_cli_runs_each_adversary(adversary, capsys):
    code = main(["run", "--learner", "hedge", "--adversary", adversary, "--horizon", "40", "--actions", "3",
                 "--replicas", "4"])
    out, err = capsys.readouterr()
    assert code == 0 and "regret" in out and err == ""
