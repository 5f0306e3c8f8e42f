"""The learners' compiled kernels and their pure-numpy twins agree bit for bit
(actions exactly; float state exactly or, where exp is involved, to 1e-12)."""

import numpy as np
import pytest

from harness import kernels

pytestmark = pytest.mark.skipif("numba" not in kernels._IMPLS, reason="numba not installed")


def _both(name, make):
    """Run kernel ``name`` on fresh copies of the same inputs in both backends."""
    outs = []
    for backend in ("numba", "numpy"):
        args = make()
        outs.append((kernels.implementation(name, backend)(*args), args))
    return outs


@pytest.mark.parametrize("shared", [True, False])
def test_lazy_leader_identical(rng, shared):
    steps, replicas, n = 60, 50, 6
    table = rng.random((steps, n) if shared else (steps, replicas, n)) * 0.3
    before = np.cumsum(table, axis=0) - table
    if shared:
        before = np.broadcast_to(before[:, None, :], (steps, replicas, n))
    g = rng.random((replicas, n)) * 2.0

    def make():
        leader = np.full(replicas, -1, dtype=np.int64)
        leader[:5] = 1
        return before, g, 2.0, leader, np.full(replicas, 0.5)

    (a, ra), (b, rb) = _both("lazy_leader", make)
    assert np.array_equal(a, b) and np.array_equal(ra[3], rb[3]) and np.array_equal(ra[4], rb[4])
    # the leader is the argmin of the perturbed points every round (closed form)
    d = g[None] - before
    x = before + (d - 2.0 * np.floor(d / 2.0))
    assert np.array_equal(a[:, 5:], np.argmin(x, axis=2)[:, 5:])  # rows 0-4 began from a made-up state
    # lazy: the leader changes only in rounds where its own point moved (the others only move up)
    prev = a[:-1, 5:, None]
    now = np.take_along_axis(x[1:, 5:], prev, axis=2)
    then = np.take_along_axis(x[:-1, 5:], prev, axis=2)
    still = np.isclose(now, then, rtol=0, atol=1e-12)[:, :, 0]
    assert np.all(a[1:, 5:][still] == a[:-1, 5:][still]) and still.mean() > 0.5


def _play_dartboard(backend, shared, data, state, steps, replicas, buffer_size):
    """Run a dartboard kernel to the end, refilling a UniformStream of ``buffer_size`` as it asks."""
    rng = np.random.default_rng(4)
    stream = kernels.UniformStream(rng, chunk=buffer_size)
    out = np.empty((steps, replicas), dtype=np.int64)
    name = "dartboard_shared" if shared else "dartboard_per_replica"
    t, calls = 0, 0
    while t < steps:
        stream.reserve(2 * replicas)
        t = kernels.implementation(name, backend)(*data, t, out, state[0], stream.buffer, stream.position,
                                                  *state[1:])
        calls += 1
    return out, calls


@pytest.mark.parametrize("shared", [True, False])
def test_dartboard_identical(rng, shared):
    """Both backends consume the same uniforms in the same order and play the same actions,
    and the buffer's size (how often the kernel stops for a refill) changes nothing."""
    steps, replicas, n, beta = 80, 64, 5, 0.4
    table = rng.random((steps, n) if shared else (steps, replicas, n))
    results = []
    for backend in ("numba", "numpy"):
        for buffer_size in (2 * replicas, 5000):
            last = np.full(replicas, -1, dtype=np.int64)
            last[::3] = 2  # some replicas start mid-game, holding action 2
            state = (beta, last, np.zeros(replicas), np.full(replicas, 0.7), np.zeros(replicas, dtype=np.int64))
            data = (np.cumsum(table, axis=0) - table,) if shared else (table, np.zeros((replicas, n)))
            out, calls = _play_dartboard(backend, shared, data, state, steps, replicas, buffer_size)
            results.append((out, state, calls))
    (a, ra, small_calls), (b, rb, big_calls), (c, rc, _), (d, rd, _) = results
    assert small_calls > big_calls >= 1   # the small buffer made the kernel stop and resume
    for other, rother in ((b, rb), (c, rc), (d, rd)):
        assert np.array_equal(a, other)
        for x, y in zip(ra[1:], rother[1:]):  # last, mark, clock, redraws
            np.testing.assert_allclose(x, y, rtol=1e-12)
    # a change of action needs a redraw
    assert np.all(ra[-1] >= (a[1:] != a[:-1]).sum(axis=0)) and ra[-1].sum() > 0


def test_dartboard_clock_rule_on_a_designed_sequence():
    """Closed form of the clock rule: every action loses 0.3 per round, so a replica that drew
    clock c at round s redraws at round s + max(1, ceil(c / 0.3)) (its action's loss since
    the draw reaches c); replayed by hand from the same uniforms."""
    steps, replicas, n, beta = 40, 6, 3, 0.5
    before = np.arange(steps)[:, None] * np.full((1, n), 0.3)
    for backend in ("numba", "numpy"):
        last, mark, clock = np.full(replicas, -1, dtype=np.int64), np.zeros(replicas), np.zeros(replicas)
        redraws = np.zeros(replicas, dtype=np.int64)
        _play_dartboard(backend, True, (before,), (beta, last, mark, clock, redraws), steps, replicas, 1000)
        u = np.random.default_rng(4).random(1000)   # replay: two uniforms per draw, replicas in order
        due = np.zeros(replicas, dtype=np.int64)
        count, k = np.full(replicas, -1), 0
        for t in range(steps):
            for r in np.flatnonzero(due == t):
                c = -np.log1p(-u[k + 1]) / beta
                k += 2
                due[r] = t + max(1, int(np.ceil(c / 0.3 - 1e-9)))
                count[r] += 1
        assert np.array_equal(redraws, count), backend
        assert count.sum() > replicas  # the design makes clocks run out


@pytest.mark.parametrize("gain, block, mix, ix", [(True, 1, 0.1, 0.0), (False, 1, 0.0, 0.05), (True, 4, 0.2, 0.0)])
def test_bandit_weights_identical(rng, gain, block, mix, ix):
    steps, replicas, n = 57, 40, 7
    losses = rng.random((steps, replicas, n))
    u = rng.random((-(-steps // block), replicas))  # one row per block start

    def make():
        return (losses, np.ones((n, replicas)), u, np.zeros(replicas, dtype=np.int64), np.zeros(replicas),
                np.zeros(replicas), np.array([0], dtype=np.int64), block, mix, 0.3, ix, gain)

    (a, ra), (b, rb) = _both("bandit_weights", make)
    # exp may differ in the last bit between libm and numpy's SIMD loop; a draw exactly on
    # a boundary could then differ, with probability ~1e-13 per draw.
    assert np.array_equal(a, b)
    np.testing.assert_allclose(ra[1], rb[1], rtol=1e-12)
    np.testing.assert_allclose(ra[4], rb[4], rtol=1e-12)
    assert ra[6][0] == rb[6][0] == steps % block
    full = a[:block * (steps // block)].reshape(-1, block, replicas)
    assert np.all(full[:, 1:] == full[:, :1])  # one action per block
    # p_cur is the drawn action's probability (1 - mix) w / W + mix / n, from the weights at
    # the last block start: redo the last update backwards from the final weights
    if steps % block == 0:
        w = rb[1].copy()
        last = a[-1]
        y = losses[steps - block:, np.arange(replicas), :][np.arange(block)[:, None], np.arange(replicas),
                                                             last].sum(axis=0) / block
        factor = np.exp(0.3 * (1 - y) / (rb[4] + ix)) if gain else np.exp(-0.3 * y / (rb[4] + ix))
        w[last, np.arange(replicas)] /= factor
        p = (1 - mix) * w / w.sum(axis=0) + mix / n
        np.testing.assert_allclose(rb[4], p[last, np.arange(replicas)], rtol=1e-9)


def test_bandit_weights_reads_only_the_played_loss(rng):
    """NaN in every unplayed entry changes nothing: the kernel never reads them."""
    steps, replicas, n = 30, 20, 5
    losses = rng.random((steps, replicas, n))
    u = rng.random((steps, replicas))
    args = lambda table: (table, np.ones((n, replicas)), u, np.zeros(replicas, dtype=np.int64),  # noqa: E731
                          np.zeros(replicas), np.zeros(replicas), np.array([0], dtype=np.int64), 1, 0.1, 0.2,
                          0.0, True)
    for backend in ("numba", "numpy"):
        first = args(losses)
        a = kernels.implementation("bandit_weights", backend)(*first)
        masked = np.full_like(losses, np.nan)
        idx = (np.arange(steps)[:, None], np.arange(replicas)[None], a)
        masked[idx] = losses[idx]
        second = args(masked)
        b = kernels.implementation("bandit_weights", backend)(*second)
        assert np.array_equal(a, b) and np.array_equal(first[1], second[1])
