"""Full-information learners that switch rarely.

- ``lazy-ftpl``: Follow the Lazy Leader (Kalai and Vempala 2005);
- ``shrinking-dartboard``: Hedge's marginals with few redraws (Geulen,
  Voecking and Winkler 2010);
- ``random-walk``: the leader under random-walk perturbations (Devroye,
  Lugosi and Neu 2013);
- ``mw-ftpl``: the multiplicative-weights form of FTPL, one Gumbel
  perturbation for the whole game (Hedge's marginals, few switches);
- ``blocked-hedge``: Hedge over blocks of ceil(T/S) rounds, so at most S
  switches, always.

Every fast path takes the cumulative losses of a block at once (shared by
all replicas when the sequence is) and keeps per-replica work to what the
method needs: O(1) per round for lazy-ftpl and mw-ftpl (amortised: the
argmin is recomputed only when the leader's own score passes a level),
shrinking-dartboard (a draw only when its exponential clock runs out) and
blocked-hedge; for random-walk, whose perturbed scores all move every round,
O(number of walks near the lead) per round plus O(1) per other walk per
window of up to 32 rounds.

Claims valid only against oblivious sequences say so in their name: the
runner's certification also plays adaptive adversaries, against which a
perturbation drawn once can be learnt and exploited.
"""

from __future__ import annotations

import math

import numpy as np

from .. import kernels, validate
from ..claims import Claim
from ..errors import ConfigError
from . import REGISTRY
from .experts import (_CumulativeLearner, cumulative_before, default_hedge_eta, hedge_cdf, hedge_claims,
                      sample_each)


class _BlockCumulative(_CumulativeLearner):
    """Adds the cumulative losses before each round of a block, as (steps, replicas, n)."""

    def _before(self, losses: np.ndarray) -> np.ndarray:
        steps = losses.shape[0]
        shape = (steps, self._replicas, self._n)
        if losses.ndim == 2 and self._cum.ndim == 1:
            before, self._cum = cumulative_before(self._cum, losses)
            return np.broadcast_to(before[:, None, :], shape)
        cum = self._per_replica()
        if losses.ndim == 2:
            losses = np.broadcast_to(losses[:, None, :], shape)
        # cumsum runs in round order, the order of round-by-round `cum += losses`
        cums = np.cumsum(np.concatenate([cum[None], losses], axis=0), axis=0)
        cum[:] = cums[-1]
        return cums[:-1]


# -- Follow the Lazy Leader -----------------------------------------------------------


def default_lazy_eps(n_actions: int, horizon: int) -> float:
    """sqrt(D / (R A T)) with D = 2, R = 1, A = n for experts with losses in [0, 1]
    (Kalai and Vempala 2005, Theorem 1.1(a)'s tuning; constants from memory)."""
    return math.sqrt(2.0 / (n_actions * horizon))


@REGISTRY.register("lazy-ftpl", "follow the lazy leader: one uniform perturbation, moved only when it must")
class LazyFTPL(_BlockCumulative):
    r"""Follow the Lazy Leader (Kalai and Vempala 2005, "Efficient algorithms for
    online decision problems", J. Comput. Syst. Sci. 71, Section on FLL).

    FPL with a uniform perturbation plays argmin_i (L_{t-1}(i) + p_t(i)) with
    p_t uniform on the cube [0, 1/eps)^n. The lazy version couples the
    perturbed points of consecutive rounds: draw g uniform on [0, w)^n once
    (w = 1/eps) and let x_t be the one point of the grid g + w Z^n in the
    cube [L_{t-1}, L_{t-1} + w), coordinatewise

        x_t(i) = L_{t-1}(i) + ((g(i) - L_{t-1}(i)) mod w).

    Each x_t is uniform on its cube, so every round's marginal is FPL's, and
    the expected loss against an oblivious sequence equals FPL's. A
    coordinate moves (by +w) only when L(i) crosses a grid level, which in
    round t happens with probability eps * l_t(i), so P[x_{t+1} != x_t] <=
    eps |l_t|_1. The leader argmin_i x_t(i) changes only when *its own*
    coordinate moves (the others only move up); conditioned on leading, that
    coordinate sits low in its cube, so this is not eps * l_t(a_t) but the
    union bound above is what holds.

    Default eps = sqrt(2 / (n T)). Claims (Kalai and Vempala 2005, Theorem
    1.1(a) with D = 2, R = 1, A = n for experts, and their FLL lemma
    P[x_{t+1} != x_t] <= eps |l_t|_1; theorem numbering and constants from
    memory, and both re-derived here: each coordinate's offset is uniform,
    so it wraps with probability exactly eps l_t(i), and FPL differs from
    "be the perturbed leader" (regret <= max perturbation <= 1/eps) with
    probability <= eps |l_t|_1 <= eps n per round):
    E[regret] <= eps n T + 2 / eps (2 sqrt(2 n T) at the default) and
    E[switches] <= eps n T (sqrt(2 n T) at the default); both for oblivious
    sequences.

    Fast path: the ``kernels.lazy_leader`` kernel recomputes the argmin only
    when the leader's own coordinate moves, so per-replica work is O(1) per
    round plus O(n) per switch. The slow path recomputes x_t and its argmin
    every round from the formula above.
    """

    def __init__(self, eps=None):
        self.eps = None if eps is None else validate.positive_real("eps", eps)

    @property
    def claims(self):
        if self.eps is None:
            regret, switches = "2 * sqrt(2 * n * T)", "sqrt(2 * n * T)"
        else:
            regret, switches = f"{self.eps!r} * n * T + 2 / {self.eps!r}", f"{self.eps!r} * n * T"
        source = "Kalai and Vempala 2005, J. Comput. Syst. Sci. 71:291-307, Theorem 1.1(a) and FLL (from memory)"
        return (Claim(metric="regret", bound=regret, kind="expectation", source=source,
                      name=f"lazy-ftpl: expected regret <= {regret} (oblivious)", scope="oblivious"),
                Claim(metric="switches", bound=switches, kind="expectation", source=source,
                      name=f"lazy-ftpl: expected switches <= {switches} (oblivious)", scope="oblivious"))

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        eps = self.eps if self.eps is not None else default_lazy_eps(n_actions, horizon)
        self._width = 1.0 / eps
        self._g = rng.random((replicas, n_actions)) * self._width
        self._leader = np.full(replicas, -1, dtype=np.int64)
        self._level = np.zeros(replicas)

    def points(self) -> np.ndarray:
        """The perturbed points x_t (replicas, n) of the coming round."""
        d = self._g - self._cum
        return self._cum + (d - self._width * np.floor(d / self._width))

    def act(self):
        return np.argmin(self.points(), axis=1).astype(np.int64)

    def update(self, actions, losses):
        super().update(actions, losses)
        self._leader[:] = -1  # the kernel's cached leader is stale after a slow-path round

    def play_block(self, losses):
        return kernels.lazy_leader(self._before(losses), self._g, self._width, self._leader, self._level)


# -- Shrinking Dartboard -----------------------------------------------------------------


def default_dartboard_eta(n_actions: int, horizon: int) -> float:
    """min(1/2, sqrt(ln n / T)): balances ln(n)/eta against eta T (derivation in the class docstring)."""
    return min(0.5, math.sqrt(math.log(n_actions) / horizon))


_DEFAULT_DARTBOARD_ETA = "min(0.5, sqrt(ln(n) / T))"


@REGISTRY.register("shrinking-dartboard", "Hedge's marginals; keeps its action w.p. w_t/w_{t-1}, else redraws")
class ShrinkingDartboard(_BlockCumulative):
    r"""Shrinking Dartboard (Geulen, Voecking and Winkler 2010, "Regret minimization
    for online buffering problems using the weighted majority algorithm", COLT).

    Weights w_t(i) = (1 - eta)^{L_{t-1}(i)}, p_t = w_t / W_t. Round 1 draws
    a_1 ~ p_1. Round t keeps a_{t-1} with probability w_t(a)/w_{t-1}(a) =
    (1 - eta)^{l_{t-1}(a)}, else redraws a_t ~ p_t.

    Marginals (exact): if P[a_{t-1} = i] = p_{t-1}(i) then
    P[a_t = i] = p_{t-1}(i) w_t(i)/w_{t-1}(i) + P[redraw] p_t(i)
               = w_t(i)/W_{t-1} + (1 - W_t/W_{t-1}) w_t(i)/W_t = p_t(i),
    so every round plays Hedge's distribution with rate beta = ln(1/(1-eta)).

    Redraws: P[redraw at t] = sum_i p_{t-1}(i)(1 - w_t(i)/w_{t-1}(i)) =
    1 - W_t/W_{t-1}, so E[redraws after round 1] = sum_t (1 - W_t/W_{t-1}).
    A switch needs a redraw, and 1 - x <= ln(1/x), so

        E[switches] <= sum_t ln(W_{t-1}/W_t) = ln(W_1/W_{T+1})
                     <= ln n + L* ln(1/(1 - eta)),

    because W_1 = n and W_{T+1} >= (1 - eta)^{L*}, L* the best action's loss.

    Regret: (1 - eta)^l <= 1 - eta l on [0, 1] gives W_{t+1} <= W_t (1 - eta
    <p_t, l_t>) <= W_t exp(-eta <p_t, l_t>), hence the weighted-majority
    bound E[loss] <= (ln n + L* ln(1/(1-eta))) / eta (Littlestone and
    Warmuth 1994) and E[regret] <= ln(n)/eta + T (ln(1/(1-eta))/eta - 1).
    Default eta = min(1/2, sqrt(ln n / T)). The claims are these two bounds
    with L* <= T, for oblivious sequences (derived here; Geulen et al. state
    the same order, O(sqrt(T ln n)) for both, from memory).

    Exponential clocks (how both paths play the keep rule): keeping a
    through rounds s+1..t has probability prod_u (1 - eta)^{l_u(a)} =
    exp(-beta (L_t(a) - L_s(a))). So at each draw the replica also draws
    E ~ Exp(1) and keeps a exactly while beta (L_t(a) - L_s(a)) < E: the
    same law of play as a fresh keep/redraw coin every round, but randomness
    is drawn only at draws (two uniforms per draw: the action by inverse CDF,
    then E = -ln(1 - v)). ``tests/test_learners_dartboard.py`` checks the
    marginals and the redraw counts against the per-round construction.

    Fast path: ``kernels.dartboard_shared`` / ``dartboard_per_replica``: per
    replica one comparison per round, and the CDF of p_t only in rounds where
    some replica redraws. The slow path draws the same uniforms in the same
    order, so both give identical play. ``redraws`` (replicas,) counts
    redraws after round 1, for tests.
    """

    def __init__(self, eta=None):
        self.eta = None if eta is None else validate.real("eta", eta, low=0.0, high=1.0, low_open=True,
                                                           high_open=True)

    @property
    def claims(self):
        e = _DEFAULT_DARTBOARD_ETA if self.eta is None else repr(self.eta)
        regret = f"ln(n) / ({e}) + T * (ln(1 / (1 - {e})) / ({e}) - 1)"
        switches = f"ln(n) + T * ln(1 / (1 - {e}))"
        source = ("Geulen, Voecking and Winkler 2010 (COLT), Shrinking Dartboard; bound derived in "
                  "harness.learners.low_switching.ShrinkingDartboard from the weighted-majority analysis")
        return (Claim(metric="regret", bound=regret, kind="expectation", source=source,
                      name="shrinking-dartboard: expected regret <= ln(n)/eta + T(ln(1/(1-eta))/eta - 1) (oblivious)", scope="oblivious"),
                Claim(metric="switches", bound=switches, kind="expectation", source=source,
                      name="shrinking-dartboard: expected switches <= ln n + T ln(1/(1-eta)) (oblivious)", scope="oblivious"))

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._eta = self.eta if self.eta is not None else default_dartboard_eta(n_actions, horizon)
        self._beta = -math.log1p(-self._eta)         # Hedge rate with the same weights
        self._last = np.full(replicas, -1, dtype=np.int64)
        self._mark = np.zeros(replicas)               # L(a) when a was drawn
        self._clock = np.zeros(replicas)              # E / beta: the loss a may take before a redraw
        self._uniforms = kernels.UniformStream(rng, chunk=max(256, 32 * replicas))
        self.redraws = np.zeros(replicas, dtype=np.int64)

    def act(self):
        cum = np.broadcast_to(self._cum, (self._replicas, self._n))
        held = cum[np.arange(self._replicas), np.maximum(self._last, 0)]
        idx = np.flatnonzero((self._last < 0) | (held - self._mark >= self._clock))
        if idx.size:
            self.redraws[idx] += self._last[idx] >= 0
            uv = self._uniforms.take(2 * idx.size).reshape(idx.size, 2)
            drawn = sample_each(hedge_cdf(cum[idx], self._beta), uv[:, 0])
            self._last[idx] = drawn
            self._mark[idx] = cum[idx, drawn]
            self._clock[idx] = -np.log1p(-uv[:, 1]) / self._beta
        return self._last.copy()

    def play_block(self, losses):
        steps = losses.shape[0]
        out = np.empty((steps, self._replicas), dtype=np.int64)
        if losses.ndim == 2 and self._cum.ndim == 1:
            before, self._cum = cumulative_before(self._cum, losses)
            kernel, data = kernels.dartboard_shared, (before,)
        else:
            if losses.ndim == 2:
                losses = np.broadcast_to(losses[:, None, :], (steps, self._replicas, self._n))
            kernel, data = kernels.dartboard_per_replica, (losses, self._per_replica())
        stream, t = self._uniforms, 0
        while t < steps:  # the kernel stops before a round when the buffered uniforms run low
            stream.reserve(2 * self._replicas)
            t = kernel(*data, t, out, self._beta, stream.buffer, stream.position, self._last, self._mark,
                       self._clock, self.redraws)
        return out


# -- random-walk perturbation ----------------------------------------------------------------


@REGISTRY.register("random-walk", "follow the leader of losses perturbed by independent Gaussian random walks")
class RandomWalkPerturbation(_BlockCumulative):
    r"""Prediction by random-walk perturbation (Devroye, Lugosi and Neu 2013, COLT,
    PMLR 30:460-473).

        a_t = argmin_i ( L_{t-1}(i) + Z_t(i) ),   Z_t = Z_{t-1} + scale * X_t,

    Z_0 = 0 and X_t(i) i.i.d. standard normal: each action's loss is
    perturbed by its own symmetric random walk, so the perturbation drifts
    slowly and the leader changes rarely. No tuning in the original (unit
    steps); ``scale`` multiplies the steps.

    The authors show O(sqrt(T log n)) expected regret and O(sqrt(T log n))
    expected switches (abstract, checked); their explicit constants and the
    exact step law of the analysis (Gaussian or +-1/2 steps) could not be
    checked, so no Claim is attached.

    How both paths play it (``kernels.walk_windows``): each step is Gaussian,
    so each walk is a Brownian motion seen at whole times. Rounds are cut
    into windows of up to 32 rounds; at a window start the walks of actions
    whose perturbed score is near the leader's are drawn step by step, and
    for every other action only the window's end point and whether its
    Brownian bridge comes down to a level it would need to reach to lead
    (probability exp(-2 (z - b)(c - b) / (scale^2 length))); if it does, it is
    drawn from the first time it touches the level (an inverse Gaussian time
    change) to the window's end. The played action is exactly the argmin of
    the definition above, with typically one or two walks drawn per round
    instead of n. ``tests/test_fast_kernels.py`` holds the sampler to a
    direct step-by-step simulation. Both paths consume the same draws in the
    same order (normals and uniforms from two generators spawned at reset),
    so they give identical play.
    """

    def __init__(self, scale=1.0):
        self.scale = validate.positive_real("scale", scale)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._t = 0
        self._z = np.zeros((replicas, n_actions))
        self._wlen = max(1, min(32, 4096 // n_actions))
        self._buf = np.zeros((replicas, self._wlen + 1, n_actions))
        self._first = np.zeros((replicas, n_actions), dtype=np.int64)
        self._drawn = np.zeros((replicas, n_actions), dtype=np.int64)
        self._endz = np.zeros((replicas, n_actions))
        self._window = np.zeros(2, dtype=np.int64)
        self._near = kernels.WALK_NEAR  # which walks are drawn step by step: cost only, never the law
        self._need = (replicas * n_actions * (self._wlen + 2), replicas * 2 * n_actions)
        normal_rng, uniform_rng = rng.spawn(2)
        self._normals = kernels.NormalStream(normal_rng, chunk=max(1 << 16, self._need[0]))
        self._uniforms = kernels.UniformStream(uniform_rng, chunk=max(1 << 12, self._need[1]))

    def _play(self, before):
        out = np.empty(before.shape[:2], dtype=np.int64)
        s = 0
        while s < before.shape[0]:  # the kernel stops before a window start when its buffers run low
            self._normals.reserve(self._need[0])
            self._uniforms.reserve(self._need[1])
            s = kernels.walk_windows(before, s, out, self._t, self._wlen, float(self.scale), self._near, self._z,
                                     self._buf, self._first, self._drawn, self._endz, self._window,
                                     self._normals.buffer,
                                     self._normals.position, self._uniforms.buffer, self._uniforms.position)
        self._t += before.shape[0]
        return out

    def act(self):
        before = np.broadcast_to(self._cum, (self._replicas, self._n))[None]
        return self._play(before)[0]

    def play_block(self, losses):
        return self._play(self._before(losses))


# -- multiplicative-weights FTPL -------------------------------------------------------------


@REGISTRY.register("mw-ftpl", "FTPL with one Gumbel perturbation per game: Hedge's marginals, few switches")
class GumbelFTPL(_BlockCumulative):
    r"""The multiplicative-weights form of Follow the Perturbed Leader.

        a_t = argmin_i ( L_{t-1}(i) - G(i) / eta ),  G(i) i.i.d. standard Gumbel,

    with G drawn once per game. By the Gumbel lemma, argmax_i (G(i) - eta L(i))
    is distributed as p(i) ~ exp(-eta L(i)) (the Gumbel-max trick; see Hazan
    et al. 2017 as cited by Kim and Tewari, and Kalai and Vempala 2005 on
    FTPL), so every round's marginal is exactly Hedge's with rate eta. Against
    an oblivious sequence the expected loss depends only on the marginals,
    so Hedge's expected-regret claim carries over (default eta =
    sqrt(8 ln n / T), Cesa-Bianchi and Lugosi 2006, Theorem 2.2); one draw
    per game makes the leader change rarely. Against adaptive adversaries the
    fixed perturbation can be learnt: the claim is for oblivious sequences
    only, and Hedge's high-probability claim (which needs fresh draws each
    round) is not made.

    Fast path: ``kernels.lazy_argmin``. Every score L(i) - G(i)/eta only
    rises, so while the leader's score stays below the least other score
    seen when it was last computed it is still the argmin: per replica O(1)
    per round, O(n) only when the leader's score passes that level.
    Identical play to the slow path.
    """

    def __init__(self, eta=None):
        self.eta = None if eta is None else validate.positive_real("eta", eta)

    @property
    def claims(self):
        expected = hedge_claims(self.eta, label="mw-ftpl")[0]
        return (Claim(metric=expected.metric, bound=expected.bound, kind=expected.kind,
                      name=expected.name + " (oblivious)", scope="oblivious", source=expected.source + "; Gumbel-max marginals"),)

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        eta = self.eta if self.eta is not None else default_hedge_eta(n_actions, horizon)
        self._shift = rng.gumbel(size=(replicas, n_actions)) / eta
        # the fast path's cached leader and a lower bound on the other scores; scores only
        # rise, so the bound stays valid across slow-path rounds too
        self._leader = np.full(replicas, -1, dtype=np.int64)
        self._level = np.zeros(replicas)

    def act(self):
        return np.argmin(self._cum - self._shift, axis=1).astype(np.int64)

    def play_block(self, losses):
        return kernels.lazy_argmin(self._before(losses), self._shift, self._leader, self._level)


# -- blocked Hedge -----------------------------------------------------------------------------


def required_budget(budget, field: str = "budget") -> int:
    if budget is None:
        raise ConfigError(f"{field}: required; give the switch budget S, e.g. {field}=20")
    return validate.positive_int(field, budget)


def block_length(horizon: int, budget: int) -> int:
    """ceil(T / S): at most S blocks, so at most S - 1 switches."""
    return -(-horizon // budget)


BLOCKING_SOURCE = ("blocking as in Arora, Dekel and Tewari 2012 (ICML), 'Online bandit learning against an "
                   "adaptive adversary: from regret to policy regret' (from memory)")


@REGISTRY.register("blocked-hedge", "Hedge drawn once per block of ceil(T/S) rounds: at most S switches, always")
class BlockedHedge(_BlockCumulative):
    r"""Hedge played in blocks, for a hard switch budget S (``budget``).

    The horizon is cut into K = ceil(T / B) blocks of B = ceil(T / S) rounds
    (K <= S). At each block start one action is drawn from Hedge's weights
    on the losses so far, scaled to one block: p(i) ~ exp(-eta L(i) / B); it
    is played for the whole block. So there are at most K - 1 < S switches
    on every sequence.

    Each block is one round of Hedge with losses (block total)/B in [0, 1],
    so with the default eta = sqrt(8 ln n / K) the expected regret is at most
    B sqrt(K ln n / 2) (Cesa-Bianchi and Lugosi 2006, Theorem 2.2, on the
    block sequence; the blocking argument as in Arora, Dekel and Tewari
    2012). With a fixed block rate eta: B (ln(n)/eta + eta K/8).

    Fast path: one draw per replica per block start (inverse CDF on the
    shared weights when the sequence is shared); the slow path draws the
    same uniforms in the same rounds, so both give identical play.
    """

    example_params = {"budget": 20}

    def __init__(self, budget=None, eta=None):
        self.budget = required_budget(budget)
        self.eta = None if eta is None else validate.positive_real("eta", eta)

    @property
    def claims(self):
        S = self.budget
        B, K = f"ceil(T / {S})", f"ceil(T / ceil(T / {S}))"
        regret = (f"{B} * sqrt({K} * ln(n) / 2)" if self.eta is None
                  else f"{B} * (ln(n) / {self.eta!r} + {self.eta!r} * {K} / 8)")
        return (Claim(metric="switches", bound=float(S), kind="always", name=f"blocked-hedge: at most {S} switches",
                      source="construction (one draw per block of ceil(T/S) rounds)"),
                Claim(metric="regret", bound=regret, kind="expectation",
                      name=f"blocked-hedge: expected regret <= {regret}",
                      source=f"{hedge_claims()[0].source} on block losses; {BLOCKING_SOURCE}"))

    def reset(self, n_actions, horizon, replicas, rng):
        super().reset(n_actions, horizon, replicas, rng)
        self._block = block_length(horizon, self.budget)
        blocks = -(-horizon // self._block)
        eta = self.eta if self.eta is not None else default_hedge_eta(n_actions, blocks)
        self._rate = eta / self._block
        self._t = 0
        self._cur = np.zeros(replicas, dtype=np.int64)

    def act(self):
        if self._t % self._block == 0:
            u = self._rng.random(self._replicas)
            cdf = hedge_cdf(np.broadcast_to(self._cum, (self._replicas, self._n)), self._rate)
            self._cur = sample_each(cdf, u)
        return self._cur.copy()

    def update(self, actions, losses):
        super().update(actions, losses)
        self._t += 1

    def play_block(self, losses):
        steps = losses.shape[0]
        starts = np.flatnonzero((self._t + np.arange(steps)) % self._block == 0)
        u = self._rng.random((starts.size, self._replicas))
        shared = losses.ndim == 2 and self._cum.ndim == 1
        before = self._before(losses)
        if shared:
            drawn = kernels.sample_rows(hedge_cdf(before[starts, 0, :], self._rate), u)
        else:
            drawn = np.stack([sample_each(hedge_cdf(before[s], self._rate), u[k])
                              for k, s in enumerate(starts)]) if starts.size else np.empty((0, self._replicas),
                                                                                           dtype=np.int64)
        draws = np.concatenate([self._cur[None], drawn], axis=0)
        which = np.searchsorted(starts, np.arange(steps), side="right")
        self._cur = draws[-1].copy()
        self._t += steps
        return draws[which]
