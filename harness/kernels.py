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

import math
import os

import numpy as np

# Up to this many actions the compiled inverse-CDF sampler counts linearly;
# above it, it searches.
SMALL_N = 24

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


def _np_hedge_row_cdf(row, beta):
    """Normalised CDF of p(i) ~ exp(-beta row(i)) (as learners.experts.hedge_cdf)."""
    c = np.cumsum(np.exp(-beta * (row - row.min(axis=-1, keepdims=True))), axis=-1)
    return c / c[..., -1:]


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


def _np_bandit_weights(losses, w, u, cur, p_cur, acc, pos, block, mix, rate, ix, gain) -> np.ndarray:
    """Exponential weights with bandit feedback: EXP3, EXP3-IX and their blocked forms.

    ``losses`` (steps, replicas, n), read only at each replica's own action.
    ``w`` (n, replicas) the weights, one column per replica (so the compiled
    loop runs across replicas in vector lanes); ``pos`` a one-element array,
    the position in the current block of ``block`` rounds (shared by all
    replicas). At a block start replica r draws its action from
    p = (1 - mix) w / W + mix / n with one uniform (inverse CDF, the CDF
    summed in action order; ``u`` holds one row of uniforms per block start
    in the call, in order) and keeps p_a in ``p_cur``; every round it adds
    its own loss to ``acc``; at a block end y = acc / block and the played
    action's weight is multiplied by exp(rate (1 - y) / (p_a + ix)) when
    ``gain`` (EXP3's reward form) else exp(-rate y / (p_a + ix)) (EXP3-IX).
    A column is rescaled by its total when that leaves [1e-100, 1e100],
    which leaves p unchanged. Sums run in action order, as the compiled loop's."""
    steps, replicas, n = losses.shape
    out = np.empty((steps, replicas), dtype=np.int64)
    rows = np.arange(replicas)
    m = mix / n
    k = 0
    for t in range(steps):
        if pos[0] == 0:
            scale = (1.0 - mix) / _np_column_totals(w)
            c = np.zeros(replicas)
            count = np.zeros(replicas, dtype=np.int64)
            for j in range(n - 1):
                c += w[j] * scale + m
                count += c <= u[k]
            k += 1
            cur[:] = count
            p_cur[:] = w[cur, rows] * scale + m
            acc[:] = 0.0
        out[t] = cur
        acc += losses[t][rows, cur]
        if pos[0] == block - 1:
            y = acc / block
            if gain:
                w[cur, rows] = w[cur, rows] * np.exp(rate * ((1.0 - y) / (p_cur + ix)))
            else:
                w[cur, rows] = w[cur, rows] * np.exp(-rate * (y / (p_cur + ix)))
            W = _np_column_totals(w)
            bad = np.flatnonzero((W < 1e-100) | (W > 1e100))
            if bad.size:
                w[:, bad] = w[:, bad] / W[bad]
            pos[0] = 0
        else:
            pos[0] += 1
    return out


def _np_column_totals(w) -> np.ndarray:
    total = np.zeros(w.shape[1])
    for j in range(w.shape[0]):  # in action order, as the compiled loop adds
        total += w[j]
    return total


def _np_cap_block(proposed, last, switches, budget) -> np.ndarray:
    """Budget cap on a block of proposals (steps, replicas): play the proposal while
    fewer than ``budget`` switches were made, then keep the last action played.
    ``last`` and ``switches`` (capped at ``budget``) are updated in place."""
    steps, replicas = proposed.shape
    prev = np.concatenate([last[None], proposed[:-1]], axis=0)
    count = switches[None] + np.cumsum((proposed != prev) & (prev >= 0), axis=0)
    # count is nondecreasing, so the rounds still played as proposed form a prefix
    index = np.where(count <= budget, np.arange(steps)[:, None], -1)
    index = np.maximum.accumulate(index, axis=0)
    cols = np.arange(replicas)
    played = np.where(index >= 0, proposed[np.maximum(index, 0), cols], last[None]).astype(np.int64)
    switches[:] = np.minimum(count[-1], budget)
    last[:] = played[-1]
    return played


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


def _np_epoch_ends(proposed, out, s0, rows, prev, count, alive, k) -> np.ndarray:
    """One epoch-restart cohort's block: (steps, rows) proposals of its inner learner.

    Writes the proposals of rows still ``alive`` into ``out[s0:, rows]``, and
    returns for each row the first step at which its switch count (``count``,
    carried from earlier blocks, with ``prev`` the last proposal, -1 before
    any) reaches ``k``, for alive rows; -1 where it does not. ``prev`` and
    ``count`` are advanced over the whole block in place."""
    live = np.flatnonzero(alive)
    out[s0:, rows[live]] = proposed[:, live]
    before = np.concatenate([prev[None], proposed[:-1]], axis=0)
    running = count[None] + np.cumsum((proposed != before) & (before >= 0), axis=0)
    over = (running >= k) & alive[None]
    ends = np.where(over.any(axis=0), over.argmax(axis=0), -1)
    count[:] = running[-1]
    prev[:] = proposed[-1]
    return ends


def _np_cumulative_before(cum0, losses) -> tuple:
    """Cumulative losses before each round of a (steps, n) block, and after it.

    ``cum0`` (n,) are the totals before the block. Sums run in round order, as a
    round-by-round update would (numpy's cumsum along the first axis does)."""
    cums = np.cumsum(np.concatenate([cum0[None, :], losses], axis=0), axis=0)
    return cums[:-1], cums[-1].copy()


# Below this, a_j y rounds 1 - a_j y to exactly 1 for every y in [0, 1): the factor is 1.
FTPL_TINY = 2.0 ** -54
# Running products below this are set to 0 (their share of any probability is far below
# rounding), which keeps the loops out of slow subnormal arithmetic.
FTPL_FLUSH = 1e-200


def _np_ftpl_rows(a, y, w) -> np.ndarray:
    """Unnormalised FTPL probabilities a_i sum_k w_k prod_{j != i} (1 - a_j y_k), per row.

    ``a`` (rows, n) = exp(-eta (L - min L)); ``y``, ``w`` Gauss-Legendre nodes
    and weights on [0, 1]. Factors with a_j < FTPL_TINY are exactly 1 in
    floating point and are skipped: Q(y_k) = prod over the others; for an
    active i the product without i is Q(y_k) / (1 - a_i y_k) (the same rounded
    factor divided back out: no cancellation), for an inactive i it is Q(y_k).
    Products run in action order, sums in node order (the compiled loop's)."""
    rows, n = a.shape
    out = np.empty((rows, n))
    for r in range(rows):
        act = np.flatnonzero(a[r] >= FTPL_TINY)
        aa = a[r, act]
        q = np.ones(y.size)
        for j, aj in enumerate(aa):
            q = q * (1.0 - aj * y)
            if j % 16 == 15:
                q[q < FTPL_FLUSH] = 0.0
        wq = w * q
        total = 0.0
        for k in range(y.size):
            total += wq[k]
        acc = np.zeros(aa.size)
        for k in range(y.size):
            acc += wq[k] / (1.0 - aa * y[k])
        out[r] = a[r] * total
        out[r, act] = aa * acc
    return out


# -- adversaries ------------------------------------------------------------------------------


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


# -- random-walk perturbation: windows ------------------------------------------------------

# A window is worth certifying only when it is at least this long.
WALK_MIN_WINDOW = 4
# An action is "near" the leader when its perturbed score is within
# (length - 1) + WALK_NEAR sigma sqrt(length) of the leader's (see walk_windows).
WALK_NEAR = 2.0


def _walk_windows(before, s0, out, t_first, wlen, scale, near, z, buf, first, drawn, endz, window, nbuf, npos,
                  ubuf, upos):
    """Exact random-walk perturbation (learners.low_switching.RandomWalkPerturbation)
    with most walks never drawn step by step.

    Rounds are cut into windows of ``wlen`` rounds aligned to absolute time
    (round t starts a window when t % wlen == 0; a first window may be
    shorter). At a window start, per replica, with L = cumulative losses and
    z = each walk's value (``z``), the perturbed scores s_j = L_j + z_j pick
    the leader; the other actions within (length - 1) + near sigma
    sqrt(length) of it are "near" (``near`` = WALK_NEAR in play; any value
    gives the same law, only the cost changes). If no action is far (or the
    window is shorter than WALK_MIN_WINDOW) every walk is drawn step by step
    for the window (sigma N(0, 1) steps), as the definition says. Otherwise:

    - the near walks are drawn step by step;
    - E = max over the window's rounds of min over near actions of
      (L_j at the window start + rounds elapsed + their walk), an upper bound
      of the least near score (a loss is at most 1 per round);
    - each far walk j is a Brownian motion observed at whole times (its
      steps are Gaussian), so draw its window end c = z_j + sigma sqrt(length)
      N(0, 1) and whether the bridge from z_j to c dips to the level
      b = E - L_j: it does with probability exp(-2 (z_j - b)(c - b) /
      (sigma^2 length)) (Brownian bridge crossing, common practice), and
      surely if c <= b. If it does not, its score stays above E throughout:
      it cannot lead in this window and none of its steps is drawn. If it
      does, the first time tau it touches b has tau = length u / (1 + u),
      u inverse Gaussian with mean (z_j - b) / |c - b| and shape
      (z_j - b)^2 / (sigma^2 length) (the bridge's first-passage density
      after the time change u = tau / (length - tau)); before tau it is above
      b (cannot lead), after tau it is a Brownian bridge from (tau, b) to
      (length, c), drawn at whole times. If z_j <= b already, the whole
      window's bridge is drawn.

    Every round, the action with the least L_t + walk among the drawn walks
    (ties to the lowest index) is played: exactly the argmin over all walks.

    Buffers: ``buf`` (replicas, wlen + 1, n) holds the drawn walk values at
    window positions 1..length, ``first[r, j]`` the first position at which
    walk j is drawn (length + 1: never), ``drawn[r]`` the drawn actions in
    increasing order (-1 after the last), ``endz`` the values at the window's
    end, copied into ``z`` when it ends; ``window`` = [start round, length].
    Normals come from the buffer ``nbuf`` (position ``npos[0]``) and uniforms
    from ``ubuf`` (``upos[0]``), in a fixed order per replica; the kernel
    plays rounds s0, s0+1, ... of the block (absolute round t_first + s) and
    stops before a window start when a buffer holds fewer values than the
    window may need, returning the round it stopped at (``steps`` when done).
    """
    steps, replicas, n = before.shape
    need_normals = replicas * n * (wlen + 2)
    need_uniforms = replicas * 2 * n
    var = scale * scale
    score = np.empty(n)
    near_j = np.empty(n, dtype=np.int64)
    for s in range(s0, steps):
        t = t_first + s
        if window[1] <= 0 or t >= window[0] + window[1]:
            if nbuf.shape[0] - npos[0] < need_normals or ubuf.shape[0] - upos[0] < need_uniforms:
                return s
            length = wlen - t % wlen
            window[0] = t
            window[1] = length
            root = math.sqrt(length)
            margin = (length - 1) + near * scale * root
            for r in range(replicas):
                best = np.inf
                for j in range(n):
                    score[j] = before[s, r, j] + z[r, j]
                    best = min(best, score[j])
                m = 0
                for j in range(n):
                    if score[j] - best <= margin:
                        near_j[m] = j
                        m += 1
                lazy = m < n and length >= WALK_MIN_WINDOW
                # near walks (all walks in a plain window), step by step
                for j in range(n):
                    if lazy and score[j] - best > margin:
                        continue
                    v = z[r, j]
                    for k in range(1, length + 1):
                        v = v + scale * nbuf[npos[0]]
                        npos[0] += 1
                        buf[r, k, j] = v
                    first[r, j] = 1
                    endz[r, j] = v
                if not lazy:
                    for j in range(n):
                        drawn[r, j] = j
                    continue
                top = -np.inf
                for k in range(1, length + 1):
                    low = np.inf
                    for i in range(m):
                        j = near_j[i]
                        low = min(low, before[s, r, j] + (k - 1) + buf[r, k, j])
                    top = max(top, low)
                for j in range(n):
                    if score[j] - best <= margin:
                        continue
                    a = z[r, j]
                    level = top - before[s, r, j]
                    c = a + scale * root * nbuf[npos[0]]
                    npos[0] += 1
                    endz[r, j] = c
                    start_t, start_v = 0.0, a
                    if a > level:
                        if c > level:
                            expo = -2.0 * (a - level) * (c - level) / (var * length)
                            if expo < -40.0:
                                # crossing probability < 5e-18, below a uniform's resolution (2^-53):
                                # no draw can fall under it but 0.0 itself
                                first[r, j] = length + 1
                                continue
                            u = ubuf[upos[0]]
                            upos[0] += 1
                            if u >= math.exp(expo):
                                first[r, j] = length + 1   # stays above the level: never leads here
                                continue
                        # first passage: u ~ IG(mu, lam) (Michael, Schucany and Haas 1976)
                        x0 = a - level
                        y0 = max(abs(c - level), 1e-12 * (x0 + scale))
                        mu = x0 / y0
                        lam = x0 * x0 / (var * length)
                        g = nbuf[npos[0]]
                        npos[0] += 1
                        big = mu * g * g
                        cand = 4.0 * mu * lam * big / (big + math.sqrt(4.0 * lam * big + big * big)) ** 2
                        if big == 0.0:
                            cand = mu
                        w = ubuf[upos[0]]
                        upos[0] += 1
                        ig = cand if w * (mu + cand) <= mu else mu * (mu / cand)
                        start_t = length * ig / (1.0 + ig)
                        start_v = level
                    k1 = int(math.floor(start_t)) + 1
                    first[r, j] = k1
                    for k in range(k1, length):   # Brownian bridge to (length, c), at whole times
                        rem = length - start_t
                        step = k - start_t
                        mean = start_v + (c - start_v) * step / rem
                        sd = scale * math.sqrt(step * (length - k) / rem)
                        v = mean + sd * nbuf[npos[0]]
                        npos[0] += 1
                        buf[r, k, j] = v
                        start_t, start_v = float(k), v
                    buf[r, length, j] = c
                i = 0
                for j in range(n):
                    if first[r, j] <= length:
                        drawn[r, i] = j
                        i += 1
                if i < n:
                    drawn[r, i] = -1
        k = t - window[0] + 1
        for r in range(replicas):
            best = np.inf
            a = 0
            for i in range(n):
                j = drawn[r, i]
                if j < 0:
                    break
                if first[r, j] <= k:
                    x = before[s, r, j] + buf[r, k, j]
                    if x < best:
                        best = x
                        a = j
            out[s, r] = a
        if k == window[1]:
            for r in range(replicas):
                for j in range(n):
                    z[r, j] = endz[r, j]
    return steps


_np_walk_windows = _walk_windows  # the twin is the same source, run by the interpreter


def _np_fill_normals(rng, out) -> None:
    rng.standard_normal(out=out)


# -- numba --------------------------------------------------------------------

try:  # numba is a declared dependency, but the numpy path keeps working without it
    import numba
except Exception:  # pragma: no cover - exercised only where numba is missing
    numba = None

if numba is not None:
    # error_model="numpy": float division follows IEEE (as the numpy twins do) instead of
    # raising ZeroDivisionError, and so loops with divisions vectorise.
    _jit = numba.njit(cache=True, nogil=True, error_model="numpy")

    @_jit
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

    @_jit
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

    @_jit
    def _nb_account_shared(losses, actions, last, played, switches):
        steps, replicas = actions.shape
        for t in range(steps):
            for r in range(replicas):
                a = actions[t, r]
                b = last[r]
                played[r] += losses[t, a]
                switches[r] += (a != b) & (b >= 0)  # branch-free: switches are unpredictable
                last[r] = a

    @_jit
    def _nb_account_per_replica(losses, actions, last, played, switches):
        steps, replicas = actions.shape
        for t in range(steps):
            for r in range(replicas):
                a = actions[t, r]
                b = last[r]
                played[r] += losses[t, r, a]
                switches[r] += (a != b) & (b >= 0)
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

    @_jit
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

    @_jit
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

    @_jit
    def _nb_bandit_weights(losses, w, u, cur, p_cur, acc, pos, block, mix, rate, ix, gain):
        steps, replicas, n = losses.shape
        out = np.empty((steps, replicas), dtype=np.int64)
        m = mix / n
        scale = np.empty(replicas)
        c = np.empty(replicas)
        count = np.empty(replicas, dtype=np.int32)
        k = 0
        for t in range(steps):
            if pos[0] == 0:
                # loops over replicas innermost: each replica's sums keep their
                # order, and independent replicas fill the vector lanes
                for r in range(replicas):
                    scale[r] = 0.0
                for j in range(n):
                    for r in range(replicas):
                        scale[r] += w[j, r]
                for r in range(replicas):
                    scale[r] = (1.0 - mix) / scale[r]
                    c[r] = 0.0
                    count[r] = 0
                for j in range(n - 1):
                    for r in range(replicas):
                        c[r] += w[j, r] * scale[r] + m
                        count[r] += np.int32(c[r] <= u[k, r])
                k += 1
                for r in range(replicas):
                    a = count[r]
                    cur[r] = a
                    p_cur[r] = w[a, r] * scale[r] + m
                    acc[r] = 0.0
            for r in range(replicas):
                a = cur[r]
                out[t, r] = a
                acc[r] += losses[t, r, a]
            if pos[0] == block - 1:
                for r in range(replicas):
                    a = cur[r]
                    y = acc[r] / block
                    if gain:
                        w[a, r] = w[a, r] * np.exp(rate * ((1.0 - y) / (p_cur[r] + ix)))
                    else:
                        w[a, r] = w[a, r] * np.exp(-rate * (y / (p_cur[r] + ix)))
                for r in range(replicas):
                    c[r] = 0.0
                for j in range(n):
                    for r in range(replicas):
                        c[r] += w[j, r]
                for r in range(replicas):
                    if c[r] < 1e-100 or c[r] > 1e100:
                        for j in range(n):
                            w[j, r] = w[j, r] / c[r]
                pos[0] = 0
            else:
                pos[0] += 1
        return out

    @_jit
    def _nb_cap_block(proposed, last, switches, budget):
        steps, replicas = proposed.shape
        out = np.empty((steps, replicas), dtype=np.int64)
        for t in range(steps):
            for r in range(replicas):
                b = last[r]
                a = proposed[t, r]
                if switches[r] >= budget:
                    a = b
                elif b >= 0 and a != b:
                    switches[r] += 1
                last[r] = a
                out[t, r] = a
        return out

    @_jit
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

    @_jit
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


if numba is not None:
    @_jit
    def _nb_epoch_ends(proposed, out, s0, rows, prev, count, alive, k):
        steps, width = proposed.shape
        ends = np.full(width, -1, dtype=np.int64)
        for s in range(steps):
            for j in range(width):
                a = proposed[s, j]
                if alive[j]:
                    out[s0 + s, rows[j]] = a
                b = prev[j]
                count[j] += (a != b) & (b >= 0)
                prev[j] = a
                if ends[j] < 0 and alive[j] and count[j] >= k:
                    ends[j] = s
        return ends


if numba is not None:
    @_jit
    def _nb_cumulative_before(cum0, losses):
        steps, n = losses.shape
        before = np.empty((steps, n))
        after = cum0.copy()
        for t in range(steps):
            for j in range(n):
                before[t, j] = after[j]
                after[j] = after[j] + losses[t, j]
        return before, after


if numba is not None:
    @_jit
    def _nb_ftpl_rows(a, y, w):
        rows, n = a.shape
        m = y.shape[0]
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
                    q[i] = q[i] * (1.0 - aj * y[i])
                if j % 16 == 15:
                    for i in range(m):
                        if q[i] < FTPL_FLUSH:
                            q[i] = 0.0
            total = 0.0
            for i in range(m):
                wq[i] = w[i] * q[i]
                total += wq[i]
            for j in range(k):
                acc[j] = 0.0
            for i in range(m):
                for j in range(k):  # across actions: vector lanes, each sum in node order
                    acc[j] += wq[i] / (1.0 - aa[j] * y[i])
            k = 0
            for j in range(n):
                if a[r, j] >= FTPL_TINY:
                    out[r, j] = aa[k] * acc[k]
                    k += 1
                else:
                    out[r, j] = a[r, j] * total
        return out


if numba is not None:
    @_jit
    def _nb_pareto_one(u, scale, alpha, cap):
        x = np.ceil(scale * (1.0 - u) ** (-1.0 / alpha))
        if not (x < cap):  # also inf and nan
            x = cap
        return max(np.int64(x), 1)

    @_jit
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

    @_jit
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

    @_jit
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


if numba is not None:
    _nb_walk_windows = _jit(_walk_windows)

    @_jit
    def _nb_fill_normals(rng, out):
        for i in range(out.shape[0]):
            out[i] = rng.standard_normal()


def _pick():
    wanted = os.environ.get("BOUNDBREAKER_KERNELS", "numba").strip().lower()
    return "numba" if (numba is not None and wanted != "numpy") else "numpy"


BACKEND = _pick()
"""Which implementation is live: ``"numba"`` or ``"numpy"``."""

KERNELS = ("sample_rows", "account_shared", "account_per_replica", "hedge_per_replica", "lazy_leader",
           "dartboard_shared", "dartboard_per_replica", "bandit_weights", "cap_block", "lazy_argmin",
           "perturbed_leader", "epoch_ends",
           "cumulative_before", "ftpl_rows", "pareto_walk", "tie_walk", "near_tie",
           "walk_windows", "fill_normals")
"""Every kernel, by name; ``_np_<name>`` is its numpy twin and ``_nb_<name>`` its compiled loop."""

_IMPLS = {"numpy": {name: globals()["_np_" + name] for name in KERNELS}}
if numba is not None:
    _IMPLS["numba"] = {name: globals()["_nb_" + name] for name in KERNELS}


def implementation(name: str, backend: str | None = None):
    """A kernel by name from a given backend (tests compare the two)."""
    return _IMPLS[backend or BACKEND][name]


class UniformStream:
    """The uniforms of ``rng.random()``, in order, read through a buffer.

    ``take(k)`` returns the next k values: exactly what k single calls would
    give, whenever refills happen. Kernels that draw a data-dependent number
    of values read ``buffer`` from ``position[0]`` on and advance it,
    stopping when fewer than they may need are left; the caller then
    ``reserve``s and resumes. (Handing a compiled loop the Generator itself
    costs tens of microseconds per call, which dominates when a learner is
    called for many small blocks, as epoch restarts and act() do.)
    """

    def __init__(self, rng: np.random.Generator, chunk: int = 4096):
        self.rng = rng
        self.chunk = int(chunk)
        self.buffer = np.empty(0)
        self.position = np.zeros(1, dtype=np.int64)

    def _fresh(self, k: int) -> np.ndarray:
        return self.rng.random(k)

    def reserve(self, k: int) -> None:
        """Make at least ``k`` unread values available."""
        left = self.buffer.size - int(self.position[0])
        if left < k:
            fresh = self._fresh(max(k - left, self.chunk))
            self.buffer = np.concatenate([self.buffer[int(self.position[0]):], fresh])
            self.position[0] = 0

    def take(self, k: int) -> np.ndarray:
        self.reserve(k)
        p = int(self.position[0])
        self.position[0] = p + k
        return self.buffer[p:p + k]


class NormalStream(UniformStream):
    """As UniformStream for ``rng.standard_normal()`` (filled by a compiled loop: the same
    values as numpy's, in the same order)."""

    def _fresh(self, k: int) -> np.ndarray:
        out = np.empty(k)
        fill_normals(self.rng, out)
        return out


sample_rows = implementation("sample_rows")
account_shared = implementation("account_shared")
account_per_replica = implementation("account_per_replica")
hedge_per_replica = implementation("hedge_per_replica")
lazy_leader = implementation("lazy_leader")
dartboard_shared = implementation("dartboard_shared")
dartboard_per_replica = implementation("dartboard_per_replica")
bandit_weights = implementation("bandit_weights")
cap_block = implementation("cap_block")
lazy_argmin = implementation("lazy_argmin")
perturbed_leader = implementation("perturbed_leader")
epoch_ends = implementation("epoch_ends")
cumulative_before = implementation("cumulative_before")
ftpl_rows = implementation("ftpl_rows")
pareto_walk = implementation("pareto_walk")
tie_walk = implementation("tie_walk")
near_tie = implementation("near_tie")
walk_windows = implementation("walk_windows")
fill_normals = implementation("fill_normals")
