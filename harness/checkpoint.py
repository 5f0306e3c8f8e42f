"""Checkpoint and resume: finished replica chunks on disk.

``run(..., checkpoint=DIR)`` writes each chunk's per-replica results to
``DIR/chunk-000012.npz`` the moment the chunk finishes, and a manifest
``DIR/run.json`` recording what the run is (learner and adversary specs,
horizon, actions, replicas, seed, chunk size, package versions). Rerunning the
same call after an interruption (Ctrl-C, a killed worker, a lost machine)
loads the finished chunks instead of recomputing them. Because chunk k's
results depend only on (seed, k, chunk size), a resumed run is bit-identical
to an uninterrupted one: no replica is lost or counted twice.

A directory written by a different run is refused, never mixed in. Files are
written to a temporary name and renamed, so an interruption mid-write leaves
no half-written chunk; chunk files are .npz read with allow_pickle=False and
checked for shape and dtype.
"""

from __future__ import annotations

import io
import json
import os
import tempfile
from pathlib import Path

import numpy as np

from .errors import ConfigError

MANIFEST = "run.json"
FORMAT = "boundbreaker-checkpoint/1"


class ChunkStore:
    """Finished chunks of one run (or one certification) under ``directory``.

    ``identity`` is everything chunk results depend on; a directory whose
    manifest records another identity is refused. Chunks are stored by name
    (``chunk-000012`` for ``run``; certification adds its group to the name).
    """

    def __init__(self, directory, identity: dict):
        self.dir = Path(directory)
        self.identity = {"format": FORMAT, **identity}
        if self.dir.exists() and not self.dir.is_dir():
            raise ConfigError(f"checkpoint: {self.dir} exists and is not a directory; give a directory path")
        self.dir.mkdir(parents=True, exist_ok=True)
        manifest = self.dir / MANIFEST
        if manifest.exists():
            try:
                recorded = json.loads(manifest.read_text())
            except (OSError, ValueError) as exc:
                raise ConfigError(f"checkpoint: {manifest} is unreadable ({exc}); remove it or use a fresh "
                                  f"directory") from None
            if recorded != self.identity:
                differs = sorted(k for k in set(recorded) | set(self.identity)
                                 if recorded.get(k) != self.identity.get(k))
                raise ConfigError(f"checkpoint: {self.dir} holds a different run (differs in: "
                                  f"{', '.join(differs)}); use a fresh directory to start this one")
        else:
            _atomic_write(manifest, json.dumps(self.identity, indent=2, sort_keys=True).encode())

    def _path(self, name: str) -> Path:
        return self.dir / f"{name}.npz"

    def get(self, name: str, size: int):
        """(regret, switches) of a finished chunk of ``size`` replicas, or None; validated."""
        path = self._path(name)
        if not path.exists():
            return None
        try:
            with np.load(path, allow_pickle=False) as data:
                regret, switches = data["regret"], data["switches"]
        except Exception as exc:
            raise ConfigError(f"checkpoint: {path} is corrupt ({type(exc).__name__}); delete that file "
                              f"and rerun to recompute the chunk") from None
        if (regret.shape != (size,) or switches.shape != (size,) or regret.dtype != np.float64
                or switches.dtype != np.int64):
            raise ConfigError(f"checkpoint: {path} does not hold {size} replicas of results; delete it and "
                              f"rerun to recompute the chunk")
        return regret, switches

    def save(self, name: str, regret: np.ndarray, switches: np.ndarray) -> None:
        buffer = io.BytesIO()
        np.savez(buffer, regret=np.asarray(regret, dtype=np.float64),
                 switches=np.asarray(switches, dtype=np.int64))
        _atomic_write(self._path(name), buffer.getvalue())


def _atomic_write(path: Path, data: bytes) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-", suffix=path.suffix)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
