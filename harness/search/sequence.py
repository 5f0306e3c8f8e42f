"""An oblivious adversary that serves one fixed loss array to every replica."""

from __future__ import annotations

import hashlib

import numpy as np

from ..errors import ConfigError
from ..protocol import Adversary, read_only


def check_losses(losses, field: str = "losses") -> np.ndarray:
    """A (T, n) float64 array in [0, 1], finite, with T >= 1 and n >= 2; else ConfigError."""
    arr = np.asarray(losses)
    if arr.dtype.kind not in "fiu" or arr.dtype.kind == "b":
        raise ConfigError(f"{field}: must be an array of numbers, got dtype {arr.dtype}")
    if arr.ndim != 2 or arr.shape[0] < 1 or arr.shape[1] < 2:
        raise ConfigError(f"{field}: must have shape (horizon, n_actions) with n_actions >= 2, got {arr.shape}")
    arr = arr.astype(np.float64, copy=False)
    finite = np.isfinite(arr)
    if not finite.all():
        t, i = np.argwhere(~finite)[0]
        raise ConfigError(f"{field}: entry (round {t}, action {i}) is {arr[t, i]}; losses must be finite")
    bad = (arr < 0.0) | (arr > 1.0)
    if bad.any():
        t, i = np.argwhere(bad)[0]
        raise ConfigError(f"{field}: entry (round {t}, action {i}) is {arr[t, i]:g}; losses must lie in [0, 1]")
    return arr


class Sequence(Adversary):
    """The given ``(T, n)`` losses, the same for every replica (``shared``).

    Because the sequence is shared, the runner's shared fast paths apply:
    learners compute their distribution of play once per round and each
    replica only draws from it.
    """

    shared = True

    def __init__(self, losses):
        arr = check_losses(losses)
        self.losses_ = read_only(np.array(arr, dtype=np.float64))

    def reset(self, n_actions, horizon, replicas, rng):
        T, n = self.losses_.shape
        if n_actions != n:
            raise ConfigError(f"n_actions: the sequence has {n} actions, the run asked for {n_actions}")
        if horizon > T:
            raise ConfigError(f"horizon: the sequence has {T} rounds, the run asked for {horizon}")

    def losses(self, t0, t1):
        return self.losses_[t0:t1]

    def spec(self) -> dict:
        # The array itself would bloat every result's metadata; its digest identifies it.
        digest = hashlib.sha256(np.ascontiguousarray(self.losses_).tobytes()).hexdigest()
        return {"name": "sequence", "class": f"{type(self).__module__}:{type(self).__qualname__}",
                "params": {"shape": list(self.losses_.shape), "sha256": digest}}

    def __repr__(self):
        return f"Sequence(shape={self.losses_.shape})"
