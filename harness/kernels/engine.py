"""The engine's kernels: inverse-CDF sampling and streaming accounting."""

from __future__ import annotations

import numpy as np

from ._compile import jit, numba

# Up to this many actions the compiled inverse-CDF sampler counts linearly;
# above it, it searches.
SMALL_N = 24


def _np_sample_rows(cdf: np.ndarray, u: np.ndarray) -> np.ndarray:
    """Row t: a = #{j < n-1 : cdf[t, j] <= u[t, r]}, the inverse CDF of a
    nondecreasing, normalised ``cdf``. Actions of zero probability are never
    drawn: their cdf entry equals the previous one."""
    steps, replicas = u.shape
    out = np.empty((steps, replicas), dtype=np.int64)
    inner = cdf[:, :-1]
    for t in range(steps):
        out[t] = np.searchsorted(inner[t], u[t], side="right")
    return out


def _np_account_shared(losses, actions, last, played, switches) -> None:
    """Add a block of play on a shared sequence to the running totals, in place.

    losses (steps, n); actions (steps, replicas)."""
    steps = actions.shape[0]
    gained = losses[np.arange(steps)[:, None], actions]
    _np_add_sequentially(played, gained)
    _np_count_switches(actions, last, switches)


def _np_account_per_replica(losses, actions, last, played, switches) -> None:
    """As _np_account_shared for losses (steps, replicas, n)."""
    gained = np.take_along_axis(losses, actions[:, :, None], axis=2)[:, :, 0]
    _np_add_sequentially(played, gained)
    _np_count_switches(actions, last, switches)


def _np_add_sequentially(total, rows) -> None:
    # accumulate adds row by row, the order the compiled loop uses; np.sum
    # would sum pairwise and differ in the last bits.
    stacked = np.concatenate([total[None, :], rows], axis=0)
    total[:] = np.add.accumulate(stacked, axis=0)[-1]


def _np_count_switches(actions, last, switches) -> None:
    prev = np.concatenate([last[None, :], actions[:-1]], axis=0)
    switches += ((actions != prev) & (prev >= 0)).sum(axis=0)
    last[:] = actions[-1]


def _np_cumulative_before(cum0, losses) -> tuple:
    """Cumulative losses before each round of a (steps, n) block, and after it.

    ``cum0`` (n,) are the totals before the block. Sums run in round order, as a
    round-by-round update would (numpy's cumsum along the first axis does)."""
    cums = np.cumsum(np.concatenate([cum0[None, :], losses], axis=0), axis=0)
    return cums[:-1], cums[-1].copy()


def _np_hedge_row_cdf(row, beta):
    """Normalised CDF of p(i) ~ exp(-beta row(i)) (as learners.experts.hedge_cdf)."""
    c = np.cumsum(np.exp(-beta * (row - row.min(axis=-1, keepdims=True))), axis=-1)
    return c / c[..., -1:]


if numba is not None:

    @jit
    def _nb_sample_rows(cdf, u):
        steps, replicas = u.shape
        n = cdf.shape[1]
        out = np.empty((steps, replicas), dtype=np.int64)
        if n <= SMALL_N:
            # Count cdf[j] <= u one j at a time across all replicas: the inner
            # loop over replicas vectorises (int32 lanes), ~1 ns per draw at n = 10.
            acc = np.empty(replicas, dtype=np.int32)
            for t in range(steps):
                for r in range(replicas):
                    acc[r] = 0
                for j in range(n - 1):
                    c = cdf[t, j]
                    for r in range(replicas):
                        acc[r] += np.int32(u[t, r] >= c)
                for r in range(replicas):
                    out[t, r] = acc[r]
            return out
        # Larger n: a branch-free search with halving steps over the row padded
        # past a power of two with +inf, run level by level across replicas so
        # the independent searches overlap (a branchy search mispredicts on
        # every level). It returns the same count.
        size = 1
        while size < n:  # at least one +inf, so a count of n - 1 is reachable
            size *= 2
        pad = np.empty(size)
        pos = np.empty(replicas, dtype=np.int64)
        for t in range(steps):
            for j in range(n - 1):
                pad[j] = cdf[t, j]
            for j in range(n - 1, size):
                pad[j] = np.inf
            for r in range(replicas):
                pos[r] = 0
            h = size // 2
            while h >= 1:
                for r in range(replicas):
                    p = pos[r]
                    if pad[p + h - 1] <= u[t, r]:
                        pos[r] = p + h
                h //= 2
            for r in range(replicas):
                out[t, r] = pos[r]
        return out

    @jit
    def _nb_draw(cdf_row, x):
        """#{j < n-1 : cdf_row[j] <= x} for one uniform (the inverse CDF)."""
        n = cdf_row.shape[0]
        lo, hi = 0, n - 1
        while lo < hi:
            mid = (lo + hi) >> 1
            if cdf_row[mid] <= x:
                lo = mid + 1
            else:
                hi = mid
        return lo

    @jit
    def _nb_account_shared(losses, actions, last, played, switches):
        steps, replicas = actions.shape
        for t in range(steps):
            for r in range(replicas):
                a = actions[t, r]
                b = last[r]
                played[r] += losses[t, a]
                switches[r] += (a != b) & (b >= 0)  # branch-free: switches are unpredictable
                last[r] = a

    @jit
    def _nb_account_per_replica(losses, actions, last, played, switches):
        steps, replicas = actions.shape
        for t in range(steps):
            for r in range(replicas):
                a = actions[t, r]
                b = last[r]
                played[r] += losses[t, r, a]
                switches[r] += (a != b) & (b >= 0)
                last[r] = a

    @jit
    def _nb_cumulative_before(cum0, losses):
        steps, n = losses.shape
        before = np.empty((steps, n))
        after = cum0.copy()
        for t in range(steps):
            for j in range(n):
                before[t, j] = after[j]
                after[j] = after[j] + losses[t, j]
        return before, after

    @jit
    def _nb_hedge_row_cdf(row, beta, out):
        m = row[0]
        for j in range(1, row.shape[0]):
            m = min(m, row[j])
        acc = 0.0
        for j in range(row.shape[0]):
            acc += np.exp(-beta * (row[j] - m))
            out[j] = acc
        for j in range(row.shape[0]):
            out[j] = out[j] / acc


KERNELS = ("sample_rows", "account_shared", "account_per_replica", "cumulative_before")
