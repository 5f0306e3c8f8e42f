"""Claims and their bound expressions."""

import math

import pytest

from harness.claims import Claim, expression
from harness.errors import ConfigError


def test_expression_values_match_python_math():
    e = expression("sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)")
    T, n, d = 10_000, 10, 0.05
    assert e(T, n, d) == pytest.approx(math.sqrt(T * math.log(n) / 2) + math.sqrt(T * math.log(1 / d) / 2))
    assert expression("2 ** 3 - -1 + max(T, n) / min(1, e) * pi")(4, 2, 0.1) == pytest.approx(9 + 4 / 1 * math.pi)
    assert expression("ceil(T / 3) + floor(log2(n)) + log10(100) + exp(0) + abs(-2)")(10, 8, 0.1) == 4 + 3 + 2 + 1 + 2


@pytest.mark.parametrize("text, piece", [
    ("__import__('os').system('true')", "not allowed"),
    ("T.__class__", "not allowed"),
    ("[x for x in ()]", "not allowed"),
    ("lambda: 1", "not allowed"),
    ("open('x')", "not allowed"),
    ("eta * T", "unknown name 'eta'"),
    ("'a' * 3", "only numbers"),
    ("sqrt(x=T)", "positional"),
    ("T +", "not a valid expression"),
    ("", "must be a number"),
    ("T" + " + T" * 200, "longer than"),
])
def test_expressions_cannot_execute_code(text, piece):
    with pytest.raises(ConfigError, match=piece):
        expression(text)


def test_huge_powers_are_refused_at_evaluation():
    with pytest.raises(ConfigError, match="bound failed"):
        Claim(metric="regret", bound="T ** 100").bound_at(10, 2)


def test_claim_validates_its_fields():
    with pytest.raises(ConfigError, match="claim.metric"):
        Claim(metric="loss", bound=1.0)
    with pytest.raises(ConfigError, match="claim.kind"):
        Claim(metric="regret", bound=1.0, kind="usually")
    with pytest.raises(ConfigError, match="claim.delta"):
        Claim(metric="regret", bound=1.0, delta=1.5)
    c = Claim(metric="switches", bound="2 * ln(T)", kind="always")
    assert c.name == "switches always" and c.spec()["bound"] == "2 * ln(T)"
    assert c.violations([1, 5, 9], horizon=math.e ** 2, n_actions=2).tolist() == [False, True, True]


def test_oblivious_only_claims_are_not_judged_on_adaptive_adversaries(tmp_path):
    """A claim with scope="oblivious" (lazy perturbation analyses hold for sequences fixed in
    advance) is listed as not judged on an adaptive adversary, never failed on it."""
    import adversaries
    from harness.certify import Certificate, certify
    from harness.learners import get as get_learner

    claim = Claim(metric="switches", bound=0.0, kind="always", name="never switches", scope="oblivious")
    everywhere = Claim(metric="switches", bound=0.0, kind="always", name="never switches (any)")
    cert = certify(get_learner("ftl"), [claim, everywhere], [adversaries.get("alternating"), adversaries.get("chase")],
                   horizons=20, n_actions=2, max_replicas=256, seed=1)
    judged = {(c.adversary_label, c.claim_name): c.verdict for c in cert.cells}
    assert judged == {("alternating()", "never switches"): "fail", ("alternating()", "never switches (any)"): "fail",
                      ("chase(high=1.0, low=0.0)", "never switches (any)"): "fail"}
    assert [r["claim_name"] for r in cert.not_applicable] == ["never switches"]
    assert "not judged: claim 'never switches' on chase(high=1.0, low=0.0)" in cert.table()
    assert "## Not judged" in cert.markdown()
    assert Certificate.load(cert.save(tmp_path / "c.json")).not_applicable == cert.not_applicable
    with pytest.raises(ConfigError, match="none applies"):
        certify(get_learner("ftl"), [claim], [adversaries.get("chase")], horizons=20, n_actions=2)
    with pytest.raises(ConfigError, match="claim.scope"):
        Claim(metric="regret", bound=1.0, scope="sometimes")
