"""Shared test settings: keep tool caches out of $HOME and bound hypothesis."""

import os
import tempfile

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
os.environ.setdefault("MPLCONFIGDIR", os.path.join(tempfile.gettempdir(), "cycleledger-mpl"))

from hypothesis import HealthCheck, settings  # noqa: E402

settings.register_profile(
    "ci", max_examples=200, deadline=None,
    suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("dev", max_examples=60, deadline=None)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))
