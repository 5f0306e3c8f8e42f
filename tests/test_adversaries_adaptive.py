"""Adaptive adversaries: no leak of round t's action, and the behaviour each one promises."""

import math

import numpy as np
import pytest

import adversaries
from harness import Adversary, Learner, run
from harness.learners import get as get_learner

ADAPTIVE = [n for n in adversaries.names() if adversaries.get(n).adaptive]


class Announcer(Learner):
    """Draws round t's action (uniform) one round early and posts it where anyone can read it.

    If an adversary could see round t's draw before committing round t's
    losses, it could load exactly that action. The post is a class attribute
    (the runner deep-copies learners, not classes). Every round it records
    sum_r [l_t(a_t) - mean_i l_t(i)] per replica: zero in expectation unless
    the losses depend on a_t.
    """

    posted = None
    excess = []

    def __init__(self):
        pass

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._r, self._rng = n_actions, replicas, rng
        type(self).posted = rng.integers(0, n_actions, replicas)
        type(self).excess = [np.zeros(replicas)]

    def act(self):
        return type(self).posted.copy()

    def update(self, actions, losses):
        rows = np.arange(self._r)
        type(self).excess[0] += losses[rows, actions] - losses.mean(axis=1)
        type(self).posted = self._rng.integers(0, self._n, self._r)


class Peeker(Adversary):
    """A deliberately leaking adversary: loss 1 on the action the Announcer will play."""

    adaptive = True

    def __init__(self):
        pass

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._r = n_actions, replicas

    def respond(self, t, history):
        out = np.zeros((self._r, self._n))
        out[np.arange(self._r), Announcer.posted] = 1.0
        return out


def _excess(adversary, horizon=200, n=4, replicas=400, seed=0):
    run(Announcer(), adversary, horizon, n, replicas=replicas, seed=seed, chunk=replicas)
    return Announcer.excess[0]


def test_the_leak_test_catches_a_leaking_adversary():
    """Control: reading the posted action gives excess (1 - 1/n) per round, far outside the null band."""
    excess = _excess(Peeker())
    assert np.allclose(excess, 200 * (1 - 1 / 4))


@pytest.mark.parametrize("name", ADAPTIVE + ["mix", "concat"])
def test_adaptive_adversaries_cannot_see_the_current_action(name):
    """Under no leak, E[l_t(a_t) - mean_i l_t(i)] = 0 for an action drawn independently of l_t.

    Per replica the excess is a sum of 200 terms in [-1, 1] with mean 0 and
    it is independent across replicas; the mean of 400 replicas has standard
    deviation at most sqrt(200/400) = 0.71. The check |mean| < 5 * 0.71 has
    false-failure probability below 1e-6 (Hoeffding: 2 exp(-2 (5*0.71*400)^2
    / (400 * 200 * 4)) ~ 3e-6 per test; seeds fixed, so it is deterministic).
    The leaking control scores 150.
    """
    params = {"parts": ["chase", "leader-flip", "tie-keeper"]} if name in ("mix", "concat") else {}
    excess = _excess(adversaries.get(name, **params))
    assert abs(excess.mean()) < 5 * math.sqrt(200 / 400)


class Cycle(Learner):
    """Test subject: plays (t * step) mod n in round t -- step 0 stays put, step 1 moves every round."""

    def __init__(self, step):
        self.step = step

    def reset(self, n_actions, horizon, replicas, rng):
        self._t, self._n, self._r = 0, n_actions, replicas

    def act(self):
        return np.full(self._r, (self._t * self.step) % self._n, dtype=np.int64)

    def update(self, actions, losses):
        self._t += 1


def test_chase_charges_staying_and_spares_moving():
    """Closed forms by hand (T = 101, n = 3): staying on action 0 pays `high` in rounds 1..T-1 while
    actions 1, 2 lose `low`: regret (T-1)(high-low). Moving every round always pays `low`; each action
    was last-played in about a third of the rounds, so the best one lost at least as much: regret <= 0."""
    adv = adversaries.get("chase", high=0.9, low=0.2)
    stay = run(Cycle(0), adv, 101, 3, replicas=2)
    np.testing.assert_allclose(stay.regret, 100 * (0.9 - 0.2))
    move = run(Cycle(1), adv, 101, 3, replicas=2)
    assert np.all(move.regret <= 1e-9) and np.all(move.switches == 100)


def test_leader_flip_gives_ftl_regret_t_times_1_minus_1_over_n():
    """Every round FTL plays the current leader, which takes loss 1: FTL loses T; the n actions share
    the T losses round-robin, so the best loses floor(T/n): regret T - floor(T/n) (closed form)."""
    T, n = 103, 4
    res = run(get_learner("ftl"), adversaries.get("leader-flip"), T, n, replicas=2)
    assert np.all(res.regret == T - T // n)


@pytest.mark.parametrize("margin", [0.5, 1.0, 2.5])
def test_tie_keeper_keeps_the_two_leaders_within_the_margin(margin):
    """The two smallest cumulative losses never differ by more than max(margin, 1)."""
    class Record(Learner):
        gaps = []

        def __init__(self):
            pass

        def reset(self, n_actions, horizon, replicas, rng):
            self._cum, self._rng, self._n, self._r = np.zeros((replicas, n_actions)), rng, n_actions, replicas
            type(self).gaps = []

        def act(self):
            return self._rng.integers(0, self._n, self._r)

        def update(self, actions, losses):
            self._cum += losses
            top = np.sort(self._cum, axis=1)[:, :2]
            type(self).gaps.append((top[:, 1] - top[:, 0]).max())

    run(Record(), adversaries.get("tie-keeper", margin=margin), 300, 4, replicas=20, seed=1)
    assert max(Record.gaps) <= max(margin, 1.0) + 1e-12
    res = run(get_learner("ftl"), adversaries.get("tie-keeper", margin=margin), 300, 3, replicas=2)
    # traced by hand at margin 1: a 4-round cycle where FTL pays 3 and each leader 2, regret T/4;
    # margin 1/2 never loads the runner-up, so FTL pays every round (regret T/2, by hand);
    # margin 5/2: T/6 is the value measured once (a regression pin, not derived)
    assert np.all(res.regret == {0.5: 150, 1.0: 75, 2.5: 50}[margin])


class Budgeted(Learner):
    """Test subject: FTL that stops switching after `budget` switches (at most S switches, always)."""

    def __init__(self, budget):
        self.budget = budget

    def reset(self, n_actions, horizon, replicas, rng):
        self._cum = np.zeros((replicas, n_actions))
        self._last = np.full(replicas, -1)
        self._used = np.zeros(replicas, dtype=int)

    def act(self):
        want = np.argmin(self._cum, axis=1)
        keep = (self._last >= 0) & ((self._used >= self.budget) | (want == self._last))
        a = np.where(keep, self._last, want)
        self._used += (self._last >= 0) & (a != self._last)
        self._last = a
        return a.astype(np.int64)

    def update(self, actions, losses):
        self._cum += losses


def test_budget_drain_forces_linear_regret_once_the_budget_is_spent():
    """A learner capped at S switches is chased until it has spent S - reserve, then the best action
    moves to one it has played least; with no switches left it pays 1 per remaining round."""
    T, S = 400, 10
    res = run(Budgeted(S), adversaries.get("budget-drain", budget=S, reserve=0), T, 3, replicas=4)
    assert np.all(res.switches == S)
    assert np.all(res.regret >= T - 3 * S - 5)  # ~S rounds of chase, then loss 1 per round vs 0
