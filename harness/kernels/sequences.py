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


class SegmentSchedule:
    """Per-row segments of random length with a label each, streamed across blocks.

    ``remaining[r]`` is how many rounds of row r's current segment are left
    (0: a new segment starts at the next round). At a segment start the row's
    uniforms of that round decide the new label and length; every round has
    its uniforms whether or not it starts a segment, so the sequence is the
    same whatever the block cut.
    """

    def __init__(self, rows: int):
        self.remaining = np.zeros(rows, dtype=np.int64)
        self.label = np.full(rows, -1, dtype=np.int64)

    def labels(self, u_length, u_label, new_length, new_label) -> tuple[np.ndarray, np.ndarray]:
        """Labels (steps, rows) for the next block and a (steps, rows) mask of segment starts.

        ``new_length(u)`` and ``new_label(old, u)`` map uniforms to lengths and labels.
        """
        steps, rows = u_length.shape
        start_label = self.label.copy()
        changes = np.full((steps, rows), -1, dtype=np.int64)
        pos = self.remaining.copy()
        while True:
            r = np.flatnonzero(pos < steps)
            if r.size == 0:
                break
            p = pos[r]
            self.label[r] = new_label(self.label[r], u_label[p, r])
            changes[p, r] = self.label[r]
            pos[r] = p + new_length(u_length[p, r])
        self.remaining = pos - steps
        starts = changes >= 0
        last = np.where(starts, np.arange(steps)[:, None], -1)
        np.maximum.accumulate(last, axis=0, out=last)
        cols = np.arange(rows)[None, :]
        out = np.where(last >= 0, changes[np.maximum(last, 0), cols], start_label[None, :])
        return out, starts


class OtherLabel:
    """A label map: uniform over the n labels at the first segment, else uniform over the n-1 others."""

    def __init__(self, n: int):
        self.n = n

    def __call__(self, old, u):
        n = self.n
        fresh = np.minimum((u * n).astype(np.int64), n - 1)
        step = 1 + np.minimum((u * (n - 1)).astype(np.int64), n - 2)
        return np.where(old < 0, fresh, (old + step) % n)


def _np_regime_shift(u, remaining, label, base, gap, scale, alpha, cap) -> tuple:
    """adversaries.oblivious.RegimeShift's losses for a block, (steps, rows, n), and each
    round's better action, (steps, rows).

    ``u`` (steps, rows, n + 2): per (round, row) the n losses' uniforms, then
    a new segment's length (Pareto, capped at ``cap``) and label (uniform over
    the other actions) where a segment starts. ``remaining`` (rounds left in
    each row's segment; 0: one starts at the next round) and ``label`` (-1
    before the first) advance in place. The label's action has mean
    base - gap, every other action base."""
    steps, rows, width = u.shape
    n = width - 2
    schedule = SegmentSchedule(rows)
    schedule.remaining, schedule.label = remaining.copy(), label.copy()
    best, _ = schedule.labels(u[:, :, n], u[:, :, n + 1], lambda x: pareto_length(x, scale, alpha, cap),
                              OtherLabel(n))
    remaining[:], label[:] = schedule.remaining, schedule.label
    p = np.full((steps, rows, n), base)
    np.put_along_axis(p, best[:, :, None], base - gap, axis=2)
    return (u[:, :, :n] < p).astype(np.float64), best


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

    @jit
    def _nb_regime_shift(u, remaining, label, base, gap, scale, alpha, cap):
        steps, rows, width = u.shape
        n = width - 2
        out = np.empty((steps, rows, n))
        best = np.empty((steps, rows), dtype=np.int64)
        for s in range(steps):
            for r in range(rows):
                if remaining[r] == 0:  # a segment starts at this round
                    x = u[s, r, n + 1]
                    if label[r] < 0:
                        label[r] = min(np.int64(x * n), n - 1)
                    else:
                        label[r] = (label[r] + 1 + min(np.int64(x * (n - 1)), n - 2)) % n
                    remaining[r] = _nb_pareto_one(u[s, r, n], scale, alpha, cap)
                remaining[r] -= 1
                b = label[r]
                best[s, r] = b
                for j in range(n):
                    out[s, r, j] = 1.0 if u[s, r, j] < (base - gap if j == b else base) else 0.0
        return out, best


KERNELS = ("pareto_walk", "tie_walk", "near_tie", "regime_shift")
