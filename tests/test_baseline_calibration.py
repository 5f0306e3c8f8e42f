"""Calibration and power of tail comparisons, by simulation.

Calibration: when nothing changed, "regressed" must be reported at most at the nominal family-wise rate
1 - confidence. Checked at the level of one test on heavily tied metrics (integers, a coarsely rounded
normal, where thresholds chosen in-sample would break the level), and end to end: a learner recorded and
compared against its own profile over many seeds, on a battery with a shared sequence, per-replica
sequences and a deterministic one.

Power: heavier-tailed variants must be reported regressed in most runs; the detection rate is given
against the size of the change (the share of replicas that break in the heavy-tail learner, the factor by
which Hedge's learning rate is too large).

CI runs small fixed-seed versions; ``-m slow`` runs the full study, and ``python
tests/test_baseline_calibration.py`` prints the table quoted in the closing note.
"""

import sys
import time
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

sys.path.insert(0, str(Path(__file__).parent))

import adversaries  # noqa: E402
from harness.baseline import compare, record  # noqa: E402
from harness.learners import get as get_learner  # noqa: E402
from harness.stats import clopper_pearson, quantile_rank  # noqa: E402


def _shown_above(count, runs, limit):
    """True when a 99.9% Clopper-Pearson lower bound on count/runs exceeds ``limit``."""
    return clopper_pearson(count, runs, 0.999, "greater").low > limit


# -- one test, tied metrics ---------------------------------------------------------------------

TIED = {
    "poisson(3)": lambda rng, shape: rng.poisson(3.0, size=shape).astype(float),
    "normal rounded to 2 sd": lambda rng, shape: 2.0 * np.round(rng.standard_normal(shape) / 2.0),
    "bernoulli(0.1)": lambda rng, shape: (rng.random(shape) < 0.1).astype(float),
}


def single_test_rejections(draw, q, n, runs, alpha, seed):
    """Share of ``runs`` in which the exceedance test (Fisher, one-sided "greater") rejects at ``alpha`` when
    the baseline's quantile batch, its reference batch and the new batch (``n`` each) come from one law:
    the profile's construction, vectorised over runs."""
    rng = np.random.default_rng(seed)
    head = np.sort(draw(rng, (runs, n)), axis=1)
    v = head[:, quantile_rank(n, q) - 1]
    base = (draw(rng, (runs, n)) > v[:, None]).sum(axis=1)
    new = (draw(rng, (runs, n)) > v[:, None]).sum(axis=1)
    p = stats.hypergeom.sf(new - 1, 2 * n, new + base, n)
    return int(np.count_nonzero(p <= alpha))


@pytest.mark.parametrize("name", sorted(TIED))
def test_one_test_holds_its_level_on_tied_metrics(name):
    """3 levels x 3000 fixed-seed runs of 1000 + 1000 + 1000 draws, alpha = 0.05: the rejection share must
    not be shown above alpha (99.9% Clopper-Pearson lower bound), so a false failure has probability <= 0.003
    per law if the test holds its level. Fisher's test with a threshold fixed before both counts is exact
    whatever the ties (Lehmann and Romano 2005, Section 4.5); the slow study measures shares from 0.000 to
    0.045 over 20000 runs each (discreteness makes Fisher's test conservative)."""
    for j, q in enumerate((0.5, 0.9, 0.99)):
        hits = single_test_rejections(TIED[name], q, 1000, 3000, 0.05, seed=100 * sorted(TIED).index(name) + j)
        assert not _shown_above(hits, 3000, 0.05), (name, q, hits)


# -- end to end -----------------------------------------------------------------------------------

def battery():
    return [adversaries.get("alternating"), adversaries.get("bernoulli", p=0.5, shared=True),
            adversaries.get("bernoulli", p=0.3)]


def self_comparisons(runs, seed0, replicas=500, horizon=50, learner="hedge", params=None):
    """Record ``learner`` and compare it with itself (fresh seeds) ``runs`` times; counts of each verdict."""
    out = {"regressed": 0, "improved": 0, "unchanged": 0}
    for i in range(runs):
        profile = record(get_learner(learner, **(params or {})), battery(), [horizon], [2], replicas=replicas,
                         seed=seed0 + 2 * i)
        out[compare(profile, get_learner(learner, **(params or {})), seed=seed0 + 2 * i + 1).verdict] += 1
    return out


def test_a_learner_compared_with_itself_is_calibrated():
    """Hedge recorded and compared with itself over 100 seeds (3 cells x 2 metrics x 4 levels = 24 tests,
    500 + 500 replicas recorded, 500 new): "regressed" must not be shown above 1 - confidence = 0.05 (a
    99.9% Clopper-Pearson lower bound), so a false failure has probability <= 0.001 if the construction
    holds; the same for "improved". The slow study measures 0.018 and 0.026 over 1000 self-comparisons
    (Holm with Fisher's conservative test)."""
    out = self_comparisons(100, seed0=5000)
    assert not _shown_above(out["regressed"], 100, 0.05)
    assert not _shown_above(out["improved"], 100, 0.05)


def power_runs(base, variant, runs, seed0, replicas=1000, horizon=100):
    """Share of ``runs`` in which ``variant`` is reported regressed against ``base``'s profile (each run
    records afresh), on the alternating sequence, T = ``horizon``, n = 2."""
    hits = 0
    for i in range(runs):
        profile = record(get_learner(*base[:1], **base[1]), [adversaries.get("alternating")], [horizon], [2],
                         replicas=replicas, seed=seed0 + 2 * i)
        result = compare(profile, get_learner(*variant[:1], **variant[1]), seed=seed0 + 2 * i + 1)
        hits += result.verdict == "regressed"
    return hits


HEAVY = ("flawed-heavy-tail", {"tail_prob": 0.0})  # Shrinking Dartboard: no replica breaks


def test_heavier_tails_are_reported_regressed():
    """Against the Shrinking Dartboard's profile (flawed-heavy-tail with tail_prob = 0), the same learner
    with 5% of replicas breaking (switching every round from a uniform onset) is reported regressed in 12
    of 12 runs, and Hedge with a learning rate twice its tuning (flawed-hot-hedge, heat = 2) against
    Hedge's profile in 12 of 12. 1000 + 1000 recorded and 1000 new replicas, T = 100. The slow study
    measures power 1.000 for both over 200 runs, so 12 of 12 fails with probability < 0.01 if the power is
    >= 0.9992; seeds fixed."""
    assert power_runs(HEAVY, ("flawed-heavy-tail", {"tail_prob": 0.05}), 12, seed0=7000) == 12
    assert power_runs(("hedge", {}), ("flawed-hot-hedge", {"heat": 2.0}), 12, seed0=8000) == 12


# -- the full study --------------------------------------------------------------------------------

SIZES = {"heavy tail": (HEAVY, [("flawed-heavy-tail", {"tail_prob": t}) for t in (0.0025, 0.005, 0.01, 0.02, 0.05)]),
         "hot hedge": (("hedge", {}), [("flawed-hot-hedge", {"heat": h}) for h in (1.0, 1.1, 1.2, 1.3, 1.5, 2.0)])}


def full_study(runs=200, calibration_runs=1000, single_runs=20000):
    rows = []
    for i, (name, draw) in enumerate(TIED.items()):
        for j, q in enumerate((0.5, 0.9, 0.99)):
            hits = single_test_rejections(draw, q, 1000, single_runs, 0.05, seed=10_000 + 100 * i + j)
            rows.append(("one test, alpha 0.05", f"{name}, q={q:g}", hits, single_runs))
    started = time.perf_counter()
    out = self_comparisons(calibration_runs, seed0=100_000)
    rows.append(("self-comparison, regressed", "hedge, 3 cells, 24 tests", out["regressed"], calibration_runs))
    rows.append(("self-comparison, improved", "hedge, 3 cells, 24 tests", out["improved"], calibration_runs))
    rows.append(("(wall time per self-comparison, s)", "", round((time.perf_counter() - started) / calibration_runs, 3),
                 1))
    for label, (base, variants) in SIZES.items():
        for variant in variants:
            for replicas in (1000, 4000):
                n = runs if replicas == 1000 else runs // 4
                hits = power_runs(base, variant, n, seed0=200_000 + 10_000 * replicas, replicas=replicas)
                rows.append((f"power, {label}, {replicas} replicas", f"{variant[0]} {variant[1]}", hits, n))
    return rows


@pytest.mark.slow
def test_full_calibration_and_power_study():
    """The figures of the closing note: false "regressed" and "improved" shares of self-comparisons (1000
    runs) not shown above 0.05 (99.9% Clopper-Pearson margin, false-failure probability <= 0.001 per check),
    single tests on tied metrics (20000 runs each) likewise, and power >= 0.99 at 5% breaking replicas and at
    heat 2 (1000 replicas; a shortfall by chance has probability < 1e-4 if the true power is >= 0.999)."""
    for what, setting, hits, runs in full_study():
        if what.startswith(("one test", "self-comparison")):
            assert not _shown_above(hits, runs, 0.05), (what, setting)
        if what == "power, heavy tail, 1000 replicas" and "0.05" in setting or \
                what == "power, hot hedge, 1000 replicas" and "2.0" in setting:
            assert hits >= 0.99 * runs, (what, setting, hits)
        if what == "power, hot hedge, 1000 replicas" and "'heat': 1.0" in setting:
            assert not _shown_above(hits, runs, 0.05)  # heat 1 is Hedge itself


if __name__ == "__main__":
    for what, setting, hits, runs in full_study():
        share = hits / runs
        ci = clopper_pearson(int(hits), runs, 0.95) if runs > 1 else None
        extra = f"  [{ci.low:.4f}, {ci.high:.4f}]" if ci else ""
        print(f"{what:<42} {setting:<44} {hits:>6} / {runs:<6} {share:.4f}{extra}")
