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


@pytest.mark.parametrize("shared", [True, False])
def test_dartboard_identical(rng, shared):
    steps, replicas, n = 40, 64, 5
    shape = (steps, replicas, n)
    ratio = rng.random((steps, n) if shared else shape)
    w = rng.random((steps, n) if shared else shape)
    cdf = np.cumsum(w, axis=-1) / w.sum(axis=-1, keepdims=True)
    if shared:
        ratio = np.broadcast_to(ratio[:, None, :], shape)
        cdf = np.broadcast_to(cdf[:, None, :], shape)
    uk, ud = rng.random((steps, replicas)), rng.random((steps, replicas))

    def make():
        last = np.full(replicas, -1, dtype=np.int64)
        last[::3] = 2
        return ratio, cdf, uk, ud, last, np.zeros(replicas, dtype=np.int64)

    (a, ra), (b, rb) = _both("dartboard", make)
    assert np.array_equal(a, b) and np.array_equal(ra[4], rb[4]) and np.array_equal(ra[5], rb[5])
    # keep iff u_keep < ratio[previous action] (closed form of the rule)
    prev = np.concatenate([ra[4][None] * 0 + make()[4][None], a[:-1]], axis=0)
    kept = (prev >= 0) & (uk < np.take_along_axis(ratio, np.maximum(prev, 0)[:, :, None], 2)[:, :, 0])
    assert np.all(a[kept] == prev[kept])


@pytest.mark.parametrize("gain, block, mix, ix", [(True, 1, 0.1, 0.0), (False, 1, 0.0, 0.05), (True, 4, 0.2, 0.0)])
def test_bandit_weights_identical(rng, gain, block, mix, ix):
    steps, replicas, n = 57, 40, 7
    losses = rng.random((steps, replicas, n))
    u = rng.random((steps, replicas))

    def make():
        return (losses, np.ones((replicas, n)), u, np.zeros(replicas, dtype=np.int64), np.zeros(replicas),
                np.array([0], dtype=np.int64), block, mix, 0.3, ix, gain)

    (a, ra), (b, rb) = _both("bandit_weights", make)
    # exp may differ in the last bit between libm and numpy's SIMD loop; a draw exactly on
    # a boundary could then differ, with probability ~1e-13 per draw.
    assert np.array_equal(a, b)
    np.testing.assert_allclose(ra[1], rb[1], rtol=1e-12)
    assert ra[5][0] == rb[5][0] == steps % block
    assert np.all(a.reshape(-1, block, replicas)[:, 1:] == a.reshape(-1, block, replicas)[:, :1]) \
        if steps % block == 0 else np.all(a[:block * (steps // block)].reshape(-1, block, replicas)[:, 1:]
                                          == a[:block * (steps // block)].reshape(-1, block, replicas)[:, :1])


def test_bandit_weights_reads_only_the_played_loss(rng):
    """NaN in every unplayed entry changes nothing: the kernel never reads them."""
    steps, replicas, n = 30, 20, 5
    losses = rng.random((steps, replicas, n))
    u = rng.random((steps, replicas))
    args = lambda table: (table, np.ones((replicas, n)), u, np.zeros(replicas, dtype=np.int64),  # noqa: E731
                          np.zeros(replicas), np.array([0], dtype=np.int64), 1, 0.1, 0.2, 0.0, True)
    for backend in ("numba", "numpy"):
        first = args(losses)
        a = kernels.implementation("bandit_weights", backend)(*first)
        masked = np.full_like(losses, np.nan)
        idx = (np.arange(steps)[:, None], np.arange(replicas)[None], a)
        masked[idx] = losses[idx]
        second = args(masked)
        b = kernels.implementation("bandit_weights", backend)(*second)
        assert np.array_equal(a, b) and np.array_equal(first[1], second[1])
