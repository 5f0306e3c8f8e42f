"""Sequence genomes: a short description of a long loss sequence.

A :class:`Genome` is a list of :class:`Segment` objects, each a named
*pattern* with a few parameters and an integer *weight*, plus an action
permutation, a number of *cycles* and the loss level of the actions no
pattern speaks about. :func:`expand` turns it, deterministically, into a
``(T, n)`` array in [0, 1] for any horizon T: the horizon is cut into
``cycles`` equal parts, each part is cut among the segments in proportion
to their weights, and each segment fills its rounds with its pattern.

Patterns speak of *roles*: role 0 and role 1 are the two actions the pattern
plays against each other (``rotate`` uses every action); every other role
loses ``rest`` each round. The permutation maps role i to action
``permutation[i]``, so a learner's tie-breaking order cannot hide a defect.

Every parameter has a *plain* value (the one a person reads most easily:
losses 0 and 1, period 1, no noise) and a range. Hypothesis strategies over
genomes (:mod:`harness.search.strategies`) shrink toward fewer segments,
earlier patterns in :data:`PATTERNS`, weight 1 and plain parameters, so a
counterexample comes out as a description a person can read, not thousands
of numbers. The optimiser (:mod:`harness.search.cem`) moves the same
parameters in their unit-interval coordinates.
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError

MAX_WEIGHT = 64
MAX_CYCLES = 64
MAX_PERIOD = 64
MAX_SEED = (1 << 16) - 1
MAX_SEGMENTS = 16


@dataclass(frozen=True)
class Param:
    """One pattern parameter: its range, its plain value, integer or real."""

    name: str
    low: float
    high: float
    plain: float
    integer: bool = False

    def check(self, where: str, value) -> float | int:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ConfigError(f"{where}.{self.name}: must be a number, got {value!r}")
        if self.integer and (not float(value).is_integer()):
            raise ConfigError(f"{where}.{self.name}: must be an integer, got {value!r}")
        if not (math.isfinite(value) and self.low <= value <= self.high):
            raise ConfigError(f"{where}.{self.name}: must lie in [{self.low:g}, {self.high:g}], got {value!r}")
        return int(value) if self.integer else float(value)

    def from_unit(self, u: float) -> float | int:
        """The value at unit coordinate u in [0, 1] (integers: log scale for periods)."""
        u = min(1.0, max(0.0, float(u)))
        if self.integer:
            if self.name == "period":  # periods matter on a log scale: 1, 2, 4, ..., 64
                return int(round(2 ** (u * math.log2(self.high))))
            return int(round(self.low + u * (self.high - self.low)))
        return self.low + u * (self.high - self.low)


# -- patterns ------------------------------------------------------------------------
# Each fills ``length`` rounds (t = 0.. length-1, counted from the segment's start)
# of an (length, n) array in role coordinates; roles beyond those it sets stay at rest.


def _constant(out, length, a, b):
    out[:, 0] = a
    out[:, 1] = b


def _alternating(out, length, period, low):
    flip = (np.arange(length) // period) % 2 == 1
    out[:, 0] = np.where(flip, low, 1.0 - low)
    out[:, 1] = np.where(flip, 1.0 - low, low)


def _rotate(out, length, period, low):
    n = out.shape[1]
    out[:] = 1.0 - low
    out[np.arange(length), (np.arange(length) // period) % n] = low


def _near_tie(out, length, eps, seed):
    signs = np.where(np.random.default_rng(int(seed)).random(length) < 0.5, -1.0, 1.0)
    out[:, 0] = 0.5 + eps * signs
    out[:, 1] = 0.5 - eps * signs


def _random(out, length, p0, p1, seed):
    u = np.random.default_rng(int(seed)).random((length, 2))
    out[:, 0] = (u[:, 0] < p0).astype(float)
    out[:, 1] = (u[:, 1] < p1).astype(float)


def _shift(out, length, gap, at):
    cut = int(round(at * length))
    good, bad = (1.0 - gap) / 2.0, (1.0 + gap) / 2.0
    out[:cut, 0], out[:cut, 1] = good, bad
    out[cut:, 0], out[cut:, 1] = bad, good


@dataclass(frozen=True)
class Pattern:
    name: str
    params: tuple[Param, ...]
    fill: object
    text: str


_PERIOD = Param("period", 1, MAX_PERIOD, 1, integer=True)
_LOW = Param("low", 0.0, 0.5, 0.0)
_SEED = Param("seed", 0, MAX_SEED, 0, integer=True)

#: The patterns, plainest first (shrinking moves toward the front of this list).
PATTERNS: dict[str, Pattern] = {p.name: p for p in (
    Pattern("constant", (Param("a", 0.0, 1.0, 0.0), Param("b", 0.0, 1.0, 1.0)), _constant,
            "role 0 loses a, role 1 loses b, every round"),
    Pattern("alternating", (_PERIOD, _LOW), _alternating,
            "roles 0 and 1 take turns losing 1-low (the other low), switching every period rounds"),
    Pattern("rotate", (_PERIOD, _LOW), _rotate,
            "every action in turn gets loss low (the others 1-low), moving on every period rounds"),
    Pattern("shift", (Param("gap", 0.0, 1.0, 1.0), Param("at", 0.0, 1.0, 0.5)), _shift,
            "regime shift: role 0 better by gap until fraction at of the segment, then role 1"),
    Pattern("near_tie", (Param("eps", 0.0, 0.5, 0.0), _SEED), _near_tie,
            "roles 0 and 1 lose 1/2 +- eps with a random sign each round, so the lead keeps changing"),
    Pattern("random", (Param("p0", 0.0, 1.0, 0.5), Param("p1", 0.0, 1.0, 0.5), _SEED), _random,
            "random block: roles 0 and 1 lose 1 with probabilities p0 and p1, independently"),
)}


@dataclass(frozen=True)
class Segment:
    """One pattern, its parameters (in the pattern's order) and its weight."""

    pattern: str
    params: tuple = ()
    weight: int = 1

    def __post_init__(self):
        if self.pattern not in PATTERNS:
            raise ConfigError(f"segment.pattern: must be one of {', '.join(PATTERNS)}; got {self.pattern!r}")
        spec = PATTERNS[self.pattern]
        if len(self.params) != len(spec.params):
            raise ConfigError(f"segment {self.pattern}: takes {len(spec.params)} parameters "
                              f"({', '.join(p.name for p in spec.params)}), got {len(self.params)}")
        values = tuple(p.check(f"segment {self.pattern}", v) for p, v in zip(spec.params, self.params))
        object.__setattr__(self, "params", values)
        weight = self.weight
        if isinstance(weight, bool) or not isinstance(weight, int) or not 1 <= weight <= MAX_WEIGHT:
            raise ConfigError(f"segment {self.pattern}.weight: must be an integer in [1, {MAX_WEIGHT}], "
                              f"got {weight!r}")

    @classmethod
    def plain(cls, pattern: str, weight: int = 1, **params) -> "Segment":
        """A segment with plain parameters, except those given by name."""
        spec = PATTERNS.get(pattern)
        if spec is None:
            raise ConfigError(f"segment.pattern: must be one of {', '.join(PATTERNS)}; got {pattern!r}")
        names = [p.name for p in spec.params]
        for key in params:
            if key not in names:
                raise ConfigError(f"segment {pattern}: unknown parameter {key!r}; its parameters are "
                                  f"{', '.join(names)}")
        return cls(pattern, tuple(params.get(p.name, p.plain) for p in spec.params), weight)

    def named(self) -> dict:
        return {p.name: v for p, v in zip(PATTERNS[self.pattern].params, self.params)}

    def plainness(self) -> int:
        """How many parameters differ from their plain value (0 = fully plain)."""
        return sum(v != p.plain for p, v in zip(PATTERNS[self.pattern].params, self.params))

    def __str__(self):
        args = ", ".join(f"{k}={_short(v)}" for k, v in self.named().items())
        return f"{self.pattern}({args}) x{self.weight}"


@dataclass(frozen=True)
class Genome:
    """A loss sequence described by segments; see the module docstring."""

    segments: tuple
    permutation: tuple
    cycles: int = 1
    rest: float = 1.0

    def __post_init__(self):
        segs = tuple(self.segments)
        if not 1 <= len(segs) <= MAX_SEGMENTS or not all(isinstance(s, Segment) for s in segs):
            raise ConfigError(f"genome.segments: must be 1 to {MAX_SEGMENTS} segments, got {len(segs)}")
        object.__setattr__(self, "segments", segs)
        perm = tuple(self.permutation)
        if (len(perm) < 2 or any(isinstance(p, bool) or not isinstance(p, (int, np.integer)) for p in perm)
                or sorted(int(p) for p in perm) != list(range(len(perm)))):
            raise ConfigError(f"genome.permutation: must be a permutation of 0..n-1 with n >= 2, got {list(perm)}")
        object.__setattr__(self, "permutation", tuple(int(p) for p in perm))
        if isinstance(self.cycles, bool) or not isinstance(self.cycles, int) or not 1 <= self.cycles <= MAX_CYCLES:
            raise ConfigError(f"genome.cycles: must be an integer in [1, {MAX_CYCLES}], got {self.cycles!r}")
        rest = self.rest
        if isinstance(rest, bool) or not isinstance(rest, (int, float)) or not (0.0 <= rest <= 1.0):
            raise ConfigError(f"genome.rest: must be a number in [0, 1], got {rest!r}")
        object.__setattr__(self, "rest", float(rest))

    @property
    def n_actions(self) -> int:
        return len(self.permutation)

    def expand(self, horizon: int) -> np.ndarray:
        return expand(self, horizon)

    def as_dict(self) -> dict:
        return {"segments": [{"pattern": s.pattern, "weight": s.weight, "params": s.named()}
                             for s in self.segments],
                "permutation": list(self.permutation), "cycles": self.cycles, "rest": self.rest}

    @classmethod
    def from_dict(cls, data, field: str = "genome") -> "Genome":
        """Rebuild from :meth:`as_dict` output, refusing unknown or missing fields."""
        _keys(field, data, {"segments", "permutation", "cycles", "rest"})
        segs = data["segments"]
        if not isinstance(segs, list):
            raise ConfigError(f"{field}.segments: must be a list, got {type(segs).__name__}")
        out = []
        for i, seg in enumerate(segs):
            where = f"{field}.segments[{i}]"
            _keys(where, seg, {"pattern", "weight", "params"})
            pattern = seg["pattern"]
            if pattern not in PATTERNS:
                raise ConfigError(f"{where}.pattern: must be one of {', '.join(PATTERNS)}; got {pattern!r}")
            names = {p.name for p in PATTERNS[pattern].params}
            _keys(f"{where}.params", seg["params"], names)
            out.append(Segment(pattern, tuple(seg["params"][p.name] for p in PATTERNS[pattern].params),
                               seg["weight"]))
        perm = data["permutation"]
        if not isinstance(perm, list):
            raise ConfigError(f"{field}.permutation: must be a list of integers, got {type(perm).__name__}")
        return cls(tuple(out), tuple(perm), data["cycles"], data["rest"])

    def key(self) -> str:
        """A stable hash of the description (used to seed its evaluation)."""
        text = json.dumps(self.as_dict(), sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode()).hexdigest()

    def size(self) -> tuple:
        """Complexity, smaller is simpler: segments, total weight, non-plain parameters."""
        return (len(self.segments), self.cycles, sum(s.weight for s in self.segments),
                sum(s.plainness() for s in self.segments))

    def __str__(self):
        parts = " + ".join(str(s) for s in self.segments)
        extra = []
        if self.cycles > 1:
            extra.append(f"repeated {self.cycles} times")
        if self.n_actions > 2:
            extra.append(f"other actions lose {_short(self.rest)}")
        if self.permutation != tuple(range(self.n_actions)):
            extra.append(f"roles -> actions {list(self.permutation)}")
        return parts + (f" ({'; '.join(extra)})" if extra else "")


def _short(v) -> str:
    return f"{v:.3g}" if isinstance(v, float) else str(v)


def _keys(field: str, data, allowed: set) -> None:
    if not isinstance(data, dict):
        raise ConfigError(f"{field}: must be a table/object, got {type(data).__name__}")
    extra = sorted(set(data) - allowed)
    missing = sorted(allowed - set(data))
    if extra:
        raise ConfigError(f"{field}: unknown field {extra[0]!r}; allowed: {', '.join(sorted(allowed))}")
    if missing:
        raise ConfigError(f"{field}: missing field {missing[0]!r}")


def boundaries(total: int, weights) -> np.ndarray:
    """Cut ``total`` rounds into consecutive parts proportional to ``weights``."""
    cum = np.concatenate([[0], np.cumsum(weights)])
    return np.round(total * cum / cum[-1]).astype(np.int64)


def expand(genome: Genome, horizon: int) -> np.ndarray:
    """The (horizon, n) loss array a genome describes; deterministic, in [0, 1]."""
    n = genome.n_actions
    roles = np.full((horizon, n), genome.rest)
    cuts = boundaries(horizon, [1] * genome.cycles)
    weights = [s.weight for s in genome.segments]
    for c in range(genome.cycles):
        lo, hi = cuts[c], cuts[c + 1]
        inner = lo + boundaries(hi - lo, weights)
        for seg, s0, s1 in zip(genome.segments, inner[:-1], inner[1:]):
            if s1 > s0:
                PATTERNS[seg.pattern].fill(roles[s0:s1], int(s1 - s0), *seg.params)
    out = np.empty_like(roles)
    out[:, list(genome.permutation)] = roles
    return out
