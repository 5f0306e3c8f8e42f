"""Wrappers that take any Learner: a hard switch cap and epoch restarts.

``budget_cap(learner, budget)`` and ``epoch_restart(learner,
switches_per_epoch)`` wrap a learner object; the registry entries
``budget-cap`` and ``epoch-restart`` build the same from names, e.g.
``get("budget-cap", inner="hedge", inner_params={"eta": 0.1}, budget=10)``,
where ``inner`` is a registry name or ``module:Class`` (or a learner's
``spec()`` dict, so a recorded spec rebuilds the wrapper). Both work under full
and bandit feedback and keep their state per replica.
"""

from __future__ import annotations

import copy
import heapq
import math
from array import array
from typing import Callable

import numpy as np

from .. import kernels, validate
from ..claims import Claim
from ..errors import ConfigError
from ..protocol import Learner
from . import REGISTRY
from .low_switching import required_budget


def _inner_learner(inner, inner_params, field: str = "inner") -> Learner:
    """A Learner from a registry name / module:Class (with params) or an instance."""
    if inner is None:
        raise ConfigError(f"{field}: required; give a learner registry name (e.g. {field}='hedge') "
                          f"or module:Class")
    if inner_params is not None and not isinstance(inner_params, dict):
        raise ConfigError(f"{field}_params: must be a table of parameters, got {type(inner_params).__name__}")
    if isinstance(inner, str):
        return REGISTRY.get(inner, **(inner_params or {}))
    if isinstance(inner, dict):  # a recorded spec(), as results and certificates store it
        if inner_params:
            raise ConfigError(f"{field}_params: give parameters inside the {field} spec's 'params'")
        name = inner.get("name") or inner.get("class")
        if not isinstance(name, str) or not isinstance(inner.get("params", {}), dict):
            raise ConfigError(f"{field}: a spec needs 'name' (or 'class') and a 'params' table, got {inner!r}"[:200])
        return REGISTRY.get(name, **inner.get("params", {}))
    if inner_params:
        raise ConfigError(f"{field}_params: only with {field} given by name; pass parameters to the object instead")
    for attr in ("reset", "act", "update", "play_block"):
        if not callable(getattr(inner, attr, None)):
            raise ConfigError(f"{field}: {type(inner).__name__} is not a Learner (lacks {attr}()); "
                              f"give a registry name or a harness.Learner")
    if getattr(inner, "feedback", None) not in ("full", "bandit"):
        raise ConfigError(f"{field}: feedback must be 'full' or 'bandit', got {getattr(inner, 'feedback', None)!r}")
    return inner


def _name_of(learner) -> str:
    return getattr(learner, "registry_name", None) or type(learner).__name__


# -- budget cap ------------------------------------------------------------------------------


@REGISTRY.register("budget-cap", "any learner, frozen after its S-th switch: at most S switches, always")
class BudgetCap(Learner):
    """Play the inner learner's actions until the S-th switch, then keep that action.

    Per replica: the wrapper plays what the inner learner proposes while it
    has made fewer than S switches; the round that makes the S-th switch is
    played, and from then on the replica keeps that action to the end. So
    every replica switches at most S times on every sequence.

    The inner learner keeps running (its draws stay aligned with the other
    replicas'); once a replica is frozen the inner learner's state for it no
    longer influences play. Under bandit feedback the inner learner is told
    the loss of the action actually played; for frozen replicas that is not
    its own proposal, which is harmless for the same reason (and the fast
    path shows the inner learner its proposals' losses, again only for
    replicas whose play it no longer decides).

    Claim: at most S switches, always (by construction). The inner
    learner's regret claims do not carry over and are not repeated.
    """

    example_params = {"inner": "shrinking-dartboard", "budget": 20}

    def __init__(self, inner=None, budget=None, inner_params=None):
        self.inner = inner
        self.inner_params = inner_params
        self.budget = required_budget(budget)
        self._inner = _inner_learner(inner, inner_params)
        self.feedback = self._inner.feedback

    @property
    def claims(self):
        return (Claim(metric="switches", bound=float(self.budget), kind="always",
                      name=f"budget-cap({_name_of(self._inner)}): at most {self.budget} switches",
                      source="construction (harness.learners.wrappers.BudgetCap)"),)

    def reset(self, n_actions, horizon, replicas, rng):
        self._live = copy.deepcopy(self._inner)
        self._live.reset(n_actions, horizon, replicas, rng)
        self._live._protocol_replicas = replicas
        self._last = np.full(replicas, -1, dtype=np.int64)
        self.switches = np.zeros(replicas, dtype=np.int64)

    def act(self):
        proposed = np.asarray(self._live.act())
        self._proposed = proposed
        played = np.where(self.switches >= self.budget, self._last, proposed)
        self.switches += (played != self._last) & (self._last >= 0)
        self._last = played.astype(np.int64)
        return self._last.copy()

    def update(self, actions, losses):
        self._live.update(self._proposed, losses)

    def play_block(self, losses):
        proposed = np.asarray(self._live.play_block(losses)).astype(np.int64, copy=False)
        return kernels.cap_block(proposed, self._last, self.switches, self.budget)


def budget_cap(learner, budget) -> BudgetCap:
    """``learner`` (a Learner or registry name), frozen after its ``budget``-th switch."""
    return BudgetCap(inner=learner, budget=budget)


# -- epoch restarts ------------------------------------------------------------------------------


class _Cohort:
    """One restart of the inner learner, serving the replicas that began an epoch together."""

    def __init__(self, learner, rows, key):
        self.learner = learner
        self.rows = rows                                   # global replica indices
        self.key = key                                     # creation order
        self.alive = np.ones(rows.size, dtype=bool)
        self.live = rows.size                              # alive.sum()
        self.count = np.zeros(rows.size, dtype=np.int64)  # switches in this epoch
        self.prev = np.full(rows.size, -1, dtype=np.int64)  # last proposal


@REGISTRY.register("epoch-restart", "any learner, restarted with fresh randomness after k switches in an epoch")
class EpochRestart(Learner):
    r"""Run the inner learner in epochs of k = ``switches_per_epoch`` switches, restarting it fresh.

    Construction. Each replica starts an epoch with a fresh copy of the inner
    learner (its own generator, spawned from the wrapper's, and the remaining
    horizon). The epoch lasts until that copy has switched k times; right
    after the round of its k-th switch the replica starts a new epoch with a
    new copy. Replicas restart independently; all replicas that end an
    epoch in the same round share one new copy (they are independent rows of
    it). Every epoch has exactly k switches inside it, plus at most one
    switch where it meets the next.

    Why: if the inner learner promises E[switches] <= s on any suffix of an
    oblivious sequence, then an epoch, which runs on fresh randomness, ends
    before the horizon with probability at most q = s / k (Markov), whatever
    happened before. So P[more than m epochs] <= q^m, and with probability
    at least 1 - delta there are at most m = ceil(ln(1/delta) / ln(1/q))
    epochs and at most (k + 1) m - 1 switches: an expectation guarantee
    becomes a high-probability one, at the price of a factor ln(1/delta).
    This is the restart-on-overflow argument the literature on limited
    switching uses to turn expected switching bounds into high-probability
    ones (we could not check which paper states it first; from memory); the
    statement and constants here are derived in this docstring. It is attached as a Claim for every expected-switches
    claim of the inner learner (assumes that claim holds, is nondecreasing in
    T, and the sequence is oblivious).

    Fast path: each copy plays the block with its own fast path; the rounds
    where replicas end an epoch are then found from the proposals, and the
    new copies are started in time order (the order the slow path spawns
    them), each playing the rest of the block.
    """

    example_params = {"inner": "shrinking-dartboard", "switches_per_epoch": 20}
    _block_scale = 4  # every live copy costs a call per block: fewer, longer blocks (runner.BLOCK_ENTRIES)

    def __init__(self, inner=None, switches_per_epoch=None, inner_params=None):
        self.inner = inner
        self.inner_params = inner_params
        self.switches_per_epoch = required_budget(switches_per_epoch, "switches_per_epoch")
        self._inner = _inner_learner(inner, inner_params)
        self.feedback = self._inner.feedback

    @property
    def claims(self):
        k = self.switches_per_epoch
        out = []
        for claim in getattr(self._inner, "claims", ()) or ():
            if claim.metric == "switches" and claim.kind == "expectation":
                out.append(Claim(metric="switches", bound=_restart_bound(claim, k), delta=0.05,
                                 kind="high_probability",
                                 name=f"epoch-restart(k={k}): switches <= (k+1) m - 1 w.p. 1 - delta, "
                                      f"m = ceil(ln(1/delta)/ln(k/s)), s from '{claim.name}'",
                                 source="derived in harness.learners.wrappers.EpochRestart (Markov per epoch)",
                                 scope=claim.scope))
        return tuple(out)

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._horizon, self._replicas, self._rng = n_actions, horizon, replicas, rng
        self._t = 0
        self.epochs = np.ones(replicas, dtype=np.int64)
        # the restart log, flat: 8 bytes per restarting replica (it grows with the number of
        # restarts, the one record here that does; see ``restarts``)
        self._log_round, self._log_size, self._log_rows = array("q"), array("q"), array("q")
        self._cohorts = {}   # key -> live cohort, in creation order
        self._start(np.arange(replicas), horizon)

    @property
    def restarts(self) -> list:
        """(round the new epoch starts, replicas restarting), in time order."""
        rows = np.frombuffer(self._log_rows, dtype=np.int64) if len(self._log_rows) else np.empty(0, np.int64)
        cuts = np.cumsum(np.frombuffer(self._log_size, dtype=np.int64))[:-1] if len(self._log_size) else []
        return list(zip(self._log_round.tolist(), np.split(rows.copy(), cuts)))

    def _start(self, rows, remaining) -> _Cohort:
        learner = copy.deepcopy(self._inner)
        learner.reset(self._n, remaining, rows.size, self._rng.spawn(1)[0])
        learner._protocol_replicas = rows.size
        cohort = _Cohort(learner, rows, len(self._log_round))
        self._cohorts[cohort.key] = cohort
        return cohort

    def _end(self, cohort: _Cohort, done: np.ndarray) -> np.ndarray:
        """Rows ``done`` (a mask or indices) of ``cohort`` end their epoch; returns their replicas."""
        cohort.alive[done] = False
        ended = cohort.rows[done]
        cohort.live -= ended.size
        if cohort.live == 0:  # spent: it plays no replica any more
            del self._cohorts[cohort.key]
        return ended

    # -- slow path -------------------------------------------------------------------

    def act(self):
        out = np.empty(self._replicas, dtype=np.int64)
        for c in self._cohorts.values():
            c.proposed = np.asarray(c.learner.act())
            out[c.rows[c.alive]] = c.proposed[c.alive]
        return out

    def update(self, actions, losses):
        ending = []
        for c in list(self._cohorts.values()):
            if self.feedback == "full":
                seen = losses[c.rows]
            else:  # dead rows learn nothing: they get 0, never another action's loss
                seen = np.zeros(c.rows.size)
                seen[c.alive] = losses[c.rows[c.alive]]
            c.learner.update(c.proposed, seen)
            c.count += (c.proposed != c.prev) & (c.prev >= 0)
            c.prev = c.proposed.astype(np.int64)
            done = c.alive & (c.count >= self.switches_per_epoch)
            if done.any():
                ending.append(self._end(c, done))
        self._t += 1
        self._restart(ending, self._t)

    def _restart(self, ending, t_next) -> _Cohort | None:
        """Start one fresh copy for the replicas in ``ending``."""
        if not ending or t_next >= self._horizon:
            return None
        rows = np.sort(np.concatenate(ending))
        self.epochs[rows] += 1
        self._log_round.append(t_next)
        self._log_size.append(rows.size)
        self._log_rows.extend(rows.tolist())
        return self._start(rows, self._horizon - t_next)

    # -- fast path -------------------------------------------------------------------

    def play_block(self, losses):
        steps = losses.shape[0]
        shared = losses.ndim == 2
        out = np.empty((self._replicas, steps), dtype=np.int64)  # replica-major: cohorts write rows
        events: list = []   # heap of (step, rows ending their epoch at that step)
        pending: dict = {}

        def play(c: _Cohort, s0: int):
            block = losses[s0:] if shared else losses[s0:, c.rows]
            proposed = np.asarray(c.learner.play_block(block)).astype(np.int64, copy=False)
            ends = kernels.epoch_ends(proposed, out, s0, c.rows, c.prev, c.count, c.alive, self.switches_per_epoch)
            for j in np.flatnonzero(ends >= 0):
                s = s0 + int(ends[j])
                if s not in pending:
                    pending[s] = []
                    heapq.heappush(events, s)
                pending[s].append((c, j))

        for c in list(self._cohorts.values()):
            play(c, 0)
        while events:
            s = heapq.heappop(events)
            ending = [self._end(c, np.array([j])) for c, j in pending.pop(s)]
            fresh = self._restart(ending, self._t + s + 1)
            if fresh is not None and s + 1 < steps:
                play(fresh, s + 1)
        self._t += steps
        return out.T


def _restart_bound(claim: Claim, k: int) -> Callable:
    def bound(horizon, n_actions, delta):
        s = claim.bound_at(horizon, n_actions)
        if s <= 0:
            return 0.0
        q = s / k
        if q >= 1.0:
            return float(max(horizon - 1, 0))
        m = max(1, math.ceil(math.log(1.0 / delta) / math.log(1.0 / q)))
        return float(min(horizon - 1, (k + 1) * m - 1))
    bound.__qualname__ = f"epoch_restart_bound(k={k})"
    return bound


def epoch_restart(learner, switches_per_epoch) -> EpochRestart:
    """``learner`` (a Learner or registry name) restarted fresh after every ``switches_per_epoch`` switches."""
    return EpochRestart(inner=learner, switches_per_epoch=switches_per_epoch)
