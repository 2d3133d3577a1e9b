"""One place that imports numba, so the cache location is settled first.

numba's ``cache=True`` writes next to the source by default. When that folder
is read-only (an installed wheel, a container) numba refuses to import the
module, so fall back to a per-user cache folder before numba is imported.
"""

from __future__ import annotations

import os
import tempfile

if not os.environ.get("NUMBA_CACHE_DIR"):
    _here = os.path.dirname(os.path.abspath(__file__))
    if not os.access(_here, os.W_OK):
        _fallback = os.path.join(
            os.environ.get("XDG_CACHE_HOME") or os.path.join(tempfile.gettempdir()),
            "cycleledger-numba")
        os.makedirs(_fallback, exist_ok=True)
        os.environ["NUMBA_CACHE_DIR"] = _fallback

from numba import njit  # noqa: E402  (must follow the cache-dir guard)

#: Decorator for every compiled kernel: cached on disk, releases the GIL.
kernel = njit(cache=True, nogil=True)

__all__ = ["kernel", "njit"]
