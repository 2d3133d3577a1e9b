"""Rainflow matrices extrapolated to longer usage.

A recording of a stationary load is a sample: run it ten times longer and
larger cycles than any it holds will occur. Multiplying its rainflow matrix
by ten keeps its largest cycle as the largest; :func:`extrapolate_matrix`
instead smooths the observed range-mean matrix into a density (a kernel
density estimate, as Dressler et al. proposed for rainflow matrices) and
scales that density to the longer usage, so the tail beyond the observed
cycles is filled in the way the observed ones fall off.

Method
------
The observed cycles are first binned finely (a weighted point per occupied
cell). Each point carries a Gaussian kernel in range and mean; its width is
a global width (Silverman's rule of thumb for two dimensions, from robust
spreads) times a local factor from Abramson's square-root law: wider where
cycles are sparse (the large, rare ones), narrower where they are dense.
Kernel mass that would fall below zero range is reflected back into
positive ranges. The expected count of each output bin is the factor times
the total count times the kernel masses over the bin (exact Gaussian
integrals, no sampling).

References
----------
.. [1] K. Dressler, B. Gruender, M. Hack and V. B. Koettgen, "Extrapolation
   of rainflow matrices," SAE Technical Paper 960569, 1996.
   doi:10.4271/960569
.. [2] I. S. Abramson, "On bandwidth variation in kernel estimates - a
   square root law," *Ann. Statist.*, vol. 10, no. 4, pp. 1217-1223, 1982.
.. [3] B. W. Silverman, *Density Estimation for Statistics and Data
   Analysis*. London: Chapman & Hall, 1986, sec. 4.2.1 and 5.3.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import ndtr

from .errors import InvalidParameter
from .rainflow import CycleTable

#: Fine cells per axis the observed cycles are pooled into before smoothing.
_POOL = 160
#: Bounds of the local bandwidth factor (Abramson's law unbounded makes
#: isolated cycles' kernels arbitrarily wide).
_LAMBDA = (0.5, 2.0)
#: Default multiplier of the rule-of-thumb widths. The rule oversmooths a
#: spectrum's tail (it is exact for one normal density); 0.6 with the local
#: factors bounded to [0.5, 2] is this project's choice, measured on seeded
#: Gaussian processes (tests/engine/test_extrapolation.py): a tenfold
#: extrapolation of 1e5 samples against counting 1e6 gives Miner sums 0 to
#: +6 % high (m = 3 to 5), never low in those runs.
BANDWIDTH_SCALE = 0.6


@dataclass(frozen=True)
class ExtrapolatedMatrix:
    """An extrapolated range-mean matrix.

    Attributes
    ----------
    range_edges, mean_edges : ndarray
        Bin edges. [MPa]
    counts : ndarray (ranges, means)
        Expected cycles in each bin over the longer usage. [cycles]
    scaled : ndarray (ranges, means)
        The observed matrix on the same bins times the factor (for
        comparison: what plain scaling gives). [cycles]
    factor : float
        Usage extrapolated to / usage recorded. [-]
    observed_max_range : float
        The largest range recorded. [MPa]
    expected_above_observed : float
        Expected cycles above the largest recorded range over the longer
        usage. [cycles]
    """

    range_edges: np.ndarray
    mean_edges: np.ndarray
    counts: np.ndarray
    scaled: np.ndarray
    factor: float
    observed_max_range: float
    expected_above_observed: float

    def table(self, which: str = "counts") -> CycleTable:
        """The matrix as a cycle table (one row per bin at its centre, the
        expected count as the row's count), for Miner's sum."""
        m = getattr(self, which)
        rc = 0.5 * (self.range_edges[:-1] + self.range_edges[1:])
        mc = 0.5 * (self.mean_edges[:-1] + self.mean_edges[1:])
        r, mean = np.meshgrid(rc, mc, indexing="ij")
        keep = m > 0
        frm = mean[keep] - 0.5 * r[keep]
        to = mean[keep] + 0.5 * r[keep]
        idx = np.zeros(frm.shape[0], np.int64)
        return CycleTable(frm, to, m[keep].astype(np.float64), idx, idx.copy())


def _robust_spread(x: np.ndarray, w: np.ndarray) -> float:
    order = np.argsort(x)
    cw = np.cumsum(w[order])
    cw /= cw[-1]
    q1, q3 = np.interp([0.25, 0.75], cw, x[order])
    mean = np.average(x, weights=w)
    std = math.sqrt(max(np.average((x - mean) ** 2, weights=w), 0.0))
    iqr = (q3 - q1) / 1.349
    s = min(std, iqr) if iqr > 0 else std
    return s


def _masses(x: np.ndarray, h: np.ndarray, edges: np.ndarray, reflect: bool) -> np.ndarray:
    """Gaussian kernel mass of each point over each bin: (points, bins)."""
    z = (edges[None, :] - x[:, None]) / h[:, None]
    cdf = ndtr(z)
    out = np.diff(cdf, axis=1)
    if reflect:  # the mirror image of each kernel about zero range
        zr = (edges[None, :] + x[:, None]) / h[:, None]
        out += np.diff(ndtr(zr), axis=1)
    return out


def _smooth(r, m, w, hr, hm, range_edges, mean_edges):
    pr = _masses(r, hr, range_edges, reflect=True) * w[:, None]
    pm = _masses(m, hm, mean_edges, reflect=False)
    return pr.T @ pm


def extrapolate_matrix(table: CycleTable, factor: float, *, range_bins: int = 48,
                       mean_bins: int = 48, range_max: float | None = None,
                       bandwidth_scale: float = BANDWIDTH_SCALE) -> ExtrapolatedMatrix:
    r"""
    Extrapolate a point's rainflow matrix to ``factor`` times the usage.

    Parameters
    ----------
    table : CycleTable
        The cycles recorded (half cycles count 0.5). [MPa]
    factor : float
        Usage to extrapolate to over usage recorded (>= 1). [-]
    range_bins, mean_bins : int
        Bins of the matrix returned.
    range_max : float, optional
        Upper range edge; default twice the largest recorded range. [MPa]
    bandwidth_scale : float
        Multiplies every kernel width (1: the rule of thumb; default
        :data:`BANDWIDTH_SCALE`). [-]

    Returns
    -------
    ExtrapolatedMatrix

    Notes
    -----
    Global widths :math:`h_d = \sigma_d\,n^{-1/6}` (Silverman's rule for
    :math:`d = 2`, :math:`\sigma` the smaller of the standard deviation and
    IQR/1.349); local factors :math:`\lambda_i = (f(x_i)/g)^{-1/2}` with
    :math:`f` the fixed-width pilot estimate and :math:`g` its weighted
    geometric mean (Abramson), bounded to [0.5, 2]. The total expected
    count is ``factor`` times the recorded count exactly (up to the mass
    beyond the upper range edge).
    """
    if not (isinstance(factor, (int, float)) and math.isfinite(factor) and factor >= 1.0):
        raise InvalidParameter(f"factor {factor!r} must be a number >= 1", field="factor",
                               value=factor if isinstance(factor, (int, float)) else None)
    if len(table) == 0 or float(np.max(table.stress_range)) <= 0:
        raise InvalidParameter("there are no cycles to extrapolate", field="table")
    rng = table.stress_range
    mean = table.stress_mean
    cnt = table.count
    n = float(cnt.sum())
    rmax = float(rng.max())
    top = float(range_max) if range_max is not None else 2.0 * rmax
    mspan = float(mean.max() - mean.min())
    pad = max(0.5 * rmax, 0.1 * mspan, 1e-9)
    mlo, mhi = float(mean.min()) - pad, float(mean.max()) + pad
    # Pool the cycles into weighted points (one per occupied fine cell).
    ri = np.minimum((rng / rmax * _POOL).astype(np.int64), _POOL - 1)
    mi = np.minimum(((mean - mlo) / (mhi - mlo) * _POOL).astype(np.int64), _POOL - 1)
    cell = ri * _POOL + mi
    uniq, inv = np.unique(cell, return_inverse=True)
    w = np.bincount(inv, cnt)
    pr = np.bincount(inv, cnt * rng) / w
    pm = np.bincount(inv, cnt * mean) / w
    sr, sm = _robust_spread(pr, w), _robust_spread(pm, w)
    scale = bandwidth_scale * n ** (-1.0 / 6.0)
    hr0 = max(sr * scale, rmax / _POOL)
    hm0 = max(sm * scale, (mhi - mlo) / _POOL)
    # Pilot density at each point from a fine fixed-width estimate.
    fine_r = np.linspace(0.0, rmax * (1 + 1.0 / _POOL), _POOL + 1)
    fine_m = np.linspace(mlo, mhi, _POOL + 1)
    pilot = _smooth(pr, pm, w, np.full(w.shape, hr0), np.full(w.shape, hm0), fine_r, fine_m)
    cell_area = (fine_r[1] - fine_r[0]) * (fine_m[1] - fine_m[0])
    dens = pilot / (n * cell_area)
    at = dens[np.minimum(np.searchsorted(fine_r, pr) - 1, _POOL - 1).clip(0),
              np.minimum(np.searchsorted(fine_m, pm) - 1, _POOL - 1).clip(0)]
    at = np.maximum(at, 1e-300)
    g = math.exp(float(np.sum(w * np.log(at)) / n))
    lam = np.clip((at / g) ** -0.5, *_LAMBDA)
    range_edges = np.linspace(0.0, top, range_bins + 1)
    mean_edges = np.linspace(mlo, mhi, mean_bins + 1)
    counts = factor * _smooth(pr, pm, w, hr0 * lam, hm0 * lam, range_edges, mean_edges)
    observed, _, _ = np.histogram2d(rng, mean, bins=[range_edges, mean_edges], weights=cnt)
    above = factor * float(np.sum(w * (1.0 - ndtr((rmax - pr) / (hr0 * lam)))))
    return ExtrapolatedMatrix(range_edges, mean_edges, counts, factor * observed,
                              float(factor), rmax, above)
