"""The random-walk perturbation's kernel (learners.low_switching.RandomWalkPerturbation)."""

from __future__ import annotations

import math

import numpy as np

from ._compile import jit, numba

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


if numba is not None:
    _nb_walk_windows = jit(_walk_windows)

    @jit
    def _nb_fill_normals(rng, out):
        for i in range(out.shape[0]):
            out[i] = rng.standard_normal()


KERNELS = ("walk_windows", "fill_normals")
