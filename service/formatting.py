"""Numbers for people: one policy for every text output (CLI tables, pages).

Four significant digits; scientific notation outside 1e-3 to 1e5; counts
as counts (whole, or a half cycle); ``inf`` for an infinite value and ``-``
for one that is unknown or not given, which never look the same.
Machine outputs (JSON, CSV, Parquet) keep full precision.
"""

from __future__ import annotations

import math

#: Significant digits of every number shown to people.
SIGNIFICANT = 4


def number(v) -> str:
    """A value for a table (see the module notes)."""
    if v is None:
        return "-"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, int):
        return str(v)
    v = float(v)
    if math.isnan(v):
        return "-"
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    if v == 0:
        return "0"
    if abs(v) >= 1e5 or abs(v) < 1e-3:
        return f"{v:.{SIGNIFICANT - 1}e}"
    return f"{v:.{SIGNIFICANT}g}"


def count(v) -> str:
    """A cycle count: ``1949`` or ``1949.5`` (half cycles), never ``1949.0``."""
    if v is None:
        return "-"
    v = float(v)
    return str(int(v)) if v == int(v) else f"{v:.1f}"
