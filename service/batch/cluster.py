"""Where Dask tasks run: a configured scheduler, or a local one in this process.

``CYCLELEDGER_DASK_SCHEDULER`` (or ``--scheduler``) names a running
scheduler (``tcp://host:8786``); its workers must have this package
installed and read the same paths (a shared data directory). Without one, a
local cluster runs in this process on threads (the compiled kernels release
the GIL), listening on nothing but loopback.
"""

from __future__ import annotations

import os
import tempfile
from contextlib import contextmanager

SCHEDULER_ENV = "CYCLELEDGER_DASK_SCHEDULER"


def scheduler_address(address: str | None = None) -> str | None:
    """The configured scheduler: the argument, else the environment, else None."""
    return address or os.environ.get(SCHEDULER_ENV) or None


@contextmanager
def connect(address: str | None = None, threads: int | None = None):
    """A ``distributed.Client``: to ``address`` (or the environment's), else to
    a local in-process cluster of ``threads`` threads (default: the cores)."""
    from distributed import Client, LocalCluster

    os.environ.setdefault("DASK_TEMPORARY_DIRECTORY",
                          os.path.join(tempfile.gettempdir(), "cycleledger-dask"))
    address = scheduler_address(address)
    if address:
        client = Client(address, timeout="30s")
        try:
            yield client
        finally:
            client.close()
        return
    cluster = LocalCluster(n_workers=1, threads_per_worker=threads or os.cpu_count() or 1,
                           processes=False, dashboard_address="127.0.0.1:0")
    client = Client(cluster)
    try:
        yield client
    finally:
        client.close()
        cluster.close()
