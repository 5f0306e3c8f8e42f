"""Kernels of the full-information learners (learners.experts and learners.low_switching)."""

from __future__ import annotations

import numpy as np

from ._compile import jit, numba
from .engine import _np_hedge_row_cdf

# Below this, a_j y rounds 1 - a_j y to exactly 1 for every y in [0, 1): the factor is 1.
FTPL_TINY = 2.0 ** -54

# Running products below this are set to 0 (their share of any probability is far below
# rounding), which keeps the loops out of slow subnormal arithmetic.
FTPL_FLUSH = 1e-200


def _np_hedge_per_replica(losses, cum, eta, u) -> np.ndarray:
    """Hedge on per-replica sequences: round t samples from cum (before
    round t's losses), then adds them. Updates ``cum`` in place."""
    steps, replicas, n = losses.shape
    out = np.empty((steps, replicas), dtype=np.int64)
    for t in range(steps):
        w = np.exp(-eta * (cum - cum.min(axis=1, keepdims=True)))
        c = np.cumsum(w, axis=1)
        cdf = c[:, :-1] / c[:, -1:]
        out[t] = (cdf <= u[t][:, None]).sum(axis=1)
        cum += losses[t]
    return out


def _np_lazy_leader(before, g, width, leader, level) -> np.ndarray:
    """Follow the Lazy Leader, event-driven (see learners.low_switching.LazyFTPL).

    ``before`` (steps, replicas, n): cumulative losses before each round (a
    stride-0 broadcast when shared). Replica r's perturbed point in action j is
    x_j = L_j + ((g_j - L_j) mod width), the one grid point of g_j + width*Z
    in [L_j, L_j + width). Only the leader's own point moving can change the
    argmin (other points only move up), so the argmin is recomputed only when
    L_leader passes ``level`` (the leader's point) or ``leader`` is -1.
    ``leader`` and ``level`` are updated in place."""
    steps, replicas, n = before.shape
    out = np.empty((steps, replicas), dtype=np.int64)
    rows = np.arange(replicas)
    for t in range(steps):
        L = before[t]
        mine = L[rows, np.maximum(leader, 0)]
        need = np.flatnonzero((leader < 0) | (mine > level))
        if need.size:
            Ln = L[need]
            d = g[need] - Ln
            x = Ln + (d - width * np.floor(d / width))
            a = np.argmin(x, axis=1)
            leader[need] = a
            level[need] = x[np.arange(need.size), a]
        out[t] = leader
    return out


def _np_second_best(scores) -> tuple:
    """(argmin, min over the other entries) per row; argmin ties go to the lowest index."""
    a = np.argmin(scores, axis=1)
    rest = scores.copy()
    rest[np.arange(scores.shape[0]), a] = np.inf
    return a, rest.min(axis=1)


def _np_lazy_argmin(before, shift, leader, level) -> np.ndarray:
    """argmin_j (before[t, r, j] - shift[r, j]) per round and replica, lazily.

    ``before`` (steps, replicas, n) (a stride-0 broadcast when shared) is
    nondecreasing in t, so every score only rises. ``level[r]`` holds the least
    score of the other actions when the leader was last computed: while the
    leader's own score stays below it, the leader is still the strict argmin
    and nothing else is looked at (O(1)); otherwise the argmin and the new
    level are recomputed (O(n)), ties to the lowest index as np.argmin. ``leader``
    (-1: unknown) and ``level`` are updated in place."""
    steps, replicas, n = before.shape
    out = np.empty((steps, replicas), dtype=np.int64)
    rows = np.arange(replicas)
    for t in range(steps):
        i = np.maximum(leader, 0)
        idx = np.flatnonzero((leader < 0) | ~(before[t][rows, i] - shift[rows, i] < level))
        if idx.size:
            leader[idx], level[idx] = _np_second_best(before[t][idx] - shift[idx])
        out[t] = leader
    return out


def _np_perturbed_leader(losses, cum, eta, rng) -> np.ndarray:
    """FTPL with fresh perturbations on per-replica sequences: argmin_j (cum[r, j] -
    Z[r, j] / eta), Z drawn as rng.standard_exponential((replicas, n)) each round,
    then cum += losses[t]. ``cum`` (replicas, n) is updated in place."""
    steps, replicas, n = losses.shape
    out = np.empty((steps, replicas), dtype=np.int64)
    for t in range(steps):
        out[t] = np.argmin(cum - rng.standard_exponential((replicas, n)) / eta, axis=1)
        cum += losses[t]
    return out


def _np_ftpl_rows(a, y, w) -> np.ndarray:
    """Unnormalised FTPL probabilities a_i sum_k w_k prod_{j != i} (1 - a_j y_k), per row.

    ``a`` (rows, n) = exp(-eta (L - min L)); ``y``, ``w`` (rows, m): each row's
    quadrature nodes and weights (Gauss-Legendre on [0, span]). Factors with
    a_j < FTPL_TINY are exactly 1 in
    floating point and are skipped: Q(y_k) = prod over the others; for an
    active i the product without i is Q(y_k) / (1 - a_i y_k) (the same rounded
    factor divided back out: no cancellation), for an inactive i it is Q(y_k).
    Products run in action order, sums in node order (the compiled loop's)."""
    rows, n = a.shape
    out = np.empty((rows, n))
    for r in range(rows):
        act = np.flatnonzero(a[r] >= FTPL_TINY)
        aa = a[r, act]
        yr = y[r]
        q = np.ones(yr.size)
        for j, aj in enumerate(aa):
            q = q * (1.0 - aj * yr)
            if j % 16 == 15:
                q[q < FTPL_FLUSH] = 0.0
        wq = w[r] * q
        total = 0.0
        for k in range(yr.size):
            total += wq[k]
        acc = np.zeros(aa.size)
        for k in range(yr.size):
            acc += wq[k] / (1.0 - aa * yr[k])
        out[r] = a[r] * total
        out[r, act] = aa * acc
    return out


def _np_dartboard_shared(before, t0, out, beta, buf, pos, last, mark, clock, redraws) -> int:
    """Shrinking Dartboard on a shared sequence, with exponential clocks.

    ``before`` (steps, n): cumulative losses before each round. Replica r
    holds action ``last[r]`` (-1: no draw yet), drawn when that action's
    cumulative loss was ``mark[r]``; it keeps it while the loss the action
    has taken since stays below ``clock[r]`` = E / beta, E ~ Exp(1). When the
    clock runs out it redraws with the next two uniforms (u, v) of the
    buffer ``buf`` (read from ``pos[0]`` on; replicas in increasing order):
    a = inverse CDF of exp(-beta L) at u, clock -log1p(-v) / beta. Keeping
    through rounds s..t then has probability exp(-beta (L_t(a) - L_s(a))) =
    prod (1 - eta)^{l(a)}: the per-round keep rule of the construction (see
    learners.low_switching.ShrinkingDartboard).

    Plays rounds t0, t0+1, ... into ``out`` (steps, replicas) and stops
    before a round when fewer than 2 * replicas uniforms are left in the
    buffer; returns the round it stopped at (``steps`` when done), so the
    caller can refill (``UniformStream``) and resume. ``last``, ``mark``,
    ``clock``, ``redraws`` (redraws after the first draw) and ``pos`` are
    updated in place."""
    steps = before.shape[0]
    replicas = last.shape[0]
    for t in range(t0, steps):
        if buf.shape[0] - pos[0] < 2 * replicas:
            return t
        row = before[t]
        idx = np.flatnonzero((last < 0) | (row[np.maximum(last, 0)] - mark >= clock))
        if idx.size:
            _np_redraw(idx, np.broadcast_to(row, (idx.size, row.shape[0])), beta, buf, pos, last, mark, clock,
                       redraws)
        out[t] = last
    return steps


def _np_redraw(idx, cum, beta, buf, pos, last, mark, clock, redraws) -> None:
    """Replicas ``idx`` (increasing) draw an action from exp(-beta cum) and a clock."""
    redraws[idx] += last[idx] >= 0
    uv = buf[pos[0]:pos[0] + 2 * idx.size].reshape(idx.size, 2)
    pos[0] += 2 * idx.size
    cdf = _np_hedge_row_cdf(cum, beta)
    a = (cdf[:, :-1] <= uv[:, :1]).sum(axis=1)
    last[idx] = a
    mark[idx] = cum[np.arange(idx.size), a]
    clock[idx] = -np.log1p(-uv[:, 1]) / beta


def _np_dartboard_per_replica(losses, cum, t0, out, beta, buf, pos, last, mark, clock, redraws) -> int:
    """As _np_dartboard_shared for losses (steps, replicas, n); ``cum`` (replicas, n)
    holds each replica's cumulative losses before round t0 and is advanced in place."""
    steps, replicas, n = losses.shape
    rows = np.arange(replicas)
    for t in range(t0, steps):
        if buf.shape[0] - pos[0] < 2 * replicas:
            return t
        idx = np.flatnonzero((last < 0) | (cum[rows, np.maximum(last, 0)] - mark >= clock))
        if idx.size:
            _np_redraw(idx, cum[idx], beta, buf, pos, last, mark, clock, redraws)
        out[t] = last
        cum += losses[t]
    return steps


if numba is not None:
    from .engine import _nb_draw, _nb_hedge_row_cdf

    @jit
    def _nb_hedge_per_replica(losses, cum, eta, u):
        steps, replicas, n = losses.shape
        out = np.empty((steps, replicas), dtype=np.int64)
        c = np.empty(n)
        for t in range(steps):
            for r in range(replicas):
                low = cum[r, 0]
                for j in range(1, n):
                    low = min(low, cum[r, j])
                acc = 0.0
                for j in range(n):
                    acc += np.exp(-eta * (cum[r, j] - low))
                    c[j] = acc
                a = 0
                for j in range(n - 1):
                    a += c[j] / acc <= u[t, r]
                out[t, r] = a
                for j in range(n):
                    cum[r, j] += losses[t, r, j]
        return out

    @jit
    def _nb_lazy_leader(before, g, width, leader, level):
        steps, replicas, n = before.shape
        out = np.empty((steps, replicas), dtype=np.int64)
        for t in range(steps):
            for r in range(replicas):
                a = leader[r]
                if a < 0 or before[t, r, a] > level[r]:
                    best = np.inf
                    for j in range(n):
                        L = before[t, r, j]
                        d = g[r, j] - L
                        x = L + (d - width * np.floor(d / width))
                        if x < best:
                            best = x
                            a = j
                    leader[r] = a
                    level[r] = best
                out[t, r] = a
        return out

    @jit
    def _nb_lazy_argmin(before, shift, leader, level):
        steps, replicas, n = before.shape
        out = np.empty((steps, replicas), dtype=np.int64)
        for t in range(steps):
            for r in range(replicas):
                i = leader[r]
                if i < 0 or not (before[t, r, i] - shift[r, i] < level[r]):
                    best, second, i = np.inf, np.inf, 0
                    for j in range(n):
                        x = before[t, r, j] - shift[r, j]
                        if x < best:
                            second, best, i = best, x, j
                        elif x < second:
                            second = x
                    leader[r] = i
                    level[r] = second
                out[t, r] = i
        return out

    @jit
    def _nb_perturbed_leader(losses, cum, eta, rng):
        steps, replicas, n = losses.shape
        out = np.empty((steps, replicas), dtype=np.int64)
        for t in range(steps):
            for r in range(replicas):
                best, a = np.inf, 0
                for j in range(n):
                    x = cum[r, j] - rng.standard_exponential() / eta
                    if x < best:
                        best, a = x, j
                out[t, r] = a
                for j in range(n):
                    cum[r, j] += losses[t, r, j]
        return out

    @jit
    def _nb_ftpl_rows(a, y, w):
        rows, n = a.shape
        m = y.shape[1]
        out = np.empty((rows, n))
        q = np.empty(m)
        wq = np.empty(m)
        aa = np.empty(n)
        acc = np.empty(n)
        for r in range(rows):
            k = 0
            for j in range(n):
                if a[r, j] >= FTPL_TINY:
                    aa[k] = a[r, j]
                    k += 1
            for i in range(m):
                q[i] = 1.0
            for j in range(k):
                aj = aa[j]
                for i in range(m):  # across nodes: vector lanes, each product in action order
                    q[i] = q[i] * (1.0 - aj * y[r, i])
                if j % 16 == 15:
                    for i in range(m):
                        if q[i] < FTPL_FLUSH:
                            q[i] = 0.0
            total = 0.0
            for i in range(m):
                wq[i] = w[r, i] * q[i]
                total += wq[i]
            for j in range(k):
                acc[j] = 0.0
            for i in range(m):
                yi = y[r, i]
                for j in range(k):  # across actions: vector lanes, each sum in node order
                    acc[j] += wq[i] / (1.0 - aa[j] * yi)
            k = 0
            for j in range(n):
                if a[r, j] >= FTPL_TINY:
                    out[r, j] = aa[k] * acc[k]
                    k += 1
                else:
                    out[r, j] = a[r, j] * total
        return out

    @jit
    def _nb_dartboard_shared(before, t0, out, beta, buf, pos, last, mark, clock, redraws):
        steps, n = before.shape
        replicas = last.shape[0]
        cdf = np.empty(n)
        for t in range(t0, steps):
            if buf.shape[0] - pos[0] < 2 * replicas:
                return t
            ready = False  # the round's CDF, computed only if a replica redraws
            for r in range(replicas):
                a = last[r]
                if a < 0 or before[t, a] - mark[r] >= clock[r]:
                    if a >= 0:
                        redraws[r] += 1
                    p = pos[0]
                    pos[0] = p + 2
                    if not ready:
                        _nb_hedge_row_cdf(before[t], beta, cdf)
                        ready = True
                    a = _nb_draw(cdf, buf[p])
                    last[r] = a
                    mark[r] = before[t, a]
                    clock[r] = -np.log1p(-buf[p + 1]) / beta
                out[t, r] = a
        return steps

    @jit
    def _nb_dartboard_per_replica(losses, cum, t0, out, beta, buf, pos, last, mark, clock, redraws):
        steps, replicas, n = losses.shape
        cdf = np.empty(n)
        for t in range(t0, steps):
            if buf.shape[0] - pos[0] < 2 * replicas:
                return t
            for r in range(replicas):
                a = last[r]
                if a < 0 or cum[r, a] - mark[r] >= clock[r]:
                    if a >= 0:
                        redraws[r] += 1
                    p = pos[0]
                    pos[0] = p + 2
                    _nb_hedge_row_cdf(cum[r], beta, cdf)
                    a = _nb_draw(cdf, buf[p])
                    last[r] = a
                    mark[r] = cum[r, a]
                    clock[r] = -np.log1p(-buf[p + 1]) / beta
                out[t, r] = a
                for j in range(n):
                    cum[r, j] += losses[t, r, j]
        return steps


KERNELS = ("hedge_per_replica", "lazy_leader", "lazy_argmin", "perturbed_leader", "ftpl_rows", "dartboard_shared",
           "dartboard_per_replica")
