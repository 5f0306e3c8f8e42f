"""pytest helpers: put certification in your own CI.

    from harness import Claim
    from harness.testing import assert_claim

    def test_my_router_keeps_its_promise():
        assert_claim(MyLearner(), Claim("regret", "sqrt(T * ln(n))", delta=0.05),
                     adversaries=["bernoulli", "alternating"], horizons=[1000], n_actions=[4])

Runs are seeded (``seed=0`` unless given), so a test gives the same verdict
on every run and machine.

Tails against a committed profile (``boundbreaker baseline``):

    from harness.testing import assert_no_tail_regression

    def test_tails_did_not_get_worse():
        assert_no_tail_regression("tests/router-profile.json", MyLearner())
"""

from __future__ import annotations

from .baseline import compare
from .certify import certify

__all__ = ["assert_claim", "assert_no_tail_regression"]

_SHOWN = 5  # failing cells spelt out in the message


def assert_claim(learner, claim, adversaries, horizons, n_actions, *, confidence=0.95, max_replicas=20000, seed=0,
                 n_jobs=1, switching_cost=0.0, allow_inconclusive=False):
    """Certify ``claim`` (a Claim or a list of them) and raise AssertionError unless every cell passes.

    The message names each failing cell, what was observed, and the line of
    Python that replays a violating replica. An inconclusive cell (the
    replicas showed neither a pass nor a fail) also fails the test unless
    ``allow_inconclusive``: raise ``max_replicas`` or restate the claim.
    Returns the :class:`~harness.certify.Certificate` when it passes.
    """
    cert = certify(learner, claim, adversaries, horizons, n_actions, confidence=confidence,
                   max_replicas=max_replicas, seed=seed, n_jobs=n_jobs, switching_cost=switching_cost)
    bad = cert.failures()
    unsure = [c for c in cert.cells if c.verdict == "inconclusive"]
    if not bad and (allow_inconclusive or not unsure):
        return cert
    lines = []
    if bad:
        lines.append(f"{len(bad)} of {len(cert.cells)} cells fail (confidence {cert.confidence:g} family-wise, "
                     f"seed {cert.seed}):")
        for c in bad[:_SHOWN]:
            lines.append(f"  {c.where}: {c.summary()}")
            if c.replay:
                lines.append(f"    replay {c.replay_hint()}")
        if len(bad) > _SHOWN:
            lines.append(f"  ... and {len(bad) - _SHOWN} more")
    if unsure and not allow_inconclusive:
        lines.append(f"{len(unsure)} cells are inconclusive after at most {cert.max_replicas} replicas (raise "
                     f"max_replicas, restate the claim, or pass allow_inconclusive=True):")
        for c in unsure[:_SHOWN]:
            lines.append(f"  {c.where}: {c.summary()}")
    raise AssertionError("\n".join(lines))


def assert_no_tail_regression(profile_path, learner, *, seed=None, replicas=None, confidence=None, adversaries=None,
                              n_jobs=1):
    """Compare ``learner`` with a saved tail profile and raise AssertionError if any tail regressed.

    The message names every regressed cell, metric and quantile with the
    baseline's and the new exceedance rates and the p-value. Improvements
    pass. The comparison is seeded (default: the profile's seed + 1), so the
    verdict is the same on every run; when the learner did not change, a
    false failure has probability at most 1 - confidence (the profile's,
    family-wise). Returns the :class:`~harness.baseline.Comparison`. See
    :func:`harness.baseline.compare` for the arguments.
    """
    result = compare(profile_path, learner, seed=seed, replicas=replicas, confidence=confidence,
                     adversaries=adversaries, n_jobs=n_jobs)
    bad = result.regressions()
    if not bad:
        return result
    lines = [f"{len(bad)} of {result.tests} tail tests regressed against {profile_path} (confidence "
             f"{result.confidence:g} family-wise, seed {result.seed}):"]
    for q in bad[:2 * _SHOWN]:
        lines.append(f"  {q.where}: {q.summary()}")
    if len(bad) > 2 * _SHOWN:
        lines.append(f"  ... and {len(bad) - 2 * _SHOWN} more")
    raise AssertionError("\n".join(lines))
