"""Counterexamples and their files.

A counterexample file is a ``.npz`` archive with exactly two members, read
with ``allow_pickle=False``:

- ``losses``: float64, shape (horizon, n_actions), finite, in [0, 1];
- ``metadata``: a 0-d unicode array holding one JSON object (format
  ``boundbreaker.counterexample``, version 1) with the fields listed in
  :data:`FIELDS`: the learner's spec, the claim (its bound as a number or an
  expression in T, n, delta, and its value at this horizon), the result
  (violation rate, violations, replicas, interval, confidence and the
  evidence of the acceptance test), the seeds that replay it, the search's
  bookkeeping (method, evaluations, error probability), the genome that
  generated the losses (or null), the adaptive adversary (or null) and the
  package versions.

For an oblivious counterexample ``losses`` *is* the counterexample: every
replica faced it. For an adaptive one the adversary (name, class,
parameters) is, and ``losses`` holds what replica ``adversary.replica`` of
the confirmation run faced, for reading; replay reruns the adversary.

Loading checks every member's header before reading it (dtype, shape, size)
and every field after, and refuses anything else (extra members or fields,
object arrays, NaN, losses out of range, wrong shapes or types) with a
one-line :class:`~harness.errors.ConfigError` naming the problem.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
import zipfile
from dataclasses import dataclass, field

import numpy as np

from ..claims import KINDS, METRICS, Claim, Expression
from ..errors import ConfigError
from .genome import Genome
from .sequence import check_losses

FORMAT = "boundbreaker.counterexample"
VERSION = 1
METHODS = ("hypothesis", "cem", "random")
MAX_ENTRIES = 1 << 25          # 32M losses (256 MiB): a larger file is refused before it is read
MAX_METADATA_CHARS = 1 << 20

#: The metadata record: top-level fields and the fields of each nested record.
FIELDS = {
    "top": {"format", "version", "horizon", "n_actions", "learner", "claim", "result", "seeds", "search",
            "genome", "adversary", "versions"},
    "adversary": {"name", "class", "params", "replica"},
    "learner": {"name", "class", "params"},
    "claim": {"metric", "bound", "bound_at", "delta", "kind", "name", "source"},
    "result": {"rate", "mean", "violations", "replicas", "ci", "confidence", "evidence"},
    "seeds": {"search", "screen", "confirm"},
    "search": {"method", "evaluations", "evaluations_to_find", "max_examples", "replicas",
               "confirm_replicas", "confirmations", "error_probability", "switching_cost"},
}


@dataclass
class Counterexample:
    """A loss sequence on which a learner was shown to break a claim.

    ``rate`` is the fraction of confirmation replicas whose metric exceeded
    the bound; ``ci`` the two-sided interval (at ``confidence``) of the
    statistic the claim bounds: the violation probability, or the mean
    metric for expectation claims (then also in ``mean``). ``evidence``
    records the acceptance test. ``evaluations`` counts the candidates the
    search played; ``evaluations_to_find`` those played up to the first
    screening of this counterexample (or of the candidate it was shrunk
    from). A Counterexample is truthy; a failed search returns a falsy
    :class:`NoCounterexample`.
    """

    losses: np.ndarray
    claim: Claim
    rate: float
    ci: tuple
    confidence: float
    violations: int
    replicas: int
    learner: dict
    method: str
    seeds: dict
    evidence: dict
    mean: float | None = None
    genome: Genome | None = None
    adversary: dict | None = None                  # adaptive counterexamples: name, class, params, replica
    evaluations: int = 0
    evaluations_to_find: int = 0
    settings: dict = field(default_factory=dict)   # max_examples, replicas, confirm_replicas, ...
    versions: dict = field(default_factory=dict)
    unshrunk: object = None   # hypothesis: the candidate as first found (kept in memory, not in files)

    def __bool__(self):
        return True

    @property
    def horizon(self) -> int:
        return int(self.losses.shape[0])

    @property
    def n_actions(self) -> int:
        return int(self.losses.shape[1])

    @property
    def bound(self) -> float:
        return self.claim.bound_at(self.horizon, self.n_actions)

    def describe(self) -> str:
        """One paragraph a person can read."""
        stat = (f"mean {self.claim.metric} {self.mean:.4g} (interval {self.ci[0]:.4g}..{self.ci[1]:.4g})"
                if self.claim.kind == "expectation" else
                f"violation rate {self.rate:.3g} (interval {self.ci[0]:.3g}..{self.ci[1]:.3g})")
        where = (str(self.genome) if self.genome is not None else
                 f"adaptive adversary {self.adversary['name']}({_params_text(self.adversary['params'])})"
                 if self.adversary is not None else "a saved loss table")
        return (f"claim {self.claim.name!r} ({self.claim.kind}, {self.claim.metric} <= {self.bound:.4g}) broken at "
                f"T={self.horizon}, n={self.n_actions}: {stat} over {self.replicas} replicas; sequence: {where}; "
                f"found by {self.method} after {self.evaluations_to_find} evaluations")

    # -- files ---------------------------------------------------------------------

    def metadata(self) -> dict:
        claim = self.claim
        bound = claim.bound.expression if isinstance(claim.bound, Expression) else (
            claim.bound if not callable(claim.bound) else self.bound)
        s = self.settings
        return {
            "format": FORMAT, "version": VERSION, "horizon": self.horizon, "n_actions": self.n_actions,
            "learner": {"name": self.learner.get("name"), "class": self.learner.get("class"),
                        "params": self.learner.get("params", {})},
            "claim": {"metric": claim.metric, "bound": bound, "bound_at": self.bound, "delta": claim.delta,
                      "kind": claim.kind, "name": claim.name, "source": claim.source},
            "result": {"rate": self.rate, "mean": self.mean, "violations": self.violations,
                       "replicas": self.replicas, "ci": [float(self.ci[0]), float(self.ci[1])],
                       "confidence": self.confidence, "evidence": self.evidence},
            "seeds": {k: self.seeds.get(k) for k in sorted(FIELDS["seeds"])},
            "search": {"method": self.method, "evaluations": self.evaluations,
                       "evaluations_to_find": self.evaluations_to_find,
                       **{k: s.get(k) for k in ("max_examples", "replicas", "confirm_replicas", "confirmations",
                                                "error_probability", "switching_cost")}},
            "genome": None if self.genome is None else self.genome.as_dict(),
            "adversary": None if self.adversary is None else {k: self.adversary.get(k)
                                                              for k in sorted(FIELDS["adversary"])},
            "versions": self.versions,
        }

    def save(self, path) -> str:
        """Write the .npz file (atomically: a crash never leaves half a file). Returns the path."""
        path = os.fspath(path)
        text = json.dumps(self.metadata(), allow_nan=False, sort_keys=True)
        folder = os.path.dirname(os.path.abspath(path))
        fd, tmp = tempfile.mkstemp(prefix=".counterexample-", suffix=".npz", dir=folder)
        try:
            with os.fdopen(fd, "wb") as fh:
                np.savez_compressed(fh, losses=np.ascontiguousarray(self.losses, dtype=np.float64),
                                    metadata=np.array(text))
            os.replace(tmp, path)
        except BaseException:
            if os.path.exists(tmp):
                os.unlink(tmp)
            raise
        return path

    @classmethod
    def load(cls, path) -> "Counterexample":
        """Read and validate a counterexample file; ConfigError naming the problem otherwise."""
        losses, meta = read_file(path)
        return from_metadata(losses, meta, os.fspath(path))


@dataclass
class NoCounterexample:
    """What a search returns when nothing was confirmed: falsy, with the books.

    ``best`` is the highest-scoring candidate screened (a Genome), with its
    ``best_score`` (> 0 means its screening sample already exceeded the bound
    at the claim's level) and ``best_rate``; ``evaluations`` counts
    candidates played, ``confirmations`` the confirmation attempts that failed.
    """

    claim: Claim
    method: str
    evaluations: int
    horizon: int
    n_actions: int
    best: Genome | None = None
    best_score: float | None = None
    best_rate: float | None = None
    confirmations: int = 0
    error_probability: float = 0.0
    evaluations_to_find: None = None

    def __bool__(self):
        return False

    def describe(self) -> str:
        best = "" if self.best is None else f"; best candidate {self.best} (score {self.best_score:.3g})"
        return (f"no counterexample to {self.claim.name!r} at T={self.horizon}, n={self.n_actions} after "
                f"{self.evaluations} evaluations by {self.method}{best}")

    def save(self, path):
        raise ConfigError("save: the search found no counterexample, so there is nothing to save")


def _params_text(params: dict) -> str:
    return ", ".join(f"{k}={v:.3g}" if isinstance(v, float) else f"{k}={v}" for k, v in params.items())


# -- reading -----------------------------------------------------------------------


def read_file(path) -> tuple[np.ndarray, dict]:
    """The checked losses array and metadata dict of a counterexample file."""
    where = os.fspath(path)
    if not os.path.isfile(where):
        raise ConfigError(f"{where}: no such counterexample file")
    if not zipfile.is_zipfile(where):
        raise ConfigError(f"{where}: not a counterexample file (expected a .npz archive written by "
                          f"boundbreaker search)")
    try:
        with zipfile.ZipFile(where) as zf:
            names = sorted(zf.namelist())
            expected = ["losses.npy", "metadata.npy"]
            extra = [n for n in names if n not in expected]
            if extra:
                shown = extra[0][:-4] if extra[0].endswith(".npy") else extra[0]
                raise ConfigError(f"{where}: unexpected member {shown!r}; a counterexample file holds only "
                                  f"'losses' and 'metadata'")
            for name in expected:
                if name not in names:
                    raise ConfigError(f"{where}: missing member {name[:-4]!r}")
            _check_header(where, zf, "losses.npy", "f", 2, MAX_ENTRIES)
            _check_header(where, zf, "metadata.npy", "U", 0, MAX_METADATA_CHARS)
        with np.load(where, allow_pickle=False) as archive:
            losses = archive["losses"]
            text = str(archive["metadata"][()])
    except ConfigError:
        raise
    except (ValueError, OSError, EOFError, zipfile.BadZipFile, KeyError) as exc:
        raise ConfigError(f"{where}: unreadable counterexample file ({type(exc).__name__}: "
                          f"{str(exc).splitlines()[0] if str(exc) else 'no detail'})") from None
    if losses.dtype != np.float64:
        raise ConfigError(f"{where}: losses must be float64, got {losses.dtype}")
    try:
        losses = check_losses(losses)
    except ConfigError as exc:
        raise ConfigError(f"{where}: {exc}") from None

    def _no_constants(name):
        raise ValueError(f"{name} is not allowed")

    try:
        meta = json.loads(text, parse_constant=_no_constants)
    except ValueError as exc:
        raise ConfigError(f"{where}: metadata is not valid JSON ({str(exc).splitlines()[0]})") from None
    if not isinstance(meta, dict):
        raise ConfigError(f"{where}: metadata must be a JSON object, got {type(meta).__name__}")
    return losses, meta


def _check_header(where, zf, member, kind, ndim, max_size):
    """Read only the .npy header: refuse object dtypes and oversized arrays before loading."""
    with zf.open(member) as fp:
        try:
            version = np.lib.format.read_magic(fp)
            reader = (np.lib.format.read_array_header_1_0 if version == (1, 0)
                      else np.lib.format.read_array_header_2_0)
            shape, _fortran, dtype = reader(fp)
        except ValueError as exc:
            raise ConfigError(f"{where}: member {member[:-4]!r} has a bad header ({exc})") from None
    name = member[:-4]
    if dtype.hasobject:
        raise ConfigError(f"{where}: member {name!r} holds Python objects (pickled data); refused")
    if dtype.kind != kind:
        want = "float64" if kind == "f" else "a unicode string"
        raise ConfigError(f"{where}: member {name!r} must be {want}, got dtype {dtype}")
    if len(shape) != ndim:
        raise ConfigError(f"{where}: member {name!r} must have {ndim} dimensions, got shape {shape}")
    size = int(np.prod(shape)) if shape else dtype.itemsize // 4
    if size > max_size:
        raise ConfigError(f"{where}: member {name!r} is too large ({size} entries, at most {max_size})")


# -- metadata -> object --------------------------------------------------------------


def _record(where, data, name):
    allowed = FIELDS[name]
    label = where if name == "top" else f"{where}: {name}"
    if not isinstance(data, dict):
        raise ConfigError(f"{label}: must be a JSON object, got {type(data).__name__}")
    extra = sorted(set(data) - allowed)
    if extra:
        raise ConfigError(f"{label}: unknown field {extra[0]!r}")
    missing = sorted(allowed - set(data))
    if missing:
        raise ConfigError(f"{label}: missing field {missing[0]!r}")
    return data


def _int(where, field, value, low=0):
    if isinstance(value, bool) or not isinstance(value, int) or value < low:
        raise ConfigError(f"{where}: {field} must be an integer >= {low}, got {value!r}")
    return value


def _num(where, field, value, low=-math.inf, high=math.inf, nullable=False):
    if value is None and nullable:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) \
            or not low <= value <= high:
        raise ConfigError(f"{where}: {field} must be a finite number in [{low:g}, {high:g}], got {value!r}")
    return float(value)


def _str(where, field, value, nullable=False):
    if value is None and nullable:
        return None
    if not isinstance(value, str):
        raise ConfigError(f"{where}: {field} must be a string, got {value!r}")
    return value


def from_metadata(losses: np.ndarray, meta: dict, where: str = "counterexample") -> Counterexample:
    _record(where, meta, "top")
    if meta["format"] != FORMAT:
        raise ConfigError(f"{where}: format must be {FORMAT!r}, got {meta['format']!r}")
    if meta["version"] != VERSION:
        raise ConfigError(f"{where}: version {meta['version']!r} is not supported (this boundbreaker reads "
                          f"version {VERSION})")
    horizon = _int(where, "horizon", meta["horizon"], 1)
    n_actions = _int(where, "n_actions", meta["n_actions"], 2)
    if losses.shape != (horizon, n_actions):
        raise ConfigError(f"{where}: losses have shape {losses.shape} but metadata says "
                          f"({horizon}, {n_actions})")

    learner = _record(where, meta["learner"], "learner")
    _str(where, "learner.name", learner["name"], nullable=True)
    _str(where, "learner.class", learner["class"])
    if not isinstance(learner["params"], dict):
        raise ConfigError(f"{where}: learner.params must be a JSON object")

    c = _record(where, meta["claim"], "claim")
    if c["metric"] not in METRICS or c["kind"] not in KINDS:
        raise ConfigError(f"{where}: claim.metric/kind must be one of {METRICS} / {KINDS}, "
                          f"got {c['metric']!r} / {c['kind']!r}")
    bound = c["bound"]
    if not isinstance(bound, str):
        bound = _num(where, "claim.bound", bound)
    _num(where, "claim.bound_at", c["bound_at"])
    try:
        claim = Claim(metric=c["metric"], bound=bound, delta=_num(where, "claim.delta", c["delta"], 0.0, 1.0),
                      kind=c["kind"], name=_str(where, "claim.name", c["name"]),
                      source=_str(where, "claim.source", c["source"]))
    except ConfigError as exc:
        raise ConfigError(f"{where}: {exc}") from None

    r = _record(where, meta["result"], "result")
    replicas = _int(where, "result.replicas", r["replicas"], 1)
    violations = _int(where, "result.violations", r["violations"])
    if violations > replicas:
        raise ConfigError(f"{where}: result.violations ({violations}) exceeds result.replicas ({replicas})")
    rate = _num(where, "result.rate", r["rate"], 0.0, 1.0)
    ci = r["ci"]
    if not (isinstance(ci, list) and len(ci) == 2):
        raise ConfigError(f"{where}: result.ci must be a list [low, high], got {ci!r}")
    ci = (_num(where, "result.ci[0]", ci[0]), _num(where, "result.ci[1]", ci[1]))
    if ci[0] > ci[1]:
        raise ConfigError(f"{where}: result.ci low {ci[0]} exceeds high {ci[1]}")
    confidence = _num(where, "result.confidence", r["confidence"], 0.0, 1.0)
    if not 0.0 < confidence < 1.0:
        raise ConfigError(f"{where}: result.confidence must lie strictly between 0 and 1, got {confidence}")
    mean = _num(where, "result.mean", r["mean"], nullable=True)
    if not isinstance(r["evidence"], dict):
        raise ConfigError(f"{where}: result.evidence must be a JSON object")

    seeds = _record(where, meta["seeds"], "seeds")
    for k in sorted(seeds):
        _int(where, f"seeds.{k}", seeds[k])

    s = _record(where, meta["search"], "search")
    method = s["method"]
    if method not in METHODS:
        raise ConfigError(f"{where}: search.method must be one of {', '.join(METHODS)}, got {method!r}")
    for k in ("evaluations", "evaluations_to_find", "max_examples", "replicas", "confirm_replicas",
              "confirmations"):
        _int(where, f"search.{k}", s[k])
    _num(where, "search.error_probability", s["error_probability"], 0.0, 1.0)
    _num(where, "search.switching_cost", s["switching_cost"], 0.0)

    genome = None
    if meta["genome"] is not None:
        try:
            genome = Genome.from_dict(meta["genome"])
        except ConfigError as exc:
            raise ConfigError(f"{where}: {exc}") from None
        if genome.n_actions != n_actions:
            raise ConfigError(f"{where}: genome.permutation has {genome.n_actions} actions, the losses "
                              f"{n_actions}")
    adversary = meta["adversary"]
    if adversary is not None:
        _record(where, adversary, "adversary")
        _str(where, "adversary.name", adversary["name"])
        _str(where, "adversary.class", adversary["class"], nullable=True)
        if not isinstance(adversary["params"], dict):
            raise ConfigError(f"{where}: adversary.params must be a JSON object")
        _int(where, "adversary.replica", adversary["replica"])
        if adversary["replica"] >= replicas:
            raise ConfigError(f"{where}: adversary.replica ({adversary['replica']}) is not below result.replicas "
                              f"({replicas})")
        if genome is not None:
            raise ConfigError(f"{where}: genome and adversary are both set; a counterexample is one or the other")
        adversary = dict(adversary)
    versions = meta["versions"]
    if not isinstance(versions, dict) or not all(isinstance(v, (str, type(None))) for v in versions.values()):
        raise ConfigError(f"{where}: versions must map package names to version strings")

    settings = {k: s[k] for k in ("max_examples", "replicas", "confirm_replicas", "confirmations",
                                  "error_probability", "switching_cost")}
    return Counterexample(losses=losses, claim=claim, rate=rate, ci=ci, confidence=confidence,
                          violations=violations, replicas=replicas, learner=dict(learner), method=method,
                          seeds=dict(seeds), evidence=dict(r["evidence"]), mean=mean, genome=genome,
                          adversary=adversary,
                          evaluations=s["evaluations"], evaluations_to_find=s["evaluations_to_find"],
                          settings=settings, versions=dict(versions))
