"""Full-information learners: Hedge, Follow the Leader, Follow the Perturbed Leader.

Each has a fast path for oblivious sequences: when every replica faces the
same sequence, whatever depends only on the sequence (cumulative losses, the
weights, the per-round distribution of play) is computed once per round and
only the draw is per replica.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.polynomial.legendre import leggauss

from .. import kernels, validate
from ..claims import Claim
from ..protocol import Learner
from . import REGISTRY

# -- shared pieces --------------------------------------------------------------


def cumulative_before(cum0: np.ndarray, losses: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Cumulative losses *before* each round of a block, and after the block.

    ``cum0`` (n,), ``losses`` (steps, n) -> ((steps, n), (n,)). Sums in round
    order, as a round-by-round update would (``kernels.cumulative_before``).
    """
    return kernels.cumulative_before(cum0, losses)


def hedge_cdf(cum: np.ndarray, eta: float) -> np.ndarray:
    """Normalised CDF of the Hedge distribution p(i) ~ exp(-eta cum(i)), per row.

    Shifting by the row minimum keeps the largest weight at 1 (no overflow).
    """
    w = np.exp(-eta * (cum - cum.min(axis=-1, keepdims=True)))
    c = np.cumsum(w, axis=-1)
    return c / c[..., -1:]


def hedge_probabilities(losses: np.ndarray, eta: float) -> np.ndarray:
    """Hedge's distribution p_t for every round of a (T, n) sequence.

    The exact mixture loss sum_t <p_t, l_t> follows, with no sampling noise.
    """
    losses = np.asarray(losses, dtype=float)
    before, _ = cumulative_before(np.zeros(losses.shape[1]), losses)
    cdf = hedge_cdf(before, eta)
    return np.diff(cdf, axis=1, prepend=0.0)


def sample_each(cdf: np.ndarray, u: np.ndarray) -> np.ndarray:
    """One draw per row: cdf (R, n), u (R,) -> (R,) int64 (same rule as the kernels)."""
    return (cdf[:, :-1] <= u[:, None]).sum(axis=1).astype(np.int64)


class _CumulativeLearner(Learner):
    """State: cumulative losses, shared (n,) until a per-replica loss arrives."""

    feedback = "full"

    def reset(self, n_actions, horizon, replicas, rng):
        self._n, self._horizon, self._replicas, self._rng = n_actions, horizon, replicas, rng
        self._cum = np.zeros(n_actions)

    def _per_replica(self) -> np.ndarray:
        if self._cum.ndim == 1:
            self._cum = np.tile(self._cum, (self._replicas, 1))
        return self._cum

    def update(self, actions, losses):
        self._per_replica()
        self._cum += losses


# -- Hedge ------------------------------------------------------------------------


def default_hedge_eta(n_actions: int, horizon: int) -> float:
    """sqrt(8 ln n / T), the tuning of Cesa-Bianchi and Lugosi (2006), Theorem 2.2."""
    return math.sqrt(8.0 * math.log(n_actions) / horizon)


HEDGE_SOURCE = "Cesa-Bianchi and Lugosi 2006, Prediction, Learning, and Games"


def hedge_claims(eta=None, *, label: str = "hedge") -> tuple:
    """Hedge's published regret claims for a learning rate (None = the default tuning).

    Default eta = sqrt(8 ln n / T): sqrt(T ln n / 2) in expectation (Theorem
    2.2) and that plus sqrt(T ln(1/delta) / 2) with probability 1 - delta
    (Lemma 4.1 / Corollary 4.2). Fixed eta: ln(n)/eta + eta T/8 in expectation
    (the general form of Theorem 2.2). Numbers from memory.
    """
    if eta is None:
        return (Claim(metric="regret", bound="sqrt(T * ln(n) / 2)", kind="expectation",
                      name=f"{label}: expected regret <= sqrt(T ln n / 2)",
                      source=f"{HEDGE_SOURCE}, Theorem 2.2 (from memory)"),
                Claim(metric="regret", bound="sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", delta=0.05,
                      kind="high_probability",
                      name=f"{label}: regret <= sqrt(T ln n / 2) + sqrt(T ln(1/delta) / 2) w.p. 1 - delta",
                      source=f"{HEDGE_SOURCE}, Lemma 4.1 and Corollary 4.2 (from memory)"))
    return (Claim(metric="regret", bound=f"ln(n) / {eta!r} + {eta!r} * T / 8", kind="expectation",
                  name=f"{label}: expected regret <= ln(n)/eta + eta T/8 (eta = {eta:g})",
                  source=f"{HEDGE_SOURCE}, Theorem 2.2, general eta (from memory)"),)


@REGISTRY.register("hedge", "exponential weights (Hedge), a fresh draw from the weights each round")
class Hedge(_CumulativeLearner):
    r"""Hedge: the exponentially weighted average forecaster, played by sampling.

    With L_{t-1}(i) the cumulative loss of action i before round t,

        p_t(i) = exp(-eta L_{t-1}(i)) / sum_j exp(-eta L_{t-1}(j)),

    and a_t ~ p_t, drawn independently each round. With losses in [0, 1] and
    eta = sqrt(8 ln n / T) (the default), the expected regret against any
    oblivious sequence is at most sqrt(T ln n / 2) (Cesa-Bianchi and Lugosi
    2006, *Prediction, Learning, and Games*, Theorem 2.2; Freund and Schapire
    1997 for the algorithm).

    Claims (``claims``): with the default eta, E[regret] <= sqrt(T ln n / 2)
    (Theorem 2.2) and, with probability at least 1 - delta, regret <=
    sqrt(T ln n / 2) + sqrt(T ln(1/delta) / 2) (Cesa-Bianchi and Lugosi 2006,
    Lemma 4.1 / Corollary 4.2: Hoeffding-Azuma on the sampled losses; valid
    against adaptive adversaries too). With a fixed eta the bound of the
    same theorem is ln(n) / eta + eta T / 8 in expectation. The theorem and
    lemma numbers and the general-eta form are from memory (the issue
    quotes the same); ``tests/test_learners_claims.py`` checks the
    expectation bound against the exact mixture regret.

    Fast path: on a shared sequence the weights, and so the CDF of p_t, are
    the same for every replica; each replica only draws one uniform per round.
    """

    def __init__(self, eta=None):
        self.eta = None if eta is None else validate.positive_real("eta", eta)

    @property
    def claims(self):
        return hedge_claims(self.eta)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._eta = self.eta if self.eta is not None else default_hedge_eta(n_actions, horizon)

    def act(self):
        u = self._rng.random(self._replicas)
        if self._cum.ndim == 1:  # shared so far: one CDF for every replica
            return kernels.sample_rows(hedge_cdf(self._cum[None, :], self._eta), u[None, :])[0]
        return sample_each(hedge_cdf(self._cum, self._eta), u)

    def play_block(self, losses):
        u = self._rng.random((losses.shape[0], self._replicas))
        if losses.ndim == 2 and self._cum.ndim == 1:
            before, self._cum = cumulative_before(self._cum, losses)
            return kernels.sample_rows(hedge_cdf(before, self._eta), u)
        if losses.ndim == 2:
            losses = np.broadcast_to(losses[:, None, :], (losses.shape[0], self._replicas, self._n))
        return kernels.hedge_per_replica(losses, self._per_replica(), self._eta, u)


# -- Follow the Leader --------------------------------------------------------------


@REGISTRY.register("ftl", "follow the leader: the action with least cumulative loss, lowest index on ties")
class FTL(_CumulativeLearner):
    """Follow the Leader: a_t = argmin_i L_{t-1}(i), ties to the lowest index.

    Deterministic. Its regret is linear on the alternating sequence (regret
    T/2 over T rounds, the standard counterexample: Shalev-Shwartz 2012,
    *Online Learning and Online Convex Optimization*, Example 2.2), and small
    on i.i.d. sequences with a gap. The tie rule is common practice.
    """

    def __init__(self):
        pass

    def act(self):
        if self._cum.ndim == 1:
            return np.full(self._replicas, int(np.argmin(self._cum)), dtype=np.int64)
        return np.argmin(self._cum, axis=1).astype(np.int64)

    def play_block(self, losses):
        steps = losses.shape[0]
        if losses.ndim == 2 and self._cum.ndim == 1:
            before, self._cum = cumulative_before(self._cum, losses)
            leaders = np.argmin(before, axis=1).astype(np.int64)
            return np.broadcast_to(leaders[:, None], (steps, self._replicas))
        cum = self._per_replica()
        out = np.empty((steps, self._replicas), dtype=np.int64)
        for s in range(steps):
            out[s] = np.argmin(cum, axis=1)
            cum += losses[s]
        return out


# -- Follow the Perturbed Leader -------------------------------------------------


def default_ftpl_eta(n_actions: int, horizon: int) -> float:
    """sqrt((1 + ln n) / T): balances the perturbation's reach, E[max_i Z_i] =
    H_n <= 1 + ln n, against T rounds of stability cost (common practice)."""
    return math.sqrt((1.0 + math.log(n_actions)) / horizon)


def ftpl_probabilities(cum: np.ndarray, eta: float, max_entries: int = 1 << 20) -> np.ndarray:
    r"""Exact P[a = i] for a = argmin_i (cum(i) - Z(i)/eta), Z(i) i.i.d. Exp(1), per row.

    With c_i = eta (cum(i) - min cum) and a_i = exp(-c_i) in (0, 1], the
    winner's value must exceed every c_j's shift, and substituting
    y = exp(min - x) gives

        P[i] = a_i \int_0^1 f_i(y) dy,   f_i(y) = prod_{j != i} (1 - a_j y),

    a polynomial of degree n-1 in y, so Gauss-Legendre quadrature with
    ceil(n/2) nodes on [0, 1] is exact. A factor with a_j < 2^-54 is exactly
    1 in floating point, so only the k "active" actions enter the product
    Q(y) = prod_j (1 - a_j y); then f_i(y_k) = Q(y_k) / (1 - a_i y_k) for an
    active i (its own rounded factor divided back out: no cancellation) and
    Q(y_k) for the rest. Node count:

    - ceil(k/2) nodes (ceil((k+1)/2) when some action is inactive, whose
      integrand Q has degree k): exact, used while that is at most 64;
    - otherwise 64 nodes on [0, s], s = min(1, 80 / S), S = sum_j a_j. Exact
      to far below rounding: f_i <= exp(-(S - 1) y) makes the part beyond s
      at most e^{-79} / 79; f_i is entire with |f_i(y)| <= exp(S |y|), so on
      the Bernstein ellipse of [0, s] with rho = 8 it is at most
      exp(80 * 2.54), and the Gauss error bound (64/15) M rho^{-2m} /
      (rho^2 - 1) (Trefethen 2013, Approximation Theory and Approximation
      Practice, Theorem 19.3; from memory) is below 1e-28, against
      \int f_i >= 1 / (4 S) >= 1 / (4 n).

    Cost O(k min(k, 128)) per row in a compiled loop (``kernels.ftpl_rows``)
    instead of O(n^2). ``max_entries`` is accepted for compatibility; no
    scratch array of rows x n x nodes is built any more.
    """
    cum = np.atleast_2d(np.asarray(cum, dtype=float))
    rows, n = cum.shape
    a = np.exp(-eta * (cum - cum.min(axis=1, keepdims=True)))
    active = (a >= kernels.FTPL_TINY).sum(axis=1)
    nodes = (active + (active < n) + 1) // 2
    bounded = nodes > FTPL_NODES
    span = np.where(bounded, np.minimum(1.0, FTPL_REACH / a.sum(axis=1)), 1.0)
    nodes = np.where(bounded, FTPL_NODES, nodes)
    out = np.empty_like(a)
    for m in np.unique(nodes):
        idx = np.flatnonzero(nodes == m)
        y, w = _gauss_legendre_01(int(m))
        sub = a if idx.size == rows else np.ascontiguousarray(a[idx])
        part = kernels.ftpl_rows(sub, span[idx, None] * y, span[idx, None] * w)
        if idx.size == rows:
            out = part
        else:
            out[idx] = part
    return out / out.sum(axis=1, keepdims=True)


# Above this many exact nodes, FTPL's quadrature switches to a fixed node count on a
# reach-limited interval (see ftpl_probabilities for the error bound).
FTPL_NODES = 64
FTPL_REACH = 80.0


_GAUSS_LEGENDRE: dict = {}


def _gauss_legendre_01(m: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights for [0, 1] with m nodes (cached: numpy computes them
    by an eigenvalue problem, milliseconds at m = 500)."""
    if m not in _GAUSS_LEGENDRE:
        nodes, weights = leggauss(m)
        _GAUSS_LEGENDRE[m] = ((nodes + 1.0) / 2.0, weights / 2.0)
    return _GAUSS_LEGENDRE[m]


@REGISTRY.register("ftpl", "follow the perturbed leader, fresh exponential perturbation each round")
class FTPL(_CumulativeLearner):
    r"""Follow the Perturbed Leader with a fresh perturbation every round.

        a_t = argmin_i ( L_{t-1}(i) - Z_t(i) / eta ),   Z_t(i) i.i.d. Exp(1),

    redrawn each round (Kalai and Vempala 2005, "Efficient algorithms for
    online decision problems", FPL* with exponential noise; the fresh draw
    each round is their version for adaptive adversaries). Default
    eta = sqrt((1 + ln n) / T).

    Fast path: given the cumulative losses, a fresh-perturbation draw is an
    independent draw from the fixed distribution ``ftpl_probabilities``; on a
    shared sequence that distribution is computed once per round, exactly,
    and each replica draws one uniform instead of n exponentials. The slow
    path (``act``) draws the perturbations themselves; tests check that both
    give the same distribution of play. On per-replica sequences the fast
    path (``kernels.perturbed_leader``) draws the slow path's perturbations,
    in the same order, in one compiled loop: identical play.

    Claim: Kalai and Vempala's bound for FPL* on experts, E[loss] <=
    (1 + eta) L* + (1 + ln n) / eta, with L* <= T gives E[regret] <=
    eta T + (1 + ln n) / eta, i.e. 2 sqrt(T (1 + ln n)) at the default eta
    (the constant (1 + ln n) is from memory; ``tests/test_learners_claims.py``
    checks the expectation against the exact mixture regret).
    """

    def __init__(self, eta=None):
        self.eta = None if eta is None else validate.positive_real("eta", eta)

    @property
    def claims(self):
        bound = "2 * sqrt(T * (1 + ln(n)))" if self.eta is None else f"{self.eta!r} * T + (1 + ln(n)) / {self.eta!r}"
        return (Claim(metric="regret", bound=bound, kind="expectation",
                      name=f"ftpl: expected regret <= {bound}",
                      source="Kalai and Vempala 2005, J. Comput. Syst. Sci. 71:291-307, FPL* for experts "
                             "with L* <= T (from memory)"),)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._eta = self.eta if self.eta is not None else default_ftpl_eta(n_actions, horizon)

    def act(self):
        z = self._rng.standard_exponential((self._replicas, self._n))
        return np.argmin(self._cum - z / self._eta, axis=1).astype(np.int64)

    def play_block(self, losses):
        if losses.ndim == 2 and self._cum.ndim == 1:
            before, self._cum = cumulative_before(self._cum, losses)
            cdf = np.cumsum(ftpl_probabilities(before, self._eta), axis=1)
            cdf /= cdf[:, -1:]
            return kernels.sample_rows(cdf, self._rng.random((losses.shape[0], self._replicas)))
        if losses.ndim == 2:
            losses = np.broadcast_to(losses[:, None, :], (losses.shape[0], self._replicas, self._n))
        # per-replica sequences: the slow path's draws, in the same order, in one compiled loop
        return kernels.perturbed_leader(losses, self._per_replica(), self._eta, self._rng)
