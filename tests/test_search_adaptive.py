"""Searching adaptive adversaries' parameters; adaptive counterexamples saved and replayed."""

import math

import numpy as np
import pytest

from harness import Adversary, run
from harness.claims import Claim
from harness.errors import ConfigError
from harness.learners import get
from harness.search import Counterexample, replay, search
from harness.search.adaptive import families, infer_space, realized_losses


class ParamChase(Adversary):
    """Adaptive test adversary: loss ``high`` on the action each replica played last, ``low`` elsewhere.

    Defaults 0.5/0.5 make it harmless, so a search must move the parameters to hurt anyone."""

    adaptive = True

    def __init__(self, high=0.5, low=0.5):
        self.high, self.low = high, low

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._rows = n_actions, np.arange(replicas)

    def respond(self, t, history):
        out = np.full((self._rows.size, self._n), self.low)
        seen = history.last_action >= 0
        out[self._rows[seen], history.last_action[seen]] = self.high
        return out


NAME = f"{__name__}:ParamChase"


def ftl_regret_by_hand(high, low, horizon):
    """Follow the Leader (ties to action 0) against the chase, n = 2, simulated in plain Python."""
    cum, last, played = [0.0, 0.0], None, 0.0
    for _ in range(horizon):
        row = [low, low] if last is None else [high if i == last else low for i in range(2)]
        action = 0 if cum[0] <= cum[1] else 1
        played += row[action]
        cum = [cum[0] + row[0], cum[1] + row[1]]
        last = action
    return played - min(cum)


# Follow the Leader against the chase: regret about 0.17 (high - low) T (simulated below); the cap is
# invented for the test.
FTL_CAP = Claim("regret", "0.1 * T", delta=0.05, name="FTL regret <= 0.1 T (invented)")


def test_engine_agrees_with_a_hand_simulation_of_ftl_against_the_chase():
    for high, low in [(1.0, 0.0), (0.9, 0.2), (0.5, 0.5)]:
        result = run(get("ftl"), ParamChase(high, low), 100, 2, replicas=2, seed=0)
        assert result.regret == pytest.approx([ftl_regret_by_hand(high, low, 100)] * 2)
    assert ftl_regret_by_hand(1.0, 0.0, 100) > 10 >= ftl_regret_by_hand(0.5, 0.5, 100)


def test_adaptive_parameters_are_searched_shrunk_saved_and_replayed(tmp_path):
    found = search(get("ftl"), FTL_CAP, 100, 2, max_examples=60, replicas=8, seed=0,
                   adaptive={NAME: {"high": (0.0, 1.0), "low": (0.0, 1.0)}}, oblivious=False)
    assert found and found.genome is None and found.adversary["name"] == NAME
    params = found.adversary["params"]
    assert ftl_regret_by_hand(params["high"], params["low"], 100) > 10   # really beyond the cap
    assert found.losses.shape == (100, 2)
    # the stored losses are what the violating replica faced: FTL on them, as a fixed sequence, has the
    # same regret (FTL is deterministic), computed here by hand
    cum = np.zeros(2)
    played = 0.0
    for row in found.losses:
        played += row[int(np.argmin(cum))]
        cum += row
    assert played - cum.min() > FTL_CAP.bound_at(100, 2)
    path = found.save(tmp_path / "chase.npz")
    back = Counterexample.load(path)
    assert back.adversary == found.adversary and back.genome is None
    with pytest.raises(ConfigError, match="does not import code named in a file"):
        replay(path, get("ftl"))                                     # module:Class in a file: never imported
    chase = ParamChase(**back.adversary["params"])
    again = replay(path, get("ftl"), adversary=chase)
    assert again.still_violates and again.violations == found.violations
    assert not replay(path, get("hedge"), adversary=chase).still_violates   # Hedge is not fooled by it


def test_compliant_hedge_against_adaptive_adversaries_is_not_broken():
    """Hedge's high-probability bound also holds against adaptive adversaries (the Hoeffding-Azuma step
    only needs l_t fixed before a_t is drawn: Cesa-Bianchi and Lugosi 2006, Section 4.2, from memory).
    A false counterexample has probability <= 0.05 by construction; fixed seed."""
    claim = Claim("regret", "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", delta=0.05, name="hp")
    out = search(get("hedge"), claim, 200, 2, max_examples=25, replicas=64, seed=1, method="cem",
                 adaptive={NAME: {"high": (0.0, 1.0), "low": (0.0, 1.0)}})
    assert not out and out.evaluations == 25


def test_registered_adaptive_counterexample_replays_from_the_file_alone(tmp_path):
    """leader-flip (adversaries issue) against FTL: the file names a registered adversary, so replay
    rebuilds it; FTL pays about 1 per round against it (invented cap T/4)."""
    claim = Claim("regret", "T / 4", delta=0.05, name="FTL regret <= T/4 (invented)")
    found = search(get("ftl"), claim, 200, 3, max_examples=20, replicas=8, seed=0, adaptive=["leader-flip"],
                   oblivious=False)
    assert found and found.adversary["name"] == "leader-flip"
    path = found.save(tmp_path / "flip.npz")
    assert replay(path, get("ftl")).still_violates


def test_realized_losses_replay_the_chunk_exactly():
    """The recorded row equals what a direct adaptive run served that replica (checked via FTL's regret)."""
    losses = realized_losses(get("ftl"), ParamChase(1.0, 0.0), 50, 2, seed=3, replica=300, replicas=400)
    assert losses.shape == (50, 2) and np.all(losses.sum(axis=1)[1:] == 1.0)


def test_spaces_are_inferred_from_defaults_and_checked():
    assert infer_space("p", 0.3).high == 1.0 and infer_space("m", 2.0).low == 0.25
    assert infer_space("k", 3).high == 16 and infer_space("flag", True).choices == (False, True)
    assert infer_space("name", "x") is None
    (fam,) = families([NAME])
    assert {s.name for s in fam.spaces} == {"high", "low"}
    with pytest.raises(ConfigError, match="unknown parameter 'hgh'"):
        families({NAME: {"hgh": (0, 1)}})
    with pytest.raises(ConfigError, match="oblivious adversary"):
        families(["bernoulli"])
    with pytest.raises(ConfigError, match="low <= high"):
        families({NAME: {"high": (1.0, 0.0)}})
    with pytest.raises(ConfigError, match="nothing to search"):
        search(get("ftl"), FTL_CAP, 10, 2, oblivious=False)
