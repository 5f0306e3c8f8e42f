"""Campaign files: a valid one loads as documented; every malformed one gives its one-line error."""

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))

from harness.config import Campaign, demo_path, load_campaign, parse_campaign  # noqa: E402
from harness.errors import ConfigError  # noqa: E402

GOOD = """
[campaign]
name = "test-fleet"
seed = 3
confidence = 0.9
max_replicas = 500
n_jobs = 1

[learner]
name = "hedge"
params = { eta = 0.05 }

[[claims]]
name = "regret-hp"
metric = "regret"
bound = "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)"
delta = 0.05
kind = "high_probability"
source = "Cesa-Bianchi and Lugosi 2006, Corollary 4.2"

[[claims]]
name = "few-switches"
metric = "switches"
bound = 400
kind = "always"

[[adversaries]]
name = "bernoulli"
params = { p = 0.5, shared = false }

[[adversaries]]
name = "alternating"
label = "flapping"

[grid]
horizons = [100, 200]
n_actions = [2, 3]
switching_cost = 0.5

[search]
max_examples = 20
"""


def _write(tmp_path, text, name="camp.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_a_valid_campaign_loads(tmp_path):
    c = load_campaign(_write(tmp_path, GOOD))
    assert isinstance(c, Campaign)
    assert (c.name, c.seed, c.confidence, c.max_replicas, c.n_jobs) == ("test-fleet", 3, 0.9, 500, 1)
    assert c.learner_spec == {"name": "hedge", "params": {"eta": 0.05}}
    assert [cl.name for cl in c.claims] == ["regret-hp", "few-switches"]
    assert c.claims[0].bound_at(100, 2) == pytest.approx((100 * 0.6931471805599453 / 2) ** 0.5
                                                         + (100 * 2.995732273553991 / 2) ** 0.5)
    assert c.claims[1].kind == "always" and c.claims[1].bound_at(100, 2) == 400.0
    assert [s["label"] for s in c.adversary_specs] == ["bernoulli(p=0.5, shared=False)", "flapping"]
    assert (c.horizons, c.n_actions, c.switching_cost) == ((100, 200), (2, 3), 0.5)
    assert c.search == {"max_examples": 20, "replicas": 256, "method": "hypothesis"}
    assert c.build_learner().eta == 0.05
    assert [a.spec()["name"] for a in c.build_adversaries()] == ["bernoulli", "alternating"]
    assert len(c.digest) == 64 and c.path == str(tmp_path / "camp.toml")


def test_defaults_fill_a_minimal_campaign(tmp_path):
    c = load_campaign(_write(tmp_path, """
[learner]
name = "ftl"
[[adversaries]]
name = "alternating"
[grid]
horizons = 50
n_actions = 2
""", name="minimal.toml"))
    assert (c.name, c.seed, c.confidence, c.max_replicas, c.n_jobs) == ("minimal", 0, 0.95, 20000, 1)
    assert c.claims == () and c.horizons == (50,) and c.switching_cost == 0.0


def test_digest_ignores_layout_and_n_jobs_but_not_content(tmp_path):
    base = load_campaign(_write(tmp_path, GOOD)).digest
    reordered = GOOD.replace("n_jobs = 1", "n_jobs = 2  # more cores").replace(
        'name = "test-fleet"\nseed = 3', 'seed = 3\nname = "test-fleet"')
    assert load_campaign(_write(tmp_path, reordered, "b.toml")).digest == base
    assert load_campaign(_write(tmp_path, GOOD.replace("seed = 3", "seed = 4"), "c.toml")).digest != base
    assert load_campaign(_write(tmp_path, GOOD.replace("bound = 400", "bound = 401"), "d.toml")).digest != base


def test_parse_campaign_takes_a_dict():
    c = parse_campaign({"learner": {"name": "hedge"}, "adversaries": [{"name": "bernoulli"}],
                        "grid": {"horizons": [10], "n_actions": [2]}}, source="inline")
    assert c.path == "inline" and c.name == "campaign"
    with pytest.raises(ConfigError, match="^inline: grid: missing"):
        parse_campaign({"learner": {"name": "hedge"}, "adversaries": [{"name": "bernoulli"}]}, source="inline")


def test_learner_claims_join_when_asked(tmp_path):
    text = GOOD.replace('name = "hedge"\nparams = { eta = 0.05 }',
                        'name = "certify_subjects:RareCapBreaker"\nparams = { budget = 7 }')
    c = load_campaign(_write(tmp_path, text.replace("n_jobs = 1", "n_jobs = 1\nuse_learner_claims = true")))
    assert [cl.name for cl in c.claims] == ["regret-hp", "few-switches", "switch-budget"]
    assert c.claims[-1].bound_at(100, 2) == 7.0
    assert [cl.name for cl in load_campaign(_write(tmp_path, text, "b.toml")).claims] == ["regret-hp",
                                                                                          "few-switches"]


def test_module_class_next_to_the_campaign_file(tmp_path, monkeypatch):
    monkeypatch.setattr(sys, "path", list(sys.path))
    (tmp_path / "my_router_policy.py").write_text(
        "from harness.learners.experts import Hedge\n\nclass Router(Hedge):\n    pass\n")
    text = GOOD.replace('name = "hedge"\nparams = { eta = 0.05 }', 'name = "my_router_policy:Router"')
    assert type(load_campaign(_write(tmp_path, text)).build_learner()).__name__ == "Router"


def test_the_demo_campaign_loads():
    c = load_campaign(demo_path())
    assert c.name == "edge-router" and len(c.claims) == 4 and len(c.adversary_specs) == 3
    assert all(cl.source for cl in c.claims)


def _replace(old, new):
    def edit(text):
        assert old in text, old
        return text.replace(old, new, 1)
    return edit


def _drop(section_header, next_header):
    def edit(text):
        start = text.index(section_header)
        end = text.index(next_header, start + 1)
        return text[:start] + text[end:]
    return edit


BAD = [
    (_replace("[campaign]", "[campaign"), "not valid TOML"),
    (_replace("[grid]", "[grids]"), "grids: unknown key in the file; did you mean 'grid'?"),
    (_replace("confidence = 0.9", "confidnce = 0.9"), "campaign.confidnce: unknown key in campaign; did you mean "
                                                      "'confidence'?"),
    (_replace("confidence = 0.9", "confidence = 1.5"), "campaign.confidence: must lie in (0, 1)"),
    (_replace("seed = 3", "seed = -1"), "campaign.seed: must be an integer >= 0"),
    (_replace("seed = 3", 'seed = "three"'), "campaign.seed: must be an integer"),
    (_replace("max_replicas = 500", "max_replicas = 0"), "campaign.max_replicas: must be an integer >= 1"),
    (_replace("n_jobs = 1", "n_jobs = 0"), "campaign.n_jobs: must be a non-zero integer"),
    (_replace("name = \"test-fleet\"", "name = 5"), "campaign.name: must be a non-empty string"),
    (_drop("[learner]", "[[claims]]"), "learner: missing; add [learner] with name = \"hedge\""),
    (_replace('name = "hedge"', 'name = "hedgehog"'), "learner.name: learner: unknown name 'hedgehog'; did you "
                                                      "mean 'hedge'?"),
    (_replace("eta = 0.05", "eta = -1"), "learner.params: learner 'hedge': eta: must lie in (0, inf]"),
    (_replace("eta = 0.05", "etta = 0.05"), "learner.params: learner 'hedge': unknown parameter 'etta'"),
    (_replace('params = { eta = 0.05 }', 'params = 0.05'), "learner.params: must be a table"),
    (_replace('name = "hedge"', 'name = "no_such_module:Thing"'), "learner.name: learner 'no_such_module:Thing': "
                                                                  "cannot import module"),
    (_replace('metric = "regret"', 'metric = "loss"'), "claims[0].metric: must be one of regret, switches, "
                                                       "cost_regret"),
    (_replace('bound = "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)"', ""),
     "claims[0].bound: missing; add bound = \"sqrt(T * ln(n) / 2)\" or a number"),
    (_replace("sqrt(T * ln(n) / 2) + sqrt", "sqrt(T * x) + sqrt"), "claims[0].bound: unknown name 'x'"),
    (_replace("sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", "T +"), "claims[0].bound: 'T +' is not a "
                                                                           "valid expression"),
    (_replace("sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", "ln(n - 2)"),
     "claims[0].bound: cannot be evaluated at T=100, n=2: ValueError: math domain error"),
    (_replace("sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", "exp(700) * exp(700)"),
     "claims[0].bound: is inf at T=100, n=2; give a finite bound"),
    (_replace("bound = 400", "bound = true"), "claims[1].bound: must be a number or an expression"),
    (_replace("bound = 400", 'bound = [1, 2]'), "claims[1].bound: must be a number or an expression"),
    (_replace("delta = 0.05", "delta = 0"), "claims[0].delta: must lie in (0, 1)"),
    (_replace('kind = "always"', 'kind = "usually"'), "claims[1].kind: must be one of high_probability, "
                                                      "expectation, always"),
    (_replace('name = "few-switches"', 'name = "regret-hp"'), "claims[1].name: 'regret-hp' is used twice"),
    (_replace('kind = "always"', 'kind = "always"\nbuond = 3'), "claims[1].buond: unknown key in claims[1]; did "
                                                                "you mean 'bound'?"),
    (lambda text: text.replace("[[claims]]", "[claims.first]", 1).replace("[[claims]]", "[claims.second]"),
     "claims: must be an array of tables; write each as [[claims]]"),
    (_drop("[[adversaries]]\nname = \"bernoulli\"", "[grid]"), "adversaries: missing; add [[adversaries]]"),
    (_replace('name = "bernoulli"', 'name = "bernouli"'), "adversaries[0].name: adversary: unknown name "
                                                          "'bernouli'; did you mean 'bernoulli'?"),
    (_replace("p = 0.5, shared", "p = 1.5, shared"), "adversaries[0].params: adversary 'bernoulli': p: every "
                                                      "entry must lie in [0, 1]"),
    (_replace("p = 0.5, shared", "p = [0.1, 0.2], shared"), "adversaries[0].params: p: has 2 entries but the run "
                                                            "has 3 actions; give one value per action or a single "
                                                            "number (with n_actions = 3)"),
    (_replace('label = "flapping"', 'label = "bernoulli(p=0.5, shared=False)"'), "adversaries[1].label: "
                                                                                  "'bernoulli(p=0.5, shared=False)' "
                                                                                  "is used twice"),
    (_replace("horizons = [100, 200]", ""), "grid.horizons: missing; add horizons = [1000, 10000]"),
    (_replace("horizons = [100, 200]", "horizons = []"), "grid.horizons: must be an integer or a non-empty list"),
    (_replace("horizons = [100, 200]", "horizons = [100, 100]"), "grid.horizons: 100 appears twice"),
    (_replace("n_actions = [2, 3]", "n_actions = [1]"), "grid.n_actions[0]: must be an integer >= 2, got 1"),
    (_replace("switching_cost = 0.5", "switching_cost = -1"), "grid.switching_cost: must lie in [0, inf]"),
    (_replace("max_examples = 20", 'method = "random"'), "search.method: must be one of hypothesis, cem"),
    (_replace("max_examples = 20", "max_example = 20"), "search.max_example: unknown key in search; did you mean "
                                                         "'max_examples'?"),
    (lambda text: text.replace("n_jobs = 1", "n_jobs = 1\nuse_learner_claims = true").replace(
        'name = "hedge"\nparams = { eta = 0.05 }', 'name = "certify_subjects:CoinSwitch"'),
     "campaign.use_learner_claims: learner CoinSwitch carries no claims"),
]


@pytest.mark.parametrize("edit, message", BAD, ids=[m[:40] for _, m in BAD])
def test_malformed_campaigns_give_one_line_errors(tmp_path, edit, message):
    path = _write(tmp_path, edit(GOOD))
    with pytest.raises(ConfigError) as err:
        load_campaign(path)
    text = str(err.value)
    assert text.startswith(f"{path}: "), text
    assert message in text, text
    assert "\n" not in text


def test_file_level_errors(tmp_path):
    with pytest.raises(ConfigError, match="no such campaign file"):
        load_campaign(tmp_path / "missing.toml")
    with pytest.raises(ConfigError, match="is a directory"):
        load_campaign(tmp_path)
    bad = tmp_path / "latin.toml"
    bad.write_bytes("name = 'caf\xe9'".encode("latin-1"))
    with pytest.raises(ConfigError, match="not UTF-8"):
        load_campaign(bad)


@pytest.mark.parametrize("payload", [
    "__import__('os').system('touch {flag}')",
    "open('{flag}', 'w')",
    "[c for c in ().__class__.__base__.__subclasses__()]",
    "(lambda: open('{flag}', 'w'))()",
    "T.__class__",
])
def test_bound_expressions_cannot_execute_code(tmp_path, payload):
    flag = tmp_path / "executed"
    text = GOOD.replace("sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", payload.format(flag=flag))
    with pytest.raises(ConfigError, match=r"claims\[0\]\.bound: .*(not allowed|unknown name)"):
        load_campaign(_write(tmp_path, text))
    assert not flag.exists()


def test_composite_adversaries_load_and_certify(tmp_path):
    """Campaign files name composites the way the adversaries package documents (nested specs)."""
    from harness.certify import certify_campaign

    text = GOOD.replace('[[adversaries]]\nname = "alternating"\nlabel = "flapping"',
                        '[[adversaries]]\nname = "concat"\nlabel = "mixed"\nparams.parts = ["alternating", '
                        '{ name = "bernoulli", params = { p = 0.3 } }]')
    c = load_campaign(_write(tmp_path, text.replace("max_replicas = 500", "max_replicas = 256")))
    assert c.adversary_specs[1]["label"] == "mixed"
    cert = certify_campaign(c)
    assert len(cert.cells) == 16 and {cell.adversary_label for cell in cert.cells} == {
        "bernoulli(p=0.5, shared=False)", "mixed"}


def test_hedges_own_claims_join_a_campaign(tmp_path):
    text = GOOD.replace("n_jobs = 1", "n_jobs = 1\nuse_learner_claims = true").replace(
        'params = { eta = 0.05 }', "")
    names = [c.name for c in load_campaign(_write(tmp_path, text)).claims]
    assert names[:2] == ["regret-hp", "few-switches"] and len(names) == 4
    assert any("expected regret" in n for n in names[2:])
