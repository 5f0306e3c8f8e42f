"""The fast-path kernels: compiled loops equal their numpy twins, the twins equal the
definitions they implement, and the exact samplers have the laws they claim."""

import math

import numpy as np
import pytest
from hypothesis import given, strategies as st

from harness import kernels
from harness.learners import get as get_learner
from harness.learners.experts import hedge_probabilities
from harness.protocol import Learner

from helpers import drive

compiled = pytest.mark.skipif("numba" not in kernels._IMPLS, reason="numba not installed")


def _both(name, make):
    """Kernel ``name`` from both backends on fresh copies of the same inputs: [(result, args), ...]."""
    backends = [b for b in ("numba", "numpy") if b in kernels._IMPLS]
    out = []
    for backend in backends:
        args = make()
        out.append((kernels.implementation(name, backend)(*args), args))
    return out


def _same(outs, *arg_positions):
    (a, ra), *rest = outs
    for b, rb in rest:
        assert all(np.array_equal(x, y) for x, y in zip(np.atleast_1d(a) if not isinstance(a, tuple) else a,
                                                      np.atleast_1d(b) if not isinstance(b, tuple) else b))
        for k in arg_positions:
            assert np.array_equal(ra[k], rb[k]), k


# -- inverse-CDF sampling --------------------------------------------------------------


@compiled
@pytest.mark.parametrize("n", [2, 3, 23, 24, 25, 31, 32, 33, 64, 65, 1000])
def test_sample_rows_both_strategies_equal_the_counting_rule(rng, n):
    """Around the switch from counting to searching (SMALL_N) and at powers of two, both
    backends give #{j < n-1 : cdf[j] <= u}, including u exactly on a CDF value and
    zero-probability actions (equal CDF values), which are never drawn."""
    w = rng.random((20, n))
    w[:, ::3] = 0.0
    w[:, -1] += 1e-3
    cdf = np.cumsum(w, axis=1)
    cdf /= cdf[:, -1:]
    u = rng.random((20, 77))
    u[:, :5] = cdf[:, :5] if n > 5 else u[:, :5]   # ties: u equal to a CDF value
    expected = (cdf[:, None, :-1] <= u[:, :, None]).sum(axis=2)
    for backend in ("numba", "numpy"):
        got = kernels.implementation("sample_rows", backend)(cdf, u)
        assert np.array_equal(got, expected), backend
    p = np.diff(cdf, axis=1, prepend=0.0)
    assert (p[np.arange(20)[:, None], expected] > 0).all()


# -- running totals, caps, epochs ----------------------------------------------------------


@compiled
@pytest.mark.parametrize("shape", [(1, 4), (300, 7), (64, 1)])
def test_cumulative_before_is_the_round_by_round_sum(rng, shape):
    cum0 = rng.random(shape[1])
    losses = rng.random(shape)
    (before, after), _ = _both("cumulative_before", lambda: (cum0, losses))[0]
    running = cum0.copy()
    for t in range(shape[0]):                      # the definition: add round by round
        assert np.array_equal(before[t], running)
        running = running + losses[t]
    assert np.array_equal(after, running)
    other = _both("cumulative_before", lambda: (cum0, losses))[1][0]
    assert np.array_equal(before, other[0]) and np.array_equal(after, other[1])


@compiled
@given(st.integers(1, 6), st.integers(0, 10_000))
def test_cap_block_matches_a_plain_loop(budget, seed):
    """The cap, both backends and a one-replica-at-a-time loop: identical play, never more
    than ``budget`` switches, and the proposals are followed until the budget-th switch."""
    r = np.random.default_rng(seed)
    steps, replicas = 30, 9
    proposed = r.integers(0, 3, (steps, replicas))
    last0 = r.integers(-1, 3, replicas)
    sw0 = np.where(last0 >= 0, np.minimum(r.integers(0, 3, replicas), budget), 0)  # no switch before a first action
    outs = _both("cap_block", lambda: (proposed, last0.copy(), sw0.copy(), budget))
    _same(outs, 1, 2)
    played, args = outs[0]
    for k in range(replicas):
        last, sw = last0[k], sw0[k]
        for t in range(steps):
            a = proposed[t, k]
            if sw >= budget:
                a = last
            elif last >= 0 and a != last:
                sw += 1
            assert played[t, k] == a
            last = a
        assert args[2][k] == sw <= budget


@compiled
def test_epoch_ends_finds_the_kth_switch(rng):
    steps, width, k = 50, 12, 4
    proposed = rng.integers(0, 3, (steps, width))
    rows = np.arange(width) * 2 + 1

    def make():
        alive = np.ones(width, dtype=bool)
        alive[::5] = False
        return (proposed, np.full((2 * width + 1, steps + 3), -7), 3, rows, np.full(width, -1),
                np.zeros(width, dtype=np.int64), alive, k)

    outs = _both("epoch_ends", make)
    _same(outs, 1, 4, 5)
    ends, args = outs[0]
    out, alive = args[1], args[6]
    switches = np.cumsum(proposed[1:] != proposed[:-1], axis=0)     # after rounds 1..steps-1
    for j in range(width):
        hit = np.flatnonzero(switches[:, j] >= k)
        assert ends[j] == ((hit[0] + 1) if (hit.size and alive[j]) else -1)
        col = out[rows[j], 3:]
        assert np.array_equal(col, proposed[:, j]) if alive[j] else np.all(col == -7)


# -- perturbed leaders ---------------------------------------------------------------------


@compiled
@pytest.mark.parametrize("shared", [True, False])
def test_lazy_argmin_is_the_argmin_every_round(rng, shared):
    """Lazy recomputation never changes the answer: every round it is np.argmin of the
    scores (ties included: integer-valued losses make them common), from a fresh start or
    from a cached leader that is still valid."""
    steps, replicas, n = 200, 40, 5
    table = rng.integers(0, 2, (steps, n) if shared else (steps, replicas, n)).astype(float)
    before = np.cumsum(table, axis=0) - table
    if shared:
        before = np.broadcast_to(before[:, None, :], (steps, replicas, n))
    shift = rng.integers(0, 4, (replicas, n)).astype(float)   # integer shifts: many exact ties

    def make():
        return before, shift, np.full(replicas, -1, dtype=np.int64), np.zeros(replicas)

    outs = _both("lazy_argmin", make)
    _same(outs, 2, 3)
    leaders = outs[0][0]
    assert np.array_equal(leaders, np.argmin(before - shift[None], axis=2))
    # and it was lazy: the level is the least other score at the last recomputation
    assert np.all(outs[0][1][3] >= np.sort(before[0] - shift, axis=1)[:, 1])


@compiled
def test_perturbed_leader_equals_its_definition(rng):
    steps, replicas, n, eta = 50, 20, 6, 0.8
    table = rng.random((steps, replicas, n))
    outs = _both("perturbed_leader", lambda: (table, np.zeros((replicas, n)), eta, np.random.default_rng(5)))
    _same(outs, 1)
    g = np.random.default_rng(5)
    cum = np.zeros((replicas, n))
    for t in range(steps):
        assert np.array_equal(outs[0][0][t], np.argmin(cum - g.standard_exponential((replicas, n)) / eta, axis=1))
        cum += table[t]


# -- the buffered uniform stream -----------------------------------------------------------


@given(st.lists(st.integers(0, 50), max_size=30), st.integers(1, 40))
def test_uniform_stream_reads_the_generator_in_order(takes, chunk):
    """Whatever the reads and the refill size, the values are rng.random()'s, in order."""
    stream = kernels.UniformStream(np.random.default_rng(8), chunk=chunk)
    got = [stream.take(k) for k in takes]
    flat = np.concatenate(got) if got else np.empty(0)
    assert np.array_equal(flat, np.random.default_rng(8).random(flat.size))


# -- Shrinking Dartboard: clocks against the per-round coin --------------------------------


class _TextbookDartboard(Learner):
    """Shrinking Dartboard as Geulen, Voecking and Winkler (2010) state it: every round a
    fresh coin keeps a_{t-1} with probability w_t(a)/w_{t-1}(a), else a_t ~ p_t."""

    def __init__(self, eta):
        self.eta = eta

    def reset(self, n_actions, horizon, replicas, rng):
        self._rng, self._R = rng, replicas
        self._cum = np.zeros(n_actions)
        self._prev = np.zeros(n_actions)
        self._last = np.full(replicas, -1)

    def act(self):
        beta = -math.log1p(-self.eta)
        w = np.exp(-beta * (self._cum - self._cum.min()))
        cdf = np.cumsum(w) / w.sum()
        ratio = (1 - self.eta) ** self._prev
        keep = (self._last >= 0) & (self._rng.random(self._R) < ratio[np.maximum(self._last, 0)])
        drawn = np.minimum(np.searchsorted(cdf, self._rng.random(self._R), side="right"), cdf.size - 1)
        self._last = np.where(keep, self._last, drawn)
        return self._last.copy()

    def update(self, actions, losses):
        self._prev = np.asarray(losses[0], dtype=float)
        self._cum = self._cum + self._prev


@pytest.mark.parametrize("fast", [True, False], ids=["fast", "slow"])
def test_dartboard_clocks_have_the_per_round_transition_law(rng, fast):
    """The exponential clocks are the per-round coin in law: on a fixed sequence the frequency
    of each consecutive pair (a_t, a_{t+1}) matches the exact transition law of the
    construction, P = p_t(i) [r_{t+1}(i) 1{i=j} + (1 - r_{t+1}(i)) p_{t+1}(j)] with
    r_{t+1} = (1 - eta)^{l_t} (closed form), within 5 standard errors (10 rounds x 9 pairs =
    90 cells, each false-failing with probability < 6e-7: total < 6e-5). The textbook coin
    passes the same check, so the check itself is right."""
    T, n, R, eta = 40, 3, 20000, 0.3
    losses = rng.random((T, n)) * np.array([1.0, 0.6, 0.3])
    p = hedge_probabilities(losses, -math.log1p(-eta))
    learners = [get_learner("shrinking-dartboard", eta=eta)] + ([_TextbookDartboard(eta)] if fast else [])
    for learner in learners:
        actions = drive(learner, losses, R, seed=12, fast=fast and not isinstance(learner, _TextbookDartboard))
        for t in range(5, T - 1, 3):
            r = (1 - eta) ** losses[t]
            exact = p[t][:, None] * (np.diag(r) + (1 - r)[:, None] * p[t + 1][None, :])
            freq = np.zeros((n, n))
            np.add.at(freq, (actions[t], actions[t + 1]), 1.0 / R)
            se = np.sqrt(exact * (1 - exact) / R)
            assert np.all(np.abs(freq - exact) <= 5 * se + 1e-12), (type(learner).__name__, t)


@pytest.mark.parametrize("name, params", [("shrinking-dartboard", {}), ("mw-ftpl", {}), ("exp3", {}),
                                          ("random-walk", {}), ("ftpl", {})])
def test_slow_rounds_then_fast_blocks_equal_slow_all_along(rng, name, params):
    """A learner may be driven round by round and then by blocks (the runner never mixes,
    but users may): the fast path picks up the slow path's state and plays as the slow path
    would, from the same seed (identical actions for learners whose paths draw alike)."""
    T, R, n = 90, 16, 4
    table = (rng.random((T, R, n)) < 0.5).astype(float)
    mixed = get_learner(name, **params)
    mixed.reset(n, T, R, np.random.default_rng(1))
    mixed._protocol_replicas = R
    first = Learner.play_block(mixed, table[:30])
    rest = mixed.play_block(table[30:])
    slow = drive(get_learner(name, **params), table, R, seed=1, fast=False)
    if name == "exp3":  # the paths keep weights differently (log / rescaled): same law, not same draws
        assert rest.shape == (T - 30, R) and np.array_equal(first, slow[:30])
        return
    assert np.array_equal(np.concatenate([first, rest]), slow)


# -- FTPL probabilities --------------------------------------------------------------------


@pytest.mark.parametrize("n, spread", [(7, 0.5), (40, 30.0), (200, 3.0), (300, 80.0), (1000, 0.2)])
def test_ftpl_probabilities_are_exact_with_fewer_nodes(rng, n, spread):
    """Against the plain form, a_i sum_k w_k prod_{j != i} (1 - a_j y_k) over every action with
    ceil(n/2) + 8 Gauss-Legendre nodes on [0, 1] (exact for these polynomials: an m-node rule
    integrates degree <= 2m - 1 exactly, common practice), computed here with log1p products:
    the active-set rule (few actions near the lead) and the 64-node reach-limited rule (many:
    n = 200, 1000) agree to 1e-11 relative."""
    from numpy.polynomial.legendre import leggauss

    from harness.learners.experts import FTPL_NODES, ftpl_probabilities

    cum = rng.random((3, n)) * spread
    cum[:, 0] = 0.0
    eta = 1.0
    got = ftpl_probabilities(cum, eta)
    nodes, weights = leggauss(n // 2 + 8)
    y, w = (nodes + 1) / 2, weights / 2
    a = np.exp(-eta * (cum - cum.min(axis=1, keepdims=True)))
    logs = np.log1p(-a[:, :, None] * y)
    full = a * (np.exp(logs.sum(axis=1, keepdims=True) - logs) @ w)
    full /= full.sum(axis=1, keepdims=True)
    np.testing.assert_allclose(got, full, rtol=1e-11, atol=1e-300)
    active = (a >= kernels.FTPL_TINY).sum(axis=1)
    if spread > 50:
        assert (active < n).all()                  # the inactive-action branch was exercised
    if n >= 200:
        assert (active > 2 * FTPL_NODES).all()     # and the reach-limited rule


@compiled
def test_ftpl_rows_twins_identical(rng):
    from harness.learners.experts import _gauss_legendre_01

    a = np.exp(-rng.random((6, 90)) * 60)
    a[:, 3] = 1.0
    y, w = _gauss_legendre_01(46)
    span = rng.random((6, 1)) * 0.5 + 0.5
    _same(_both("ftpl_rows", lambda: (a, span * y, span * w)))


# -- random-walk perturbation: the windowed sampler ------------------------------------------


def _brute_random_walk(losses, replicas, scale, seed):
    """The definition, step by step: Z_t = Z_{t-1} + scale N(0, 1) per action, a_t =
    argmin(L_{t-1} + Z_t) (ties: lowest index)."""
    g = np.random.default_rng(seed)
    T, n = losses.shape
    cum = np.zeros(n)
    z = np.zeros((replicas, n))
    out = np.empty((T, replicas), dtype=np.int64)
    for t in range(T):
        z += scale * g.standard_normal((replicas, n))
        out[t] = np.argmin(cum + z, axis=1)
        cum = cum + losses[t]
    return out


def _walk_branches(learner, table, replicas, seed, block):
    """Play ``table`` in blocks of ``block`` rounds and count, at each window, how many far
    walks stayed above their level (never drawn) and how many were drawn from a crossing."""
    learner.reset(table.shape[1], table.shape[0], replicas, np.random.default_rng(seed))
    learner._protocol_replicas = replicas
    out, stayed, crossed = [], 0, 0
    for t0 in range(0, table.shape[0], block):
        out.append(learner.play_block(table[t0:t0 + block]))
        length = learner._window[1]
        stayed += int((learner._first == length + 1).sum())
        crossed += int(((learner._first > 1) & (learner._first <= length)).sum())
    return np.concatenate(out), stayed, crossed


@pytest.mark.parametrize("scale, gap, near", [(0.5, 0.06, 2.0), (0.3, 0.15, -1.0), (0.5, 0.06, -4.0)])
def test_windowed_random_walk_has_the_law_of_the_definition(scale, gap, near):
    """The windowed sampler (certified far walks, inverse-Gaussian first passages, bridges)
    against the step-by-step definition, 6000 replicas each on one fixed sequence (T = 320,
    n = 4, means spread by ``gap`` so that leaders drift apart). ``near`` below the default
    calls far walks that are close to leading, so the 'crossed' branch (first passage,
    then a bridge) is taken thousands of times; the law must not depend on it.
    (1) every 16th round, each action's frequency: two-sample z within 5 SE (80 cells);
    (2) the pairs (a_t, a_{t+12}) at 6 rounds, the temporal law the windows could break:
        5 SE per cell (96 cells);
    (3) switch counts and total loss: two-sample KS, alpha = 1e-5 each.
    Cells false-fail with probability < 6e-7 each, KS 1e-5: total < 2e-4 per case."""
    R, T, n = 6000, 320, 4
    rng = np.random.default_rng(41)
    table = (rng.random((T, n)) < 0.5 + gap * (np.arange(n) - 1.5)).astype(float)
    learner = get_learner("random-walk", scale=scale)
    learner_reset = learner.reset

    def reset(*args):
        learner_reset(*args)
        learner._near = near
    learner.reset = reset
    fast, stayed, crossed = _walk_branches(learner, table, R, 5, 32)
    assert stayed > 10_000 and crossed > (100 if near > 0 else 2000), (stayed, crossed)
    brute = _brute_random_walk(table, R, scale, 6)

    def close(f1, f2):
        p = (f1 + f2) / 2
        return np.all(np.abs(f1 - f2) <= 5 * np.sqrt(2 * p * (1 - p) / R) + 1e-12)

    for t in range(0, T, 16):
        assert close(np.bincount(fast[t], minlength=n) / R, np.bincount(brute[t], minlength=n) / R), t
    for t in range(20, T - 12, 50):
        pf, pb = (np.bincount(x[t] * n + x[t + 12], minlength=n * n) / R for x in (fast, brute))
        assert close(pf, pb), t
    cost = lambda a: table[np.arange(T)[:, None], a].sum(axis=0)  # noqa: E731
    switches = lambda a: (a[1:] != a[:-1]).sum(axis=0)  # noqa: E731
    from scipy import stats
    assert stats.ks_2samp(switches(fast), switches(brute)).pvalue > 1e-5
    assert stats.ks_2samp(cost(fast), cost(brute)).pvalue > 1e-5


@compiled
@pytest.mark.parametrize("shared", [True, False])
def test_walk_windows_twins_identical(rng, shared):
    """The compiled sampler and the same source run by the interpreter: same draws, same play
    (blocks cut mid-window, buffers refilled between calls)."""
    T, R, n = 70, 6, 5
    table = (rng.random((T, n) if shared else (T, R, n)) < 0.4 + 0.05 * np.arange(n)).astype(float)
    plays = []
    for backend in ("numba", "numpy"):
        learner = get_learner("random-walk", scale=0.4)
        learner.reset(n, T, R, np.random.default_rng(2))
        learner._protocol_replicas = R
        saved = kernels.walk_windows
        kernels.walk_windows = kernels.implementation("walk_windows", backend)
        try:
            plays.append(np.concatenate([learner.play_block(table[t0:t0 + 13]) for t0 in range(0, T, 13)]))
        finally:
            kernels.walk_windows = saved
    assert np.array_equal(plays[0], plays[1])


# -- adversaries' kernels ------------------------------------------------------------------


def _sequence_case(name, rng):
    """(args factory, positions of in-place state) for an adversary kernel on 40 rows."""
    rows, steps = 40, 90
    levels = rng.integers(-4, 5, rows)
    if name == "pareto_walk":
        u = rng.random((steps, rows))
        return lambda: (u, np.zeros(rows, np.int64), np.zeros(rows, np.int64), np.full(rows, -1, np.int64),
                        2.0, 1.1, 9), (1, 2, 3)
    if name == "tie_walk":
        u = rng.random((steps, rows, 2))
        return lambda: (u, np.zeros(rows, np.int64), np.zeros(rows, np.int64), np.ones(rows, bool),
                        levels.copy(), 3.0, 1.2, 91, 4), (1, 2, 3, 4)
    if name == "near_tie":
        u = rng.random((steps, rows, 6))
        return lambda: (u, 0.7, np.zeros((rows, 3))), (2,)
    u = rng.random((steps, rows, 7))
    return lambda: (u, np.zeros(rows, np.int64), np.full(rows, -1, np.int64), 0.5, 0.2, 3.0, 1.2, 91), (1, 2)


@compiled
@pytest.mark.parametrize("name", ["pareto_walk", "tie_walk", "near_tie", "regime_shift"])
def test_sequence_kernels_twins_identical(rng, name):
    """The adversaries' compiled loops against their numpy twins (the regime-shift twin is the
    vectorised segment schedule, an independent formulation): same output and state."""
    make, state = _sequence_case(name, rng)
    outs = _both(name, make)
    (a, ra), (b, rb) = outs
    for x, y in zip(a if isinstance(a, tuple) else (a,), b if isinstance(b, tuple) else (b,)):
        assert np.array_equal(x, y)
    for k in state:
        assert np.array_equal(ra[k], rb[k]), k
