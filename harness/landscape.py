r"""landscape(): worst-case regret against a switching budget S.

For every budget S on a grid, every budgeted learner of a family (built for
that S) plays every lower-bound adversary (built for that S) over
``replicas`` independent replicas; the q-quantile of regret, with a
distribution-free order-statistic interval (:func:`harness.stats.quantile_interval`),
is the point plotted against S on log-log axes. The worst case at S is the
adversary with the largest quantile. Slopes are least-squares fits of
log(quantile) on log(S).

Reference rates and where they come from:

- Experts (full information), against ``block-random`` (K = ceil(2 S^2 /
  ln n) blocks of i.i.d. Bernoulli(1/2) losses, clipped to T; see
  :class:`adversaries.lower_bounds.BlockRandom`): a learner that cannot
  exploit the blocks pays E[max_i (T/2 - L_i)] ~ T sqrt(ln n / (2K))
  (Gaussian limit of the block totals, derived in that docstring), so

      R(S) = T sqrt(ln n / (2 K(S))) = max(T ln n / (2S), sqrt(T ln n / 2)),

  falling like 1/S until K reaches T at S = sqrt(T ln n / 2) (the knee),
  flat above it. The minimax regret with S switches is of order T ln n / S
  below S ~ sqrt(T ln n) and sqrt(T ln n) above (Altschuler and Talwar
  2018, "Online learning over a finite action set with limited switching",
  COLT; from memory).
- Bandits, against ``multiscale-walk`` (Dekel, Ding, Koren and Peres 2014,
  "Bandits with switching costs: T^{2/3} regret", STOC; construction from
  memory) with its gap retuned to the budget: eps(S) = sqrt(n / S) / (9
  log2 T). With S switches a learner collects information of order S eps^2
  / sigma^2 about the better action (their information argument, from
  memory), so this eps keeps it constant and a learner that cannot locate
  the action pays eps T (1 - 1/n) ~ T sqrt(n / S) / (9 log2 T): slope -1/2.
  The minimax rate with S switches under bandit feedback is of order T
  sqrt(n / S) up to logarithms (Altschuler and Talwar 2018; from memory).
  At S = n^{1/3} T^{2/3} this eps is the construction's own.
- Switching-cost mode: regret + C x switches, minimised over the budget
  grid, against C. Minimising the reference R(S) + C S gives sqrt(2 C T ln n)
  below the knee for experts (slope 1/2 in C) and a C^{1/3} law for bandits
  (the T^{2/3} of Dekel et al. at C = 1); these minima are computed
  numerically from the reference curves, not approximated.

Seeds: adversary a at budget S uses ``SeedSequence(seed, spawn_key=(a,
S)).generate_state(1)[0]`` for every learner, so learners face the same
sequences (common random numbers) and every point replays with
``harness.run``. Quantile intervals hold pointwise at ``confidence`` (not
family-wise over the grid).
"""

from __future__ import annotations

import json
import math
import sys
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from . import stats, validate
from .config import int_list, n_jobs as config_n_jobs
from .errors import ConfigError
from .runner import run, versions

FORMAT = "boundbreaker-landscape"
FEEDBACKS = ("full", "bandit")
ALTSCHULER_TALWAR = ("Altschuler and Talwar 2018, Online learning over a finite action set with limited switching, "
                     "COLT (from memory)")
DEKEL_ET_AL = "Dekel, Ding, Koren and Peres 2014, Bandits with switching costs: T^{2/3} regret, STOC (from memory)"


# -- families ------------------------------------------------------------------------


@dataclass(frozen=True)
class Family:
    """A member for every budget: ``build(S, T, n)`` -> Learner or Adversary."""

    name: str
    feedback: str
    description: str
    build: Callable


def _learner(name, **params):
    from .learners import get
    return get(name, **params)


def _adversary(name, **params):
    import adversaries
    return adversaries.get(name, **params)


def walk_epsilon(budget: int, horizon: int, n_actions: int) -> float:
    """The multiscale walk's gap retuned to a budget S: sqrt(n / S) / (9 log2 T) (module docstring)."""
    return min(1.0, math.sqrt(n_actions / budget) / (9.0 * math.log2(max(horizon, 2))))


LEARNERS = {f.name: f for f in (
    Family("blocked-hedge", "full", "Hedge drawn once per block of ceil(T/S) rounds (at most S switches)",
           lambda S, T, n: _learner("blocked-hedge", budget=S)),
    Family("budget-cap(shrinking-dartboard)", "full",
           "Shrinking Dartboard with eta = S/T (expected switches about eta L* < S), frozen after S switches",
           lambda S, T, n: _learner("budget-cap", inner="shrinking-dartboard",
                                    inner_params={"eta": min(0.5, S / T)}, budget=S)),
    Family("epoch-restart(shrinking-dartboard)", "full",
           "Shrinking Dartboard with eta = S/(2T), restarted every S/2 switches (switches not capped: see the table)",
           lambda S, T, n: _learner("epoch-restart", inner="shrinking-dartboard",
                                    inner_params={"eta": min(0.5, S / (2 * T))}, switches_per_epoch=max(1, S // 2))),
    Family("blocked-exp3", "bandit", "EXP3 over blocks of ceil(T/S) rounds (at most S switches)",
           lambda S, T, n: _learner("blocked-exp3", budget=S)),
    Family("budget-cap(exp3)", "bandit", "EXP3 frozen after S switches",
           lambda S, T, n: _learner("budget-cap", inner="exp3", budget=S)),
)}

ADVERSARIES = {f.name: f for f in (
    Family("block-random", "full", "i.i.d. Bernoulli(1/2) losses constant on K = ceil(2 S^2 / ln n) blocks "
                                   "(lower bound for any S-switch learner)",
           lambda S, T, n: _adversary("block-random", budget=S)),
    Family("block-random-aligned", "full", "the same with K = S blocks: learners that switch on a fixed schedule "
                                           "cannot react inside a block",
           lambda S, T, n: _adversary("block-random", budget=S, blocks=min(S, T))),
    Family("multiscale-walk", "bandit", "Dekel-Ding-Koren-Peres multi-scale walk, gap sqrt(n/S)/(9 log2 T)",
           lambda S, T, n: _adversary("multiscale-walk", epsilon=walk_epsilon(S, T, n))),
)}

DEFAULTS = {"full": (("blocked-hedge", "budget-cap(shrinking-dartboard)", "epoch-restart(shrinking-dartboard)"),
                     ("block-random",)),
            "bandit": (("blocked-exp3", "budget-cap(exp3)"), ("multiscale-walk",))}


def _families(items, table: dict, field_name: str) -> list:
    out = []
    for i, item in enumerate(items):
        if isinstance(item, str):
            if item not in table:
                raise ConfigError(f"{field_name}[{i}]: unknown family {item!r}; choose from {', '.join(table)} "
                                  f"or give (label, build(S, T, n))")
            out.append(table[item])
        elif isinstance(item, Family):
            out.append(item)
        elif isinstance(item, (tuple, list)) and len(item) == 2 and isinstance(item[0], str) and callable(item[1]):
            out.append(Family(item[0], "", "user family", item[1]))
        else:
            raise ConfigError(f"{field_name}[{i}]: give a family name or a (label, build(S, T, n)) pair, got "
                              f"{type(item).__name__}")
    names = [f.name for f in out]
    for name in names:
        if names.count(name) > 1:
            raise ConfigError(f"{field_name}: {name!r} appears twice; list each family once")
    if not out:
        raise ConfigError(f"{field_name}: give at least one family")
    return out


# -- reference rates ------------------------------------------------------------------


def knee(horizon: int, n_actions: int, feedback: str = "full") -> float | None:
    """Where the reference rate stops falling: sqrt(T ln n / 2) for experts; none below T for bandits."""
    return math.sqrt(horizon * math.log(n_actions) / 2.0) if feedback == "full" else None


def reference(budget, horizon: int, n_actions: int, feedback: str = "full") -> np.ndarray:
    """The reference regret at budget(s) S (module docstring): experts T sqrt(ln n / (2 K(S))) with
    K(S) = min(T, ceil(2 S^2 / ln n)); bandits eps(S) T (1 - 1/n)."""
    S = np.asarray(budget, dtype=float)
    T, n = float(horizon), n_actions
    if feedback == "full":
        K = np.minimum(T, np.maximum(1.0, np.ceil(2.0 * S ** 2 / math.log(n))))
        return T * np.sqrt(math.log(n) / (2.0 * K))
    eps = np.minimum(1.0, np.sqrt(n / S) / (9.0 * math.log2(max(horizon, 2))))
    return eps * T * (1.0 - 1.0 / n)


REFERENCE_TEXT = {
    "full": ("T sqrt(ln n / (2K)), K = min(T, 2 S^2 / ln n): = T ln n / (2S) below the knee sqrt(T ln n / 2), "
             "sqrt(T ln n / 2) above (derived in adversaries.lower_bounds.BlockRandom; order: " + ALTSCHULER_TALWAR
             + ")"),
    "bandit": ("eps(S) T (1 - 1/n), eps(S) = sqrt(n/S) / (9 log2 T) ~ T sqrt(n/S) (construction: " + DEKEL_ET_AL
               + "; rate T sqrt(n/S): " + ALTSCHULER_TALWAR + ")"),
}
REFERENCE_SLOPES = {"full": (-1.0, 0.0), "bandit": (-0.5, None)}
COST_SLOPES = {"full": 0.5, "bandit": 1.0 / 3.0}


def reference_cost(cost: float, budgets, horizon: int, n_actions: int, feedback: str) -> tuple[float, int]:
    """min over S in [min(budgets), max(budgets)] of reference(S) + C S, and the minimising S."""
    grid = np.unique(np.round(np.geomspace(min(budgets), max(budgets), 400)).astype(int))
    total = reference(grid, horizon, n_actions, feedback) + cost * grid
    k = int(np.argmin(total))
    return float(total[k]), int(grid[k])


# -- results ------------------------------------------------------------------------------


@dataclass(frozen=True)
class Point:
    """One (learner, adversary, S): the q-quantile of regret with its interval, and the switches seen."""

    learner: str
    adversary: str
    budget: int
    replicas: int
    seed: int
    estimate: float
    low: float | None
    high: float | None
    mean: float
    switches_mean: float
    switches_quantile: float
    switches_max: int


@dataclass(frozen=True)
class Fit:
    """Fitted slopes of log(quantile) on log(S) for one series (``adversary`` = "worst" for the worst case).

    ``slope_below`` over S <= knee/2, ``slope_above`` over S >= 2 knee
    (theory's knee; None with fewer than 2 points), ``slope_all`` over the
    whole grid, ``knee`` the break point of a continuous two-segment fit
    (experts only).
    """

    learner: str
    adversary: str
    slope_below: float | None
    slope_above: float | None
    slope_all: float | None
    knee: float | None
    points: int


@dataclass(frozen=True)
class CostPoint:
    """min over S of the q-quantile of regret + C x switches (worst adversary at each S)."""

    learner: str
    cost: float
    budget: int
    adversary: str
    estimate: float
    low: float | None
    high: float | None
    reference: float
    reference_budget: int
    at_edge: bool


@dataclass
class Landscape:
    """The result of :func:`landscape` (see the module docstring)."""

    feedback: str
    horizon: int
    n_actions: int
    quantile: float
    confidence: float
    seed: int
    budgets: tuple
    learners: tuple
    adversaries: tuple
    points: list
    fits: list
    cost_points: list = field(default_factory=list)
    cost_slopes: dict = field(default_factory=dict)
    wall_time_s: float = 0.0
    created_versions: dict = field(default_factory=dict)

    @property
    def knee_theory(self) -> float | None:
        return knee(self.horizon, self.n_actions, self.feedback)

    def series(self, learner: str, adversary: str) -> list:
        """Points of one (learner, adversary) in budget order; adversary "worst" takes the max at each S."""
        if adversary != "worst":
            return sorted((p for p in self.points if p.learner == learner and p.adversary == adversary),
                          key=lambda p: p.budget)
        out = []
        for S in self.budgets:
            at = [p for p in self.points if p.learner == learner and p.budget == S]
            if at:
                out.append(max(at, key=lambda p: p.estimate))
        return out

    def fit(self, learner: str, adversary: str = "worst") -> Fit:
        for f in self.fits:
            if f.learner == learner and f.adversary == adversary:
                return f
        raise ConfigError(f"fit: no series ({learner!r}, {adversary!r}); learners are {', '.join(self.learners)}, "
                          f"adversaries {', '.join(self.adversaries)} or 'worst'")

    def to_dict(self) -> dict:
        return {
            "format": FORMAT, "format_version": 1, "feedback": self.feedback, "horizon": self.horizon,
            "n_actions": self.n_actions, "quantile": self.quantile, "confidence": self.confidence,
            "seed": self.seed, "budgets": list(self.budgets), "learners": list(self.learners),
            "adversaries": list(self.adversaries), "knee_theory": self.knee_theory,
            "reference": REFERENCE_TEXT[self.feedback],
            "reference_slopes": list(REFERENCE_SLOPES[self.feedback]),
            "interval_method": stats.QUANTILE_METHOD, "interval_reference": stats.QUANTILE_REFERENCE,
            "points": [_clean(asdict(p)) for p in self.points], "fits": [_clean(asdict(f)) for f in self.fits],
            "cost_points": [_clean(asdict(c)) for c in self.cost_points],
            "cost_slopes": _clean(dict(self.cost_slopes)), "cost_reference_slope": COST_SLOPES[self.feedback],
            "wall_time_s": self.wall_time_s, "versions": self.created_versions,
        }

    def save(self, path) -> Path:
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(self.to_dict(), indent=2, allow_nan=False) + "\n", encoding="utf-8")
        return path

    def table(self) -> str:
        return format_table([self])


def _clean(d):
    """JSON-safe: infinite interval ends become null."""
    if isinstance(d, dict):
        return {k: _clean(v) for k, v in d.items()}
    if isinstance(d, float) and not math.isfinite(d):
        return None
    return d


# -- the sweep ------------------------------------------------------------------------------


def budget_grid(horizon: int, n_actions: int, points: int = 9) -> tuple:
    """Powers of two from 2, ``points`` of them, kept below T/4: spans both sides of the experts' knee
    sqrt(T ln n / 2) when T is large enough."""
    horizon = validate.positive_int("horizon", horizon, minimum=16)
    out = [2 ** k for k in range(1, points + 1) if 2 ** k <= horizon // 4]
    return tuple(out)


def point_seed(seed: int, adversary_index: int, budget: int) -> int:
    return int(np.random.SeedSequence(seed, spawn_key=(adversary_index, budget)).generate_state(1)[0])


def landscape(learners=None, adversaries=None, budgets=None, horizon=10_000, n_actions=4, replicas=256,
              quantile=0.9, confidence=0.95, seed=0, n_jobs=1, *, feedback="full", switching_costs=None,
              progress=False) -> Landscape:
    """Sweep the switching budget S (see the module docstring).

    ``learners`` and ``adversaries`` are family names (:data:`LEARNERS`,
    :data:`ADVERSARIES`) or ``(label, build(S, T, n))`` pairs; None takes
    the defaults for ``feedback`` ("full" or "bandit"). ``budgets`` defaults
    to :func:`budget_grid`. ``switching_costs`` (a list of C, or None for a
    grid chosen from the reference rates, or () for none) adds the
    switching-cost mode.
    """
    started = time.perf_counter()
    validate.choice("feedback", feedback, FEEDBACKS)
    horizon = validate.positive_int("horizon", horizon, minimum=16)
    n_actions = validate.positive_int("n_actions", n_actions, minimum=2)
    replicas = validate.positive_int("replicas", replicas, minimum=10)
    quantile = validate.real("quantile", quantile, low=0.0, high=1.0, low_open=True, high_open=True)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    seed = validate.nonneg_int("seed", seed)
    n_jobs = config_n_jobs("n_jobs", n_jobs)
    learner_fams = _families(learners if learners is not None else DEFAULTS[feedback][0], LEARNERS, "learners")
    adversary_fams = _families(adversaries if adversaries is not None else DEFAULTS[feedback][1], ADVERSARIES,
                               "adversaries")
    for f in learner_fams:
        if f.feedback and f.feedback != feedback:
            raise ConfigError(f"learners: {f.name!r} is a {f.feedback}-feedback family; this landscape is "
                              f"feedback={feedback!r} (run one landscape per feedback)")
    budgets = tuple(sorted(int_list("budgets", budgets if budgets is not None else budget_grid(horizon, n_actions),
                                    minimum=1)))
    if budgets[-1] >= horizon:
        raise ConfigError(f"budgets: must stay below the horizon ({horizon}), got {budgets[-1]}")

    points, raw = [], {}
    total = len(learner_fams) * len(adversary_fams) * len(budgets)
    show = progress and sys.stderr.isatty()
    done = 0
    for a, adv in enumerate(adversary_fams):
        for S in budgets:
            s = point_seed(seed, a, S)
            for lf in learner_fams:
                learner = lf.build(S, horizon, n_actions)
                result = run(learner, adv.build(S, horizon, n_actions), horizon, n_actions, replicas=replicas,
                             seed=s, n_jobs=n_jobs)
                raw[(lf.name, adv.name, S)] = (result.regret, result.switches)
                ci = stats.quantile_interval(result.regret, quantile, confidence)
                sw = result.switches
                points.append(Point(lf.name, adv.name, S, replicas, s, ci.estimate, _finite(ci.low),
                                    _finite(ci.high), float(result.regret.mean()), float(sw.mean()),
                                    float(np.quantile(sw, quantile, method="inverted_cdf")), int(sw.max())))
                done += 1
                if show:
                    sys.stderr.write(f"\rlandscape ({feedback}): {done}/{total} runs ")
                    sys.stderr.flush()
    if show:
        sys.stderr.write("\n")
    out = Landscape(feedback, horizon, n_actions, quantile, confidence, seed, budgets,
                    tuple(f.name for f in learner_fams), tuple(f.name for f in adversary_fams), points, [])
    for lf in learner_fams:
        for name in [a.name for a in adversary_fams] + (["worst"] if len(adversary_fams) > 1 else []):
            out.fits.append(_fit(out, lf.name, name))
        if len(adversary_fams) == 1:  # the worst case is that one adversary
            only = out.fit(lf.name, adversary_fams[0].name)
            out.fits.append(Fit(lf.name, "worst", only.slope_below, only.slope_above, only.slope_all, only.knee,
                                only.points))
    if switching_costs is None:
        switching_costs = default_costs(budgets, horizon, n_actions, feedback)
    if len(switching_costs):
        costs = [validate.real(f"switching_costs[{i}]", c, low=0.0, low_open=True) for i, c in enumerate(switching_costs)]
        _cost_mode(out, raw, sorted(costs))
    out.wall_time_s = round(time.perf_counter() - started, 3)
    out.created_versions = versions()
    return out


def _finite(x) -> float | None:
    return x if math.isfinite(x) else None


def _slope(xs, ys) -> float | None:
    xs, ys = np.asarray(xs, dtype=float), np.asarray(ys, dtype=float)
    keep = ys > 0
    if keep.sum() < 2:
        return None
    return float(np.polyfit(np.log(xs[keep]), np.log(ys[keep]), 1)[0])


KNEE_MIN_BEND = 0.25  # slopes on the two sides must differ by this much for a break to count as a knee


def hinge_knee(budgets, values) -> float | None:
    """Break point of a continuous two-segment least-squares fit of log(value) on log(S).

    The break is searched on a fine grid strictly between the second and the
    second-to-last budget (each segment keeps at least two points); the
    returned S is exp of the best break. None with fewer than 4 positive
    points, or when the two fitted slopes differ by less than
    ``KNEE_MIN_BEND`` (a straight line has no knee).
    """
    x, y = np.log(np.asarray(budgets, dtype=float)), np.asarray(values, dtype=float)
    keep = y > 0
    x, y = x[keep], np.log(y[keep])
    if x.size < 4:
        return None
    best, where, bend = math.inf, None, 0.0
    for x0 in np.linspace(x[1], x[-2], 200):
        design = np.column_stack([np.ones_like(x), np.minimum(x - x0, 0.0), np.maximum(x - x0, 0.0)])
        coef, *_ = np.linalg.lstsq(design, y, rcond=None)
        rss = float(np.sum((design @ coef - y) ** 2))
        if rss < best:
            best, where, bend = rss, x0, float(coef[2] - coef[1])
    return float(math.exp(where)) if abs(bend) >= KNEE_MIN_BEND else None


def _fit(ls: Landscape, learner: str, adversary: str) -> Fit:
    pts = ls.series(learner, adversary)
    S = [p.budget for p in pts]
    y = [p.estimate for p in pts]
    k = ls.knee_theory
    below = above = None
    if k is not None:
        below = _slope([s for s in S if s <= k / 2], [v for s, v in zip(S, y) if s <= k / 2])
        above = _slope([s for s in S if s >= 2 * k], [v for s, v in zip(S, y) if s >= 2 * k])
    return Fit(learner, adversary, below, above, _slope(S, y), hinge_knee(S, y) if k is not None else None, len(pts))


def default_costs(budgets, horizon, n_actions, feedback, points: int = 7) -> tuple:
    """Costs C whose reference optimum S*(C) lies inside the budget grid (and, for experts, below the knee)."""
    lo, hi = 2 * min(budgets), max(budgets) / 2
    k = knee(horizon, n_actions, feedback)
    if k is not None:
        hi = min(hi, k)
    candidates = np.geomspace(1e-5, 1e5, 201)
    inside = [c for c in candidates if lo <= reference_cost(c, budgets, horizon, n_actions, feedback)[1] <= hi]
    if len(inside) < 2:
        return ()
    return tuple(float(c) for c in np.geomspace(inside[0], inside[-1], points))


def _cost_mode(ls: Landscape, raw: dict, costs: list):
    for learner in ls.learners:
        for C in costs:
            best = None
            for S in ls.budgets:
                worst = None
                for adv in ls.adversaries:
                    regret, switches = raw[(learner, adv, S)]
                    ci = stats.quantile_interval(regret + C * switches, ls.quantile, ls.confidence)
                    if worst is None or ci.estimate > worst[0].estimate:
                        worst = (ci, adv)
                if best is None or worst[0].estimate < best[0].estimate:
                    best = (worst[0], worst[1], S)
            ci, adv, S = best
            ref, ref_S = reference_cost(C, ls.budgets, ls.horizon, ls.n_actions, ls.feedback)
            ls.cost_points.append(CostPoint(learner, C, S, adv, ci.estimate, _finite(ci.low), _finite(ci.high), ref,
                                            ref_S, S in (ls.budgets[0], ls.budgets[-1])))
        inner = [c for c in ls.cost_points if c.learner == learner and not c.at_edge]
        ls.cost_slopes[learner] = _slope([c.cost for c in inner], [c.estimate for c in inner])


# -- output -----------------------------------------------------------------------------------------


def format_table(landscapes) -> str:
    """Fitted slopes, knees and the worst-case quantiles, as printed by ``boundbreaker landscape``."""
    out = []
    for ls in landscapes:
        k = ls.knee_theory
        ref_below, ref_above = REFERENCE_SLOPES[ls.feedback]
        out.append(f"{ls.feedback} feedback: T={ls.horizon}, n={ls.n_actions}, {ls.points[0].replicas} replicas per "
                   f"point, q={ls.quantile:g} quantile of regret with {ls.confidence:g} order-statistic intervals")
        out.append(f"  reference: {REFERENCE_TEXT[ls.feedback]}")
        if k is not None:
            out.append(f"  theory knee sqrt(T ln n / 2) = {k:.1f}; reference slopes {ref_below:g} below, "
                       f"{ref_above:g} above")
        else:
            out.append(f"  reference slope {ref_below:g} (no knee below S ~ T)")
        out.append(f"  {'learner':<36}{'adversary':<22}{'below':>8}{'above':>8}{'all':>8}{'knee':>8}")
        for f in ls.fits:
            out.append(f"  {f.learner:<36}{f.adversary:<22}{_s(f.slope_below):>8}{_s(f.slope_above):>8}"
                       f"{_s(f.slope_all):>8}{_s(f.knee, 1):>8}")
        head = "  S:" + "".join(f"{S:>9}" for S in ls.budgets)
        out.append("")
        out.append(f"  worst-case q={ls.quantile:g} regret [and max switches]")
        out.append(head)
        for learner in ls.learners:
            pts = ls.series(learner, "worst")
            out.append(f"  {learner}")
            out.append("    " + "".join(f"{p.estimate:>9.4g}" for p in pts))
            out.append("    " + "".join(f"{'[' + str(p.switches_max) + ']':>9}" for p in pts))
        out.append("    reference " + " ".join(f"{v:.4g}" for v in reference(ls.budgets, ls.horizon, ls.n_actions,
                                                                               ls.feedback)))
        if ls.cost_points:
            out.append("")
            out.append(f"  switching-cost mode: min over S of q={ls.quantile:g} regret + C x switches "
                       f"(reference slope in C: {COST_SLOPES[ls.feedback]:.3g})")
            for learner in ls.learners:
                cps = [c for c in ls.cost_points if c.learner == learner]
                out.append(f"  {learner}: slope {_s(ls.cost_slopes.get(learner))}; " + ", ".join(
                    f"C={c.cost:.3g}: {c.estimate:.4g} at S={c.budget}{'*' if c.at_edge else ''}" for c in cps))
            out.append("  (* = optimum at the edge of the budget grid, left out of the slope)")
        out.append("")
    return "\n".join(out).rstrip() + "\n"


def _s(x, digits=2) -> str:
    return "-" if x is None else f"{x:.{digits}f}"


def figure(landscapes, mode: str = "regret"):
    """Log-log panels, one per landscape: the q-quantile of regret against S (``mode="regret"``) or the
    best regret + C x switches against C (``mode="cost"``), with intervals, fitted slopes and references."""
    from .report.figures import ACTION_COLOURS, new_figure

    validate.choice("mode", mode, ("regret", "cost"))
    landscapes = list(landscapes)
    entries = max(1 + (len(ls.learners) * (len(ls.adversaries) if mode == "regret" else 1)) for ls in landscapes)
    legend_h = 0.4 + 0.14 * entries
    height = 4.2 + legend_h
    fig = new_figure(6.2 * len(landscapes), height)
    axes = fig.subplots(1, len(landscapes), squeeze=False)[0]
    markers = ["o", "s", "^", "D", "v"]
    for ax, ls in zip(axes, landscapes):
        colours = {name: ACTION_COLOURS[i % len(ACTION_COLOURS)] for i, name in enumerate(ls.learners)}
        if mode == "regret":
            _regret_panel(ax, ls, colours, markers)
        else:
            _cost_panel(ax, ls, colours)
    fig.subplots_adjust(left=0.6 / fig.get_figwidth(), right=0.99, top=1 - 0.4 / height, bottom=(legend_h + 0.45) / height,
                        wspace=0.2)
    return fig


def _bars(ax, xs, pts, colour, marker, line, label, filled=True):
    y = np.array([p.estimate for p in pts], dtype=float)
    lo = np.array([p.low if p.low is not None else np.nan for p in pts], dtype=float)
    hi = np.array([p.high if p.high is not None else np.nan for p in pts], dtype=float)
    err = np.vstack([np.where(np.isnan(lo), 0, np.maximum(y - lo, 0)), np.where(np.isnan(hi), 0, np.maximum(hi - y, 0))])
    keep = y > 0
    ax.errorbar(np.asarray(xs)[keep], y[keep], yerr=err[:, keep], color=colour, marker=marker, linestyle=line,
                linewidth=1.3, markersize=4.5, capsize=2.5, label=label,
                markerfacecolor=colour if filled else "white")


def _regret_panel(ax, ls, colours, markers):
    grid = np.geomspace(ls.budgets[0], ls.budgets[-1], 200)
    ax.plot(grid, reference(grid, ls.horizon, ls.n_actions, ls.feedback), color="#9e9e9e", linestyle="--",
            linewidth=1.6, label="reference rate", zorder=1)
    k = ls.knee_theory
    if k is not None and ls.budgets[0] <= k <= ls.budgets[-1]:
        ax.axvline(k, color="#9e9e9e", linestyle=":", linewidth=1.2)
        ax.annotate(f"theory knee\nsqrt(T ln n / 2) = {k:.0f}", (k, 0.97), xycoords=("data", "axes fraction"),
                    xytext=(4, 0), textcoords="offset points", va="top", fontsize=7.5, color="#616161")
    for j, adv in enumerate(ls.adversaries):
        for learner in ls.learners:
            f = ls.fit(learner, adv)
            slope = f"{_s(f.slope_below)} / {_s(f.slope_above)}" if k is not None else f"{_s(f.slope_all)}"
            if k is not None and j == 0:  # the construction the theory's knee belongs to
                slope += f", knee {_s(f.knee, 0)}"
            _bars(ax, [p.budget for p in ls.series(learner, adv)], ls.series(learner, adv), colours[learner],
                  markers[j % len(markers)], "-" if j == 0 else "--", f"{learner} vs {adv}: slope {slope}",
                  filled=(j == 0))
    note = ("slopes: below knee/2 / above 2 knee; fitted knee" if k is not None else "slope over all S")
    styles = "; filled = first adversary, open = the others" if len(ls.adversaries) > 1 else ""
    _log_axes(ax, "switching budget S", f"{ls.quantile:g}-quantile of regret",
              f"{_kind(ls)}: T={ls.horizon}, n={ls.n_actions}, {ls.points[0].replicas} replicas per point, "
              f"{ls.confidence:.0%} intervals",
              f"{note}; reference slopes {'-1 / 0' if k is not None else '-1/2'}{styles}")
    ax.set_xscale("log", base=2)


def _kind(ls) -> str:
    return "experts" if ls.feedback == "full" else "bandits"


def _log_axes(ax, xlabel, ylabel, title, legend_title=None):
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(xlabel, fontsize=8.5)
    ax.set_ylabel(ylabel, fontsize=8.5)
    ax.set_title(title, fontsize=9)
    ax.grid(True, which="both", color="#eeeeee", linewidth=0.6)
    ax.tick_params(labelsize=7.5)
    ax.legend(fontsize=6.6, loc="upper center", bbox_to_anchor=(0.5, -0.1), frameon=False, ncol=1,
              title=legend_title, title_fontsize=7)


def _cost_panel(ax, ls, colours):
    costs = sorted({c.cost for c in ls.cost_points})
    if not costs:
        ax.text(0.5, 0.5, "no switching costs in this landscape", ha="center", transform=ax.transAxes)
        return
    ref = [reference_cost(C, ls.budgets, ls.horizon, ls.n_actions, ls.feedback)[0] for C in costs]
    ax.plot(costs, ref, color="#9e9e9e", linestyle="--", linewidth=1.6,
            label=f"reference: min over S of rate + C S (slope {COST_SLOPES[ls.feedback]:.2g})")
    for learner in ls.learners:
        pts = [c for c in ls.cost_points if c.learner == learner]
        _bars(ax, [c.cost for c in pts], pts, colours[learner], "o", "-",
              f"{learner}: slope {_s(ls.cost_slopes.get(learner))}")
        for c in pts:
            ax.annotate(f"S={c.budget}", (c.cost, c.estimate), xytext=(3, -9), textcoords="offset points",
                        fontsize=6, color=colours[learner])
    _log_axes(ax, "cost C per switch", f"min over S of the {ls.quantile:g}-quantile of regret + C x switches",
              f"{_kind(ls)} with switching costs: T={ls.horizon}, n={ls.n_actions}")


__all__ = ["landscape", "Landscape", "Point", "Fit", "CostPoint", "LEARNERS", "ADVERSARIES", "Family",
           "budget_grid", "reference", "reference_cost", "knee", "hinge_knee", "walk_epsilon", "format_table",
           "figure", "REFERENCE_TEXT"]
