"""Fatigue engine: pure functions over numpy arrays.

Nothing here imports Flask, SQLite, pyarrow or Dask (``tests/test_layers.py``
checks it), so every layer above can call it and every test can run it alone.
"""

from .errors import (EngineError, IncompatibleState, InvalidLoadHistory,
                     InvalidParameter, UnknownMethod)
from .histograms import CycleMatrix, exceedance, from_to_matrix, range_mean_matrix
from .rainflow import (CountingState, CycleTable, astm_e1049, close_residue,
                       count_block, turning_points)

__all__ = [
    "EngineError", "IncompatibleState", "InvalidLoadHistory", "InvalidParameter",
    "UnknownMethod", "CountingState", "CycleTable", "astm_e1049", "close_residue",
    "count_block", "turning_points", "CycleMatrix", "exceedance", "from_to_matrix",
    "range_mean_matrix",
]
