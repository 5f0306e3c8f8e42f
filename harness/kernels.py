"""Per-replica inner loops: inverse-CDF sampling and streaming accounting.

These are the only places where work is done per replica per round, so they
decide throughput. Each kernel exists twice:

- a numba-compiled loop (used when numba imports), and
- a pure-numpy version that gives **bit-identical** results (same random
  numbers in, same comparisons, same summation order), kept both as the
  fallback and as the reference the tests hold the compiled loop to.

Set ``BOUNDBREAKER_KERNELS=numpy`` to force the numpy versions.

Conventions: ``u`` are uniforms in [0, 1) drawn by the caller from its own
generator, so both versions consume randomness identically; ``last`` holds
each replica's previous action, -1 before the first round (the first round is
never a switch).
"""

from __future__ import annotations

import os

import numpy as np

# -- pure numpy ---------------------------------------------------------------


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


def _np_dartboard(ratio, cdf, u_keep, u_draw, last, redraws) -> np.ndarray:
    """Shrinking Dartboard draws (see learners.low_switching.ShrinkingDartboard).

    ``ratio`` (steps, replicas, n): w_t(i)/w_{t-1}(i); ``cdf`` (steps,
    replicas, n): the normalised CDF of w_t (both may be broadcast views).
    Replica r keeps its last action a when u_keep < ratio[a], else (and in
    its first round, last = -1) draws from the CDF with u_draw. ``last`` and
    the per-replica ``redraws`` counter are updated in place."""
    steps, replicas, n = cdf.shape
    out = np.empty((steps, replicas), dtype=np.int64)
    rows = np.arange(replicas)
    for t in range(steps):
        keep = (last >= 0) & (u_keep[t] < ratio[t][rows, np.maximum(last, 0)])
        draw = np.flatnonzero(~keep)
        if draw.size:
            last[draw] = (cdf[t][draw, :-1] <= u_draw[t][draw, None]).sum(axis=1)
            redraws[draw] += 1
        out[t] = last
    return out


def _np_bandit_weights(losses, w, u, cur, acc, pos, block, mix, rate, ix, gain) -> np.ndarray:
    """Exponential weights with bandit feedback: EXP3, EXP3-IX and their blocked forms.

    ``losses`` (steps, replicas, n), read only at each replica's own action.
    ``w`` (replicas, n) the weights; ``pos`` a one-element array, the
    position in the current block of ``block`` rounds (shared by all
    replicas). At a block start replica r draws its action from
    p = (1 - mix) w / W + mix / n with one uniform; every round it adds its
    own loss to ``acc``; at a block end y = acc / block and the played
    action's weight is multiplied by exp(rate (1 - y) / (p_a + ix)) when
    ``gain`` (EXP3's reward form) else exp(-rate y / (p_a + ix)) (EXP3-IX).
    A row is rescaled by its total when that leaves [1e-100, 1e100], which
    leaves p unchanged. Sums run sequentially (the compiled loop's order)."""
    steps, replicas, n = losses.shape
    out = np.empty((steps, replicas), dtype=np.int64)
    rows = np.arange(replicas)
    for t in range(steps):
        if pos[0] == 0:
            W = np.add.accumulate(w, axis=1)[:, -1]
            c = np.add.accumulate((1.0 - mix) * w / W[:, None] + mix / n, axis=1)
            cur[:] = (c[:, :-1] <= u[t][:, None]).sum(axis=1)
            acc[:] = 0.0
        out[t] = cur
        acc += losses[t][rows, cur]
        if pos[0] == block - 1:
            W = np.add.accumulate(w, axis=1)[:, -1]
            p = (1.0 - mix) * w[rows, cur] / W + mix / n
            y = acc / block
            if gain:
                w[rows, cur] = w[rows, cur] * np.exp(rate * ((1.0 - y) / (p + ix)))
            else:
                w[rows, cur] = w[rows, cur] * np.exp(-rate * (y / (p + ix)))
            W = np.add.accumulate(w, axis=1)[:, -1]
            bad = np.flatnonzero((W < 1e-100) | (W > 1e100))
            if bad.size:
                w[bad] = w[bad] / W[bad, None]
            pos[0] = 0
        else:
            pos[0] += 1
    return out


# -- numba --------------------------------------------------------------------

try:  # numba is a declared dependency, but the numpy path keeps working without it
    import numba
except Exception:  # pragma: no cover - exercised only where numba is missing
    numba = None

if numba is not None:
    _jit = numba.njit(cache=True, nogil=True)

    @_jit
    def _nb_sample_rows(cdf, u):
        steps, replicas = u.shape
        n = cdf.shape[1]
        out = np.empty((steps, replicas), dtype=np.int64)
        if n <= 32:
            # branch-free count: vectorises, and beats a search at small n
            for t in range(steps):
                for r in range(replicas):
                    x = u[t, r]
                    a = 0
                    for j in range(n - 1):
                        a += cdf[t, j] <= x
                    out[t, r] = a
        else:
            for t in range(steps):
                for r in range(replicas):
                    x = u[t, r]
                    lo, hi = 0, n - 1  # answer in [lo, hi]: first j with cdf[j] > x, capped
                    while lo < hi:
                        mid = (lo + hi) >> 1
                        if cdf[t, mid] <= x:
                            lo = mid + 1
                        else:
                            hi = mid
                    out[t, r] = lo
        return out

    @_jit
    def _nb_account_shared(losses, actions, last, played, switches):
        steps, replicas = actions.shape
        for t in range(steps):
            for r in range(replicas):
                a = actions[t, r]
                played[r] += losses[t, a]
                if last[r] >= 0 and a != last[r]:
                    switches[r] += 1
                last[r] = a

    @_jit
    def _nb_account_per_replica(losses, actions, last, played, switches):
        steps, replicas = actions.shape
        for t in range(steps):
            for r in range(replicas):
                a = actions[t, r]
                played[r] += losses[t, r, a]
                if last[r] >= 0 and a != last[r]:
                    switches[r] += 1
                last[r] = a

    @_jit
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


    @_jit
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

    @_jit
    def _nb_dartboard(ratio, cdf, u_keep, u_draw, last, redraws):
        steps, replicas, n = cdf.shape
        out = np.empty((steps, replicas), dtype=np.int64)
        for t in range(steps):
            for r in range(replicas):
                a = last[r]
                if a < 0 or not (u_keep[t, r] < ratio[t, r, a]):
                    x = u_draw[t, r]
                    a = 0
                    for j in range(n - 1):
                        a += cdf[t, r, j] <= x
                    redraws[r] += 1
                    last[r] = a
                out[t, r] = a
        return out

    @_jit
    def _nb_bandit_weights(losses, w, u, cur, acc, pos, block, mix, rate, ix, gain):
        steps, replicas, n = losses.shape
        out = np.empty((steps, replicas), dtype=np.int64)
        for t in range(steps):
            start = pos[0] == 0
            end = pos[0] == block - 1
            for r in range(replicas):
                if start:
                    W = 0.0
                    for j in range(n):
                        W += w[r, j]
                    c = 0.0
                    a = 0
                    for j in range(n - 1):
                        c += (1.0 - mix) * w[r, j] / W + mix / n
                        a += c <= u[t, r]
                    cur[r] = a
                    acc[r] = 0.0
                a = cur[r]
                out[t, r] = a
                acc[r] += losses[t, r, a]
                if end:
                    W = 0.0
                    for j in range(n):
                        W += w[r, j]
                    p = (1.0 - mix) * w[r, a] / W + mix / n
                    y = acc[r] / block
                    if gain:
                        w[r, a] = w[r, a] * np.exp(rate * ((1.0 - y) / (p + ix)))
                    else:
                        w[r, a] = w[r, a] * np.exp(-rate * (y / (p + ix)))
                    W = 0.0
                    for j in range(n):
                        W += w[r, j]
                    if W < 1e-100 or W > 1e100:
                        for j in range(n):
                            w[r, j] = w[r, j] / W
            if end:
                pos[0] = 0
            else:
                pos[0] += 1
        return out


def _pick():
    wanted = os.environ.get("BOUNDBREAKER_KERNELS", "numba").strip().lower()
    return "numba" if (numba is not None and wanted != "numpy") else "numpy"


BACKEND = _pick()
"""Which implementation is live: ``"numba"`` or ``"numpy"``."""

_IMPLS = {"numpy": {"sample_rows": _np_sample_rows, "account_shared": _np_account_shared,
                    "account_per_replica": _np_account_per_replica,
                    "hedge_per_replica": _np_hedge_per_replica, "lazy_leader": _np_lazy_leader,
                    "dartboard": _np_dartboard, "bandit_weights": _np_bandit_weights}}
if numba is not None:
    _IMPLS["numba"] = {"sample_rows": _nb_sample_rows, "account_shared": _nb_account_shared,
                       "account_per_replica": _nb_account_per_replica,
                       "hedge_per_replica": _nb_hedge_per_replica, "lazy_leader": _nb_lazy_leader,
                       "dartboard": _nb_dartboard, "bandit_weights": _nb_bandit_weights}


def implementation(name: str, backend: str | None = None):
    """A kernel by name from a given backend (tests compare the two)."""
    return _IMPLS[backend or BACKEND][name]


sample_rows = implementation("sample_rows")
account_shared = implementation("account_shared")
account_per_replica = implementation("account_per_replica")
hedge_per_replica = implementation("hedge_per_replica")
lazy_leader = implementation("lazy_leader")
dartboard = implementation("dartboard")
bandit_weights = implementation("bandit_weights")
