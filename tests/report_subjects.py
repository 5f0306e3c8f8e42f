"""A small certificate with every verdict and every kind, shared by the report tests (not part of the product)."""

import functools

from harness import Claim, certify
from harness.learners import get as get_learner

PUBLISHED = "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)"  # Cesa-Bianchi and Lugosi 2006, Corollary 4.2


@functools.lru_cache(maxsize=1)  # a Certificate is immutable: certify once per session
def small_certificate():
    """Hedge (a registry learner, so the report can rebuild it) on T=200, n in {2, 3}:

    - "published-95": the high-probability bound of Cesa-Bianchi and Lugosi (2006, Corollary 4.2;
      numbering from memory): passes;
    - "tight-95": sqrt(T)/10, far below Hedge's regret: fails;
    - "mean": the expectation bound sqrt(T ln n / 2) (ibid., Theorem 2.2): inconclusive, since 512
      replicas cannot settle a mean judged on the worst-case range [-T, T];
    - "cap": at most 5 switches, always (Hedge redraws every round): fails on the first replica.
    Adversaries: one shared deterministic sequence, one per-replica random, one adaptive.
    """
    claims = [Claim("regret", PUBLISHED, delta=0.05, name="published-95"),
              Claim("regret", "sqrt(T) / 10", delta=0.05, name="tight-95"),
              Claim("regret", "sqrt(T * ln(n) / 2)", kind="expectation", name="mean"),
              Claim("switches", 5, kind="always", name="cap")]
    import adversaries

    advs = [adversaries.get("alternating"), adversaries.get("bernoulli", p=0.5, shared=False),
            adversaries.get("chase")]
    return certify(get_learner("hedge"), claims, advs, horizons=[200], n_actions=[2, 3], confidence=0.9,
                   max_replicas=512, seed=7, labels=["flapping pair", "coin flips", "chaser"])
