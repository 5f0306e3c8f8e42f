"""Rebuilding learners and adversaries from files: registered names only, never imported code."""

import pytest

import adversaries
from harness.errors import ConfigError
from harness.learners import REGISTRY as LEARNERS, get


def test_a_recorded_spec_rebuilds_the_same_object():
    learner = get("budget-cap", inner="hedge", inner_params={"eta": 0.2}, budget=5)
    again = LEARNERS.from_file_spec(learner.spec(), "--learner")
    assert again.spec() == learner.spec()
    adv = adversaries.get("bernoulli", p=0.3, shared=True)
    assert adversaries.REGISTRY.from_file_spec(adv.spec(), "adversary=").spec() == adv.spec()


@pytest.mark.parametrize("spec, text", [
    ({"name": "os:system", "class": "os:system", "params": {}}, "not a registered learner"),
    ({"name": None, "class": "evil:Thing", "params": {}}, "'evil:Thing', not a registered learner"),
    ({"name": "hedge", "class": "fleet_user:Mine", "params": {}}, "under the registered name 'hedge'"),
    ({"name": "budget-cap", "class": "harness.learners.wrappers:BudgetCap",
      "params": {"inner": "evil:Thing", "budget": 3}}, "'evil:Thing' at params.inner"),
    ({"name": "budget-cap", "class": "harness.learners.wrappers:BudgetCap",
      "params": {"inner": {"name": None, "class": "evil:Thing"}, "budget": 3}}, "at params.inner"),
])
def test_code_named_in_a_file_is_never_imported(spec, text):
    with pytest.raises(ConfigError, match="does not import code named in a file") as info:
        LEARNERS.from_file_spec(spec, "--learner NAME")
    assert text in str(info.value) and "--learner NAME" in str(info.value)


def test_bad_parameters_in_a_file_say_how_to_give_the_object():
    with pytest.raises(ConfigError, match=r"cannot rebuild the file's learner .*eta.*give it yourself \(--learner\)"):
        LEARNERS.from_file_spec({"name": "hedge", "params": {"eta": -1}}, "--learner")
