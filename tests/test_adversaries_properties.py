"""Every registered adversary: shapes, dtype and range for any valid parameters,
one-line errors for invalid ones, determinism, block invariance, specs that rebuild.

Hypothesis draws the parameters (derandomized, see conftest.py); each property
is a deterministic check, so these tests have no false-failure probability.
"""

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

import adversaries
from harness import ConfigError, History, Learner, run, runner

ALL = adversaries.names()
ADAPTIVE = [n for n in ALL if adversaries.get(n).adaptive]
OBLIVIOUS = [n for n in ALL if n not in ADAPTIVE]

# -- parameter strategies (valid) -------------------------------------------------------

unit = st.floats(0.0, 1.0)
SIMPLE_SPECS = st.sampled_from([
    "alternating", "bernoulli", {"name": "uniform", "params": {"low": 0.2}},
    {"name": "bernoulli", "params": {"p": 0.3, "shared": True}}, "near-tie", "chase",
    {"name": "multiscale-walk", "params": {"epsilon": 0.2}}, "leader-flip",
])


@st.composite
def bounded_noise(draw):
    width = draw(st.floats(0.0, 0.5))
    return {"width": width, "mean": draw(st.floats(width, 1.0 - width))}


@st.composite
def gap_params(draw):
    gap = draw(st.floats(0.01, 1.0))
    return {"gap": gap, "base": draw(st.floats(gap, 1.0))}


def _shared_ok(specs):
    """A per-replica composite may not hold a random shared part (see compose.py)."""
    return not any(isinstance(s, dict) and s.get("params", {}).get("shared") for s in specs)


PARAMS = {
    "alternating": st.just({}),
    "bernoulli": st.fixed_dictionaries({"p": unit}),
    "uniform": st.tuples(unit, unit).map(lambda lh: {"low": min(lh), "high": max(lh)}),
    "bounded-noise": bounded_noise(),
    "stochastic-gap": gap_params(),
    "regime-shift": st.tuples(gap_params(), st.floats(0.3, 3.0), st.floats(1.0, 30.0)).map(
        lambda x: {**x[0], "alpha": x[1], "scale": x[2]}),
    "near-tie": st.fixed_dictionaries({"leaders": st.integers(2, 3), "margin": st.floats(0.01, 1.0)}),
    "block-random": st.fixed_dictionaries({"budget": st.integers(1, 40), "p": st.floats(0.05, 0.95)}),
    "multiscale-walk": st.fixed_dictionaries({"epsilon": st.none() | unit, "sigma": st.none() | st.floats(0.0, 0.5)}),
    "pareto-oscillations": st.fixed_dictionaries({"alpha": st.floats(0.3, 3.0), "scale": st.floats(1.0, 5.0),
                                                  "cap": st.none() | st.integers(1, 50)}),
    "tie-stretches": st.fixed_dictionaries({"alpha": st.floats(0.3, 3.0), "scale": st.floats(1.0, 20.0),
                                            "spread": st.none() | st.integers(0, 30)}),
    "chase": st.fixed_dictionaries({"high": unit, "low": unit}),
    "leader-flip": st.just({}),
    "tie-keeper": st.fixed_dictionaries({"margin": st.floats(0.1, 3.0)}),
    "budget-drain": st.fixed_dictionaries({"budget": st.integers(1, 20), "reserve": st.integers(0, 3)}),
    "concat": st.lists(SIMPLE_SPECS, min_size=1, max_size=3).filter(_shared_ok).flatmap(
        lambda parts: st.fixed_dictionaries({"parts": st.just(parts), "weights": st.lists(
            st.floats(0.1, 5.0), min_size=len(parts), max_size=len(parts))})),
    "mix": st.lists(SIMPLE_SPECS, min_size=1, max_size=3).filter(_shared_ok).map(lambda p: {"parts": p}),
    "permute": st.fixed_dictionaries({"inner": SIMPLE_SPECS}),
    "rescale": st.tuples(SIMPLE_SPECS, unit, unit).map(  # offset a, end point b: scale = b - a
        lambda x: {"inner": x[0], "offset": x[1], "scale": x[2] - x[1]}),
    "noisy": st.fixed_dictionaries({"inner": SIMPLE_SPECS.filter(lambda s: _shared_ok([s])),
                                    "width": unit, "kind": st.sampled_from(["uniform", "bernoulli"])}),
    "embed": st.fixed_dictionaries({"pattern": SIMPLE_SPECS, "background": SIMPLE_SPECS.filter(
        lambda s: _shared_ok([s])), "at": unit, "length": st.none() | st.integers(1, 40)}),
}


def test_every_registered_adversary_has_a_strategy_and_a_one_line_description():
    assert set(PARAMS) == set(ALL)
    for name, text, params in adversaries.describe():
        assert text and "\n" not in text and name == name.lower() and " " not in name


def _randomized(name, params):
    return getattr(adversaries.get(name, **params), "randomized", True)


class Uniform(Learner):
    """Test subject: a fresh uniform action each round (reveals nothing, follows nothing)."""

    def __init__(self, feedback="full"):
        self.feedback = feedback

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._r, self._rng = n_actions, replicas, rng

    def act(self):
        return self._rng.integers(0, self._n, self._r)

    def update(self, actions, losses):
        pass


@pytest.mark.parametrize("name", ALL)
@settings(max_examples=15)
@given(data=st.data())
def test_losses_have_the_right_shape_dtype_and_range(name, data):
    params = data.draw(PARAMS[name], label="params")
    n = data.draw(st.integers(params.get("leaders", 2), 5), label="n")
    horizon = data.draw(st.integers(1, 60), label="T")
    replicas = data.draw(st.integers(1, 4), label="replicas")
    if "shared" in adversaries.REGISTRY.describe()[ALL.index(name)][2]:
        params["shared"] = data.draw(st.booleans(), label="shared")
    try:
        adv = adversaries.get(name, **params)
    except ConfigError as exc:  # only the documented shared-mixing refusal may reject drawn params
        assert "would differ between replica chunks" in str(exc) or "shared" in str(exc)
        return
    adv.reset(n, horizon, replicas, np.random.default_rng(1))
    if adv.adaptive:
        history = History(replicas, n, adv.memory)
        rng = np.random.default_rng(2)
        for t in range(horizon):
            x = adv.respond(t, history)
            assert x.shape == (replicas, n) and x.dtype == np.float64
            assert np.all((x >= 0) & (x <= 1))
            history.record(rng.integers(0, n, replicas), np.asarray(x))
        return
    cut = sorted(data.draw(st.sets(st.integers(1, max(1, horizon - 1)), max_size=4), label="cuts"))
    edges = [0] + [c for c in cut if c < horizon] + [horizon]
    for t0, t1 in zip(edges[:-1], edges[1:]):
        x = adv.losses(t0, t1)
        want = (t1 - t0, n) if adv.shared else (t1 - t0, replicas, n)
        assert x.shape == want and x.dtype == np.float64
        assert np.all((x >= 0) & (x <= 1))


BAD = [
    ("bernoulli", {"p": 2}, "p"), ("uniform", {"low": 0.8, "high": 0.2}, "high"),
    ("uniform", {"low": -0.1}, "low"), ("bounded-noise", {"width": 0.3, "mean": 0.1}, "mean"),
    ("bounded-noise", {"width": 0.6}, "width"), ("stochastic-gap", {"gap": 0.7, "base": 0.5}, "gap"),
    ("stochastic-gap", {"gap": 0}, "gap"), ("stochastic-gap", {"best": -1}, "best"),
    ("regime-shift", {"alpha": 0}, "alpha"), ("regime-shift", {"scale": 0.5}, "scale"),
    ("near-tie", {"leaders": 1}, "leaders"), ("near-tie", {"margin": 0}, "margin"),
    ("block-random", {"budget": 0}, "budget"), ("block-random", {"p": 1.0}, "p"),
    ("block-random", {"blocks": 2.5}, "blocks"), ("multiscale-walk", {"epsilon": 2}, "epsilon"),
    ("multiscale-walk", {"sigma": -1}, "sigma"), ("pareto-oscillations", {"alpha": -1}, "alpha"),
    ("pareto-oscillations", {"cap": 0}, "cap"), ("tie-stretches", {"spread": -2}, "spread"),
    ("tie-stretches", {"scale": "big"}, "scale"), ("chase", {"high": 3}, "high"),
    ("tie-keeper", {"margin": 0}, "margin"), ("budget-drain", {"budget": 0}, "budget"),
    ("budget-drain", {"reserve": -1}, "reserve"), ("concat", {"parts": []}, "parts"),
    ("concat", {"parts": ["bernoulli"], "weights": [1, 2]}, "weights"),
    ("concat", {"parts": ["bernouli"]}, "parts[0]"), ("concat", {"parts": [{"nam": "x"}]}, "parts[0]"),
    ("concat", {"parts": [{"name": "bernoulli", "params": {"q": 1}}]}, "parts[0]"),
    ("concat", {"parts": ["bernoulli", {"name": "bernoulli", "params": {"shared": True}}]}, "parts[1]"),
    ("mix", {"parts": "bernoulli"}, "parts"), ("mix", {"parts": ["chase"], "weights": [-1]}, "weights[0]"),
    ("permute", {"permutation": [0, 0, 1]}, "permutation"), ("permute", {"inner": 3}, "inner"),
    ("rescale", {"scale": 0.9, "offset": 0.5}, "scale"), ("rescale", {"offset": 1.5}, "offset"),
    ("noisy", {"kind": "gauss"}, "kind"), ("noisy", {"inner": "bernoulli", "shared": True}, "shared"),
    ("noisy", {"inner": {"name": "bernoulli", "params": {"shared": True}}}, "inner"),
    ("embed", {"pattern": [[0.5, 2.0]]}, "pattern"), ("embed", {"pattern": [[0, 1], [1]]}, "pattern"),
    ("embed", {"at": 1.5}, "at"), ("embed", {"pattern": [[0, 1]], "length": 3}, "length"),
]


@pytest.mark.parametrize("name, params, field", BAD)
def test_invalid_parameters_give_one_line_errors_naming_the_field(name, params, field):
    with pytest.raises(ConfigError) as info:
        adversaries.get(name, **params)
    message = str(info.value)
    assert "\n" not in message and message.startswith(f"adversary {name!r}: {field}")


@pytest.mark.parametrize("name, params, n, field", [
    ("stochastic-gap", {"best": 5}, 3, "best"), ("near-tie", {"leaders": 4}, 3, "leaders"),
    ("block-random", {"blocks": 50}, 3, "blocks"), ("bernoulli", {"p": [0.1, 0.2]}, 3, "p"),
    ("permute", {"permutation": [1, 0]}, 3, "permutation"), ("embed", {"pattern": [[0, 1]]}, 3, "pattern"),
])
def test_parameters_that_depend_on_the_run_are_checked_at_reset(name, params, n, field):
    """Checked once n and T are known; the runner passes the ConfigError through unchanged."""
    with pytest.raises(ConfigError) as info:
        run(Uniform(), adversaries.get(name, **params), 20, n, replicas=2)
    assert str(info.value).startswith(field) and "\n" not in str(info.value)


# -- determinism and block invariance ------------------------------------------------------

EXAMPLES = [(n, {}) for n in OBLIVIOUS] + [
    ("regime-shift", {"scale": 2, "alpha": 0.7}), ("tie-stretches", {"scale": 1, "spread": 3}),
    ("pareto-oscillations", {"cap": 4}), ("block-random", {"blocks": 7}),
    ("concat", {"parts": ["tie-stretches", "multiscale-walk", "regime-shift"], "weights": [1, 2, 1]}),
    ("embed", {"pattern": "regime-shift", "background": "multiscale-walk", "length": 37, "at": 0.3}),
    ("mix", {"parts": ["near-tie", "block-random", "alternating"]}),
    ("noisy", {"inner": "tie-stretches"}), ("permute", {"inner": "tie-stretches"}),
]


def _shared_version(name, params):
    """The same example with every randomised part drawing one sequence for all replicas."""
    def share(spec):
        if isinstance(spec, list):
            return [share(x) for x in spec]
        if isinstance(spec, str) and "shared" in adversaries.get(spec).get_params():
            return {"name": spec, "params": {"shared": True}}
        return spec
    if name == "mix" or "shared" not in adversaries.get(name, **params).get_params() and name not in (
            "concat", "embed", "permute", "rescale"):
        return adversaries.get(name, **params)
    shared = {k: share(v) if k in ("parts", "inner", "pattern", "background") else v for k, v in params.items()}
    if "shared" in adversaries.get(name, **params).get_params():
        shared["shared"] = True
    return adversaries.get(name, **shared)


def _sequence(adv, n, horizon, replicas, seed, edges):
    adv.reset(n, horizon, replicas, np.random.default_rng(np.random.SeedSequence(seed)))
    return np.concatenate([adv.losses(a, b) for a, b in zip(edges[:-1], edges[1:])])


@pytest.mark.parametrize("shared", [False, True])
@pytest.mark.parametrize("name, params", EXAMPLES)
def test_block_cut_does_not_change_the_sequence(name, params, shared):
    """Bit-identical under any cut into blocks (one block, single rounds, uneven blocks)."""
    adv = _shared_version(name, params) if shared else adversaries.get(name, **params)
    T, n, R = 300, 4, 3
    whole = _sequence(adv, n, T, R, 5, [0, T])
    single = _sequence(adv, n, T, R, 5, list(range(T + 1)))
    uneven = _sequence(adv, n, T, R, 5, [0, 1, 2, 17, 64, 65, 190, 299, T])
    assert np.array_equal(whole, single) and np.array_equal(whole, uneven)
    again = _sequence(adv, n, T, R, 5, [0, T])
    assert np.array_equal(whole, again)  # same seed, same sequence
    if getattr(adv, "randomized", True):
        assert not np.array_equal(whole, _sequence(adv, n, T, R, 6, [0, T]))


@pytest.mark.parametrize("name, params", [("multiscale-walk", {}), ("tie-stretches", {"scale": 2}),
                                          ("regime-shift", {"scale": 3}), ("near-tie", {}),
                                          ("concat", {"parts": ["block-random", "pareto-oscillations"]})])
@pytest.mark.parametrize("shared", [False, True])
def test_runner_block_size_does_not_change_results(name, params, shared, monkeypatch):
    """The runner's own cut (BLOCK_ENTRIES, as tests/test_runner.py does) leaves results unchanged."""
    from harness.learners import get as get_learner
    adv = _shared_version(name, params) if shared else adversaries.get(name, **params)
    big = run(get_learner("hedge"), adv, 400, 3, replicas=40, seed=3, chunk=16)
    monkeypatch.setattr(runner, "BLOCK_ENTRIES", 7)  # one-round blocks
    small = run(get_learner("hedge"), adv, 400, 3, replicas=40, seed=3, chunk=16)
    assert np.array_equal(big.switches, small.switches)
    np.testing.assert_allclose(big.regret, small.regret, rtol=0, atol=1e-9)


@pytest.mark.parametrize("name", ALL)
def test_specs_are_json_and_rebuild_the_same_adversary(name):
    import json
    adv = adversaries.get(name)
    spec = json.loads(json.dumps(adv.spec()))
    assert spec["name"] == name
    again = adversaries.from_spec(spec)
    assert again.spec() == adv.spec()
    if not adv.adaptive:
        assert np.array_equal(_sequence(adv, 3, 50, 2, 9, [0, 50]), _sequence(again, 3, 50, 2, 9, [0, 50]))


def test_state_does_not_grow_with_the_horizon():
    """Streaming state is O(rows x (n + log T)): the pickled size barely changes from T = 1e3 to 1e6."""
    import pickle
    for name in OBLIVIOUS:
        sizes = []
        for T in (1_000, 1_000_000):
            adv = adversaries.get(name)
            adv.reset(4, T, 8, np.random.default_rng(0))
            adv.losses(0, 10)
            sizes.append(len(pickle.dumps({k: v for k, v in vars(adv).items() if k != "_rng"})))
        assert sizes[1] < sizes[0] + 2_000, name
