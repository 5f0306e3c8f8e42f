"""``boundbreaker bench``: throughput and memory of the engine, measured in one run.

Throughput is in replica-rounds per second: replicas x horizon / wall time
of ``run`` on one core, against an i.i.d. Bernoulli(1/2) sequence shared by
all replicas (the oblivious fast path) and, separately, one sequence per
replica. The naive baseline runs the same learner's act/update loop one
replica at a time (numpy per round) on a shorter horizon; the ratio is
fast / naive. Peak memory is the tracemalloc peak (numpy allocations
included) of a run at two horizons: streaming means it must not grow with T.

Figures from a shared machine are noisy: compare ratios from one run, not
absolute numbers across runs.
"""

from __future__ import annotations

import time
import tracemalloc

import numpy as np

from . import kernels
from .learners import example, get as get_learner, names as learner_names
from .protocol import Learner
from .runner import run


class _SlowPath(Learner):
    """Delegates act/update but keeps the base act/update loop for blocks."""

    def __init__(self, inner):
        self.inner = inner
        self.feedback = inner.feedback

    def reset(self, n_actions, horizon, replicas, rng):
        self.inner.reset(n_actions, horizon, replicas, rng)

    def act(self):
        return self.inner.act()

    def update(self, actions, losses):
        self.inner.update(actions, losses)


def _adversary(shared: bool):
    import adversaries

    return adversaries.get("bernoulli", p=0.5, shared=shared)


def throughput(learner, horizon, replicas, n_actions, shared=True, seed=0) -> float:
    started = time.perf_counter()
    run(learner, _adversary(shared), horizon, n_actions, replicas=replicas, seed=seed)
    return replicas * horizon / (time.perf_counter() - started)


def naive_throughput(learner, horizon, replicas, n_actions) -> float:
    """One replica at a time through the learner's own act/update (numpy per round)."""
    started = time.perf_counter()
    for r in range(replicas):
        run(_SlowPath(learner), _adversary(True), horizon, n_actions, replicas=1, seed=r)
    return replicas * horizon / (time.perf_counter() - started)


def peak_memory(learner, horizon, replicas, n_actions) -> int:
    """Peak bytes allocated (tracemalloc) during one run."""
    tracemalloc.start()
    try:
        run(learner, _adversary(True), horizon, n_actions, replicas=replicas, seed=0)
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def main(horizon=100_000, replicas=1024, n_actions=10, learners=None, quick=False) -> dict:
    if quick:
        horizon, replicas = min(horizon, 5_000), min(replicas, 256)
    names = learners or learner_names()
    naive_h, naive_r = max(200, horizon // 50), 4
    rows = []
    for name in names:
        learner = example(name)  # registry defaults, or the entry's example_params (a budget, an inner learner)
        run(learner, _adversary(True), 64, n_actions, replicas=8)  # compile kernels outside the clock
        run(learner, _adversary(False), 64, n_actions, replicas=8)
        fast = throughput(learner, horizon, replicas, n_actions, shared=True)
        per_replica = throughput(learner, max(1, horizon // 10), replicas, n_actions, shared=False)
        naive = naive_throughput(learner, naive_h, naive_r, n_actions)
        rows.append({"learner": name, "shared_rps": fast, "per_replica_rps": per_replica,
                     "naive_rps": naive, "speedup": fast / naive})
    mem_horizons = (10_000, 100_000) if quick else (10_000, 1_000_000)
    memory = {str(h): peak_memory(get_learner("hedge"), h, replicas, n_actions) for h in mem_horizons}
    return {"horizon": horizon, "replicas": replicas, "n_actions": n_actions, "kernels": kernels.BACKEND,
            "naive_horizon": naive_h, "naive_replicas": naive_r, "learners": rows,
            "peak_memory_bytes": memory,
            "memory_ratio": memory[str(mem_horizons[1])] / memory[str(mem_horizons[0])]}


def format_report(report: dict) -> str:
    lines = [f"throughput, replica-rounds/s: T={report['horizon']} replicas={report['replicas']} "
             f"n={report['n_actions']}, one core, kernels={report['kernels']}",
             f"naive = the learner's act/update loop, one replica at a time, T={report['naive_horizon']}",
             f"{'learner':<24}{'shared seq':>14}{'per-replica':>14}{'naive':>12}{'speedup':>10}"]
    for row in report["learners"]:
        lines.append(f"{row['learner']:<24}{row['shared_rps']:>14.3g}{row['per_replica_rps']:>14.3g}"
                     f"{row['naive_rps']:>12.3g}{row['speedup']:>9.0f}x")
    mem = report["peak_memory_bytes"]
    shown = ", ".join(f"T={h}: {v / 2**20:.1f} MiB" for h, v in mem.items())
    lines.append(f"peak memory (hedge, tracemalloc): {shown}; ratio {report['memory_ratio']:.2f}")
    return "\n".join(lines)
