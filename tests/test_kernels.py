"""The compiled kernels and their pure-numpy twins must agree bit for bit."""

import numpy as np
import pytest

from harness import kernels

pytestmark = pytest.mark.skipif("numba" not in kernels._IMPLS, reason="numba not installed")


def _cdf(rng, steps, n, zeros=False):
    w = rng.random((steps, n))
    if zeros:
        w[:, ::3] = 0.0  # zero-probability actions must never be drawn
    c = np.cumsum(w, axis=1)
    return c / c[:, -1:]


@pytest.mark.parametrize("n", [2, 10, 33, 200])
@pytest.mark.parametrize("zeros", [False, True])
def test_sample_rows_identical(rng, n, zeros):
    cdf = _cdf(rng, 50, n, zeros)
    u = rng.random((50, 300))
    a = kernels.implementation("sample_rows", "numba")(cdf, u)
    b = kernels.implementation("sample_rows", "numpy")(cdf, u)
    assert np.array_equal(a, b)
    if zeros:
        p = np.diff(cdf, axis=1, prepend=0.0)
        assert (p[np.arange(50)[:, None], a] > 0).all()


def test_sample_rows_frequencies_match_the_cdf(rng):
    """Inverse-CDF sampling: frequencies within 5 standard errors of p
    (false-failure probability < 1e-5 per cell, 10 cells)."""
    p = np.array([0.05, 0.3, 0.0, 0.15, 0.5])
    u = rng.random((1, 200_000))
    a = kernels.sample_rows(np.cumsum(p)[None, :], u)[0]
    freq = np.bincount(a, minlength=5) / a.size
    se = np.sqrt(p * (1 - p) / a.size)
    assert np.all(np.abs(freq - p) <= 5 * se + 1e-12)


@pytest.mark.parametrize("shared", [True, False])
def test_accounting_identical(rng, shared):
    steps, replicas, n = 40, 70, 6
    losses = rng.random((steps, n) if shared else (steps, replicas, n))
    actions = rng.integers(0, n, (steps, replicas))
    name = "account_shared" if shared else "account_per_replica"
    totals = []
    for backend in ("numba", "numpy"):
        last = np.full(replicas, -1, dtype=np.int64)
        last[:5] = 2
        played, switches = np.full(replicas, 0.25), np.zeros(replicas, dtype=np.int64)
        kernels.implementation(name, backend)(losses, actions, last, played, switches)
        totals.append((played, switches, last))
    for x, y in zip(*totals):
        assert np.array_equal(x, y)
    played, switches, last = totals[0]
    # closed form of the same totals
    gained = losses[np.arange(steps)[:, None], actions] if shared else \
        np.take_along_axis(losses, actions[:, :, None], 2)[:, :, 0]
    np.testing.assert_allclose(played, 0.25 + gained.sum(axis=0))
    expected = (actions[1:] != actions[:-1]).sum(axis=0) + np.r_[(actions[0, :5] != 2), np.zeros(replicas - 5)]
    assert np.array_equal(switches, expected) and np.array_equal(last, actions[-1])


def test_hedge_per_replica_agrees(rng):
    losses = rng.random((30, 40, 7))
    u = rng.random((30, 40))
    outs = []
    for backend in ("numba", "numpy"):
        cum = np.zeros((40, 7))
        outs.append((kernels.implementation("hedge_per_replica", backend)(losses, cum, 0.7, u), cum))
    # exp may differ in the last bit between libm and numpy's SIMD loop, so a
    # draw exactly on a boundary could differ; with random u that has
    # probability ~1e-13 per draw.
    assert np.array_equal(outs[0][0], outs[1][0])
    np.testing.assert_allclose(outs[0][1], outs[1][1], rtol=1e-12)
