"""The bandit learners' kernel: exponential weights with bandit feedback (learners.bandits)."""

from __future__ import annotations

import numpy as np

from ._compile import jit, numba


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


if numba is not None:

    @jit
    def _nb_column_totals(w, out):
        """out[r] = sum_j w[j, r], in action order; the loop over replicas is innermost (vector lanes)."""
        for r in range(w.shape[1]):
            out[r] = 0.0
        for j in range(w.shape[0]):
            for r in range(w.shape[1]):
                out[r] += w[j, r]

    @jit
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
                _nb_column_totals(w, scale)
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
                _nb_column_totals(w, c)
                for r in range(replicas):
                    if c[r] < 1e-100 or c[r] > 1e100:
                        for j in range(n):
                            w[j, r] = w[j, r] / c[r]
                pos[0] = 0
            else:
                pos[0] += 1
        return out


KERNELS = ("bandit_weights",)
