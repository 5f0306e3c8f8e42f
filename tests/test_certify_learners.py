"""certify() on the reference learners' own claims: compliant ones pass, the deliberately flawed ones fail.

Verdicts are family-wise at confidence 0.95 (so a wrong verdict anywhere in a
test has probability <= 0.05 by construction); seeds are fixed, so each test
gives the same verdicts on every run.
"""

from harness import certify
from harness.learners import get as get_learner


def _by_claim(cert):
    out = {}
    for c in cert.cells:
        out.setdefault(c.claim_name, {}).setdefault(c.adversary_label, c.verdict)
    return out


def test_hedge_passes_its_own_published_claims():
    """Hedge at eta = sqrt(8 ln n / T) carries E[regret] <= sqrt(T ln n / 2) and the 95% bound adding
    sqrt(T ln(1/delta) / 2) (Cesa-Bianchi and Lugosi 2006, Theorem 2.2, Lemma 4.1 / Corollary 4.2;
    numbering from memory): every cell passes on i.i.d. and alternating losses."""
    cert = certify(get_learner("hedge"), None, ["bernoulli", "alternating"], [500], [2, 4], max_replicas=6000,
                   seed=21)
    assert len(cert.cells) == 8 and cert.verdict == "pass", cert.table()


def test_hot_hedge_fails_where_it_is_exposed_and_passes_on_iid_losses():
    """flawed-hot-hedge (eta 10x Hedge's tuning) carries Hedge's claims. On the alternating sequence its
    hot weights chase the last leader and regret grows linearly (Shalev-Shwartz 2012, Example 2.2, for
    the extreme case FTL), so both claims fail; on i.i.d. Bernoulli(1/2) losses no learner can do worse
    than chance by much and the high-probability claim passes."""
    cert = certify(get_learner("flawed-hot-hedge"), None, ["bernoulli", "alternating"], [2000], [2],
                   max_replicas=6000, seed=22)
    verdicts = _by_claim(cert)
    assert all(v["alternating()"] == "fail" for v in verdicts.values()), cert.table()
    hp = next(name for name in verdicts if "w.p." in name)
    assert verdicts[hp]["bernoulli(p=0.5, shared=False)"] == "pass"
    for c in cert.failures():
        assert c.replay and c.replay[0]["value"] > c.bound


def test_heavy_tail_fails_its_high_probability_switch_claim():
    """flawed-heavy-tail breaks in about 1% of replicas and then switches every round, so P[switches >
    ln n + T ln(1/(1-eta))] is about 0.0097 here, against the claimed delta = 0.001: the claim must fail,
    with violating replicas recorded for replay."""
    cert = certify(get_learner("flawed-heavy-tail"), None, "bernoulli", [2000], [4], max_replicas=20000, seed=23)
    hp = next(c for c in cert.cells if c.kind == "high_probability")
    assert hp.verdict == "fail" and hp.ci_low > 0.001 and hp.replay
    learner = get_learner("flawed-heavy-tail")
    from harness.certify import replay_replica

    assert replay_replica(hp, learner) == hp.replay[0]["value"] > hp.bound


def test_budgeted_learner_keeps_its_hard_cap():
    """blocked-hedge plays one draw per block of ceil(T/S) rounds, so it switches at most S times, always
    (by construction): no replica of the battery breaks it."""
    cert = certify(get_learner("blocked-hedge", budget=5), None, ["bernoulli", "alternating"], [300], [3],
                   max_replicas=2000, seed=24)
    cap = [c for c in cert.cells if c.kind == "always"]
    assert cap and all(c.verdict == "pass" and c.violations == 0 and c.replicas == 2000 for c in cap)
