"""Kernels of the wrappers (learners.wrappers): the switch cap and epoch ends."""

from __future__ import annotations

import numpy as np

from ._compile import jit, numba


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


def _np_epoch_ends(proposed, out, s0, rows, prev, count, alive, k) -> np.ndarray:
    """One epoch-restart cohort's block: (steps, rows) proposals of its inner learner.

    Writes the proposals of rows still ``alive`` into ``out[rows, s0:]`` (``out`` is
    replica-major, (replicas, steps), so a cohort of one replica writes one
    contiguous row rather than a column of a round-major array), and
    returns for each row the first step at which its switch count (``count``,
    carried from earlier blocks, with ``prev`` the last proposal, -1 before
    any) reaches ``k``, for alive rows; -1 where it does not. ``prev`` and
    ``count`` are advanced over the whole block in place."""
    live = np.flatnonzero(alive)
    out[rows[live], s0:] = proposed[:, live].T
    before = np.concatenate([prev[None], proposed[:-1]], axis=0)
    running = count[None] + np.cumsum((proposed != before) & (before >= 0), axis=0)
    over = (running >= k) & alive[None]
    ends = np.where(over.any(axis=0), over.argmax(axis=0), -1)
    count[:] = running[-1]
    prev[:] = proposed[-1]
    return ends


if numba is not None:

    @jit
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

    @jit
    def _nb_epoch_ends(proposed, out, s0, rows, prev, count, alive, k):
        steps, width = proposed.shape
        ends = np.full(width, -1, dtype=np.int64)
        for s in range(steps):
            for j in range(width):
                a = proposed[s, j]
                if alive[j]:
                    out[rows[j], s0 + s] = a
                b = prev[j]
                count[j] += (a != b) & (b >= 0)
                prev[j] = a
                if ends[j] < 0 and alive[j] and count[j] >= k:
                    ends[j] = s
        return ends


KERNELS = ("cap_block", "epoch_ends")
