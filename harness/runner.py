"""run(): play a learner against an adversary over many independent replicas.

Seeding (reproducible by construction):

- ``SeedSequence(seed)`` is the root. Replicas are cut into chunks of
  ``chunk`` (default 256); chunk k uses the root's child k, i.e.
  ``SeedSequence(seed, spawn_key=(k,))``, split again into a learner stream
  and an adversary stream.
- An adversary with ``shared = True`` draws one sequence for all replicas
  from ``default_rng(SeedSequence(seed))`` (the root's own stream), handed
  afresh to every chunk, so every chunk sees the same sequence.

So results depend on (seed, replicas, chunk) only: never on ``n_jobs``, the
joblib backend, or the order in which chunks finish.

Memory: oblivious sequences arrive in time blocks of bounded size and every
metric is a running total, so memory does not grow with the horizon.
"""

from __future__ import annotations

import copy
import functools
import math
import sys
import time
from dataclasses import dataclass, field

import numpy as np

from . import kernels, validate
from .errors import AdversaryFault, BoundbreakerError, ConfigError, LearnerFault
from .protocol import FEEDBACKS, History, RoundError, action_problem, read_only

DEFAULT_CHUNK = 256
# Entries of a loss block (and of the (rounds x replicas) arrays a block
# makes) held at once: 2 MiB of float64, large enough to amortise Python
# overhead per block, small enough that a block's arrays stay near the core
# (`boundbreaker bench` measured 2^18 faster than 2^20 for every sampling
# learner). A learner whose play_block has a high fixed cost per call sets
# ``_block_scale`` to ask for blocks that many times larger; results never
# depend on the cut (draws are block-invariant).
BLOCK_ENTRIES = 1 << 18


@dataclass
class RunResult:
    """Per-replica outcomes of one run.

    ``regret[r]`` = learner's total loss - min_i total loss of action i, in
    replica r; ``switches[r]`` counts rounds t >= 1 with a_t != a_{t-1};
    ``cost_regret`` = regret + switching_cost * switches.
    """

    regret: np.ndarray
    switches: np.ndarray
    switching_cost: float = 0.0
    meta: dict = field(default_factory=dict)

    @property
    def cost_regret(self) -> np.ndarray:
        return self.regret + self.switching_cost * self.switches

    def metric(self, name: str) -> np.ndarray:
        """``"regret"``, ``"switches"`` or ``"cost_regret"`` by name."""
        if name not in ("regret", "switches", "cost_regret"):
            raise ConfigError(f"metric: must be regret, switches or cost_regret, got {name!r}")
        return getattr(self, name)

    def summary(self) -> dict:
        """Mean, median, 95th/99th percentile and max of regret and switches."""
        out = {}
        for name in ("regret", "switches", "cost_regret"):
            if name == "cost_regret" and not self.switching_cost:
                continue
            x = np.asarray(self.metric(name), dtype=float)
            out[name] = {"mean": float(x.mean()), "median": float(np.median(x)),
                         "p95": float(np.quantile(x, 0.95)), "p99": float(np.quantile(x, 0.99)),
                         "max": float(x.max())}
        return out


def chunk_seed(seed: int, index: int) -> np.random.SeedSequence:
    """The SeedSequence of replica chunk ``index``: the root's child ``index``."""
    return np.random.SeedSequence(seed, spawn_key=(index,))


def run(learner, adversary, horizon, n_actions, replicas=1000, seed=0, n_jobs=1,
        switching_cost=0.0, chunk=DEFAULT_CHUNK, progress=False, checkpoint=None) -> RunResult:
    """Play ``learner`` against ``adversary`` for ``horizon`` rounds, ``replicas`` times.

    Chunks of replicas are dispatched with joblib (``n_jobs``; any backend set
    with ``joblib.parallel_config`` works, dask included: see
    :mod:`harness.cluster`). ``progress=True`` draws a progress line on stderr
    when it is a terminal. ``checkpoint=DIR`` saves each finished chunk there
    and, on a rerun of the same call, resumes from what is saved (see
    :mod:`harness.checkpoint`).
    """
    horizon = validate.positive_int("horizon", horizon)
    n_actions = validate.positive_int("n_actions", n_actions, minimum=2)
    replicas = validate.positive_int("replicas", replicas)
    seed = validate.nonneg_int("seed", seed)
    chunk = validate.positive_int("chunk", chunk)
    switching_cost = validate.real("switching_cost", switching_cost, low=0.0)
    if isinstance(n_jobs, bool) or not isinstance(n_jobs, int) or n_jobs == 0:
        raise ConfigError(f"n_jobs: must be a non-zero integer (-1 = all cores), got {n_jobs!r}")
    _check_learner(learner)
    _check_adversary(adversary)

    started = time.perf_counter()
    bounds = {k: (k * chunk, min(replicas, (k + 1) * chunk)) for k in range(math.ceil(replicas / chunk))}
    regret = np.empty(replicas)
    switches = np.empty(replicas, dtype=np.int64)
    store, resumed = None, {}
    if checkpoint is not None:
        from .checkpoint import ChunkStore
        identity = {"learner": learner.spec(), "adversary": adversary.spec(), "horizon": horizon,
                    "n_actions": n_actions, "replicas": replicas, "seed": seed, "chunk": chunk,
                    "versions": versions()}
        store = ChunkStore(checkpoint, identity)
    todo = []
    for k, (lo, hi) in bounds.items():
        saved = store.get(f"chunk-{k:06d}", hi - lo) if store else None
        if saved is not None:
            regret[lo:hi], switches[lo:hi] = saved
            resumed[k] = True
        else:
            todo.append((k, (learner, adversary, horizon, n_actions, seed, k, hi - lo)))
    for k, reg, sw in dispatch(todo, n_jobs, progress):
        if store is not None:
            store.save(f"chunk-{k:06d}", reg, sw)  # at once: an interruption loses no finished chunk
        lo, hi = bounds[k]
        regret[lo:hi] = reg
        switches[lo:hi] = sw
    meta = {
        "seed": seed, "replicas": replicas, "chunk": chunk, "horizon": horizon,
        "n_actions": n_actions, "switching_cost": switching_cost, "n_jobs": n_jobs,
        "learner": learner.spec(), "adversary": adversary.spec(),
        "feedback": learner.feedback, "adaptive": bool(adversary.adaptive),
        "shared_sequence": bool(getattr(adversary, "shared", False)) and not adversary.adaptive,
        "kernels": kernels.BACKEND, "versions": versions(), "resumed_chunks": len(resumed),
        "wall_time_s": time.perf_counter() - started,
    }
    return RunResult(regret=regret, switches=switches, switching_cost=switching_cost, meta=meta)


def play_chunk(learner, adversary, horizon: int, n_actions: int, seed: int, index: int,
               replicas: int):
    """Play chunk ``index`` (``replicas`` replicas) and return (regret, switches).

    ``run`` calls this once per chunk; call it directly to replay the chunk a
    fault message names.
    """
    learner = copy.deepcopy(learner)  # the caller's objects are never mutated
    adversary = copy.deepcopy(adversary)
    learner_ss, adversary_ss = chunk_seed(seed, index).spawn(2)
    adversary_rng = np.random.default_rng(
        np.random.SeedSequence(seed) if getattr(adversary, "shared", False) else adversary_ss)
    where = f"in chunk {index} (replay: harness.runner.play_chunk(..., seed={seed}, index={index}, replicas={replicas}))"
    name = _name(learner)
    adv_name = _name(adversary)
    _ask(adversary.reset, (n_actions, horizon, replicas, adversary_rng), adv_name, f"in reset {where}")
    try:
        learner.reset(n_actions, horizon, replicas, np.random.default_rng(learner_ss))
    except BoundbreakerError:
        raise
    except Exception as exc:
        raise LearnerFault(f"learner {name} raised {_exc(exc)} in reset {where}") from exc
    learner._protocol_replicas = replicas
    if adversary.adaptive:
        return _play_adaptive(learner, adversary, horizon, n_actions, replicas, name, adv_name, where)
    return _play_oblivious(learner, adversary, horizon, n_actions, replicas, name, adv_name, where)


def _play_oblivious(learner, adversary, horizon, n_actions, replicas, name, adv_name, where):
    shared = bool(getattr(adversary, "shared", False))
    per_round = n_actions if shared else replicas * n_actions
    entries = BLOCK_ENTRIES * int(getattr(learner, "_block_scale", 1) or 1)
    step = int(max(1, min(horizon, entries // max(per_round, replicas))))
    last = np.full(replicas, -1, dtype=np.int64)
    played = np.zeros(replicas)
    switches = np.zeros(replicas, dtype=np.int64)
    best = np.zeros(n_actions if shared else (replicas, n_actions))
    for t0 in range(0, horizon, step):
        t1 = min(horizon, t0 + step)
        losses = _ask(adversary.losses, (t0, t1), adv_name, f"at rounds {t0}-{t1 - 1} {where}")
        want = (t1 - t0, n_actions) if shared else (t1 - t0, replicas, n_actions)
        _check_losses(losses, want, adv_name, t0, where)
        try:
            actions = learner.play_block(read_only(losses))
        except RoundError as err:
            raise _learner_fault(name, t0 + err.step, err.cause, where) from None
        except BoundbreakerError:
            raise
        except Exception as exc:
            raise LearnerFault(f"learner {name} raised {_exc(exc)} in rounds {t0}-{t1 - 1} {where}") from exc
        problem = action_problem(actions, replicas, n_actions)
        if problem is None and actions.shape != (t1 - t0, replicas):
            problem = f"returned a block of shape {actions.shape}; expected ({t1 - t0}, {replicas})"
        if problem:
            raise LearnerFault(f"learner {name} {problem} in rounds {t0}-{t1 - 1} {where}")
        actions = np.ascontiguousarray(actions, dtype=np.int64)
        if shared:
            kernels.account_shared(losses, actions, last, played, switches)
        else:
            kernels.account_per_replica(losses, actions, last, played, switches)
        best += losses.sum(axis=0)
    regret = played - (best.min() if shared else best.min(axis=1))
    return regret, switches


def _play_adaptive(learner, adversary, horizon, n_actions, replicas, name, adv_name, where):
    history = History(replicas, n_actions, memory=int(getattr(adversary, "memory", 1) or 1))
    rows = np.arange(replicas)
    bandit = learner.feedback == "bandit"
    for t in range(horizon):
        # The adversary commits first: it cannot see this round's draw.
        losses = _ask(adversary.respond, (t, history), adv_name, f"at round {t} {where}")
        _check_losses(losses, (replicas, n_actions), adv_name, t, where, per_round=True)
        try:
            actions = learner.act()
        except Exception as exc:
            raise _learner_fault(name, t, exc, where) from exc
        problem = action_problem(actions, replicas, n_actions)
        if problem is None and actions.ndim != 1:
            problem = f"returned actions of shape {actions.shape}; expected ({replicas},)"
        if problem:
            raise _learner_fault(name, t, problem, where)
        actions = actions.astype(np.int64, copy=False)
        view = read_only(losses)
        try:
            learner.update(read_only(actions), view[rows, actions] if bandit else view)
        except Exception as exc:
            raise _learner_fault(name, t, exc, where) from exc
        history.record(actions, losses)
    regret = history.played - history.cumulative.min(axis=1)
    return regret, history.switches.copy()


# -- dispatch -----------------------------------------------------------------


def _keyed_chunk(key, args):
    return (key, *play_chunk(*args))


def dispatch(calls, n_jobs, progress=False):
    """Play chunks and yield ``(key, regret, switches)`` for each ``(key, play_chunk args)``
    as it finishes (in any order when parallel). ``n_jobs == 1`` stays in-process."""
    if not calls:
        return
    if n_jobs == 1 or len(calls) == 1:
        results = (_keyed_chunk(key, args) for key, args in calls)
    else:
        from joblib import Parallel, delayed
        results = Parallel(n_jobs=n_jobs, return_as="generator_unordered")(
            delayed(_keyed_chunk)(key, args) for key, args in calls)
    bar = _Progress(len(calls)) if progress and sys.stderr.isatty() else None
    for item in results:
        if bar:
            bar.tick()
        yield item
    if bar:
        bar.close()


class _Progress:
    def __init__(self, total: int):
        self.total, self.done, self.start = total, 0, time.perf_counter()

    def tick(self):
        self.done += 1
        width = 30
        filled = int(width * self.done / self.total)
        elapsed = time.perf_counter() - self.start
        eta = elapsed / self.done * (self.total - self.done)
        sys.stderr.write(f"\r[{'#' * filled}{'.' * (width - filled)}] {self.done}/{self.total} chunks, "
                         f"{elapsed:.0f}s elapsed, ~{eta:.0f}s left ")
        sys.stderr.flush()

    def close(self):
        sys.stderr.write("\n")


# -- checks -------------------------------------------------------------------


def _check_learner(learner):
    for attr in ("reset", "act", "update", "play_block", "spec"):
        if not callable(getattr(learner, attr, None)):
            raise ConfigError(f"learner: {type(learner).__name__} lacks {attr}(); subclass harness.Learner "
                              f"or wrap a plain learner with harness.per_replica")
    if getattr(learner, "feedback", None) not in FEEDBACKS:
        raise ConfigError(f"learner: feedback must be 'full' or 'bandit', got {getattr(learner, 'feedback', None)!r}")


def _check_adversary(adversary):
    needed = ("reset", "respond") if getattr(adversary, "adaptive", False) else ("reset", "losses")
    for attr in needed + ("spec",):
        if not callable(getattr(adversary, attr, None)):
            raise ConfigError(f"adversary: {type(adversary).__name__} lacks {attr}(); subclass harness.Adversary")


def _check_losses(losses, want, adv_name, t0, where, per_round=False):
    if not isinstance(losses, np.ndarray) or losses.dtype.kind != "f":
        kind = type(losses).__name__ if not isinstance(losses, np.ndarray) else f"dtype {losses.dtype}"
        raise AdversaryFault(f"adversary {adv_name} returned {kind} at round {t0}; losses must be a float array {where}")
    if losses.shape != want:
        raise AdversaryFault(f"adversary {adv_name} returned losses of shape {losses.shape} at round {t0}; "
                             f"expected {want} {where}")
    lo, hi = losses.min(), losses.max()
    if not (lo >= 0.0 and hi <= 1.0):  # also false for NaN
        bad = np.argwhere(~((losses >= 0.0) & (losses <= 1.0)))[0]
        t = t0 if per_round else t0 + int(bad[0])
        value = losses[tuple(bad)]
        raise AdversaryFault(f"adversary {adv_name} returned loss {value} outside [0, 1] at round {t} {where}")


def _ask(method, args, adv_name, when):
    """Call an adversary; anything it raises becomes one AdversaryFault line naming it and ``when``."""
    try:
        return method(*args)
    except BoundbreakerError:
        raise
    except Exception as exc:
        raise AdversaryFault(f"adversary {adv_name} raised {_exc(exc)} {when}") from exc


def _learner_fault(name, t, cause, where) -> LearnerFault:
    text = cause if isinstance(cause, str) else f"raised {_exc(cause)}"
    return LearnerFault(f"learner {name} {text} at round {t} {where}")


def _exc(exc: BaseException) -> str:
    msg = str(exc).splitlines()[0] if str(exc) else ""
    return f"{type(exc).__name__}: {msg}" if msg else type(exc).__name__


def _name(obj) -> str:
    spec_name = getattr(obj, "registry_name", None)
    return repr(spec_name) if spec_name else type(obj).__name__


@functools.lru_cache(maxsize=1)
def _versions() -> tuple:
    import platform
    from importlib import metadata

    out = [("python", platform.python_version())]
    for pkg in ("boundbreaker", "numpy", "scipy", "joblib", "numba"):
        try:
            out.append((pkg, metadata.version(pkg)))
        except metadata.PackageNotFoundError:
            out.append((pkg, None))
    return tuple(out)


def versions() -> dict:
    """Versions of Python and the packages results depend on (looked up once per process:
    the lookup costs milliseconds, and searches call run() thousands of times)."""
    return dict(_versions())

