"""Small test subjects shared by several test modules (not part of the product)."""

import numpy as np

from harness import Adversary, Learner


class Chase(Adversary):
    """Adaptive test adversary: loss 1 on the action each replica played last."""

    adaptive = True

    def __init__(self):
        pass

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._replicas = n_actions, replicas

    def respond(self, t, history):
        out = np.zeros((self._replicas, self._n))
        seen = history.last_action >= 0
        out[np.flatnonzero(seen), history.last_action[seen]] = 1.0
        return out


class Fixed(Adversary):
    """A given (T, n) loss array, shared by all replicas."""

    shared = True

    def __init__(self, table):
        self.table = np.asarray(table, dtype=float)

    def reset(self, n_actions, horizon, replicas, rng):
        pass

    def losses(self, t0, t1):
        return self.table[t0:t1]


class Faulty(Learner):
    """Plays action 0 until ``at``, then misbehaves as ``how`` says."""

    def __init__(self, how, at=3, where="act"):
        self.how, self.at, self.where = how, at, where

    def reset(self, n_actions, horizon, replicas, rng):
        self._t, self._r, self._n = 0, replicas, n_actions

    def act(self):
        a = np.zeros(self._r, dtype=np.int64)
        if self._t == self.at and self.where == "act":
            if self.how == "raise":
                raise ZeroDivisionError("boom")
            if self.how == "shape":
                return np.zeros(self._r + 1, dtype=np.int64)
            if self.how == "float":
                return a.astype(float)
            if self.how == "nan":
                return np.full(self._r, np.nan)
            if self.how == "range":
                a[-1] = self._n
                return a
            if self.how == "negative":
                a[0] = -1
                return a
            if self.how == "list":
                return [0] * self._r
        return a

    def update(self, actions, losses):
        if self._t == self.at and self.where == "update":
            raise KeyError("lost state")
        self._t += 1


def drive(learner, table, replicas, seed=0, fast=True):
    """Reset ``learner`` and play the whole (T, n) or (T, replicas, n) table in one block;
    returns the actions (T, replicas). ``fast=False`` uses the act/update loop."""
    table = np.asarray(table, dtype=float)
    learner.reset(table.shape[-1], table.shape[0], replicas, np.random.default_rng(seed))
    learner._protocol_replicas = replicas
    view = table.view()
    view.flags.writeable = False
    return learner.play_block(view) if fast else Learner.play_block(learner, view)


def run_cli(capsys, *argv):
    """Run the command line in-process: (exit code, stdout, stderr). Arguments may be paths."""
    from harness.cli import main

    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err
