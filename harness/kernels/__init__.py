"""Per-replica inner loops: the only places where work is done per replica per round.

They decide throughput. Each kernel exists twice:

- a numba-compiled loop (used when numba imports), and
- a pure-numpy (or plain Python) version that gives **bit-identical**
  results (same random numbers in, same comparisons, same summation order),
  kept both as the fallback and as the reference the tests hold the compiled
  loop to. Where exp, log or pow are involved the two may differ in the last
  bit (libm against numpy's vector loops), so a draw exactly on a boundary
  could differ, with probability ~1e-13 per draw.

Set ``BOUNDBREAKER_KERNELS=numpy`` to force the twins.

Modules: ``engine`` (inverse-CDF sampling, streaming accounting, running
totals), ``experts`` (full-information learners), ``bandits``, ``wrappers``,
``walk`` (random-walk perturbation), ``sequences`` (adversaries), and
``streams`` (buffered draws for kernels that draw a data-dependent number of
values).

Conventions: ``u`` are uniforms in [0, 1) drawn by the caller from its own
generator, so both versions consume randomness identically; ``last`` holds
each replica's previous action, -1 before the first round (the first round is
never a switch).
"""

from __future__ import annotations

import os

from . import bandits, engine, experts, sequences, walk, wrappers
from ._compile import numba
from .engine import SMALL_N  # noqa: F401
from .experts import FTPL_FLUSH, FTPL_TINY  # noqa: F401
from .sequences import pareto_length  # noqa: F401
from .streams import NormalStream, UniformStream  # noqa: F401
from .walk import WALK_MIN_WINDOW, WALK_NEAR  # noqa: F401

_MODULES = (engine, experts, bandits, wrappers, walk, sequences)

KERNELS = tuple(name for module in _MODULES for name in module.KERNELS)
"""Every kernel, by name; ``_np_<name>`` is its twin and ``_nb_<name>`` its compiled loop."""


def _pick():
    wanted = os.environ.get("BOUNDBREAKER_KERNELS", "numba").strip().lower()
    return "numba" if (numba is not None and wanted != "numpy") else "numpy"


BACKEND = _pick()
"""Which implementation is live: ``"numba"`` or ``"numpy"``."""

_IMPLS = {"numpy": {name: getattr(m, "_np_" + name) for m in _MODULES for name in m.KERNELS}}
if numba is not None:
    _IMPLS["numba"] = {name: getattr(m, "_nb_" + name) for m in _MODULES for name in m.KERNELS}


def implementation(name: str, backend: str | None = None):
    """A kernel by name from a given backend (tests compare the two)."""
    return _IMPLS[backend or BACKEND][name]


sample_rows = implementation("sample_rows")
account_shared = implementation("account_shared")
account_per_replica = implementation("account_per_replica")
cumulative_before = implementation("cumulative_before")
hedge_per_replica = implementation("hedge_per_replica")
lazy_leader = implementation("lazy_leader")
lazy_argmin = implementation("lazy_argmin")
perturbed_leader = implementation("perturbed_leader")
ftpl_rows = implementation("ftpl_rows")
dartboard_shared = implementation("dartboard_shared")
dartboard_per_replica = implementation("dartboard_per_replica")
bandit_weights = implementation("bandit_weights")
cap_block = implementation("cap_block")
epoch_ends = implementation("epoch_ends")
walk_windows = implementation("walk_windows")
fill_normals = implementation("fill_normals")
pareto_walk = implementation("pareto_walk")
tie_walk = implementation("tie_walk")
near_tie = implementation("near_tie")
regime_shift = implementation("regime_shift")
