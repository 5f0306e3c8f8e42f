"""The one protocol every learner and adversary speaks.

A *replica* is one independent play of the learner against the adversary. All
state is batched over replicas: a learner holds arrays of shape
``(replicas, ...)`` and answers one round for all of them at once.

Round ``t`` (0-based) goes:

1. an adaptive adversary commits the losses of round ``t`` from the history of
   rounds ``< t`` (an oblivious one committed them all in advance);
2. the learner picks actions ``a_t`` of shape ``(replicas,)``;
3. the learner is told the losses: the whole vector (``feedback = "full"``)
   or only the loss of its own action (``feedback = "bandit"``).

Because the adversary commits before the learner draws, no adversary can see
the current round's randomness; the runner enforces the order.
"""

from __future__ import annotations

import inspect
from typing import Callable

import numpy as np

from .errors import ConfigError

FEEDBACKS = ("full", "bandit")


class Specified:
    """Parameters in the constructor, readable back as a spec.

    Like scikit-learn estimators: every constructor argument is stored on an
    attribute of the same name, so ``get_params()`` can rebuild the object and
    ``spec()`` can record it in results, certificates and counterexample files.
    """

    registry_name: str | None = None

    @classmethod
    def _param_names(cls) -> list[str]:
        sig = inspect.signature(cls.__init__)
        return [p.name for p in sig.parameters.values()
                if p.name != "self" and p.kind not in (p.VAR_POSITIONAL, p.VAR_KEYWORD)]

    def get_params(self) -> dict:
        return {name: getattr(self, name) for name in self._param_names() if hasattr(self, name)}

    def spec(self) -> dict:
        """A JSON-ready description: registry name, class path and parameters."""
        params = {}
        for key, value in self.get_params().items():
            params[key] = _jsonable(value)
        cls = type(self)
        return {"name": self.registry_name, "class": f"{cls.__module__}:{cls.__qualname__}",
                "params": params}

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.get_params().items())
        return f"{type(self).__name__}({args})"


def _jsonable(value):
    if isinstance(value, Specified):
        return value.spec()
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating,)):
        return float(value)
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    if callable(value):
        return f"{getattr(value, '__module__', '?')}:{getattr(value, '__qualname__', repr(value))}"
    return repr(value)


def read_only(array: np.ndarray) -> np.ndarray:
    """A read-only view: the caller's array stays writable, the view does not."""
    view = array.view()
    view.flags.writeable = False
    return view


class Learner(Specified):
    """An online learner, batched over replicas.

    Subclasses set ``feedback`` and implement ``reset``, ``act`` and
    ``update``; they may override ``play_block`` with a fast path for
    oblivious sequences, which must give the same distribution of play as the
    act/update loop. ``claims`` lists the :class:`~harness.claims.Claim`
    objects the learner's authors make for it.
    """

    feedback: str = "full"
    claims: tuple = ()

    def reset(self, n_actions: int, horizon: int, replicas: int, rng: np.random.Generator) -> None:
        """Forget everything; prepare for ``replicas`` fresh plays.

        ``rng`` is the only source of randomness the learner may use. (The
        runner also sets ``_protocol_replicas`` after reset, so the base
        ``play_block`` knows the batch size before the first action.)
        """
        raise NotImplementedError

    def act(self) -> np.ndarray:
        """The actions of this round, ``(replicas,)`` int64 in ``[0, n_actions)``."""
        raise NotImplementedError

    def update(self, actions: np.ndarray, losses: np.ndarray) -> None:
        """Observe the round. ``losses`` is ``(replicas, n_actions)`` under full
        feedback (possibly a read-only broadcast view) or ``(replicas,)`` under
        bandit feedback: the loss of the action each replica played."""
        raise NotImplementedError

    def play_block(self, losses: np.ndarray) -> np.ndarray:
        """Play consecutive rounds of an oblivious sequence.

        ``losses`` is ``(steps, n_actions)`` when every replica faces the same
        sequence, else ``(steps, replicas, n_actions)``. Returns the actions,
        ``(steps, replicas)``. This base version loops act/update, checking
        every round's actions before they are used.
        """
        steps = losses.shape[0]
        shared = losses.ndim == 2
        replicas = losses.shape[1] if not shared else getattr(self, "_protocol_replicas", None)
        out = None
        for s in range(steps):
            try:
                actions = self.act()
            except Exception as exc:
                raise RoundError(s, exc) from exc
            if replicas is None:  # used outside the runner: trust the first round's shape
                replicas = np.shape(actions)[0] if np.ndim(actions) == 1 else 0
            problem = action_problem(actions, replicas, losses.shape[-1])
            if problem:
                raise RoundError(s, problem)
            if out is None:
                out = np.empty((steps, replicas), dtype=np.int64)
            out[s] = actions
            row = losses[s]
            if self.feedback == "full":
                seen = np.broadcast_to(row, (replicas, row.shape[-1])) if shared else row
            elif shared:
                seen = row[out[s]]
            else:
                seen = row[np.arange(replicas), out[s]]
            try:
                self.update(read_only(out[s]), read_only(seen))
            except Exception as exc:
                raise RoundError(s, exc) from exc
        return out


class RoundError(Exception):
    """Internal: a fault at a step of a block; the runner adds round and seed."""

    def __init__(self, step: int, cause):
        super().__init__(step, cause)
        self.step = step
        self.cause = cause


def action_problem(actions, replicas: int, n_actions: int) -> str | None:
    """What is wrong with a round's or a block's actions, or None.

    Accepts any integer dtype (cast later to int64); refuses floats (naming
    NaN when present), bools, objects, wrong shapes and out-of-range values.
    Costs two reductions, so it can run every round.
    """
    if not isinstance(actions, np.ndarray):
        return f"returned {type(actions).__name__} instead of a numpy int64 array"
    if actions.dtype.kind not in "iu":
        if actions.dtype.kind == "f" and actions.size and np.isnan(actions).any():
            return "returned NaN actions"
        return f"returned actions of dtype {actions.dtype}; actions must be int64"
    if actions.shape[-1:] != (replicas,) or actions.ndim not in (1, 2):
        return f"returned actions of shape {actions.shape}; expected (..., {replicas})"
    if actions.size:
        lo, hi = actions.min(), actions.max()
        if lo < 0 or hi >= n_actions:
            bad = lo if lo < 0 else hi
            return f"returned action {int(bad)} outside [0, {n_actions})"
    return None


class Adversary(Specified):
    """A loss-sequence generator, batched over replicas.

    Oblivious adversaries (``adaptive = False``) implement ``losses(t0, t1)``
    and are called with consecutive blocks ``[0, b), [b, 2b), ...``; the
    sequence must not depend on how the horizon is cut into blocks (draw in
    time-major order, a fixed number of draws per entry). ``shared = True``
    means one sequence for all replicas: the runner then hands ``reset`` the
    same generator in every replica chunk, so all chunks see the same sequence.

    Adaptive adversaries (``adaptive = True``) implement ``respond(t,
    history)``, seeing only rounds ``< t`` through :class:`History`.
    """

    adaptive: bool = False
    shared: bool = False
    memory: int = 1

    def reset(self, n_actions: int, horizon: int, replicas: int, rng: np.random.Generator) -> None:
        raise NotImplementedError

    def losses(self, t0: int, t1: int) -> np.ndarray:
        """Rounds ``[t0, t1)``: ``(t1-t0, n)`` when shared, else ``(t1-t0, replicas, n)``."""
        raise NotImplementedError

    def respond(self, t: int, history: "History") -> np.ndarray:
        """Adaptive only: the losses of round ``t``, ``(replicas, n_actions)``."""
        raise NotImplementedError


class History:
    """What an adaptive adversary may see: rounds before the current one.

    Every array is a read-only view of the runner's running totals, so its
    size is O(replicas x n) whatever the horizon.

    - ``t``: rounds completed so far;
    - ``last_action`` ``(replicas,)``: the previous round's action, -1 at t = 0;
    - ``recent`` ``(replicas, memory)``: the last ``memory`` actions, oldest
      first, most recent in the last column, -1 where there were none yet;
    - ``switches`` ``(replicas,)``: rounds s >= 1 with a_s != a_{s-1};
    - ``counts`` ``(replicas, n)``: how often each action was played;
    - ``cumulative`` ``(replicas, n)``: each action's total loss so far;
    - ``played`` ``(replicas,)``: the learner's total loss so far.
    """

    def __init__(self, replicas: int, n_actions: int, memory: int = 1):
        self.t = 0
        self._last = np.full(replicas, -1, dtype=np.int64)
        self._recent = np.full((replicas, max(1, memory)), -1, dtype=np.int64)
        self._switches = np.zeros(replicas, dtype=np.int64)
        self._counts = np.zeros((replicas, n_actions), dtype=np.int64)
        self._cumulative = np.zeros((replicas, n_actions), dtype=np.float64)
        self._played = np.zeros(replicas, dtype=np.float64)
        self._rows = np.arange(replicas)
        self.last_action = read_only(self._last)
        self.recent = read_only(self._recent)
        self.switches = read_only(self._switches)
        self.counts = read_only(self._counts)
        self.cumulative = read_only(self._cumulative)
        self.played = read_only(self._played)

    def record(self, actions: np.ndarray, losses: np.ndarray) -> None:
        """Append one round (runner only). ``losses`` is ``(replicas, n)``."""
        rows = self._rows
        if self.t > 0:
            self._switches += actions != self._last
        self._last[:] = actions
        if self._recent.shape[1] > 1:
            self._recent[:, :-1] = self._recent[:, 1:]
        self._recent[:, -1] = actions
        self._counts[rows, actions] += 1
        self._played += losses[rows, actions]
        self._cumulative += losses
        self.t += 1


class _PerReplica(Learner):
    """A plain single-replica learner run once per replica (the slow path)."""

    def __init__(self, factory: Callable, feedback: str = "full"):
        if not callable(factory):
            raise ConfigError(f"per_replica: factory must be callable, got {type(factory).__name__}")
        if feedback not in FEEDBACKS:
            raise ConfigError(f"per_replica: feedback must be 'full' or 'bandit', got {feedback!r}")
        self.factory = factory
        self.feedback = feedback

    def reset(self, n_actions, horizon, replicas, rng):
        # One child generator per replica, so a replica's play depends only on
        # its own stream.
        self._plays = [self.factory(n_actions, horizon, child) for child in rng.spawn(replicas)]
        self._n = n_actions

    def act(self):
        raw = [play.act() for play in self._plays]
        try:
            return np.asarray(raw)
        except (TypeError, ValueError):  # ragged or exotic values: let the action check name them
            return np.asarray(raw, dtype=object)

    def update(self, actions, losses):
        for r, play in enumerate(self._plays):
            play.update(int(actions[r]), losses[r] if self.feedback == "full" else float(losses[r]))

    def spec(self):
        base = super().spec()
        base["params"] = {"factory": _jsonable(self.factory), "feedback": self.feedback}
        return base


def per_replica(factory: Callable, feedback: str = "full") -> Learner:
    """Turn a plain, one-replica learner into a batched :class:`Learner`.

    ``factory(n_actions, horizon, rng)`` must return an object with
    ``act() -> int`` and ``update(action, losses)``, where ``losses`` is the
    full loss vector (``feedback="full"``) or the scalar loss of ``action``
    (``feedback="bandit"``). Each replica gets its own generator spawned from
    the chunk's, so results stay reproducible from the run's seed.
    """
    return _PerReplica(factory, feedback)
