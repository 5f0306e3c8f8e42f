"""Calibration of the verdicts by simulation: false passes at the boundary, power off it.

The claim "P[violation] <= delta" is judged from Bernoulli streams. At rate
exactly delta a pass (shown below delta) is wrong and must happen with
probability at most 1 - confidence, early stopping included; at 2*delta and
delta/2 the right verdict (fail, pass) should be reached in most runs.

CI runs small, fixed-seed versions; ``-m slow`` runs the full study, and
``python tests/test_calibration.py`` prints the table quoted in the closing
note (false-pass rate, power, replicas used versus a fixed-sample design of
the same power).
"""

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))

from harness import Claim, certify  # noqa: E402
from harness.stats import bonferroni, clopper_pearson, fixed_sample_size, rate_sequence  # noqa: E402

from certify_subjects import CoinSwitch  # noqa: E402


def stream_study(rate, threshold, confidence, max_n, runs, seed):
    """Run ``runs`` Bernoulli(rate) streams of up to ``max_n`` through rate_sequence.

    Returns the share of "below" (pass) and "above" (fail) decisions and the
    replicas each run used.
    """
    rng = np.random.default_rng(seed)
    below = above = 0
    used = np.empty(runs, dtype=np.int64)
    for i in range(runs):
        res = rate_sequence(rng.random(max_n) < rate, threshold, confidence)
        below += res.decision == "below"
        above += res.decision == "above"
        used[i] = res.n
    return {"pass": below, "fail": above, "runs": runs, "used": used}


def _shown_above(count, runs, limit):
    """True when a Clopper-Pearson 99.9% lower bound on count/runs exceeds ``limit``."""
    return clopper_pearson(count, runs, 0.999, "greater").low > limit


def test_false_pass_rate_at_the_boundary_is_at_most_alpha():
    """Rate exactly delta = 0.05, confidence 0.95, up to 20000 replicas, stopping at the first decision:
    passes and fails are both errors, each of probability <= 0.05 (Ville's inequality; Robbins 1970).
    600 fixed-seed streams; the test fails only if a 99.9% Clopper-Pearson lower bound on either share
    exceeds 0.05, which has probability <= 0.002 if the construction holds."""
    out = stream_study(0.05, 0.05, 0.95, 20_000, 600, seed=11)
    assert not _shown_above(out["pass"], out["runs"], 0.05)
    assert not _shown_above(out["fail"], out["runs"], 0.05)
    # anytime validity is conservative: the measured error is well under alpha (slow study: about 0.01)
    assert out["pass"] + out["fail"] <= 0.05 * out["runs"]


@pytest.mark.parametrize("rate, right", [(0.10, "fail"), (0.025, "pass")])
def test_power_at_twice_and_half_delta(rate, right):
    """At 2*delta the claim must fail, at delta/2 it must pass, with delta = 0.05 and per-cell confidence
    0.9975 (confidence 0.95 over 20 cells), up to 20000 replicas. 300 fixed-seed streams; the slow study
    measures power 1.000 here, and if the true power is >= 0.97 the chance of fewer than 90% right
    verdicts in 300 runs is below 1e-6 (binomial tail)."""
    out = stream_study(rate, 0.05, bonferroni(0.95, 20), 20_000, 300, seed=12)
    assert out[right] >= 0.9 * out["runs"]
    assert out["fail" if right == "pass" else "pass"] == 0  # a wrong verdict here would have probability <= 0.0025


def test_sequential_uses_fewer_replicas_than_the_fixed_design_of_equal_power():
    """At 2*delta the sequential test's mean replica count is below the exact fixed-sample binomial test
    of the same power and level (fixed_sample_size, checked against scipy.stats.binomtest); 300 fixed-seed
    streams; the slow study gives a mean of 384 replicas against 1016 for the fixed design of power
    0.9995 (and 435 for power 0.9)."""
    confidence = bonferroni(0.95, 20)
    out = stream_study(0.10, 0.05, confidence, 20_000, 300, seed=13)
    power = min(out["fail"] / out["runs"], 0.999)
    assert out["used"].mean() < fixed_sample_size(0.05, 0.10, confidence, power)


def test_certify_pipeline_is_calibrated():
    """Through certify itself (rounds of chunks, group seeds, early stopping): a learner whose switches are
    Bernoulli(p) against the claim "switches <= 0.5 with probability 0.9" (delta = 0.1), confidence 0.9,
    up to 3000 replicas, 60 campaign seeds. At p = delta a pass is an error of probability <= 0.1; the test
    fails only if a 99.9% lower bound on the pass share exceeds 0.1 (probability <= 0.001 if sound). At
    p = 2*delta every run must fail and at p = delta/2 every run pass: each slip has probability <= 0.1
    by construction but measured power is 1.00, so 60 of 60 right has probability >= 0.9 if the
    per-run power is >= 0.9983 (checked by the slow study)."""
    import adversaries

    claim = Claim("switches", 0.5, delta=0.1, name="coin")
    adv = adversaries.get("alternating")

    def verdicts(p, seeds):
        return [certify(CoinSwitch(p), claim, adv, 2, 2, confidence=0.9, max_replicas=3000, seed=s).verdict
                for s in seeds]

    at_delta = verdicts(0.1, range(60))
    assert not _shown_above(at_delta.count("pass"), 60, 0.1)
    assert verdicts(0.2, range(100, 130)) == ["fail"] * 30
    assert verdicts(0.05, range(200, 230)) == ["pass"] * 30


# -- the full study ---------------------------------------------------------------------------------


def full_study(runs=2000, max_n=20_000):
    rows = []
    for delta in (0.01, 0.05, 0.2):
        for cells in (1, 20):
            confidence = bonferroni(0.95, cells)
            for factor, right in ((1.0, None), (2.0, "fail"), (0.5, "pass")):
                rate = delta * factor
                out = stream_study(rate, delta, confidence, max_n, runs, seed=int(1000 * delta) + cells)
                used = out["used"]
                row = {"delta": delta, "cells": cells, "rate": rate, "runs": runs,
                       "pass": out["pass"] / runs, "fail": out["fail"] / runs,
                       "mean_used": float(used.mean()), "median_used": float(np.median(used)),
                       "p90_used": float(np.quantile(used, 0.9))}
                if right:
                    power = out[right] / runs
                    row["power"] = power
                    row["fixed_n"] = fixed_sample_size(delta, rate, confidence, min(power, 1 - 1 / runs))
                    row["fixed_n90"] = fixed_sample_size(delta, rate, confidence, 0.9)
                rows.append(row)
    return rows


@pytest.mark.slow
def test_full_calibration_study():
    """2000 fixed-seed streams per setting, delta in {0.01, 0.05, 0.2}, 1 or 20 cells: false passes and
    fails at the boundary stay below alpha per cell (99.9% Clopper-Pearson margin, so a false failure has
    probability <= 0.001 per check), power at 2*delta and delta/2 is at least 0.9."""
    for row in full_study():
        alpha = 1 - bonferroni(0.95, row["cells"])
        if row["rate"] == row["delta"]:
            assert not _shown_above(round(row["pass"] * row["runs"]), row["runs"], alpha)
            assert not _shown_above(round(row["fail"] * row["runs"]), row["runs"], alpha)
        else:
            assert row["power"] >= 0.9


if __name__ == "__main__":
    print(f"{'delta':>6} {'cells':>5} {'rate':>7} {'pass':>7} {'fail':>7} {'power':>6} {'mean n':>8} "
          f"{'median':>7} {'p90':>7} {'fixed N':>8} {'ratio':>6} {'N@0.9':>6}")
    for r in full_study():
        fixed = r.get("fixed_n")
        print(f"{r['delta']:>6} {r['cells']:>5} {r['rate']:>7.4f} {r['pass']:>7.4f} {r['fail']:>7.4f} "
              f"{r.get('power', float('nan')):>6.3f} {r['mean_used']:>8.0f} {r['median_used']:>7.0f} "
              f"{r['p90_used']:>7.0f} {fixed if fixed else '-':>8} "
              f"{(r['mean_used'] / fixed) if fixed else float('nan'):>6.2f} {r.get('fixed_n90', '-'):>6}")
