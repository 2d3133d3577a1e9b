"""One helper thread the engine hands half of a long pass to.

The compiled kernels release the GIL, so a long pass split in two halves runs
on both cores: the calling thread takes one half, this thread the other.
Callers combine the halves in a fixed order, so results never depend on
which thread finished first.
"""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

_POOL: list[ThreadPoolExecutor] = []
_LOCK = threading.Lock()


def helper() -> ThreadPoolExecutor:
    """The engine's helper thread (made on first use)."""
    with _LOCK:
        if not _POOL:
            _POOL.append(ThreadPoolExecutor(1, thread_name_prefix="cycleledger-engine"))
        return _POOL[0]
