"""Per-replica values behind a certificate, by exact replay.

A :class:`~harness.certify.Certificate` keeps summaries per cell, not every
replica's metric. The report gets the distributions back by replaying: the
cells of one (adversary, T, n) group share one stream of replicas, and those
replicas are exactly ``harness.run(learner, adversary, T, n,
replicas=replicas_run, seed=cell.seed, chunk=cell.chunk)`` (see
:mod:`harness.certify`). So the report re-runs each group from its recorded
seed and gets the very replicas the verdicts rest on, bit for bit.

Replaying costs what the certification cost. ``limit`` caps it: a group that
played more than ``limit`` replicas is replayed on its first
``floor(limit / chunk)`` whole chunks, which are still exactly the first
replicas the certification played (chunk k depends only on the seed and k).

The learner and adversaries are the caller's objects when given (``certify
--report`` passes the ones it certified); otherwise they are rebuilt from
the certificate's specs, registered names only: a certificate may come from
anywhere, and boundbreaker never imports code named in a file (the rule of
:mod:`harness.search.replay`). Whatever cannot be had is reported, with what
to pass instead.

The replay is checked against the certificate: for every cell whose
verdict rests on replayed replicas, the count of values above the bound must
equal the recorded ``violations``, and every recorded replica that was
replayed must give its recorded value exactly. A mismatch (the learner,
adversary or library changed since the certificate was written) is reported,
never hidden.

:func:`trace_replica` replays one recorded replica while recording its loss
sequence and its actions, for the counterexample plots.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass, field

import numpy as np

from ..errors import BoundbreakerError, ConfigError
from ..protocol import Adversary, Learner
from ..runner import play_chunk, run, versions

DEFAULT_LIMIT = 4096


@dataclass
class GroupValues:
    """Replayed values of one (adversary, horizon, n_actions) group."""

    adversary_index: int
    adversary_label: str
    horizon: int
    n_actions: int
    seed: int
    regret: np.ndarray
    switches: np.ndarray
    switching_cost: float
    replicas_run: int            # what the certification played
    problems: list = field(default_factory=list)

    @property
    def replicas(self) -> int:
        return int(self.regret.size)

    def values(self, metric: str) -> np.ndarray:
        if metric == "regret":
            return self.regret
        if metric == "switches":
            return self.switches.astype(float)
        return self.regret + self.switching_cost * self.switches


@dataclass
class Distributions:
    """What the report knows of each group's replicas (or why it does not)."""

    groups: dict
    method: str
    problems: list               # where the replay does not reproduce the certificate
    limit: int
    skipped: str | None = None   # why nothing was replayed
    notes: list = field(default_factory=list)  # groups left out, versions that differ

    def group(self, cell) -> GroupValues | None:
        return self.groups.get((cell.adversary_index, cell.horizon, cell.n_actions))

    @property
    def consistent(self) -> bool:
        return not self.problems and self.skipped is None


METHOD = ("Per-replica values were obtained by exact replay: each (adversary, T, n) group was re-run with "
          "harness.run from the seed, chunk size and replica count recorded in the certificate, which gives the "
          "very replicas certification played. The replay was checked against the certificate (violation counts "
          "and recorded replica values).")


@dataclass
class Subjects:
    """The learner and the adversaries (by position in the battery) a report replays, or why not."""

    learner: object
    adversaries: dict
    learner_problem: str | None = None
    adversary_problems: dict = field(default_factory=dict)


def subjects(cert, learner=None, adversaries=None) -> Subjects:
    """The caller's learner and adversaries (a list in battery order), else rebuilt from registered names."""
    from ..learners import REGISTRY as LEARNERS
    import adversaries as library

    problem = None
    if learner is None:
        try:
            learner = LEARNERS.from_file_spec(cert.learner, "boundbreaker report --learner NAME|module:Class")
        except BoundbreakerError as exc:
            problem = f"the learner was not rebuilt ({exc})"
    given = {}
    if adversaries is not None:
        adversaries = list(adversaries)
        if len(adversaries) != len(cert.adversaries):
            raise ConfigError(f"adversaries: give one per adversary of the certificate ({len(cert.adversaries)}), "
                              f"got {len(adversaries)}")
        given = dict(enumerate(adversaries))
    rebuilt, problems = {}, {}
    for a, spec in enumerate(cert.adversaries):
        if a in given:
            rebuilt[a] = given[a]
            continue
        spec = {k: spec[k] for k in ("name", "class", "params") if k in spec}
        try:
            library.REGISTRY.check_file_spec(spec, "pass adversaries= to harness.report.write_report")
            rebuilt[a] = library.from_spec(spec)
        except BoundbreakerError as exc:
            problems[a] = f"adversary {cert.adversaries[a].get('label', a)!r} was not rebuilt ({exc})"
    return Subjects(learner, rebuilt, problem, problems)


def replay_distributions(cert, learner=None, limit: int = DEFAULT_LIMIT, n_jobs: int = 1,
                         adversaries=None) -> Distributions:
    """Replay every group of ``cert`` (see the module docstring).

    ``learner`` and ``adversaries`` (a list in battery order) default to the
    ones rebuilt from the certificate's registered names (:func:`subjects`);
    a :class:`Subjects` may be passed as ``learner``. Groups whose adversary
    cannot be had are left out and listed in ``problems``; without a
    learner nothing is replayed and ``skipped`` says why.
    """
    if isinstance(limit, bool) or not isinstance(limit, int) or limit < 1:
        raise ConfigError(f"limit: must be a positive integer number of replicas, got {limit!r}")
    subs = learner if isinstance(learner, Subjects) else subjects(cert, learner, adversaries)
    if subs.learner is None:
        return Distributions({}, METHOD, [], limit, skipped=subs.learner_problem)
    problems, notes = [], [subs.adversary_problems[a] + "; its groups are left out"
                           for a in sorted(subs.adversary_problems)]
    now = versions()
    if now != cert.versions:
        changed = sorted(k for k in set(now) | set(cert.versions) if now.get(k) != cert.versions.get(k))
        notes.append("library versions differ from the certificate's (" + ", ".join(
            f"{k} {cert.versions.get(k)} -> {now.get(k)}" for k in changed) + "); the replay may not reproduce it")
    groups = {}
    first_cells = {}
    for c in cert.cells:
        first_cells.setdefault((c.adversary_index, c.horizon, c.n_actions), c)
    for key, cell in first_cells.items():
        adversary = subs.adversaries.get(cell.adversary_index)
        if adversary is None:
            continue
        replicas = cell.replicas_run
        if replicas > limit:
            replicas = max(cell.chunk, (limit // cell.chunk) * cell.chunk)
        result = run(subs.learner, adversary, cell.horizon, cell.n_actions, replicas=replicas, seed=cell.seed,
                     chunk=cell.chunk, n_jobs=n_jobs)
        g = GroupValues(cell.adversary_index, cell.adversary_label, cell.horizon, cell.n_actions, cell.seed,
                        result.regret, result.switches, cert.switching_cost, cell.replicas_run)
        _check(cert, g)
        problems.extend(g.problems)
        groups[key] = g
    if not groups:
        return Distributions({}, METHOD, problems, limit, notes=notes, skipped="no adversary could be rebuilt: "
                             + "; ".join(subs.adversary_problems.values()))
    return Distributions(groups, METHOD, problems, limit, notes=notes)


def _check(cert, g: GroupValues):
    for c in cert.cells:
        if (c.adversary_index, c.horizon, c.n_actions) != (g.adversary_index, g.horizon, g.n_actions):
            continue
        values = g.values(c.metric)
        if c.replicas <= g.replicas:
            seen = int(np.count_nonzero(values[:c.replicas] > c.bound))
            if seen != c.violations:
                g.problems.append(f"cell {c.index} ({c.where}): replay gives {seen} violations in the first "
                                  f"{c.replicas} replicas, the certificate {c.violations}")
        for r in c.replay:
            if r["replica"] < g.replicas and float(values[r["replica"]]) != r["value"]:
                g.problems.append(f"cell {c.index} ({c.where}): replica {r['replica']} replays to "
                                  f"{float(values[r['replica']]):.6g}, the certificate recorded {r['value']:.6g}")


# -- one replica, recorded -----------------------------------------------------------------------


class _Sink:
    """Shared by a recorder and its deep copies (play_chunk copies what it is given)."""

    def __init__(self):
        self.items = []


class _RecordingLearner(Learner):
    def __init__(self, inner, row, sink):
        self.inner, self.row, self.sink = inner, row, sink
        self.feedback = inner.feedback

    def __deepcopy__(self, memo):
        return _RecordingLearner(copy.deepcopy(self.inner, memo), self.row, self.sink)

    def spec(self):
        return self.inner.spec()

    def reset(self, n_actions, horizon, replicas, rng):
        self.inner.reset(n_actions, horizon, replicas, rng)
        self.inner._protocol_replicas = replicas

    def act(self):
        actions = self.inner.act()
        self.sink.items.append(np.asarray(actions)[self.row:self.row + 1].copy())
        return actions

    def update(self, actions, losses):
        self.inner.update(actions, losses)

    def play_block(self, losses):
        actions = self.inner.play_block(losses)
        self.sink.items.append(np.asarray(actions)[:, self.row].copy())
        return actions


class _RecordingAdversary(Adversary):
    def __init__(self, inner, row, sink):
        self.inner, self.row, self.sink = inner, row, sink
        self.adaptive = bool(inner.adaptive)
        self.memory = getattr(inner, "memory", 1)
        if hasattr(inner, "shared"):
            self.shared = inner.shared

    def __deepcopy__(self, memo):
        return _RecordingAdversary(copy.deepcopy(self.inner, memo), self.row, self.sink)

    def spec(self):
        return self.inner.spec()

    def reset(self, n_actions, horizon, replicas, rng):
        self.inner.reset(n_actions, horizon, replicas, rng)

    def losses(self, t0, t1):
        block = self.inner.losses(t0, t1)
        self.sink.items.append(np.array(block if block.ndim == 2 else block[:, self.row, :]))
        return block

    def respond(self, t, history):
        block = self.inner.respond(t, history)
        self.sink.items.append(np.array(block[self.row:self.row + 1, :]))
        return block


@dataclass(frozen=True)
class ReplicaTrace:
    """One replica's loss sequence (T, n), actions (T,), regret and switches, exactly as played."""

    losses: np.ndarray
    actions: np.ndarray
    regret: float
    switches: int


def trace_replica(learner, adversary, horizon: int, n_actions: int, seed: int, index: int, replicas: int,
                  row: int) -> ReplicaTrace:
    """Replay chunk ``index`` like :func:`harness.runner.play_chunk` and record row ``row``.

    The learner and adversary are wrapped in recorders that pass every call
    through, so the chunk plays exactly as it did; only the recorded row's
    losses and actions are kept (O(T n) memory).
    """
    if not 0 <= row < replicas:
        raise ConfigError(f"row: must lie in [0, {replicas}), got {row}")
    actions_sink, losses_sink = _Sink(), _Sink()
    regret, switches = play_chunk(_RecordingLearner(learner, row, actions_sink),
                                  _RecordingAdversary(adversary, row, losses_sink),
                                  horizon, n_actions, seed, index, replicas)
    losses = np.concatenate(losses_sink.items, axis=0)
    actions = np.concatenate([np.ravel(a) for a in actions_sink.items]).astype(np.int64)
    return ReplicaTrace(losses=losses, actions=actions, regret=float(regret[row]), switches=int(switches[row]))


def trace_cell(cell, learner, adversary, which: int = 0) -> ReplicaTrace:
    """The recorded replica ``which`` of a certificate cell, traced."""
    if not cell.replay:
        raise ConfigError(f"{cell.where}: no replica was recorded for this cell")
    r = cell.replay[which]
    return trace_replica(learner, adversary, cell.horizon, cell.n_actions, cell.seed, r["chunk_index"],
                         r["chunk_replicas"], r["row"])


__all__ = ["GroupValues", "Distributions", "Subjects", "subjects", "replay_distributions", "ReplicaTrace", "trace_replica", "trace_cell",
           "DEFAULT_LIMIT", "METHOD"]
