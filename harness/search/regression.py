"""Turn a directory of saved counterexamples into pytest regression tests.

In a test module::

    from harness.search.regression import regression_tests

    test_fixed_counterexamples = regression_tests("tests/counterexamples")

collects one test per ``*.npz`` file in the directory. Each replays its
counterexample (recorded seed and replicas, so the test is deterministic)
and fails, with the replay's one-line summary, if the learner still breaks
the claim there: the defect the file records has come back. The learner is
rebuilt from the file (registry name and parameters), or given as
``learner``: a Learner, or a function of the loaded Counterexample returning
one. A file that no longer loads fails its test with the loader's message.
"""

from __future__ import annotations

import os
from pathlib import Path

from ..errors import ConfigError
from .files import Counterexample
from .replay import learner_from_spec, replay


def counterexample_files(directory) -> list[Path]:
    """The ``*.npz`` files of a directory, sorted by name."""
    folder = Path(os.fspath(directory))
    if not folder.is_dir():
        raise ConfigError(f"{folder}: not a directory of counterexample files")
    return sorted(folder.glob("*.npz"))


def check_fixed(path, learner=None, replicas=None, seed=None) -> None:
    """Raise AssertionError if the counterexample at ``path`` still breaks its claim."""
    ce = Counterexample.load(path)
    if learner is None:
        subject = learner_from_spec(ce.learner)
    elif callable(learner) and not callable(getattr(learner, "play_block", None)):
        subject = learner(ce)
    else:
        subject = learner
    result = replay(ce, subject, replicas=replicas, seed=seed)
    if result.still_violates:
        raise AssertionError(f"{Path(path).name}: {result.describe()}")


def regression_tests(directory, learner=None, replicas=None, seed=None):
    """A pytest test function parametrized over the directory's counterexample files."""
    import pytest

    paths = counterexample_files(directory)

    @pytest.mark.parametrize("path", paths, ids=[p.name for p in paths])
    def test_counterexample_stays_fixed(path):
        check_fixed(path, learner=learner, replicas=replicas, seed=seed)

    return test_counterexample_stays_fixed
