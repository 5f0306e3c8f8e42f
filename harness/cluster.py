"""Scale out: run replica chunks on a dask.distributed cluster.

The runner dispatches chunks through joblib, so any joblib backend applies;
this module sets up joblib's dask backend against a cluster::

    from harness.cluster import cluster
    with cluster("tcp://scheduler-host:8786"):      # or cluster("local")
        result = run(learner, adversary, T, n, replicas=100_000, n_jobs=-1)

Results are bit-identical to a local run with the same seed: chunk k always
draws from ``SeedSequence(seed, spawn_key=(k,))``, wherever it runs. Workers
need boundbreaker (and any user learner module) importable, in the same
versions as the client.

Pointing it at your cluster: start a scheduler (``dask scheduler``) and
workers (``dask worker tcp://host:8786 --nthreads 1``: one thread per worker
process, since each chunk is single-threaded numpy/numba work), then pass
the scheduler address here or as ``boundbreaker run --cluster tcp://host:8786``.
``"local"`` starts a LocalCluster with one single-threaded worker per core.
"""

from __future__ import annotations

import os
from contextlib import contextmanager

from .errors import ConfigError


@contextmanager
def cluster(address: str, n_workers: int | None = None, timeout: str = "10s"):
    """Route joblib work (and so ``run``'s chunks) to a dask cluster while open.

    ``n_workers`` sizes a ``"local"`` cluster; ``timeout`` bounds the wait for
    a remote scheduler.
    """
    try:
        import joblib
        from dask.distributed import Client, LocalCluster
    except ImportError:
        raise ConfigError("cluster: needs dask.distributed; install it with "
                          "pip install 'boundbreaker[cluster]'") from None
    if not isinstance(address, str) or not address:
        raise ConfigError(f"cluster: give 'local' or a scheduler address like tcp://host:8786, got {address!r}")
    local = None
    try:
        if address == "local":
            local = LocalCluster(n_workers=n_workers or os.cpu_count() or 1, threads_per_worker=1,
                                 processes=True, dashboard_address=None)
            client = Client(local)
        else:
            try:
                client = Client(address, timeout=timeout)
            except (OSError, TimeoutError, ValueError) as exc:
                raise ConfigError(f"cluster: cannot reach a dask scheduler at {address!r} "
                                  f"({type(exc).__name__}); check the address and that it is running") from None
        with client, joblib.parallel_config(backend="dask"):
            yield client
    finally:
        if local is not None:
            local.close()
