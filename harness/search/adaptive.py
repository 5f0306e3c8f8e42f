"""Adaptive adversaries as search candidates: the adversary and its parameters are the genome.

An :class:`AdaptiveCandidate` names an adaptive adversary (registry name or
``module:Class``) and its parameters. A *space* says where each parameter
may move: ``(low, high)`` for a real range, two integers for an integer
range, a list for a choice. The parameter's default in the adversary's
constructor is its plain value (shrinking moves toward it). Spaces for
registered adversaries can be given explicitly; otherwise they are inferred
from the defaults (common practice, and stated here so it can be
overridden): a real default in [0, 1] moves in [0, 1]; another positive real
d in [d/8, 8d]; an integer d >= 0 in [0, 4d + 4]; a bool in {False, True}.
Parameters without a default, or of other types, stay fixed at the default.
The registered adaptive adversaries whose defaults would mislead that rule
have their spaces here (:data:`KNOWN_SPACES`). ``adaptive=True`` searches
every registered adaptive adversary.

Against an adaptive adversary every replica faces its own sequence, so a
counterexample is the adversary itself; its file also stores the losses
the first violating replica faced (recorded by replaying that replica's
chunk through :func:`harness.runner.play_chunk`), as an illustration.
"""

from __future__ import annotations

import hashlib
import json
import math
import numbers
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from ..protocol import Adversary
from ..registry import parameters_of


@dataclass(frozen=True)
class Space:
    """Where one parameter may move, and its plain value."""

    name: str
    kind: str            # "real", "int" or "choice"
    low: float = 0.0
    high: float = 1.0
    choices: tuple = ()
    plain: object = None

    def from_unit(self, u: float):
        u = min(1.0, max(0.0, float(u)))
        if self.kind == "choice":
            return self.choices[min(len(self.choices) - 1, int(u * len(self.choices)))]
        value = self.low + u * (self.high - self.low)
        return int(round(value)) if self.kind == "int" else float(value)


def _space_from(name: str, spec, default) -> Space:
    if isinstance(spec, list):
        if not spec:
            raise ConfigError(f"adaptive space {name}: a choice list must not be empty")
        plain = default if default in spec else spec[0]
        return Space(name, "choice", choices=tuple(spec), plain=plain)
    if isinstance(spec, tuple) and len(spec) == 2 and all(isinstance(v, numbers.Real) and not isinstance(v, bool)
                                                          for v in spec):
        low, high = spec
        if not (math.isfinite(low) and math.isfinite(high) and low <= high):
            raise ConfigError(f"adaptive space {name}: needs finite low <= high, got {spec!r}")
        kind = "int" if all(isinstance(v, numbers.Integral) for v in spec) else "real"
        plain = default if isinstance(default, numbers.Real) and low <= default <= high else low
        return Space(name, kind, float(low), float(high), plain=int(plain) if kind == "int" else float(plain))
    raise ConfigError(f"adaptive space {name}: give (low, high) or a list of choices, got {spec!r}")


def infer_space(name: str, default) -> Space | None:
    """The default space of a parameter from its default value (see the module docstring)."""
    if isinstance(default, bool):
        return Space(name, "choice", choices=(False, True), plain=default)
    if isinstance(default, numbers.Integral) and default >= 0:
        return Space(name, "int", 0.0, float(4 * default + 4), plain=int(default))
    if isinstance(default, numbers.Real) and math.isfinite(default):
        if 0.0 <= default <= 1.0:
            return Space(name, "real", 0.0, 1.0, plain=float(default))
        if default > 0:
            return Space(name, "real", default / 8, default * 8, plain=float(default))
    return None


#: Spaces for registered adaptive adversaries (adversaries/adaptive.py): the margin of tie-keeper is a
#: loss scale, not a probability; budget-drain needs a budget >= 1.
KNOWN_SPACES = {
    "chase": {"high": (0.0, 1.0), "low": (0.0, 1.0)},
    "tie-keeper": {"margin": (0.125, 8.0)},
    "budget-drain": {"budget": (1, 64), "reserve": (0, 8)},
}


class InvalidCandidate(Exception):
    """A candidate whose adversary refuses its parameters (skipped by the search)."""


@dataclass(frozen=True)
class AdaptiveFamily:
    """An adaptive adversary and the spaces of its searched parameters."""

    name: str
    spaces: tuple
    fixed: tuple = ()    # (param, value) pairs kept at their defaults


def families(adaptive) -> tuple[AdaptiveFamily, ...]:
    """Normalise the ``adaptive`` argument of search(): names, or {name: {param: space}}."""
    import adversaries

    if adaptive is None or adaptive is False:
        return ()
    if adaptive is True:
        adaptive = [n for n in adversaries.names() if getattr(adversaries.REGISTRY.cls(n), "adaptive", False)]
        if not adaptive:
            raise ConfigError("adaptive: no adaptive adversary is registered; name one as module:Class")
    if isinstance(adaptive, str):
        adaptive = [adaptive]
    if isinstance(adaptive, (list, tuple)):
        adaptive = {name: None for name in adaptive}
    if not isinstance(adaptive, dict) or not adaptive:
        raise ConfigError(f"adaptive: give adaptive adversary names or {{name: {{param: space}}}}, got {adaptive!r}")
    out = []
    for name, given in adaptive.items():
        cls = adversaries.REGISTRY.cls(name)
        if not getattr(cls, "adaptive", False):
            raise ConfigError(f"adaptive: {name!r} is an oblivious adversary; the genome search covers those")
        defaults = parameters_of(cls)
        given = dict(KNOWN_SPACES.get(name, {}) if given is None else given)
        unknown = sorted(set(given) - set(defaults))
        if unknown:
            raise ConfigError(f"adaptive {name!r}: unknown parameter {unknown[0]!r}; its parameters are: "
                              f"{', '.join(defaults) or 'none'}")
        spaces, fixed = [], []
        for param, default in defaults.items():
            if param in given:
                spaces.append(_space_from(f"{name}.{param}", given[param], default))
                object.__setattr__(spaces[-1], "name", param)
            else:
                space = infer_space(param, default)
                if space is None:
                    fixed.append((param, default))
                else:
                    spaces.append(space)
        out.append(AdaptiveFamily(name, tuple(spaces), tuple(f for f in fixed if f[1] is not None)))
    return tuple(out)


@dataclass(frozen=True)
class AdaptiveCandidate:
    """One adaptive adversary with parameters: a search candidate."""

    name: str
    params: tuple        # sorted (param, value) pairs

    def build(self) -> Adversary:
        import adversaries

        try:
            return adversaries.get(self.name, **dict(self.params))
        except ConfigError as exc:
            raise InvalidCandidate(str(exc)) from None

    def as_dict(self) -> dict:
        return {"name": self.name, "params": dict(self.params)}

    def key(self) -> str:
        text = json.dumps(self.as_dict(), sort_keys=True, separators=(",", ":"), default=str)
        return hashlib.sha256(("adaptive:" + text).encode()).hexdigest()

    def size(self) -> tuple:
        return (1, 0, 0, 0)

    def __str__(self):
        args = ", ".join(f"{k}={v:.3g}" if isinstance(v, float) else f"{k}={v}" for k, v in self.params)
        return f"adaptive adversary {self.name}({args})"


def candidate(family: AdaptiveFamily, values: dict) -> AdaptiveCandidate:
    params = dict(family.fixed)
    params.update(values)
    return AdaptiveCandidate(family.name, tuple(sorted(params.items())))


def strategy(family: AdaptiveFamily):
    """Hypothesis strategy over one family; each parameter shrinks to its plain value."""
    from hypothesis import strategies as st

    parts = {}
    for s in family.spaces:
        if s.kind == "choice":
            body = st.sampled_from(s.choices)
        elif s.kind == "int":
            body = st.integers(int(s.low), int(s.high))
        else:
            body = st.floats(s.low, s.high, allow_nan=False, allow_infinity=False)
        parts[s.name] = st.one_of(st.just(s.plain), body)
    return st.fixed_dictionaries(parts).map(lambda values: candidate(family, values))


# -- recording what a violating replica faced -----------------------------------------


class _Recorder(Adversary):
    """Wraps an adaptive adversary and hands the rows one replica was served to ``sink``.

    Consumes no randomness of its own, so the play is the inner adversary's.
    ``sink`` is a plain function: the runner deep-copies adversaries, and a
    function survives the copy as itself.
    """

    adaptive = True
    shared = False

    def __init__(self, inner, replica, sink):
        self.inner, self.replica, self.sink = inner, replica, sink
        self.memory = getattr(inner, "memory", 1)

    def reset(self, n_actions, horizon, replicas, rng):
        self._rows = []
        self.sink(self._rows)
        self.inner.reset(n_actions, horizon, replicas, rng)

    def respond(self, t, history):
        out = self.inner.respond(t, history)
        self._rows.append(np.array(out[self.replica], dtype=np.float64))
        return out

    def spec(self):
        return self.inner.spec()


def realized_losses(learner, adversary, horizon, n_actions, seed, replica, replicas, chunk=256) -> np.ndarray:
    """The (horizon, n) losses replica ``replica`` of run(..., seed, replicas) faced.

    Replays that replica's chunk alone with :func:`harness.runner.play_chunk`,
    which gives the chunk exactly the play it had inside the full run.
    """
    from ..runner import play_chunk

    index, local = divmod(replica, chunk)
    size = min(chunk, replicas - index * chunk)
    holder = {}

    def sink(rows):
        holder["rows"] = rows

    play_chunk(learner, _Recorder(adversary, local, sink), horizon, n_actions, seed, index, size)
    return np.stack(holder["rows"])
