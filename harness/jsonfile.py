"""JSON files a user keeps (certificates, tail profiles): written whole, read with one-line refusals.

- :func:`write` replaces the file atomically (a temporary name, then a
  rename), so an interruption never leaves half a file;
- :func:`dumps` gives stable, readable text: the caller's key order, two
  spaces of indent, and any object or list short enough kept on one line,
  so a changed number is a one-line diff;
- :func:`read` and :func:`typed` turn a missing, unreadable, non-JSON or
  mistyped file into one :class:`~harness.errors.ConfigError` line naming the
  file, the field and the fix.
- :func:`digest` is the sha256 of a value's canonical JSON (sorted keys, no
  spaces), for fingerprints that ignore layout.
"""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path

from .errors import ConfigError

LINE = 100  # the widest line :func:`dumps` folds a short object or list into


def digest(data) -> str:
    text = json.dumps(data, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def dumps(data, indent: int = 2, width: int = LINE) -> str:
    """Readable JSON: see the module docstring. NaN and infinity are refused (they are not JSON)."""
    return _dump(data, 0, indent, width)


def _dump(value, level: int, indent: int, width: int) -> str:
    flat = json.dumps(value, allow_nan=False, separators=(", ", ": "))
    if not isinstance(value, (dict, list)) or not value or level * indent + len(flat) <= width:
        return flat
    pad = " " * ((level + 1) * indent)
    if isinstance(value, dict):
        items = [f"{pad}{json.dumps(str(k))}: {_dump(v, level + 1, indent, width)}" for k, v in value.items()]
        return "{\n" + ",\n".join(items) + "\n" + " " * (level * indent) + "}"
    items = [pad + _dump(v, level + 1, indent, width) for v in value]
    return "[\n" + ",\n".join(items) + "\n" + " " * (level * indent) + "]"


def write(path, text: str) -> Path:
    """Write ``text`` (plus a final newline) to ``path`` atomically; creates missing folders."""
    path = Path(path)
    if path.parent and not path.parent.exists():
        path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text + "\n", encoding="utf-8")
    os.replace(tmp, path)  # never a half-written file
    return path


def read(path, what: str, hint: str):
    """The parsed JSON of ``path``; ``what`` names the kind of file, ``hint`` how such files are made."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError(f"{path}: no such {what} file; give the path of a saved {what}") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: cannot read it ({type(exc).__name__}); give a {what} JSON file") from None
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise ConfigError(f"{path}: not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg}); "
                          f"{hint}") from None


_TYPE_NAMES = {float: "number", int: "integer", str: "string", bool: "boolean", dict: "object", list: "list"}


def typed(source: str, key: str, value, want, what: str):
    """``value`` if it has the type ``want`` (a type, None for null, or a tuple of them), else a one-line error.

    Integers pass as numbers (and come back as float); booleans are never
    numbers.
    """
    options = want if isinstance(want, tuple) else (want,)
    for t in options:
        if t is None and value is None:
            return value
        if t is float and isinstance(value, (int, float)) and not isinstance(value, bool):
            return float(value)
        if t is int and isinstance(value, int) and not isinstance(value, bool):
            return value
        if t not in (None, float, int) and isinstance(value, t):
            return value
    names = " or ".join("null" if t is None else _TYPE_NAMES[t] for t in options)
    raise ConfigError(f"{source}: {key}: must be {names}, got {json.dumps(value)[:40]}; the file is not a "
                      f"{what} boundbreaker wrote, or it was edited")
