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
