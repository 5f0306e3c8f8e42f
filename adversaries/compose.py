"""Composite adversaries: build new sequences out of registered ones.

Every composite takes its inner adversaries as *specs*, the way campaign
files name everything: a registry name (``"alternating"``), a table
``{name = "bernoulli", params = {p = 0.3}}``, the ``spec()`` of an adversary
(``{"name": ..., "class": ..., "params": ...}``), or an Adversary object. Its
``spec()`` records the inner adversaries as specs, so a composite rebuilds
from its own spec: ``adversaries.from_spec(adv.spec())``.

A composite is adaptive when any inner adversary is; it is shared when every
inner one is (and it draws nothing per replica itself). A composite that
plays one sequence per replica cannot contain a *random* shared adversary:
the runner hands each replica chunk its own generator, so the inner
"one sequence for all replicas" would differ between chunks. Such specs are
refused with the fix (make both shared, or the inner one per replica).
Deterministic inner adversaries (``alternating``) are fine anywhere.

Each inner adversary gets its own child generator, spawned from the
composite's in a fixed order, and is called with consecutive blocks in its
own time (round 0 = its first round), so composites are block-invariant
whenever their parts are.
"""

from __future__ import annotations

import numpy as np

from harness import validate
from harness.errors import BoundbreakerError, ConfigError
from harness.protocol import Adversary, read_only

from . import REGISTRY

SPEC_KEYS = {"name", "class", "params"}


def from_spec(spec, field: str = "adversary") -> Adversary:
    """An adversary from a spec: registry name, ``module:Class``, {name/class, params} dict or object."""
    if isinstance(spec, Adversary):
        return spec
    if isinstance(spec, str):
        name, params = spec, {}
    elif isinstance(spec, dict):
        extra = set(spec) - SPEC_KEYS
        if extra:
            raise ConfigError(f"{field}: unknown key {sorted(extra)[0]!r} in an adversary spec; "
                              f"use name (or class) and params")
        name = spec.get("name") or spec.get("class")
        params = spec.get("params", {}) or {}
        if not isinstance(params, dict):
            raise ConfigError(f"{field}: params must be a table of parameters, got {type(params).__name__}")
    else:
        raise ConfigError(f"{field}: give a registry name, a {{name = ..., params = {{...}}}} table or an "
                          f"adversary, got {type(spec).__name__}")
    if not name:
        raise ConfigError(f"{field}: an adversary spec needs a name, e.g. {{name = \"bernoulli\"}}")
    try:
        return REGISTRY.get(name, **params)
    except BoundbreakerError as exc:
        raise ConfigError(f"{field}: {exc}") from None


def _spec_list(field: str, specs) -> list:
    if isinstance(specs, (str, dict, Adversary)) or not isinstance(specs, (list, tuple)) or not specs:
        raise ConfigError(f"{field}: must be a non-empty list of adversary specs, got {specs!r:.60}")
    return [from_spec(s, f"{field}[{i}]") for i, s in enumerate(specs)]


def _weights(field: str, weights, count: int) -> list:
    if weights is None:
        return [1.0] * count
    if not isinstance(weights, (list, tuple)) or len(weights) != count:
        raise ConfigError(f"{field}: give one positive number per part ({count}), got {weights!r:.60}")
    return [validate.positive_real(f"{field}[{i}]", w) for i, w in enumerate(weights)]


def is_random_shared(adv) -> bool:
    """Shared by all replicas and random: must be fed the run's root generator."""
    return bool(getattr(adv, "shared", False)) and not getattr(adv, "adaptive", False) \
        and getattr(adv, "randomized", True)


class _SubHistory:
    """The rows ``idx`` of a History, read-only (for an inner adversary that plays some replicas)."""

    FIELDS = ("last_action", "recent", "switches", "counts", "cumulative", "played")

    def __init__(self, history, idx):
        self.t = history.t
        for name in self.FIELDS:
            setattr(self, name, read_only(getattr(history, name)[idx]))


class Composite(Adversary):
    """Shared machinery: parts, derived flags, child generators, shape adapters."""

    def _adopt(self, parts: list, field: str, shared: bool | None = None, own_randomness: bool = False):
        self._parts = parts
        self.adaptive = any(p.adaptive for p in parts)
        self.memory = max(int(getattr(p, "memory", 1) or 1) for p in parts)
        self.randomized = own_randomness or any(getattr(p, "randomized", True) for p in parts)
        all_shared = all(getattr(p, "shared", False) for p in parts) and not self.adaptive
        self.shared = all_shared if shared is None else shared
        if not self.shared:
            for i, p in enumerate(parts):
                if is_random_shared(p):
                    where = f"{field}[{i}]" if len(parts) > 1 or field.endswith("s") else field
                    raise ConfigError(
                        f"{where}: {getattr(p, 'registry_name', None) or type(p).__name__} draws one random "
                        f"sequence for all replicas, but this composite plays one per replica, so it would "
                        f"differ between replica chunks; set shared=false on it (or make the composite shared)")

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._horizon, self._replicas = n_actions, horizon, replicas
        self._own, *children = rng.spawn(len(self._parts) + 1)
        self._children = children

    def _reset_part(self, k: int, horizon: int, replicas: int):
        self._parts[k].reset(self._n, horizon, replicas, self._children[k])

    def _block(self, k: int, t0: int, t1: int, replicas: int) -> np.ndarray:
        """Part k's oblivious losses for its rounds [t0, t1), in this composite's layout."""
        part = self._parts[k]
        x = part.losses(t0, t1)
        if self.shared or not getattr(part, "shared", False):
            return x
        return np.broadcast_to(x[:, None, :], (t1 - t0, replicas, self._n))

    def _round(self, k: int, t: int, history, replicas: int) -> np.ndarray:
        """Part k's losses at its round t, (replicas, n), for an adaptive composite."""
        part = self._parts[k]
        if part.adaptive:
            return part.respond(t, history)
        x = part.losses(t, t + 1)[0]
        return np.broadcast_to(x, (replicas, self._n)) if getattr(part, "shared", False) else x


@REGISTRY.register("concat", "segments of several adversaries one after the other (weights = share of horizon)")
class Concat(Composite):
    """Play ``parts`` one after the other; part k gets a share weights[k] / sum(weights) of the horizon.

    Segment k covers rounds [b_k, b_{k+1}) with b_k = round(T * (w_1 + ... +
    w_k) / sum(w)); each part is reset with its segment's length as horizon
    and sees its own time (0 at the segment's first round). An adaptive part
    sees the full history, earlier segments included. A part whose segment is
    empty (tiny horizon) is skipped.
    """

    def __init__(self, parts=("alternating", "bernoulli"), weights=None):
        self.parts = _spec_list("parts", parts)
        self.weights = _weights("weights", weights, len(self.parts))
        self._adopt(self.parts, "parts")

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        w = np.cumsum([0.0] + self.weights)
        self._bounds = np.rint(horizon * w / w[-1]).astype(np.int64)
        for k in range(len(self.parts)):
            length = int(self._bounds[k + 1] - self._bounds[k])
            if length > 0:
                self._reset_part(k, length, replicas)

    def losses(self, t0, t1):
        shape = (t1 - t0, self._n) if self.shared else (t1 - t0, self._replicas, self._n)
        out = np.empty(shape)
        for k in range(len(self.parts)):
            lo, hi = max(t0, self._bounds[k]), min(t1, self._bounds[k + 1])
            if lo < hi:
                b = self._bounds[k]
                out[lo - t0:hi - t0] = self._block(k, int(lo - b), int(hi - b), self._replicas)
        return out

    def respond(self, t, history):
        k = int(np.searchsorted(self._bounds, t, side="right")) - 1
        return np.array(self._round(k, t - int(self._bounds[k]), history, self._replicas), dtype=float)


@REGISTRY.register("mix", "each replica faces one of several adversaries, drawn with probabilities weights")
class Mix(Composite):
    """Replica r plays against parts[k_r], k_r drawn i.i.d. with P[k] = weights[k] / sum(weights).

    The draw is made once per replica at reset (one uniform each, in replica
    order), so a run mixes scenarios: "90% benign traffic, 10% attack".
    Probabilities reported for a mix are over the draw of the part too. Each
    part is reset with the number of replicas it plays.
    """

    def __init__(self, parts=("bernoulli", "chase"), weights=None):
        self.parts = _spec_list("parts", parts)
        self.weights = _weights("weights", weights, len(self.parts))
        self._adopt(self.parts, "parts", shared=False, own_randomness=True)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        cdf = np.cumsum(self.weights) / np.sum(self.weights)
        pick = np.minimum(np.searchsorted(cdf, self._own.random(replicas), side="right"), len(cdf) - 1)
        self._groups = [np.flatnonzero(pick == k) for k in range(len(self.parts))]
        for k, idx in enumerate(self._groups):
            if idx.size:
                self._reset_part(k, horizon, idx.size)

    def losses(self, t0, t1):
        out = np.empty((t1 - t0, self._replicas, self._n))
        for k, idx in enumerate(self._groups):
            if idx.size:
                out[:, idx] = self._block(k, t0, t1, idx.size)
        return out

    def respond(self, t, history):
        out = np.empty((self._replicas, self._n))
        for k, idx in enumerate(self._groups):
            if idx.size:
                sub = history if idx.size == self._replicas else _SubHistory(history, idx)
                out[idx] = self._round(k, t, sub, idx.size)
        return out


class _Wrapper(Composite):
    """One inner adversary, transformed entry-wise (or column-wise)."""

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._reset_part(0, horizon, replicas)

    def _transform(self, x: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def losses(self, t0, t1):
        return self._transform(self._block(0, t0, t1, self._replicas))

    def respond(self, t, history):
        return self._transform(np.asarray(self._round(0, t, history, self._replicas), dtype=float)[None])[0]


@REGISTRY.register("permute", "relabel the actions of an inner adversary (fixed or random permutation)")
class Permute(_Wrapper):
    """l'_t(i) = l_t(perm[i]): the same sequence with actions relabelled.

    ``permutation`` is a list (a permutation of 0..n-1) or None: a uniform
    random permutation, one per replica, or one for all when the inner
    adversary is shared (drawn as n uniforms per row, argsorted). Useful to
    check that a learner has no hidden preference for low action indices
    (tie rules), which fixed constructions like ``alternating`` exploit.
    """

    def __init__(self, inner="alternating", permutation=None):
        self.inner = from_spec(inner, "inner")
        if permutation is not None:
            arr = np.asarray(permutation) if isinstance(permutation, (list, tuple)) else None
            if arr is None or arr.ndim != 1 or arr.dtype.kind not in "iu" or \
                    sorted(arr.tolist()) != list(range(len(arr))):
                raise ConfigError(f"permutation: must list each action 0..n-1 exactly once, got {permutation!r:.60}")
            permutation = arr.tolist()
        self.permutation = permutation
        self._adopt([self.inner], "inner", own_randomness=permutation is None)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        if self.permutation is not None:
            if len(self.permutation) != n_actions:
                raise ConfigError(f"permutation: has {len(self.permutation)} entries but the run has "
                                  f"{n_actions} actions")
            self._perm = np.asarray(self.permutation)[None, :]
        else:
            rows = 1 if self.shared else replicas
            self._perm = np.argsort(self._own.random((rows, n_actions)), axis=1)

    def _transform(self, x):
        if x.ndim == 2:  # shared block (steps, n)
            return x[:, self._perm[0]]
        perm = np.broadcast_to(self._perm, (x.shape[1], self._n))
        return np.take_along_axis(x, np.broadcast_to(perm[None], x.shape), axis=2)


@REGISTRY.register("rescale", "affine map offset + scale * loss of an inner adversary, staying in [0, 1]")
class Rescale(_Wrapper):
    """l'_t(i) = offset + scale * l_t(i), with [0, 1] mapped into [0, 1].

    Both end points, offset and offset + scale, must lie in [0, 1];
    ``scale`` may be negative (offset=1, scale=-1 turns losses into gains).
    Shrinking the range (scale < 1) shrinks every regret by the same factor:
    a quick check that a learner's tuning does not assume losses span [0, 1].
    """

    def __init__(self, inner="bernoulli", scale=0.5, offset=0.25):
        self.inner = from_spec(inner, "inner")
        self.scale = validate.real("scale", scale, low=-1.0, high=1.0)
        self.offset = validate.probability("offset", offset)
        if not 0.0 <= self.offset + self.scale <= 1.0:
            raise ConfigError(f"scale: offset + scale must lie in [0, 1] so losses stay in [0, 1], got "
                              f"{self.offset + self.scale:g}; lower scale or change offset")
        self._adopt([self.inner], "inner")

    def _transform(self, x):
        return np.clip(self.offset + self.scale * x, 0.0, 1.0)  # clip only removes rounding


@REGISTRY.register("noisy", "inner adversary plus bounded uniform noise (clipped) or Bernoulli rounding")
class Noisy(_Wrapper):
    """Add independent noise to every loss of an inner adversary.

    ``kind = "uniform"``: l' = clip(l + width (2U - 1), 0, 1).
    ``kind = "bernoulli"``: l' = 1[U < l], a {0, 1} loss with the same mean
    (``width`` unused). One uniform per entry, time-major. ``shared = True``
    draws one noise sequence for all replicas and needs a shared inner
    adversary.
    """

    def __init__(self, inner="alternating", width=0.1, kind="uniform", shared=False):
        self.inner = from_spec(inner, "inner")
        self.width = validate.real("width", width, low=0.0, high=1.0)
        self.kind = validate.choice("kind", kind, ("uniform", "bernoulli"))
        self.shared_noise = validate.boolean("shared", shared)
        if self.shared_noise and not getattr(self.inner, "shared", False):
            raise ConfigError("shared: the inner adversary plays one sequence per replica (or is adaptive); "
                              "set shared=false, or use a shared inner adversary")
        self._adopt([self.inner], "inner", shared=self.shared_noise, own_randomness=True)

    def _transform(self, x):
        u = self._own.random(x.shape)
        if self.kind == "bernoulli":
            return (u < x).astype(np.float64)
        return np.clip(x + self.width * (2.0 * u - 1.0), 0.0, 1.0)


@REGISTRY.register("embed", "a short pattern (adversary or loss table) written into a long benign background")
class Embed(Composite):
    """Rounds [s, s + L) of ``background`` are replaced by ``pattern``.

    ``pattern`` is an adversary spec (it plays ``length`` rounds, default a
    tenth of the horizon) or a literal table of losses, one row per round (a
    saved counterexample, say);
    s = round(at * T), moved left so the pattern fits, and the pattern is
    cut at T if it is longer. The background is generated for every round,
    the window included, so its sequence is the same with or without the
    pattern ("the same day, with an incident at noon").
    """

    def __init__(self, pattern="alternating", background="bernoulli", at=0.5, length=None):
        self.background = from_spec(background, "background")
        self.at = validate.probability("at", at)
        if isinstance(pattern, (list, tuple)) and pattern and isinstance(pattern[0], (list, tuple)):
            table = np.asarray(pattern, dtype=float) if _rectangular(pattern) else None
            if table is None or table.ndim != 2 or not np.all((table >= 0) & (table <= 1)):
                raise ConfigError("pattern: a loss table must be a list of equal-length rows of numbers in [0, 1]")
            self.pattern = table.tolist()
            self._table = table
            self.length = None if length is None else validate.positive_int("length", length)
            if self.length is not None and self.length != len(table):
                raise ConfigError(f"length: the pattern table has {len(table)} rows; drop length or make them agree")
            parts = [self.background]
        else:
            self.pattern = from_spec(pattern, "pattern")
            self._table = None
            self.length = None if length is None else validate.positive_int("length", length)
            parts = [self.background, self.pattern]
        self._adopt(parts, "background" if self._table is not None else "parts")

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        if self._table is not None and self._table.shape[1] != n_actions:
            raise ConfigError(f"pattern: the table has {self._table.shape[1]} columns but the run has "
                              f"{n_actions} actions")
        size = len(self._table) if self._table is not None else (self.length or max(1, horizon // 10))
        self._len = min(size, horizon)
        self._start = min(int(round(self.at * horizon)), horizon - self._len)
        self._reset_part(0, horizon, replicas)
        if self._table is None:
            self._reset_part(1, self._len, replicas)

    def _window(self, t0, t1):
        return max(t0, self._start), min(t1, self._start + self._len)

    def losses(self, t0, t1):
        out = np.array(self._block(0, t0, t1, self._replicas), dtype=float)
        lo, hi = self._window(t0, t1)
        if lo < hi:
            a, b = lo - self._start, hi - self._start
            part = self._table[a:b] if self._table is not None else self._block(1, a, b, self._replicas)
            out[lo - t0:hi - t0] = part if (self.shared or part.ndim == 3) else part[:, None, :]
        return out

    def respond(self, t, history):
        base = np.array(self._round(0, t, history, self._replicas), dtype=float)
        if self._start <= t < self._start + self._len:
            s = t - self._start
            base[:] = self._table[s] if self._table is not None else self._round(1, s, history, self._replicas)
        return base


def _rectangular(rows) -> bool:
    try:
        return len({len(r) for r in rows}) == 1 and all(
            isinstance(v, (int, float)) and not isinstance(v, bool) for r in rows for v in r)
    except TypeError:
        return False
