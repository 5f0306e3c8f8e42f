"""``boundbreaker bench``: throughput, memory and scaling of the engine, in one run.

What each figure means (all measured in the same process, one after the other,
so compare ratios within one report, not absolute numbers across machines or
loads; the report records the load average before and after):

- **Throughput** (replica-rounds/s): replicas x horizon / wall time of
  ``run(..., n_jobs=1)`` on one core, against i.i.d. Bernoulli(1/2) losses
  shared by all replicas (the oblivious fast path). Two sizes: n = 10 actions
  (horizon 1e5, 1024 replicas by default) and n = 1000 (horizon 1e4 by
  default: every learner at n = 1000 does at least O(n) shared work per
  round, and the short horizon keeps the run to minutes). At n = 10 the same
  learners are also timed on one sequence per replica, at a tenth of the
  horizon.
- **Naive** (replica-rounds/s): the same work played the obvious way: the
  learner's own act/update loop (numpy per round), one replica at a time,
  with the same n, horizon (so the same tuning) and sequence kind, for
  ``naive_replicas`` replicas. ``speedup`` = throughput / naive.
- **Bandwidth**: a 256 MiB float64 ``np.copyto``, bytes read plus written
  per second (GB/s), best of three.
- **Bandwidth share** of a learner = bytes per replica-round x its throughput
  / bandwidth. Bytes per replica-round is a *model*: 8 bytes for every pass
  the fast path makes over a (rounds x replicas) array of 8-byte values
  (``BYTES`` lists them per learner: every run writes the actions once and
  reads them three times, for the two range checks and the accounting; a
  learner that draws a uniform per replica-round writes and reads it once
  more, and so on). A learner whose share nears 1 is limited by memory
  traffic, not by arithmetic (the blocks are a few MiB, so they may stream
  from cache and the share can exceed 1); the report marks shares >= 0.5.
- **Peak memory** at horizons 1e4 and 1e6 (hedge, n = 10, 1024 replicas):
  the tracemalloc peak (every numpy allocation) and, in a fresh subprocess,
  the peak resident memory above the process's resident size after a
  warm-up run (it also counts the compiled kernels' own allocations; on
  Linux the peak is restarted through /proc/self/clear_refs, elsewhere only
  a rise above the warm-up's own peak shows). Streaming means the
  ratio stays near 1. ``sweep`` repeats the tracemalloc check at horizons
  T and 10 T for every learner (against the shared sequence) and every
  adversary (played by FTL), with small loss blocks (``SWEEP_BLOCK_ENTRIES``)
  so that both horizons span many blocks.
- **Scaling**: throughput of one long hedge run with n_jobs = 1 and
  n_jobs = 2 (16 replica chunks). The joblib worker pool is started and the
  kernels loaded by a small n_jobs = 2 run first, and that warm-up is
  reported separately, so process start-up does not count against scaling.
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
import time
import tracemalloc

import numpy as np

from . import kernels
from .learners import example, names as learner_names
from .protocol import Learner
from .runner import run

SECTIONS = ("throughput", "large", "bandwidth", "memory", "sweep", "scaling")
SWEEP_BLOCK_ENTRIES = 1 << 14

# Passes over (rounds x replicas) arrays of 8-byte values per block, beyond the
# engine's own four (the learner writes the actions; the runner reads them for
# the two range checks and for the accounting). See the module docstring.
ENGINE_PASSES = 4
EXTRA_PASSES = {
    "hedge": 2, "flawed-hot-hedge": 2, "ftpl": 2,        # one uniform per replica-round: written, read
    "exp3": 2, "exp3-ix": 2,                             # the same (one draw per round: blocks of 1)
    "ftl": -2,                                           # its actions are a broadcast row: the checks read one row
    "budget-cap": 2, "epoch-restart": 2,                 # the inner learner's proposals: written, read
    "flawed-heavy-tail": 4,                              # the inner proposals, and the override's where and cast
}


def bytes_per_replica_round(name: str) -> int:
    return 8 * (ENGINE_PASSES + EXTRA_PASSES.get(name, 0))


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


def throughput(learner, horizon, replicas, n_actions, shared=True, seed=0, n_jobs=1) -> float:
    started = time.perf_counter()
    run(learner, _adversary(shared), horizon, n_actions, replicas=replicas, seed=seed, n_jobs=n_jobs)
    return replicas * horizon / (time.perf_counter() - started)


def naive_throughput(learner, horizon, replicas, n_actions) -> float:
    """One replica at a time through the learner's own act/update (numpy per round)."""
    started = time.perf_counter()
    for r in range(replicas):
        run(_SlowPath(learner), _adversary(True), horizon, n_actions, replicas=1, seed=r)
    return replicas * horizon / (time.perf_counter() - started)


def bandwidth(mib: int = 256, repeats: int = 3) -> float:
    """GB/s moved (read + written) by a large float64 copy, best of ``repeats``."""
    src = np.ones(mib * 2**20 // 8)
    dst = np.empty_like(src)
    np.copyto(dst, src)  # touch the pages outside the clock
    best = math.inf
    for _ in range(repeats):
        started = time.perf_counter()
        np.copyto(dst, src)
        best = min(best, time.perf_counter() - started)
    return 2 * src.nbytes / best / 1e9


def peak_memory(learner, horizon, replicas, n_actions, adversary=None) -> int:
    """Peak bytes allocated (tracemalloc: numpy and Python allocations) during one run."""
    adversary = adversary if adversary is not None else _adversary(True)
    run(learner, adversary, min(horizon, 64), n_actions, replicas=min(replicas, 8))  # one-time imports, caches
    tracemalloc.start()
    try:
        run(learner, adversary, horizon, n_actions, replicas=replicas, seed=0)
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def resident_peak(learner_name: str, horizon: int, replicas: int, n_actions: int) -> int | None:
    """Peak resident bytes of a run above the warmed-up baseline, in a fresh subprocess
    (counts allocations tracemalloc cannot see: the compiled kernels'). None where the
    platform has no ``resource`` module."""
    code = ("import sys, json; from harness.bench import _resident_child; "
            "print(json.dumps(_resident_child(*json.loads(sys.argv[1]))))")
    args = json.dumps([learner_name, horizon, replicas, n_actions])
    done = subprocess.run([sys.executable, "-c", code, args], capture_output=True, text=True)
    if done.returncode != 0:
        raise RuntimeError(f"memory probe failed: {done.stderr.strip().splitlines()[-1:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def _resident_child(learner_name, horizon, replicas, n_actions):
    learner = example(learner_name)
    run(learner, _adversary(True), 64, n_actions, replicas=8)   # imports, kernels, caches
    if _reset_peak():  # Linux: the peak (VmHWM) restarts from the current resident size
        base = _status_bytes("VmRSS")
        run(learner, _adversary(True), horizon, n_actions, replicas=replicas, seed=0)
        return max(0, _status_bytes("VmHWM") - base)
    try:
        import resource
    except ImportError:  # pragma: no cover - not on Unix
        return None
    # elsewhere the peak cannot be reset: a rise above the warm-up's peak is all we see
    scale = 1 if sys.platform == "darwin" else 1024          # ru_maxrss: bytes on macOS, KiB on Linux
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * scale
    run(learner, _adversary(True), horizon, n_actions, replicas=replicas, seed=0)
    return max(0, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * scale - base)


def _reset_peak() -> bool:
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")
        return _status_bytes("VmHWM") is not None
    except OSError:
        return False


def _status_bytes(field: str):
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith(field + ":"):
                return int(line.split()[1]) * 1024   # kB
    return None


def _warm(learner, n_actions):
    """Compile (or load) kernels outside the clock."""
    run(learner, _adversary(True), 64, n_actions, replicas=8)
    run(learner, _adversary(False), 64, n_actions, replicas=8)


def _throughput_rows(names, horizon, replicas, n_actions, naive_replicas, per_replica, gbs):
    rows = []
    for name in names:
        learner = example(name)  # registry defaults, or the entry's example_params (a budget, an inner learner)
        _warm(learner, n_actions)
        fast = throughput(learner, horizon, replicas, n_actions, shared=True)
        row = {"learner": name, "shared_rps": fast}
        if per_replica:
            row["per_replica_rps"] = throughput(learner, max(1, horizon // 10), replicas, n_actions, shared=False)
        naive = naive_throughput(learner, horizon, naive_replicas, n_actions)
        row.update(naive_rps=naive, speedup=fast / naive, bytes_per_rr=bytes_per_replica_round(name))
        if gbs:
            row["bandwidth_share"] = row["bytes_per_rr"] * fast / (gbs * 1e9)
        rows.append(row)
    return rows


def _sweep(horizon, replicas, n_actions, quick=False):
    """tracemalloc peaks at horizon and 10 x horizon: every learner, every adversary.

    The runner's loss blocks are cut to ``SWEEP_BLOCK_ENTRIES`` for the sweep, so that even
    the shorter horizon spans many blocks: what the sweep looks for is state that grows
    with the horizon beyond one block (a list per round, a table per round)."""
    import adversaries

    from . import runner

    learners = ["hedge", "epoch-restart", "exp3"] if quick else learner_names()
    advs = ["bernoulli", "near-tie", "multiscale-walk"] if quick else adversaries.names()
    saved, runner.BLOCK_ENTRIES = runner.BLOCK_ENTRIES, SWEEP_BLOCK_ENTRIES
    try:
        out = []
        ftl = example("ftl")
        for kind, name in [("learner", x) for x in learners] + [("adversary", x) for x in advs]:
            learner = example(name) if kind == "learner" else ftl
            adversary = adversaries.get(name) if kind == "adversary" else None
            small, big = (peak_memory(learner, h, replicas, n_actions, adversary=adversary)
                          for h in (horizon, 10 * horizon))
            out.append({"kind": kind, "name": name, "small": small, "big": big, "ratio": big / small})
        return out
    finally:
        runner.BLOCK_ENTRIES = saved


def _scaling(horizon, replicas, n_actions, chunk=256, warm_up=True):
    learner = example("hedge")
    _warm(learner, n_actions)
    started = time.perf_counter()
    if warm_up:  # start the worker pool and load the kernels in it
        run(learner, _adversary(True), 256, n_actions, replicas=4 * 8, seed=1, n_jobs=2, chunk=8)
    warm = time.perf_counter() - started
    rates = []
    for jobs in (1, 2):
        started = time.perf_counter()
        run(learner, _adversary(True), horizon, n_actions, replicas=replicas, seed=0, n_jobs=jobs, chunk=chunk)
        rates.append(replicas * horizon / (time.perf_counter() - started))
    return {"learner": "hedge", "horizon": horizon, "replicas": replicas, "chunks": math.ceil(replicas / chunk),
            "warmup_s": warm, "jobs1_rps": rates[0], "jobs2_rps": rates[1], "ratio": rates[1] / rates[0]}


def main(horizon=100_000, replicas=1024, n_actions=10, learners=None, quick=False, large_actions=1000,
         large_horizon=10_000, sections=SECTIONS) -> dict:
    unknown = [s for s in sections if s not in SECTIONS]
    if unknown:
        from .errors import ConfigError
        raise ConfigError(f"sections: unknown section {unknown[0]!r}; choose from {', '.join(SECTIONS)}")
    if quick:  # a smoke test of every section: tiny sizes, figures meaningless
        horizon, replicas = min(horizon, 5_000), min(replicas, 256)
        large_horizon, large_actions = min(large_horizon, 200), min(large_actions, 100)
    names = learners or learner_names()
    report = {"horizon": horizon, "replicas": replicas, "n_actions": n_actions, "kernels": kernels.BACKEND,
              "cpus": os.cpu_count(), "load_before": _load(), "quick": bool(quick)}
    naive_replicas = 1 if (quick or horizon >= 10_000) else max(1, 10_000 // horizon)
    report["naive_replicas"] = naive_replicas
    gbs = bandwidth(32 if quick else 256) if "bandwidth" in sections else None
    report["bandwidth_gbs"] = gbs
    if "throughput" in sections:
        report["learners"] = _throughput_rows(names, horizon, replicas, n_actions, naive_replicas, True, gbs)
    if "large" in sections:
        report["large"] = {"n_actions": large_actions, "horizon": large_horizon, "replicas": replicas,
                           "learners": _throughput_rows(names, large_horizon, replicas, large_actions,
                                                        1, False, gbs)}
    if "memory" in sections:
        horizons = (1_000, 10_000) if quick else (10_000, 1_000_000)
        reps = min(replicas, 64) if quick else replicas
        tm = {str(h): peak_memory(example("hedge"), h, reps, n_actions) for h in horizons}
        rss = {str(h): resident_peak("hedge", h, reps, n_actions) for h in horizons}
        small, big = (str(h) for h in horizons)
        report["memory"] = {"learner": "hedge", "replicas": reps, "tracemalloc_bytes": tm,
                            "tracemalloc_ratio": tm[big] / tm[small], "resident_bytes": rss,
                            "resident_ratio": (max(rss[big], 1) / max(rss[small], 1)) if rss[small] is not None
                            else None}
    if "sweep" in sections:
        h, r = (2_000, 16) if quick else (5_000, 256)
        report["sweep"] = {"horizon": h, "replicas": r, "block_entries": SWEEP_BLOCK_ENTRIES,
                           "rows": _sweep(h, r, n_actions, quick)}
    if "scaling" in sections:
        h, r, c = (500, 64, 16) if quick else (250_000, 4096, 256)
        report["scaling"] = _scaling(h, r, n_actions, chunk=c, warm_up=not quick)
    report["load_after"] = _load()
    return report


def _load():
    try:
        return list(os.getloadavg())
    except OSError:  # pragma: no cover
        return None


def format_report(report: dict) -> str:
    lines = [f"boundbreaker bench: kernels={report['kernels']}, {report['cpus']} cpus, load average "
             f"{_fmt_load(report['load_before'])} before, {_fmt_load(report['load_after'])} after"]
    gbs = report.get("bandwidth_gbs")
    if gbs:
        lines.append(f"memory bandwidth (256 MiB copy, read + write): {gbs:.1f} GB/s")
    if "learners" in report:
        lines += ["", f"throughput, replica-rounds/s, one core: n={report['n_actions']} T={report['horizon']} "
                      f"replicas={report['replicas']} (per-replica sequences: T={max(1, report['horizon'] // 10)})",
                  f"naive = the learner's act/update loop, one replica at a time, same n and T, "
                  f"{report['naive_replicas']} replica(s)"]
        lines += _table(report["learners"], per_replica=True)
    if "large" in report:
        big = report["large"]
        lines += ["", f"throughput at n={big['n_actions']}: T={big['horizon']} replicas={big['replicas']}, "
                      f"shared sequence; naive on the same n and T, 1 replica"]
        lines += _table(big["learners"], per_replica=False)
    if "memory" in report:
        m = report["memory"]
        tm = ", ".join(f"T={h}: {v / 2**20:.1f} MiB" for h, v in m["tracemalloc_bytes"].items())
        lines += ["", f"peak memory ({m['learner']}, {m['replicas']} replicas): tracemalloc {tm}; "
                      f"ratio {m['tracemalloc_ratio']:.2f}"]
        if m.get("resident_ratio") is not None:
            rs = ", ".join(f"T={h}: {v / 2**20:.1f} MiB" for h, v in m["resident_bytes"].items())
            lines.append(f"  resident above baseline (fresh process): {rs}; ratio {m['resident_ratio']:.2f}")
    if "sweep" in report:
        sw = report["sweep"]
        worst = max(sw["rows"], key=lambda r: r["ratio"])
        lines += ["", f"streaming sweep (tracemalloc peak, T={sw['horizon']} vs {10 * sw['horizon']}, "
                      f"{sw['replicas']} replicas, blocks of {sw['block_entries']} entries): {len(sw['rows'])} "
                      f"learners and adversaries, worst ratio {worst['ratio']:.2f} ({worst['kind']} {worst['name']})"]
        grown = [r for r in sw["rows"] if r["ratio"] > 1.2]
        for r in grown:
            lines.append(f"  grows: {r['kind']} {r['name']}: {r['small'] / 2**20:.1f} -> {r['big'] / 2**20:.1f} MiB")
    if "scaling" in report:
        s = report["scaling"]
        lines += ["", f"scaling ({s['learner']}, T={s['horizon']}, {s['replicas']} replicas = {s['chunks']} chunks): "
                      f"n_jobs=1 {s['jobs1_rps']:.3g}, n_jobs=2 {s['jobs2_rps']:.3g} replica-rounds/s, "
                      f"ratio {s['ratio']:.2f} (pool warm-up {s['warmup_s']:.1f} s, not counted)"]
    return "\n".join(lines)


def _table(rows, per_replica):
    head = f"{'learner':<22}{'shared seq':>12}" + (f"{'per-replica':>13}" if per_replica else "") + \
        f"{'naive':>11}{'speedup':>10}{'B/rr':>6}{'bw share':>10}"
    out = [head]
    for row in rows:
        share = row.get("bandwidth_share")
        mark = "" if share is None else f"{share:>9.2f}" + ("*" if share >= 0.5 else " ")
        out.append(f"{row['learner']:<22}{row['shared_rps']:>12.3g}"
                   + (f"{row['per_replica_rps']:>13.3g}" if per_replica else "")
                   + f"{row['naive_rps']:>11.3g}{row['speedup']:>9.0f}x{row['bytes_per_rr']:>6}{mark}")
    return out


def _fmt_load(load):
    return "?" if not load else "/".join(f"{x:.2f}" for x in load)


def studies() -> int:
    """Run the test suite's long statistical studies and benchmarks (markers ``slow`` and
    ``bench``, deselected in CI) and return pytest's exit code.

    They live in the source checkout's ``tests/`` (they are tests, not part of
    the installed package), so this needs boundbreaker installed from a clone.
    """
    import subprocess
    import sys
    from pathlib import Path

    from .errors import ConfigError

    tests = Path(__file__).resolve().parent.parent / "tests"
    if not (tests / "conftest.py").exists():
        raise ConfigError("--studies: the studies are in the source checkout's tests/ folder, which this "
                          "installation lacks; install boundbreaker from a clone (pip install -e .)")
    command = [sys.executable, "-m", "pytest", str(tests), "-m", "slow or bench", "-q", "-p", "no:cacheprovider"]
    print("running:", " ".join(command), flush=True)
    return subprocess.call(command, cwd=tests.parent)

