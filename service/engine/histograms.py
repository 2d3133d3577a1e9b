"""Cycle matrices and exceedance spectra built from a :class:`CycleTable`.

These are the summaries a durability engineer compares across runs: the
range-mean matrix (what damage needs), the from-to matrix (keeps the
direction of each cycle) and the range exceedance spectrum (cumulative
cycles against range, plotted on a log cycle axis).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InvalidParameter
from .rainflow import CycleTable


@dataclass(frozen=True, eq=False)
class CycleMatrix:
    """Cycle counts on a two-dimensional grid of bins.

    Attributes
    ----------
    counts : ndarray, shape (len(row_edges) - 1, len(col_edges) - 1)
        Cycles in each cell (half cycles count 0.5). [cycles]
    row_edges, col_edges : ndarray
        Bin edges; a bin holds ``edge[i] <= value < edge[i+1]``, the last bin
        also its upper edge. [MPa]
    row_quantity, col_quantity : str
        Glossary names of the binned quantities.
    outside : float
        Cycles that fell outside user-given edges and are not in ``counts``. [cycles]
    """

    counts: np.ndarray
    row_edges: np.ndarray
    col_edges: np.ndarray
    row_quantity: str
    col_quantity: str
    outside: float

    @property
    def row_centres(self) -> np.ndarray:
        return 0.5 * (self.row_edges[:-1] + self.row_edges[1:])

    @property
    def col_centres(self) -> np.ndarray:
        return 0.5 * (self.col_edges[:-1] + self.col_edges[1:])


def _edges(bins, lo: float, hi: float, field: str) -> np.ndarray:
    """Bin edges from a bin count (spanning ``lo..hi``) or from given edges."""
    if np.isscalar(bins):
        if isinstance(bins, bool) or int(bins) != bins or int(bins) < 1:
            raise InvalidParameter(f"{field} {bins!r} must be a whole number >= 1",
                                   field=field, value=bins, limit=1)
        if hi <= lo:
            # All values equal: one bin of unit width centred on them.
            lo, hi = lo - 0.5, hi + 0.5
        return np.linspace(lo, hi, int(bins) + 1)
    edges = np.asarray(bins, dtype=np.float64)
    if edges.ndim != 1 or edges.size < 2:
        raise InvalidParameter(f"{field} needs at least two edges", field=field)
    if not np.all(np.isfinite(edges)):
        raise InvalidParameter(f"{field} edges must be finite", field=field)
    bad = np.flatnonzero(np.diff(edges) <= 0)
    if bad.size:
        i = int(bad[0])
        raise InvalidParameter(
            f"{field} edges must increase; edge {i + 1} ({edges[i + 1]}) "
            f"does not exceed edge {i} ({edges[i]})", field=field, value=float(edges[i + 1]))
    return edges


def _matrix(rows, cols, weights, row_bins, col_bins, row_q, col_q,
            row_field, col_field) -> CycleMatrix:
    rlo, rhi = (float(rows.min()), float(rows.max())) if rows.size else (0.0, 1.0)
    clo, chi = (float(cols.min()), float(cols.max())) if cols.size else (0.0, 1.0)
    re = _edges(row_bins, rlo, rhi, row_field)
    ce = _edges(col_bins, clo, chi, col_field)
    counts, _, _ = np.histogram2d(rows, cols, bins=[re, ce], weights=weights)
    return CycleMatrix(counts, re, ce, row_q, col_q,
                       float(weights.sum() - counts.sum()))


def range_mean_matrix(table: CycleTable, range_bins=32, mean_bins=32) -> CycleMatrix:
    """Counts binned by stress range (rows) and mean stress (columns).

    Parameters
    ----------
    table : CycleTable
        Counted cycles.
    range_bins, mean_bins : int or array-like
        Number of equal bins over the counted span (ranges from zero), or the
        bin edges themselves. [-] or [MPa]

    Returns
    -------
    CycleMatrix

    References
    ----------
    .. [1] ASTM E1049-85 (Reapproved 2017), sec. 5.4 (cycle counts by range
       and mean). doi:10.1520/E1049-85R17
    """
    rng = table.stress_range
    if np.isscalar(range_bins):
        hi = float(rng.max()) if rng.size else 1.0
        range_bins = _edges(range_bins, 0.0, hi if hi > 0 else 1.0, "range_bins")
    return _matrix(rng, table.stress_mean, table.count, range_bins, mean_bins,
                   "stress_range", "stress_mean", "range_bins", "mean_bins")


def from_to_matrix(table: CycleTable, bins=32) -> CycleMatrix:
    """Counts binned by the cycle's first (rows) and second (columns) point.

    The same edges serve both axes, so the matrix is square and a cycle that
    rises lies above the diagonal.
    """
    both = np.concatenate([table.stress_from, table.stress_to])
    lo, hi = (float(both.min()), float(both.max())) if both.size else (0.0, 1.0)
    edges = _edges(bins, lo, hi, "bins")
    return _matrix(table.stress_from, table.stress_to, table.count, edges, edges,
                   "stress_from", "stress_to", "bins", "bins")


def exceedance(table: CycleTable) -> tuple[np.ndarray, np.ndarray]:
    """Range exceedance spectrum: cycles whose range is at least each level.

    Returns
    -------
    (stress_range, cycles) : (ndarray, ndarray)
        Distinct ranges, largest first [MPa], and the cumulative count of
        cycles with a range greater than or equal to each [cycles].
    """
    if len(table) == 0:
        return np.empty(0), np.empty(0)
    levels, inverse = np.unique(table.stress_range, return_inverse=True)
    per_level = np.bincount(inverse, weights=table.count, minlength=levels.size)
    return levels[::-1].copy(), np.cumsum(per_level[::-1])
