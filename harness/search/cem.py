"""search(method="cem"): the cross-entropy method over the genome space; also plain random sampling.

A candidate is coded by unit coordinates in [0, 1] (segment weights, every
pattern parameter, cycles, the rest level) and by categorical choices (how
many segments, which pattern in each slot); the action permutation is
drawn uniformly and not learned. Generation 0 samples the coordinates
uniformly and the choices uniformly: that *is* plain random sampling of the
genome space, which ``method="random"`` keeps doing for the whole budget
(the baseline the benchmark compares against).

After each generation of ``population`` candidates the ``elite`` fraction
with the highest screening score refits the sampling law: each coordinate a
Gaussian (mean and standard deviation of the elites, clipped to [0, 1] when
sampling, standard deviation kept above ``min_std``), each choice a
categorical (the elites' frequencies), smoothed with the previous law by
``smoothing`` (Rubinstein 1999, "The cross-entropy method for combinatorial
and continuous optimization", Methodology and Computing in Applied
Probability 1:127-190; smoothing as in de Boer, Kroese, Mannor and
Rubinstein 2005, "A tutorial on the cross-entropy method", Annals of
Operations Research 134:19-67).

Every candidate is screened as it is drawn; one that passes screening is
confirmed at once on fresh replicas with the same acceptance rule as the
Hypothesis method.
"""

from __future__ import annotations

import math

import numpy as np

from . import adaptive
from .genome import MAX_CYCLES, MAX_WEIGHT, PATTERNS, Genome, Segment

_NAMES = list(PATTERNS)
_WIDTH = max(len(p.params) for p in PATTERNS.values())


def _log_int(u: float, high: int) -> int:
    return int(round(2 ** (min(1.0, max(0.0, u)) * math.log2(high))))


class Law:
    """The sampling law over coded candidates (uniform at first).

    A coded candidate is (kind, count, patterns, units): kind 0 is a genome,
    kind k >= 1 the k-th adaptive family, whose parameters read the last
    coordinates of ``units``.
    """

    def __init__(self, slots: int, families=(), oblivious: bool = True):
        self.slots = slots
        kinds = np.array(([1.0] if oblivious else [0.0]) + [1.0] * len(families))
        self.kind = kinds / kinds.sum()
        self.count = np.full(slots, 1.0 / slots)                   # number of segments - 1
        self.pattern = np.full((slots, len(_NAMES)), 1.0 / len(_NAMES))
        self.width = max([len(f.spaces) for f in families], default=0)
        self.dim = slots * (1 + _WIDTH) + 2 + self.width           # slots, cycles, rest, family params
        self.mean = np.full(self.dim, 0.5)
        self.std = None                                            # None: uniform coordinates

    def sample(self, rng: np.random.Generator):
        kind = 0 if self.kind.size == 1 else int(rng.choice(self.kind.size, p=self.kind))
        count = int(rng.choice(self.slots, p=self.count)) + 1
        pats = np.array([rng.choice(len(_NAMES), p=self.pattern[s]) for s in range(self.slots)])
        if self.std is None:
            units = rng.random(self.dim)
        else:
            units = np.clip(self.mean + self.std * rng.standard_normal(self.dim), 0.0, 1.0)
        return kind, count, pats, units

    def refit(self, elites, smoothing: float, min_std: float):
        """Move the law toward the elites (choices of genome structure only from genome elites)."""
        kinds = np.array([k for k, _, _, _ in elites])
        live = self.kind > 0   # a kind switched off stays off
        freq = np.bincount(kinds, minlength=self.kind.size) / len(elites)
        self.kind = np.where(live, smoothing * freq + (1 - smoothing) * self.kind, 0.0)
        self.kind /= self.kind.sum()
        genomes = [e for e in elites if e[0] == 0]
        if genomes:
            counts = np.array([c for _, c, _, _ in genomes]) - 1
            pats = np.stack([p for _, _, p, _ in genomes])
            freq = np.bincount(counts, minlength=self.slots) / len(genomes)
            self.count = smoothing * freq + (1 - smoothing) * self.count
            for s in range(self.slots):
                f = np.bincount(pats[:, s], minlength=len(_NAMES)) / len(genomes)
                self.pattern[s] = smoothing * f + (1 - smoothing) * self.pattern[s]
        units = np.stack([u for _, _, _, u in elites])
        prev_std = self.std if self.std is not None else np.full(self.dim, math.sqrt(1 / 12))  # uniform's sd
        self.mean = smoothing * units.mean(axis=0) + (1 - smoothing) * self.mean
        self.std = np.maximum(smoothing * units.std(axis=0) + (1 - smoothing) * prev_std, min_std)


def decode(kind: int, count: int, pats: np.ndarray, units: np.ndarray, permutation, families=()):
    """The candidate (a Genome, or an adaptive adversary) a coded candidate stands for.

    ``units`` holds, in order: one block (weight, parameters) per slot, then
    cycles, then rest, then the adaptive families' parameters.
    """
    slots = pats.size
    tail = slots * (1 + _WIDTH)
    if kind > 0:
        family = families[kind - 1]
        coords = units[tail + 2:]
        return adaptive.candidate(family, {s.name: s.from_unit(u) for s, u in zip(family.spaces, coords)})
    segs = []
    for s in range(count):
        spec = PATTERNS[_NAMES[int(pats[s])]]
        block = units[s * (1 + _WIDTH):(s + 1) * (1 + _WIDTH)]
        params = tuple(p.from_unit(u) for p, u in zip(spec.params, block[1:]))
        segs.append(Segment(spec.name, params, _log_int(block[0], MAX_WEIGHT)))
    cycles = _log_int(units[tail], MAX_CYCLES)
    return Genome(tuple(segs), tuple(int(a) for a in permutation), cycles, float(units[tail + 1]))


def run(ev, max_examples: int, seed: int, max_confirmations: int, learn: bool = True, families=(),
        oblivious: bool = True, population: int = 20, elite: float = 0.2, smoothing: float = 0.7,
        min_std: float = 0.05, slots: int = 4):
    """Returns (candidate, screen, judgement, confirm_seed, level, evaluations_to_find) or None."""
    from .evaluate import derived_seed

    rng = np.random.default_rng(derived_seed(seed, 3))
    law = Law(slots, families, oblivious)
    n_elite = max(2, int(math.ceil(elite * population)))
    drawn = 0
    while drawn < max_examples and len(ev.confirmations) < max_confirmations:
        scored = []
        for _ in range(min(population, max_examples - drawn)):
            coded = law.sample(rng)
            cand = decode(*coded, rng.permutation(ev.n_actions), families)
            drawn += 1
            before = ev.evaluations
            try:
                screen = ev.screen(cand)
            except adaptive.InvalidCandidate:
                scored.append((-math.inf, coded))
                continue
            scored.append((screen.score, coded))
            if screen.passed and ev.evaluations > before:  # a memo hit was already judged
                accepted, judgement, cseed, level = ev.confirm(cand, screen)
                if accepted:
                    return cand, screen, judgement, cseed, level, screen.evaluation
                if len(ev.confirmations) >= max_confirmations:
                    return None
        if learn and len(scored) >= n_elite:
            scored.sort(key=lambda item: item[0], reverse=True)
            law.refit([coded for _, coded in scored[:n_elite]], smoothing, min_std)
    return None
