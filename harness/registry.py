"""Name -> class registries for learners and adversaries.

A registry maps a lower-case name to a class and a one-line description.
Anything registered can also be named as ``module:Class`` (a user's own code)
wherever a registry name is accepted. Unknown names and parameters give a
one-line :class:`~harness.errors.ConfigError` that suggests the close match.
"""

from __future__ import annotations

import difflib
import importlib
import inspect
import re

from .errors import BoundbreakerError, ConfigError


class Registry:
    def __init__(self, kind: str):
        self.kind = kind  # "learner" or "adversary": used in messages
        self.plural = "adversaries" if kind == "adversary" else f"{kind}s"
        self._entries: dict[str, tuple[type, str]] = {}

    def register(self, name: str, description: str):
        """Class decorator: ``@REGISTRY.register("hedge", "exponential weights")``."""
        def decorate(cls):
            if name in self._entries:
                raise RuntimeError(f"{self.kind} name {name!r} registered twice")
            cls.registry_name = name
            self._entries[name] = (cls, description)
            return cls
        return decorate

    def names(self) -> list[str]:
        return sorted(self._entries)

    def describe(self) -> list[tuple[str, str, dict]]:
        """(name, description, {param: default}) for each entry, sorted by name."""
        rows = []
        for name in self.names():
            cls, text = self._entries[name]
            rows.append((name, text, parameters_of(cls)))
        return rows

    def cls(self, name: str) -> type:
        """The class behind a registry name or a ``module:Class`` path."""
        if not isinstance(name, str) or not name:
            raise ConfigError(f"{self.kind}: give a registry name or module:Class, got {name!r}")
        if ":" in name:
            return _import_class(self.kind, name)
        try:
            return self._entries[name][0]
        except KeyError:
            close = difflib.get_close_matches(name, self.names(), n=1)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise ConfigError(
                f"{self.kind}: unknown name {name!r}; {hint}"
                f"`boundbreaker list {self.plural}` shows the {len(self._entries)} known ones") from None

    def get(self, name: str, **params):
        """Build a registered (or ``module:Class``) object with parameters."""
        cls = self.cls(name)
        return construct(self.kind, name, cls, params)

    def check_file_spec(self, spec: dict, option: str) -> None:
        """Refuse to rebuild from a file anything that would import code: registered names only.

        Certificates, counterexample files and tail profiles may come from
        anywhere; a ``module:Class`` in one (at the top or inside a wrapper's
        or composite's parameters) would make boundbreaker import and call that
        code, so such objects must be given by the user instead (``option``
        says how). A class recorded under a registered name it does not own
        is refused too: a user's subclass inherits its parent's registry
        name, and rebuilding by name would silently give the parent.
        """
        kind = self.kind

        def refuse(what, where=""):
            at = f" at {where}" if where else ""
            return ConfigError(f"{kind}: the file names {what!r}{at}, which is not a registered name; "
                               f"boundbreaker does not import code named in a file: give it yourself ({option})")

        def walk(value, where):
            if isinstance(value, dict):
                if "class" in value and value.get("name") not in self._entries:
                    raise refuse(value.get("class"), where)
                for k, v in value.items():
                    walk(v, f"{where}.{k}")
            elif isinstance(value, (list, tuple)):
                for i, v in enumerate(value):
                    walk(v, f"{where}[{i}]")
            elif isinstance(value, str) and _IMPORT_PATH.match(value):
                raise refuse(value, where)

        name = spec.get("name")
        if name not in self._entries:
            raise ConfigError(f"{kind}: the file names {name or spec.get('class')!r}, not a registered {kind}; "
                              f"boundbreaker does not import code named in a file: give it yourself ({option})")
        cls = self._entries[name][0]
        owner = f"{cls.__module__}:{cls.__qualname__}"
        if spec.get("class") not in (None, owner):
            raise ConfigError(f"{kind}: the file names {spec['class']!r} under the registered name {name!r}, "
                              f"which is {owner}; boundbreaker does not import code named in a file: give it "
                              f"yourself ({option})")
        walk(spec.get("params") or {}, "params")

    def from_file_spec(self, spec: dict, option: str):
        """Rebuild what a file's spec names, after :meth:`check_file_spec`."""
        self.check_file_spec(spec, option)
        try:
            return self.get(spec["name"], **(spec.get("params") or {}))
        except ConfigError as exc:
            raise ConfigError(f"{self.kind}: cannot rebuild the file's {self.kind} ({exc}); give it yourself "
                              f"({option})") from None


_IMPORT_PATH = re.compile(r"^[A-Za-z_][\w.]*:[A-Za-z_][\w.]*$")


def _signature(cls) -> inspect.Signature:
    return inspect.signature(cls.__init__ if inspect.isclass(cls) else cls)


def parameters_of(cls) -> dict:
    sig = _signature(cls)
    out = {}
    for p in sig.parameters.values():
        if p.name == "self" or p.kind in (p.VAR_POSITIONAL, p.VAR_KEYWORD):
            continue
        out[p.name] = None if p.default is p.empty else p.default
    return out


def construct(kind: str, name: str, cls, params: dict):
    """``cls(**params)`` with unknown parameters named and the fix given."""
    accepted = parameters_of(cls)
    sig = _signature(cls)
    takes_any = any(p.kind == p.VAR_KEYWORD for p in sig.parameters.values())
    for key in params:
        if key not in accepted and not takes_any:
            listing = ", ".join(accepted) or "none"
            raise ConfigError(f"{kind} {name!r}: unknown parameter {key!r}; its parameters are: {listing}")
    try:
        return cls(**params)
    except BoundbreakerError as exc:
        # Constructors name the field; add which object it belongs to.
        raise type(exc)(f"{kind} {name!r}: {exc}") from None
    except TypeError as exc:
        raise ConfigError(f"{kind} {name!r}: {exc}") from None


def _import_class(kind: str, path: str):
    module_name, _, attr = path.partition(":")
    try:
        module = importlib.import_module(module_name)
    except Exception as exc:  # ImportError, or an error inside the user's module
        raise ConfigError(f"{kind} {path!r}: cannot import module {module_name!r} "
                          f"({type(exc).__name__}: {exc}); check the name and PYTHONPATH") from None
    obj = module
    for part in attr.split("."):
        obj = getattr(obj, part, None)
        if obj is None:
            raise ConfigError(f"{kind} {path!r}: module {module_name!r} has no attribute {attr!r}")
    if not callable(obj):
        raise ConfigError(f"{kind} {path!r}: {attr!r} is not a class or factory")
    return obj
