"""Shared test settings: keep tool caches out of $HOME and bound hypothesis."""

import os
import tempfile

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
os.environ.setdefault("MPLCONFIGDIR", os.path.join(tempfile.gettempdir(), "cycleledger-mpl"))

from hypothesis import HealthCheck, settings  # noqa: E402

# ci: the same 200 examples on every run, so a landing never hangs on luck;
# dev: fresh random examples each run (and the database of failures), to
# keep finding new cases while working.
settings.register_profile(
    "ci", max_examples=200, deadline=None, derandomize=True, database=None,
    suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("dev", max_examples=60, deadline=None)
settings.register_profile("explore", max_examples=2000, deadline=None,
                          suppress_health_check=[HealthCheck.too_slow])
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))
