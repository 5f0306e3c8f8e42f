"""Claims: what a learner's authors promise, in a form the harness can test.

A :class:`Claim` bounds one metric of a run (``regret``, ``switches`` or
``cost_regret``) in one of three senses:

- ``"high_probability"``: P[metric > bound] <= delta;
- ``"expectation"``: E[metric] <= bound (``delta`` unused);
- ``"always"``: metric <= bound on every replica (a hard cap).

``scope`` says which adversaries the claim is made against: ``"any"``
(default) or ``"oblivious"`` — many low-switching analyses (lazy
perturbations, Shrinking Dartboard) hold only for sequences fixed in
advance, and certification does not judge such a claim on adaptive
adversaries (it lists those cells as not applicable).

``bound`` is a number, a function ``bound(horizon, n_actions, delta)``, or a
small arithmetic expression in ``T``, ``n`` and ``delta`` such as
``"sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)"`` (see :func:`expression`).
"""

from __future__ import annotations

import ast
import math
import operator
from dataclasses import dataclass
from typing import Callable, Union

import numpy as np

from . import validate
from .errors import ConfigError

METRICS = ("regret", "switches", "cost_regret")
KINDS = ("high_probability", "expectation", "always")
SCOPES = ("any", "oblivious")

Bound = Union[float, Callable[[int, int, float], float]]


_FUNCTIONS = {"sqrt": math.sqrt, "ln": math.log, "log": math.log, "log2": math.log2, "log10": math.log10,
              "exp": math.exp, "min": min, "max": max, "ceil": math.ceil, "floor": math.floor, "abs": abs}
_CONSTANTS = {"e": math.e, "pi": math.pi}
_VARIABLES = ("T", "n", "delta")
_BINARY = {ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul, ast.Div: operator.truediv,
           ast.Pow: operator.pow}
_UNARY = {ast.UAdd: operator.pos, ast.USub: operator.neg}
_MAX_LENGTH = 400


class Expression:
    """A bound written as arithmetic in T, n and delta, evaluated without eval/exec.

    The text is parsed once with :mod:`ast`; only numbers, the variables
    ``T``, ``n``, ``delta``, the constants ``e`` and ``pi``, the operators
    ``+ - * / **`` and the functions sqrt, ln (= log), log2, log10, exp, min,
    max, ceil, floor and abs are accepted. Anything else (attribute access,
    subscripts, other names, lambdas, comprehensions) is refused when the
    expression is built, with a one-line error naming the offending piece.
    """

    def __init__(self, text: str, field: str = "bound"):
        if not isinstance(text, str) or not text.strip():
            raise ConfigError(f"{field}: must be a number or an expression in T, n, delta; got {text!r}")
        if len(text) > _MAX_LENGTH:
            raise ConfigError(f"{field}: expression longer than {_MAX_LENGTH} characters")
        self.expression = text.strip()
        self.field = field
        try:
            tree = ast.parse(self.expression, mode="eval")
        except SyntaxError:
            raise ConfigError(f"{field}: {text!r} is not a valid expression; write e.g. "
                              f"'2 * sqrt(T * ln(n))'") from None
        self._check(tree.body)
        self._tree = tree.body

    def _check(self, node):
        if isinstance(node, ast.Constant):
            if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
                raise ConfigError(f"{self.field}: only numbers may appear as constants, got {node.value!r}")
        elif isinstance(node, ast.Name):
            if node.id not in _VARIABLES and node.id not in _CONSTANTS:
                raise ConfigError(f"{self.field}: unknown name {node.id!r}; use T, n, delta, e, pi")
        elif isinstance(node, ast.BinOp) and type(node.op) in _BINARY:
            self._check(node.left)
            self._check(node.right)
        elif isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
            self._check(node.operand)
        elif isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id in _FUNCTIONS:
            if node.keywords or not node.args:
                raise ConfigError(f"{self.field}: call {node.func.id}() with positional arguments only")
            for arg in node.args:
                self._check(arg)
        else:
            piece = ast.unparse(node) if hasattr(ast, "unparse") else type(node).__name__
            raise ConfigError(f"{self.field}: {piece!r} is not allowed; use numbers, T, n, delta, + - * / **, "
                              f"and {', '.join(sorted(_FUNCTIONS))}")

    def __call__(self, horizon, n_actions, delta):
        env = {"T": float(horizon), "n": float(n_actions), "delta": float(delta), **_CONSTANTS}
        return float(self._eval(self._tree, env))

    def _eval(self, node, env):
        if isinstance(node, ast.Constant):
            return node.value
        if isinstance(node, ast.Name):
            return env[node.id]
        if isinstance(node, ast.BinOp):
            left, right = self._eval(node.left, env), self._eval(node.right, env)
            if isinstance(node.op, ast.Pow) and abs(right) > 64:
                raise ValueError("exponent larger than 64")
            return _BINARY[type(node.op)](left, right)
        if isinstance(node, ast.UnaryOp):
            return _UNARY[type(node.op)](self._eval(node.operand, env))
        return _FUNCTIONS[node.func.id](*(self._eval(a, env) for a in node.args))

    def __repr__(self):
        return f"Expression({self.expression!r})"

    def __eq__(self, other):
        return isinstance(other, Expression) and other.expression == self.expression

    def __hash__(self):
        return hash(self.expression)


def expression(text: str, field: str = "bound") -> Expression:
    """Parse a bound expression (see :class:`Expression`)."""
    return Expression(text, field)


@dataclass(frozen=True)
class Claim:
    """One claimed bound. See the module docstring for the three kinds."""

    metric: str
    bound: Bound
    delta: float = 0.05
    kind: str = "high_probability"
    name: str = ""
    source: str = ""  # where the bound is published (author, year, theorem)
    scope: str = "any"  # "any" or "oblivious": the adversaries the claim is made against

    def __post_init__(self):
        validate.choice("claim.metric", self.metric, METRICS)
        validate.choice("claim.kind", self.kind, KINDS)
        validate.choice("claim.scope", self.scope, SCOPES)
        if isinstance(self.bound, str):
            object.__setattr__(self, "bound", Expression(self.bound, "claim.bound"))
        elif not callable(self.bound):
            object.__setattr__(self, "bound", validate.real("claim.bound", self.bound))
        if self.kind == "high_probability":
            validate.real("claim.delta", self.delta, low=0.0, high=1.0, low_open=True, high_open=True)
        if not self.name:
            object.__setattr__(self, "name", f"{self.metric} {self.kind}")

    def bound_at(self, horizon: int, n_actions: int) -> float:
        """The numeric bound for this horizon and number of actions."""
        if not callable(self.bound):
            return float(self.bound)
        try:
            value = float(self.bound(horizon, n_actions, self.delta))
        except Exception as exc:
            raise ConfigError(f"claim {self.name!r}: bound failed at T={horizon}, n={n_actions}: "
                              f"{type(exc).__name__}: {exc}") from None
        if math.isnan(value):
            raise ConfigError(f"claim {self.name!r}: bound is NaN at T={horizon}, n={n_actions}")
        return value

    def applies_to(self, adversary) -> bool:
        """False for an oblivious-only claim facing an adaptive adversary."""
        return self.scope == "any" or not getattr(adversary, "adaptive", False)

    def violations(self, values: np.ndarray, horizon: int, n_actions: int) -> np.ndarray:
        """Boolean per replica: metric > bound (meaningful for the per-replica kinds)."""
        return np.asarray(values) > self.bound_at(horizon, n_actions)

    def spec(self) -> dict:
        bound = self.bound
        if callable(bound):
            bound = getattr(bound, "expression", None) or \
                f"{getattr(bound, '__module__', '?')}:{getattr(bound, '__qualname__', repr(bound))}"
        return {"metric": self.metric, "bound": bound, "delta": self.delta, "kind": self.kind,
                "name": self.name, "source": self.source, "scope": self.scope}


def metric_range(metric: str, horizon: int, switching_cost: float = 0.0) -> tuple[float, float]:
    """The values a metric can take over ``horizon`` rounds, whatever the learner and losses.

    With losses in [0, 1], the learner's total and every action's total lie in
    [0, T], so regret = played - min_i total(i) lies in [-T, T]; switches
    count rounds t >= 1 with a new action, so lie in [0, T - 1]; cost_regret
    adds switching_cost * switches. Expectation claims are judged with these
    known ranges and nothing else (common practice).
    """
    validate.choice("metric", metric, METRICS)
    T = float(horizon)
    if metric == "regret":
        return -T, T
    if metric == "switches":
        return 0.0, max(T - 1.0, 0.0)
    return -T, T + float(switching_cost) * max(T - 1.0, 0.0)
