"""Buffered reads of a Generator's stream, for kernels that draw a data-dependent number of values."""

from __future__ import annotations

import numpy as np


class UniformStream:
    """The uniforms of ``rng.random()``, in order, read through a buffer.

    ``take(k)`` returns the next k values: exactly what k single calls would
    give, whenever refills happen. Kernels that draw a data-dependent number
    of values read ``buffer`` from ``position[0]`` on and advance it,
    stopping when fewer than they may need are left; the caller then
    ``reserve``s and resumes. (Handing a compiled loop the Generator itself
    costs tens of microseconds per call, which dominates when a learner is
    called for many small blocks, as epoch restarts and act() do.)
    """

    def __init__(self, rng: np.random.Generator, chunk: int = 4096):
        self.rng = rng
        self.chunk = int(chunk)
        self.buffer = np.empty(0)
        self.position = np.zeros(1, dtype=np.int64)

    def _fresh(self, k: int) -> np.ndarray:
        return self.rng.random(k)

    def reserve(self, k: int) -> None:
        """Make at least ``k`` unread values available."""
        left = self.buffer.size - int(self.position[0])
        if left < k:
            fresh = self._fresh(max(k - left, self.chunk))
            self.buffer = np.concatenate([self.buffer[int(self.position[0]):], fresh])
            self.position[0] = 0

    def take(self, k: int) -> np.ndarray:
        self.reserve(k)
        p = int(self.position[0])
        self.position[0] = p + k
        return self.buffer[p:p + k]


class NormalStream(UniformStream):
    """As UniformStream for ``rng.standard_normal()`` (filled by a compiled loop: the same
    values as numpy's, in the same order)."""

    def _fresh(self, k: int) -> np.ndarray:
        from . import fill_normals

        out = np.empty(k)
        fill_normals(self.rng, out)
        return out
