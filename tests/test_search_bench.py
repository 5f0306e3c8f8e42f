"""Search effectiveness as a benchmark (never in CI): evaluations to find each planted defect.

Run with ``python -m pytest -m bench tests/test_search_bench.py -s`` or
``python -m harness.search.effectiveness``. Prints a table per (defect, method).
"""

import math

import pytest

from harness.search import effectiveness


@pytest.mark.bench
def test_evaluations_to_find_each_planted_defect():
    """Hypothesis and CEM against plain random sampling of the same genome space, 10 seeds, budget 300."""
    rows = effectiveness.main(seeds=range(10), budget=300)
    print()
    print(effectiveness.format_rows(rows))
    by = {(r["subject"], r["method"]): r for r in rows}
    for subject in {r["subject"] for r in rows}:
        guided = by[(subject, "hypothesis")]
        baseline = by[(subject, "random")]
        # the guided search should find at least as often as random sampling does, and no later (median)
        assert guided["found"] >= baseline["found"]
        assert guided["median"] <= baseline["median"] or math.isinf(baseline["median"])
