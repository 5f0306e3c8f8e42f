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


def _pick():
    wanted = os.environ.get("BOUNDBREAKER_KERNELS", "numba").strip().lower()
    return "numba" if (numba is not None and wanted != "numpy") else "numpy"


BACKEND = _pick()
"""Which implementation is live: ``"numba"`` or ``"numpy"``."""

_IMPLS = {"numpy": {"sample_rows": _np_sample_rows, "account_shared": _np_account_shared,
                    "account_per_replica": _np_account_per_replica,
                    "hedge_per_replica": _np_hedge_per_replica}}
if numba is not None:
    _IMPLS["numba"] = {"sample_rows": _nb_sample_rows, "account_shared": _nb_account_shared,
                       "account_per_replica": _nb_account_per_replica,
                       "hedge_per_replica": _nb_hedge_per_replica}


def implementation(name: str, backend: str | None = None):
    """A kernel by name from a given backend (tests compare the two)."""
    return _IMPLS[backend or BACKEND][name]


sample_rows = implementation("sample_rows")
account_shared = implementation("account_shared")
account_per_replica = implementation("account_per_replica")
hedge_per_replica = implementation("hedge_per_replica")
