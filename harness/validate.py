"""Small argument checks shared by every constructor and entry point.

Each raises :class:`~harness.errors.ConfigError` with a one-line message of the
form ``"<field>: <what is wrong>, got <value>; <fix>"``.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

from .errors import ConfigError


def _show(value) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def positive_int(field: str, value, *, minimum: int = 1) -> int:
    """An integer >= minimum (bools are refused: True is not a horizon)."""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        else:
            raise ConfigError(f"{field}: must be an integer >= {minimum}, got {_show(value)}")
    value = int(value)
    if value < minimum:
        raise ConfigError(f"{field}: must be an integer >= {minimum}, got {value}")
    return value


def nonneg_int(field: str, value) -> int:
    return positive_int(field, value, minimum=0)


def real(field: str, value, *, low=-math.inf, high=math.inf, low_open=False,
         high_open=False) -> float:
    """A finite real number in the stated interval."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ConfigError(f"{field}: must be a number, got {_show(value)}")
    value = float(value)
    if not math.isfinite(value):
        raise ConfigError(f"{field}: must be finite, got {value}")
    below = value <= low if low_open else value < low
    above = value >= high if high_open else value > high
    if below or above:
        lo = "(" if low_open else "["
        hi = ")" if high_open else "]"
        raise ConfigError(f"{field}: must lie in {lo}{low:g}, {high:g}{hi}, got {value:g}")
    return value


def positive_real(field: str, value) -> float:
    return real(field, value, low=0.0, low_open=True)


def probability(field: str, value) -> float:
    return real(field, value, low=0.0, high=1.0)


def probability_vector(field: str, value, n_actions: int | None = None) -> np.ndarray:
    """A scalar in [0, 1] broadcast to n actions, or a length-n sequence of them."""
    arr = np.asarray(value, dtype=float) if not isinstance(value, str) else None
    if arr is None or arr.ndim > 1:
        raise ConfigError(f"{field}: must be a number in [0, 1] or a list of them, got {_show(value)}")
    if not np.all(np.isfinite(arr)) or np.any((arr < 0) | (arr > 1)):
        raise ConfigError(f"{field}: every entry must lie in [0, 1], got {_show(value)}")
    if arr.ndim == 1 and n_actions is not None and arr.shape[0] != n_actions:
        raise ConfigError(
            f"{field}: has {arr.shape[0]} entries but the run has {n_actions} actions; "
            f"give one value per action or a single number")
    return arr


def boolean(field: str, value) -> bool:
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    raise ConfigError(f"{field}: must be true or false, got {_show(value)}")


def choice(field: str, value, options) -> str:
    if value not in options:
        raise ConfigError(f"{field}: must be one of {', '.join(map(str, options))}; got {_show(value)}")
    return value
