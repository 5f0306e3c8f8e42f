"""Composites: what each transformation does to the sequence, and specs that nest."""

import json
import math
import tomllib

import numpy as np
import pytest

import adversaries
from harness import ConfigError, run
from harness.cli import main
from harness.learners import get as get_learner


def _seq(adv, T=40, n=2, R=3, seed=0):
    adv.reset(n, T, R, np.random.default_rng(np.random.SeedSequence(seed)))
    return adv.losses(0, T)


def test_concat_plays_parts_in_their_own_time():
    """alternating for 30 rounds, then alternating again from its round 0 with actions swapped."""
    adv = adversaries.get("concat", parts=["alternating", {"name": "permute", "params": {
        "inner": "alternating", "permutation": [1, 0]}}], weights=[3, 1])
    x = _seq(adversaries.get("alternating"), 40)
    got = _seq(adv, 40)
    assert adv.shared and np.array_equal(got[:30], x[:30]) and np.array_equal(got[30:], x[:10, ::-1])


def test_mix_assigns_replicas_in_the_stated_proportions():
    """Replicas facing all-zero losses have regret 0; the others (alternating) do not. With weights 1:3
    the count of zero-regret replicas among 2000 is Binomial(2000, 1/4): within 5 SD (19.4) of 500
    (false-failure probability < 1e-6, normal approximation; seed fixed)."""
    zero = {"name": "rescale", "params": {"inner": "alternating", "scale": 0.0, "offset": 0.0}}
    res = run(get_learner("ftl"), adversaries.get("mix", parts=[zero, "alternating"], weights=[1, 3]),
              20, 2, replicas=2000, seed=4)
    count = int(np.sum(res.regret == 0))
    assert abs(count - 500) < 5 * math.sqrt(2000 * 0.25 * 0.75)


def test_permute_relabels_actions():
    x = _seq(adversaries.get("alternating"), 40, n=3)
    got = _seq(adversaries.get("permute", inner="alternating", permutation=[2, 0, 1]), 40, n=3)
    assert np.array_equal(got, x[:, [2, 0, 1]])
    rand = adversaries.get("permute", inner="bernoulli")  # per-replica random permutations
    y = _seq(rand, 40, n=3, R=50)
    assert y.shape == (40, 50, 3)


def test_relabelled_alternating_still_beats_ftl():
    """The 1/2 at round 0 keeps cumulative losses from ever tying, so FTL's linear regret does not hinge
    on its tie rule. By hand at T = 100: plain, FTL loses 1/2 + 99 and the best action 49.5 (regret 50);
    swapped, FTL loses 0 + 99 and the best action 49.5 (regret 49.5)."""
    plain = run(get_learner("ftl"), adversaries.get("alternating"), 100, 2, replicas=3)
    swapped = run(get_learner("ftl"), adversaries.get("permute", inner="alternating", permutation=[1, 0]),
                  100, 2, replicas=3)
    assert np.all(plain.regret == 50) and np.all(swapped.regret == 49.5)


def test_rescale_scales_regret_exactly():
    """offset + scale * l with scale > 0 keeps FTL's choices; regret is multiplied by scale exactly."""
    base = run(get_learner("ftl"), adversaries.get("alternating"), 101, 3, replicas=2)
    half = run(get_learner("ftl"), adversaries.get("rescale", inner="alternating", scale=0.5, offset=0.25),
               101, 3, replicas=2)
    np.testing.assert_allclose(half.regret, 0.5 * base.regret)


@pytest.mark.parametrize("kind", ["uniform", "bernoulli"])
def test_noise_keeps_the_mean(kind):
    """Inner losses are 0.3 everywhere (rescaled zeros); the noisy mean over 40 x 500 x 2 entries is
    0.3 within 5 standard errors (sd <= 0.5 per entry; false-failure probability < 1e-6)."""
    inner = {"name": "rescale", "params": {"inner": "alternating", "scale": 0.0, "offset": 0.3}}
    x = _seq(adversaries.get("noisy", inner=inner, width=0.3, kind=kind), 40, n=2, R=500)
    assert abs(x.mean() - 0.3) < 5 * 0.5 / math.sqrt(x.size)
    assert not np.all(x == x[0])


def test_embed_writes_the_table_into_the_window_and_leaves_the_background():
    table = [[1.0, 0.0], [0.0, 1.0], [0.5, 0.5]]
    a = _seq(adversaries.get("embed", pattern=table, background="bernoulli", at=0.5), 40, R=2)
    b = _seq(adversaries.get("embed", pattern=[[0.2, 0.2]] * 3, background="bernoulli", at=0.5), 40, R=2)
    assert np.array_equal(a[20:23], np.broadcast_to(np.array(table)[:, None, :], (3, 2, 2)))
    assert np.array_equal(a[:20], b[:20]) and np.array_equal(a[23:], b[23:])
    late = _seq(adversaries.get("embed", pattern=table, background="alternating", at=1.0), 40)
    assert np.array_equal(late[-3:], np.array(table))  # moved left so it fits


def test_embed_pattern_adversary_is_reset_with_its_own_length():
    adv = adversaries.get("embed", pattern="leader-flip", background="bernoulli", length=7, at=0.0)
    assert adv.adaptive
    res = run(get_learner("ftl"), adv, 50, 3, replicas=5)
    assert res.regret.shape == (5,)


def test_nested_specs_serialise_and_rebuild():
    adv = adversaries.get("concat", parts=[
        {"name": "mix", "params": {"parts": ["bernoulli", "regime-shift"], "weights": [1, 2]}},
        {"name": "embed", "params": {"pattern": [[0, 1], [1, 0]], "background": "multiscale-walk"}},
        {"name": "noisy", "params": {"inner": {"name": "permute", "params": {"inner": "tie-stretches"}}}},
    ])
    spec = json.loads(json.dumps(adv.spec()))
    assert spec["params"]["parts"][0]["params"]["parts"][1]["name"] == "regime-shift"
    again = adversaries.from_spec(spec)
    assert again.spec() == adv.spec()
    assert np.array_equal(_seq(adv, 60, R=4), _seq(again, 60, R=4))


CAMPAIGN = """
[[adversaries]]
name = "concat"
params.weights = [1, 3]
params.parts = [
  "alternating",
  { name = "noisy", params = { inner = { name = "near-tie", params = { margin = 0.5 } }, width = 0.05 } },
]
"""


def test_composites_read_from_a_campaign_style_toml_table():
    """How a campaign file names a composite: inner adversaries are registry specs, nested freely."""
    spec = tomllib.loads(CAMPAIGN)["adversaries"][0]
    adv = adversaries.from_spec(spec)
    assert adv.parts[1].inner.margin == 0.5
    assert run(get_learner("hedge"), adv, 200, 3, replicas=8).regret.shape == (8,)


def test_random_shared_part_in_a_per_replica_composite_is_refused():
    with pytest.raises(ConfigError, match="would differ between replica chunks"):
        adversaries.get("mix", parts=[{"name": "bernoulli", "params": {"shared": True}}])
    # deterministic shared parts are fine, and an all-shared concat is itself shared
    assert adversaries.get("concat", parts=["alternating", {"name": "bernoulli", "params": {"shared": True}}]).shared


def test_cli_runs_a_composite_and_lists_every_adversary(capsys):
    code = main(["run", "--learner", "ftl", "--adversary", "concat", "--adversary-param",
                 'parts=["alternating", {"name": "chase"}]', "--horizon", "50", "--actions", "3",
                 "--replicas", "4"])
    out, err = capsys.readouterr()
    assert code == 0 and "concat" in out and err == ""
    code = main(["run", "--learner", "ftl", "--adversary", "concat", "--adversary-param", "parts=[3]",
                 "--horizon", "50", "--actions", "3", "--replicas", "4"])
    out, err = capsys.readouterr()
    assert code == 2 and err.count("\n") == 1 and "parts[0]" in err
    assert main(["list", "adversaries"]) == 0
    out = capsys.readouterr().out
    assert all(f"  {name} " in out for name in adversaries.names())
