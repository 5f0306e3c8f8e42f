"""Campaign files: TOML -> a checked, frozen :class:`Campaign`.

One parser for every command that reads a campaign (certify, search,
baseline, landscape). The schema (DEVELOPERS.md, "Campaign files"):

    [campaign]                 # optional; every key has a default
    name = "edge-router"       # free text (default: the file's stem)
    seed = 0                   # integer >= 0
    confidence = 0.95          # family-wise over all cells, in (0, 1)
    max_replicas = 20000       # per cell
    n_jobs = 1                 # joblib jobs, -1 = all cores (results never depend on it)
    use_learner_claims = false # also judge the claims the learner carries
    [learner]                  # required
    name = "hedge"             # registry name or module:Class
    params = { eta = 0.05 }    # optional
    [[claims]]                 # zero or more
    name = "regret-hp"         # optional, unique (default "<metric> <kind>")
    metric = "regret"          # regret | switches | cost_regret
    bound = "sqrt(T * ln(n) / 2)"   # a number or an expression in T, n, delta
    delta = 0.05               # optional (high_probability)
    kind = "high_probability"  # high_probability | expectation | always
    source = "..."             # optional: where the bound is published
    [[adversaries]]            # one or more
    name = "bernoulli"         # registry name or module:Class
    params = { p = 0.5 }       # optional
    label = "congested links"  # optional: how tables name it
    [grid]                     # required
    horizons = [1000, 10000]   # an integer or a list of them
    n_actions = [2, 10]        # an integer >= 2 or a list of them
    switching_cost = 0.0       # optional, >= 0
    [search]                   # optional, read by `boundbreaker search`
    max_examples = 200
    replicas = 256
    method = "hypothesis"      # hypothesis | cem
    [baseline]                 # optional, read by `boundbreaker baseline` and `compare`
    replicas = 4000            # per cell, for the quantiles and their intervals
    reference_replicas = 4000  # per cell, a second batch counting exceedances (default: = replicas)
    quantiles = [0.5, 0.9, 0.95, 0.99, 0.999]
    power = 0.8                # at which the smallest detectable change is stated

Every error is one line: the file, the key path (``claims[1].bound``), what
is wrong and the fix. Unknown keys are errors, with the closest known key as
a hint. Learners, adversaries and bounds are built and evaluated on every
grid point while loading, so a campaign that loads will run.

To add a section or key (another command's settings), add it to
``SCHEMA`` with its check and default, and a field to :class:`Campaign`.
"""

from __future__ import annotations

import difflib
import math
import sys
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import jsonfile, validate
from .claims import KINDS, METRICS, SCOPES, Claim, Expression
from .errors import BoundbreakerError, ConfigError

REQUIRED = object()

SEARCH_METHODS = ("hypothesis", "cem")


@dataclass(frozen=True)
class Campaign:
    """A loaded, checked campaign file. ``digest`` is the sha256 of its
    canonical form (defaults filled in, n_jobs left out since results never
    depend on it), so the same campaign written differently has one digest."""

    path: str
    name: str
    seed: int
    confidence: float
    max_replicas: int
    n_jobs: int
    use_learner_claims: bool
    learner_spec: dict
    claims: tuple
    adversary_specs: tuple
    horizons: tuple
    n_actions: tuple
    switching_cost: float
    search: dict = field(default_factory=dict)
    baseline: dict = field(default_factory=dict)
    digest: str = ""

    def build_learner(self):
        """A fresh learner from ``learner_spec``."""
        from .learners import get
        return get(self.learner_spec["name"], **self.learner_spec["params"])

    def build_adversaries(self) -> list:
        """Fresh adversaries, in file order."""
        import adversaries
        return [adversaries.get(s["name"], **s["params"]) for s in self.adversary_specs]

    def canonical(self) -> dict:
        """The campaign as plain data, in a fixed form (what ``digest`` hashes)."""
        return {
            "campaign": {"name": self.name, "seed": self.seed, "confidence": self.confidence,
                         "max_replicas": self.max_replicas, "use_learner_claims": self.use_learner_claims},
            "learner": self.learner_spec,
            "claims": [c.spec() for c in self.claims],
            "adversaries": list(self.adversary_specs),
            "grid": {"horizons": list(self.horizons), "n_actions": list(self.n_actions),
                     "switching_cost": self.switching_cost},
            "search": dict(self.search),
            "baseline": dict(self.baseline),
        }


def load_campaign(path) -> Campaign:
    """Read and check a campaign file (see the module docstring for the schema)."""
    path = Path(path)
    source = str(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise ConfigError(f"{source}: no such campaign file; give the path of a .toml campaign "
                          f"(`boundbreaker certify --demo` runs a bundled one)") from None
    except IsADirectoryError:
        raise ConfigError(f"{source}: is a directory; give the path of a .toml campaign file") from None
    except OSError as exc:
        raise ConfigError(f"{source}: cannot read it ({exc.strerror}); check the path and permissions") from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise ConfigError(f"{source}: is not UTF-8 text; save the campaign as a UTF-8 TOML file") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{source}: not valid TOML ({exc}); fix the syntax there") from None
    return parse_campaign(data, source=source, path=path)


def demo_path() -> Path:
    """The bundled demo campaign (``boundbreaker certify --demo``)."""
    return Path(__file__).parent / "demos" / "edge-router.toml"


def parse_campaign(data: dict, source: str = "campaign", path=None) -> Campaign:
    """Check a campaign given as a dict (what tomllib returns); ``source`` names it in errors."""
    ctx = _Context(source, Path(path) if path is not None else None)
    top = ctx.table("", data, SCHEMA)
    camp = top["campaign"]
    grid = top["grid"]
    horizons, n_actions = grid["horizons"], grid["n_actions"]
    learner_spec, learner = ctx.learner(top["learner"], horizons, n_actions)
    adversary_specs = ctx.adversaries(top["adversaries"], horizons, n_actions)
    claims = list(ctx.claims(top["claims"], horizons, n_actions))
    if camp["use_learner_claims"]:
        claims += ctx.learner_claims(learner, claims, horizons, n_actions)
    name = camp["name"] if camp["name"] is not None else (Path(path).stem if path is not None else "campaign")
    campaign = Campaign(
        path=str(path) if path is not None else source, name=name, seed=camp["seed"],
        confidence=camp["confidence"], max_replicas=camp["max_replicas"], n_jobs=camp["n_jobs"],
        use_learner_claims=camp["use_learner_claims"], learner_spec=learner_spec, claims=tuple(claims),
        adversary_specs=tuple(adversary_specs), horizons=horizons, n_actions=n_actions,
        switching_cost=grid["switching_cost"], search=dict(top["search"]), baseline=_baseline(top["baseline"]))
    return _replace_digest(campaign, jsonfile.digest(campaign.canonical()))


def _replace_digest(campaign, digest):
    from dataclasses import replace
    return replace(campaign, digest=digest)


# -- checks for single values (each gets the key path as its field name) ----------------------


def _str(key, value):
    if not isinstance(value, str) or not value.strip():
        raise ConfigError(f"{key}: must be a non-empty string, got {value!r}")
    return value.strip()


def _opt_str(key, value):
    return None if value is None else _str(key, value)


def _seed(key, value):
    return validate.nonneg_int(key, value)


def _confidence(key, value):
    return validate.real(key, value, low=0.0, high=1.0, low_open=True, high_open=True)


def _positive(key, value):
    return validate.positive_int(key, value)


def n_jobs(key, value) -> int:
    """A joblib job count: a non-zero integer, -1 for all cores."""
    if isinstance(value, bool) or not isinstance(value, int) or value == 0:
        raise ConfigError(f"{key}: must be a non-zero integer (-1 = all cores), got {value!r}")
    return value


def _bool(key, value):
    return validate.boolean(key, value)


def _params(key, value):
    if not isinstance(value, dict):
        raise ConfigError(f"{key}: must be a table, e.g. {key.rpartition('.')[2]} = {{ eta = 0.1 }}")
    return dict(value)


def int_list(key, values, minimum: int) -> tuple:
    """An integer or a non-empty list of distinct integers >= minimum, as a tuple."""
    if isinstance(values, (int, np.integer)) and not isinstance(values, bool):
        values = [values]
    if isinstance(values, range):
        values = list(values)
    if not isinstance(values, (list, tuple)) or not values:
        raise ConfigError(f"{key}: must be an integer or a non-empty list of integers, got {values!r}")
    out = tuple(validate.positive_int(f"{key}[{i}]", v, minimum=minimum) for i, v in enumerate(values))
    for v in out:
        if out.count(v) > 1:
            raise ConfigError(f"{key}: {v} appears twice; list each value once")
    return out


def _int_list(minimum):
    return lambda key, value: int_list(key, value, minimum)


def _cost(key, value):
    return validate.real(key, value, low=0.0)


def _method(key, value):
    return validate.choice(key, value, SEARCH_METHODS)


def _opt_positive(key, value):
    return None if value is None else validate.positive_int(key, value)


def _open_unit(key, value):
    return validate.real(key, value, low=0.0, high=1.0, low_open=True, high_open=True)


def quantile_list(key, values) -> list:
    """A non-empty list of distinct quantile levels in (0, 1), sorted."""
    if isinstance(values, (int, float)) and not isinstance(values, bool):
        values = [values]
    if not isinstance(values, (list, tuple)) or not values:
        raise ConfigError(f"{key}: must be a non-empty list of levels in (0, 1), e.g. [0.5, 0.9, 0.99]")
    out = [_open_unit(f"{key}[{i}]", v) for i, v in enumerate(values)]
    for v in out:
        if out.count(v) > 1:
            raise ConfigError(f"{key}: {v:g} appears twice; list each level once")
    return sorted(out)


def _baseline(section: dict) -> dict:
    """The [baseline] settings with the reference batch's default (as many as ``replicas``) filled in."""
    out = dict(section)
    if out["reference_replicas"] is None:
        out["reference_replicas"] = out["replicas"]
    return out


def _entries(keys, minimum=0):
    """An array of tables, each checked against ``keys``."""
    def check(key, value, ctx):
        if not isinstance(value, list) or not all(isinstance(v, dict) for v in value):
            raise ctx.error(key, f"must be an array of tables; write each as [[{key}]]")
        if len(value) < minimum:
            raise ctx.error(key, f"give at least {minimum} [[{key}]] table")
        return [ctx.table(f"{key}[{i}]", v, keys) for i, v in enumerate(value)]
    check.nested = True
    return check


CLAIM_KEYS = {
    "name": (_opt_str, None),
    "metric": (lambda k, v: validate.choice(k, v, METRICS), REQUIRED),
    "bound": (lambda k, v: v, REQUIRED),  # number or expression: checked with the grid
    "delta": (lambda k, v: validate.real(k, v, low=0.0, high=1.0, low_open=True, high_open=True), 0.05),
    "kind": (lambda k, v: validate.choice(k, v, KINDS), "high_probability"),
    "source": (lambda k, v: "" if v is None else _str(k, v), None),
    "scope": (lambda k, v: validate.choice(k, v, SCOPES), "any"),
}
ADVERSARY_KEYS = {"name": (_str, REQUIRED), "params": (_params, {}), "label": (_opt_str, None)}

SCHEMA = {
    "campaign": ({
        "name": (_opt_str, None),
        "seed": (_seed, 0),
        "confidence": (_confidence, 0.95),
        "max_replicas": (_positive, 20000),
        "n_jobs": (n_jobs, 1),
        "use_learner_claims": (_bool, False),
    }, {}),
    "learner": ({"name": (_str, REQUIRED), "params": (_params, {})}, REQUIRED),
    "claims": (_entries(CLAIM_KEYS), []),
    "adversaries": (_entries(ADVERSARY_KEYS, minimum=1), REQUIRED),
    "grid": ({
        "horizons": (_int_list(1), REQUIRED),
        "n_actions": (_int_list(2), REQUIRED),
        "switching_cost": (_cost, 0.0),
    }, REQUIRED),
    "search": ({
        "max_examples": (_positive, 200),
        "replicas": (_positive, 256),
        "method": (_method, "hypothesis"),
    }, {}),
    "baseline": ({
        "replicas": (_positive, 4000),
        "reference_replicas": (_opt_positive, None),
        "quantiles": (quantile_list, [0.5, 0.9, 0.95, 0.99, 0.999]),
        "power": (_open_unit, 0.8),
    }, {}),
}

_EXAMPLES = {
    "learner": '[learner] with name = "hedge"',
    "adversaries": '[[adversaries]] with name = "bernoulli"',
    "grid": "[grid] with horizons = [1000] and n_actions = [2]",
    "learner.name": 'name = "hedge" (a registry name or module:Class)',
    "adversaries.name": 'name = "bernoulli" (a registry name or module:Class)',
    "grid.horizons": "horizons = [1000, 10000]",
    "grid.n_actions": "n_actions = [2, 10]",
    "claims.metric": 'metric = "regret" (regret, switches or cost_regret)',
    "claims.bound": 'bound = "sqrt(T * ln(n) / 2)" or a number',
}


class _Context:
    def __init__(self, source: str, path: Path | None):
        self.source = source
        self.path = path

    def error(self, key: str, text: str) -> ConfigError:
        return ConfigError(f"{self.source}: {key}: {text}" if key else f"{self.source}: {text}")

    def wrap(self, exc: ConfigError) -> ConfigError:
        return ConfigError(f"{self.source}: {exc}")

    def table(self, prefix: str, value, keys: dict) -> dict:
        where = prefix or "the file"
        if not isinstance(value, dict):
            raise self.error(prefix, "must be a table")
        for key in value:
            if key not in keys:
                close = difflib.get_close_matches(key, list(keys), n=1, cutoff=0.6)
                hint = f"did you mean {close[0]!r}? " if close else ""
                raise self.error(_join(prefix, key), f"unknown key in {where}; {hint}known keys: {', '.join(keys)}")
        out = {}
        for key, (check, default) in keys.items():
            path = _join(prefix, key)
            if key not in value:
                if default is REQUIRED:
                    generic = _generic(path)
                    example = _EXAMPLES.get(generic)
                    raise self.error(path, "missing; add " + (example if example else f"{key} = ..."))
                if isinstance(check, dict):  # a section left out: all its defaults
                    out[key] = self.table(path, {}, check)
                else:
                    out[key] = default.copy() if isinstance(default, (dict, list)) else default
                continue
            raw = value[key]
            if isinstance(check, dict):
                out[key] = self.table(path, raw, check)
            elif getattr(check, "nested", False):
                out[key] = check(path, raw, self)
            else:
                try:
                    out[key] = check(path, raw)
                except ConfigError as exc:
                    raise self.wrap(exc) from None
        return out

    # -- built objects ----------------------------------------------------------------------

    def _importable(self, name: str):
        """Let ``module:Class`` names find modules next to the campaign file."""
        if ":" in name and self.path is not None:
            folder = str(self.path.resolve().parent)
            if folder not in sys.path:
                sys.path.append(folder)

    def learner(self, spec, horizons, n_actions):
        from .learners import get

        self._importable(spec["name"])
        try:
            learner = get(spec["name"], **spec["params"])
        except ConfigError as exc:
            key = "learner.name" if _about_name(exc) else "learner.params"
            raise self.error(key, str(exc)) from None
        self._dry_reset(learner, "learner.params", horizons, n_actions)
        return {"name": spec["name"], "params": _plain(spec["params"])}, learner

    def adversaries(self, entries, horizons, n_actions) -> list:
        import adversaries as registry
        from .certify import adversary_label

        out = []
        labels = set()
        for i, spec in enumerate(entries):
            self._importable(spec["name"])
            try:
                adversary = registry.get(spec["name"], **spec["params"])
            except ConfigError as exc:
                key = f"adversaries[{i}]." + ("name" if _about_name(exc) else "params")
                raise self.error(key, str(exc)) from None
            self._dry_reset(adversary, f"adversaries[{i}].params", horizons, n_actions)
            label = spec["label"] or adversary_label(adversary.spec())
            if label in labels:
                raise self.error(f"adversaries[{i}].label", f"{label!r} is used twice; give each adversary "
                                                             f"a distinct label = \"...\"")
            labels.add(label)
            out.append({"name": spec["name"], "params": _plain(spec["params"]), "label": label})
        return out

    def _dry_reset(self, obj, key, horizons, n_actions):
        """Reset once per n (1 replica, shortest horizon): parameters that only
        meet the number of actions in reset (a per-action p) are checked now."""
        for n in n_actions:
            try:
                obj.reset(n, min(horizons), 1, np.random.default_rng(0))
            except ConfigError as exc:
                raise self.error(key, f"{exc} (with n_actions = {n})") from None
            except Exception:  # noqa: BLE001 - a faulty object is reported with its replay seed when it runs
                return

    def claims(self, entries, horizons, n_actions):
        names = set()
        for i, entry in enumerate(entries):
            key = f"claims[{i}]"
            bound = entry["bound"]
            if isinstance(bound, str):
                try:
                    bound = Expression(bound, field=f"{key}.bound")
                except ConfigError as exc:
                    raise self.wrap(exc) from None
            elif isinstance(bound, bool) or not isinstance(bound, (int, float)):
                raise self.error(f"{key}.bound", f"must be a number or an expression in T, n, delta, got "
                                                 f"{bound!r}; write e.g. bound = \"2 * sqrt(T * ln(n))\"")
            else:
                try:
                    bound = validate.real(f"{key}.bound", bound)
                except ConfigError as exc:
                    raise self.wrap(exc) from None
            kwargs = {k: entry[k] for k in ("metric", "delta", "kind", "source", "scope") if entry[k] is not None}
            claim = Claim(bound=bound, name=entry["name"] or "", **kwargs)
            if claim.name in names:
                raise self.error(f"{key}.name", f"{claim.name!r} is used twice; give each claim a distinct name")
            names.add(claim.name)
            self._evaluate(claim, f"{key}.bound", horizons, n_actions)
            yield claim

    def learner_claims(self, learner, claims, horizons, n_actions) -> list:
        own = getattr(learner, "claims", ()) or ()
        if isinstance(own, Claim):
            own = (own,)
        own = tuple(own)
        if not own:
            raise self.error("campaign.use_learner_claims",
                             f"learner {type(learner).__name__} carries no claims; set it to false and add "
                             f"[[claims]] tables")
        taken = {c.name for c in claims}
        for j, c in enumerate(own):
            if not isinstance(c, Claim):
                raise self.error("campaign.use_learner_claims",
                                 f"the learner's claims[{j}] is a {type(c).__name__}, not a harness.Claim")
            if c.name in taken:
                raise self.error("claims", f"{c.name!r} is also the name of one of the learner's claims; "
                                           f"rename the one in the file")
            taken.add(c.name)
            self._evaluate(c, f"learner claim {c.name!r}", horizons, n_actions)
        return list(own)

    def _evaluate(self, claim, key, horizons, n_actions):
        for T in horizons:
            for n in n_actions:
                try:
                    value = claim.bound_at(T, n)
                except ConfigError as exc:
                    detail = str(exc).partition(": bound failed ")[2] or str(exc)
                    raise self.error(key, f"cannot be evaluated {detail}; change the expression or the grid") \
                        from None
                if not math.isfinite(value):
                    raise self.error(key, f"is {value} at T={T}, n={n}; give a finite bound")


def _join(prefix: str, key: str) -> str:
    return f"{prefix}.{key}" if prefix else key


def _generic(path: str) -> str:
    """``claims[3].bound`` -> ``claims.bound`` (for the example table)."""
    import re
    return re.sub(r"\[\d+\]", "", path)


def _about_name(exc: BoundbreakerError) -> bool:
    text = str(exc)
    return "unknown name" in text or "cannot import" in text or "has no attribute" in text or \
        "not a class" in text or "give a registry name" in text


def _plain(value):
    """TOML values as JSON-ready data (for specs and the digest)."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_plain(v) for v in value]
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    return str(value)  # dates and times: kept as text


__all__ = ["Campaign", "load_campaign", "parse_campaign", "demo_path", "SCHEMA"]
