"""Kernels of the loss-sequence generators (adversaries.heavy_tail, adversaries.oblivious)."""

from __future__ import annotations

import numpy as np

from ._compile import jit, numba


def pareto_length(u: np.ndarray, scale: float, alpha: float, cap: int) -> np.ndarray:
    """ceil(scale * (1-u)^(-1/alpha)), capped: a Pareto(scale, alpha) length >= 1 by inversion.

    P[L > x] = (scale / x)^alpha for x >= scale (the Pareto survival function;
    common practice). One uniform per length, so draws stay block-invariant.
    (Used by adversaries.oblivious and by the heavy-tail walks' kernels below.)
    """
    with np.errstate(over="ignore", divide="ignore"):
        x = np.ceil(scale * np.power(1.0 - u, -1.0 / alpha))
    return np.minimum(np.nan_to_num(x, nan=cap, posinf=cap), cap).astype(np.int64).clip(min=1)


def _np_pareto_walk(u, d, target, sign, scale, alpha, cap) -> np.ndarray:
    """The gap walk of adversaries.heavy_tail.ParetoOscillations: (steps, rows) "D rose".

    Each round, a row whose D reached its turning point turns (sign flips) and
    draws the next amplitude from its uniform u[s, r]; then D moves one unit
    toward the turning point. ``d``, ``target``, ``sign`` are updated in place."""
    steps, rows = u.shape
    up = np.empty((steps, rows), dtype=np.bool_)
    for s in range(steps):
        turn = d == target
        if turn.any():
            sign[turn] = -sign[turn]
            target[turn] = sign[turn] * pareto_length(u[s, turn], scale, alpha, cap)
        direction = np.sign(target - d)
        d += direction
        up[s] = direction > 0
    return up


def _np_tie_walk(u, d, left, travel, level, scale, alpha, cap, spread) -> np.ndarray:
    """The gap walk of adversaries.heavy_tail.TieStretches: (steps, rows) "D rose".

    Travel: D moves toward ``level``; on arrival a tie stretch of Pareto length
    (uniform u[s, r, 1]) starts, D alternating level+1, level; when it ends a new
    level is drawn from u[s, r, 0], uniform on [-spread, spread]. State updated in place."""
    steps, rows, _ = u.shape
    up = np.empty((steps, rows), dtype=np.bool_)
    width = 2 * spread + 1
    for s in range(steps):
        arrive = travel & (d == level)
        if arrive.any():
            travel[arrive] = False
            left[arrive] = pareto_length(u[s, arrive, 1], scale, alpha, cap)
        direction = np.where(d > level, -1, 1)
        tie = ~travel
        direction[tie] = np.where(d[tie] == level[tie], 1, -1)
        left[tie] -= 1
        done = tie & (left == 0)
        if done.any():
            travel[done] = True
            level[done] = np.minimum((u[s, done, 0] * width).astype(np.int64), width - 1) - spread
        d += direction
        up[s] = direction > 0
    return up


def _np_near_tie(u, margin, cum) -> np.ndarray:
    """adversaries.oblivious.NearTie's losses for a block: (steps, rows, n).

    ``u`` (steps, rows, n) uniforms; the k = cum.shape[1] leaders' values are
    v = 1/2 + margin (u[..., :k] - 1/2), and each round the largest goes to
    the leader with the least cumulative loss (``cum`` (rows, k); ties: lowest
    index first), the next to the next, ...; every other action loses 1.
    ``cum`` advances in place."""
    steps, rows, n = u.shape
    k = cum.shape[1]
    out = np.ones((steps, rows, n))
    v = -np.sort(-(0.5 + margin * (u[:, :, :k] - 0.5)), axis=2)  # largest first
    idx = np.arange(rows)[:, None]
    for s in range(steps):
        order = np.argsort(cum, axis=1, kind="stable")
        out[s, idx, order] = v[s]
        cum += out[s, :, :k]
    return out


if numba is not None:

    @jit
    def _nb_pareto_one(u, scale, alpha, cap):
        x = np.ceil(scale * (1.0 - u) ** (-1.0 / alpha))
        if not (x < cap):  # also inf and nan
            x = cap
        return max(np.int64(x), 1)

    @jit
    def _nb_pareto_walk(u, d, target, sign, scale, alpha, cap):
        steps, rows = u.shape
        up = np.empty((steps, rows), dtype=np.bool_)
        for s in range(steps):
            for r in range(rows):
                if d[r] == target[r]:
                    sign[r] = -sign[r]
                    target[r] = sign[r] * _nb_pareto_one(u[s, r], scale, alpha, cap)
                step = 1 if target[r] > d[r] else (-1 if target[r] < d[r] else 0)
                d[r] += step
                up[s, r] = step > 0
        return up

    @jit
    def _nb_tie_walk(u, d, left, travel, level, scale, alpha, cap, spread):
        steps, rows, _ = u.shape
        up = np.empty((steps, rows), dtype=np.bool_)
        width = 2 * spread + 1
        for s in range(steps):
            for r in range(rows):
                if travel[r] and d[r] == level[r]:
                    travel[r] = False
                    left[r] = _nb_pareto_one(u[s, r, 1], scale, alpha, cap)
                step = -1 if d[r] > level[r] else 1
                if not travel[r]:
                    step = 1 if d[r] == level[r] else -1
                    left[r] -= 1
                    if left[r] == 0:
                        travel[r] = True
                        level[r] = min(np.int64(u[s, r, 0] * width), width - 1) - spread
                d[r] += step
                up[s, r] = step > 0
        return up

    @jit
    def _nb_near_tie(u, margin, cum):
        steps, rows, n = u.shape
        k = cum.shape[1]
        out = np.empty((steps, rows, n))
        order = np.empty(k, dtype=np.int64)
        v = np.empty(k)
        for s in range(steps):
            for r in range(rows):
                for i in range(k):  # the values, largest first (insertion sort)
                    x = 0.5 + margin * (u[s, r, i] - 0.5)
                    j = i
                    while j > 0 and v[j - 1] < x:
                        v[j] = v[j - 1]
                        j -= 1
                    v[j] = x
                for i in range(k):  # the leaders by cumulative loss, ties to the lowest index
                    j = i
                    while j > 0 and cum[r, order[j - 1]] > cum[r, i]:
                        order[j] = order[j - 1]
                        j -= 1
                    order[j] = i
                for i in range(k):
                    out[s, r, order[i]] = v[i]
                for i in range(k):
                    cum[r, i] += out[s, r, i]
                for j in range(k, n):
                    out[s, r, j] = 1.0
        return out


KERNELS = ("pareto_walk", "tie_walk", "near_tie")
