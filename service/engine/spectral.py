"""Fatigue from power spectral densities (stationary Gaussian loads).

A vibration test is specified by a one-sided stress PSD G(f) [MPa^2/Hz]
rather than a recording. The spectral moments (``psd.py``) give the rates
of zero up-crossings and of peaks and the bandwidth; each method here turns
them into a probability density of rainflow ranges p(S), and the damage over
an exposure T is the expected count nu T p(S) dS weighed by the S-N curve:
:math:`D = \\nu T \\int p(S)/N(S)\\,dS`. The density is laid out as a cycle
table (one row per Gauss-Legendre node of the range axis, the expected count
as its count) so that the same ``damage.assess`` as every recording gives
damage, reserve factor, flags and cautions, on any curve (knees, cut-offs,
factors, a static mean with its mean-stress correction).

Methods (``RANGE_DENSITIES``):

- ``narrow_band``: Rayleigh ranges at the zero up-crossing rate (Bendat);
  exact for a narrow-band process, conservative for wider ones.
- ``wirsching_light``: the narrow-band damage times Wirsching and Light's
  empirical factor (single-slope form; on other curves the factor of the
  curve's first slope).
- ``dirlik``: Dirlik's empirical mix of an exponential and two Rayleigh
  densities, at the peak rate.
- ``tovo_benasciutti``: Benasciutti and Tovo's weighted mix of the
  narrow-band and the range-counting densities, at the zero up-crossing rate.
- ``zhao_baker``: Zhao and Baker's Weibull-Rayleigh mix of amplitudes, at the
  peak rate.

References
----------
.. [1] J. S. Bendat, "Probability functions for random responses," NASA
   CR-33, 1964 (the narrow-band damage).
.. [2] P. H. Wirsching and M. C. Light, "Fatigue under wide band random
   stresses," *J. Struct. Div. ASCE*, vol. 106, no. 7, pp. 1593-1607, 1980.
.. [3] T. Dirlik, "Application of computers in fatigue analysis," Ph.D.
   thesis, University of Warwick, 1985.
.. [4] D. Benasciutti and R. Tovo, "Spectral methods for lifetime prediction
   under wide-band stationary random processes," *Int. J. Fatigue*, vol. 27,
   no. 8, pp. 867-877, 2005. doi:10.1016/j.ijfatigue.2004.10.007
.. [5] W. Zhao and M. J. Baker, "On the probability density function of
   rainflow stress range for stationary Gaussian processes," *Int. J.
   Fatigue*, vol. 14, no. 2, pp. 121-135, 1992.
   doi:10.1016/0142-1123(92)90088-T
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy.special import gamma as gamma_fn

from .errors import InvalidParameter, unknown
from .psd import SpectralMoments, check_psd, moments, synthesize
from .rainflow import CycleTable

# The PSD's own functions are here too: one import path for the spectral work.
__all__ = ["SpectralMoments", "check_psd", "moments", "synthesize", "RANGE_DENSITIES",
           "DEFAULT_METHODS", "LoadCase", "SpectralResult", "assess_spectrum",
           "range_density", "quadrature", "expected_cycles", "range_edges", "cycle_table",
           "narrow_band_damage", "dirlik_damage", "dirlik_coefficients",
           "tovo_benasciutti_weight", "zhao_baker_coefficients", "wirsching_light_factor",
           "outside_range", "largest_expected_range"]

#: Range bins a density is laid out on (ranges from 0 to ``_TAIL`` standard
#: deviations of the process times two).
RANGE_BINS = 4096
_TAIL = 9.0
#: Expected cycles beyond the last range kept, over a load case's exposure:
#: a Gaussian tail has no end, and bins far past any range that will occur
#: (1e-3 expected cycles) would raise static and low-cycle flags for loads
#: that never happen. The damage they carry is nil for any S-N slope in use.
TAIL_CYCLES = 1e-3


# ----------------------------------------------------------------- densities
# Each returns (rate [1/s], p(S) [1/MPa]) on the ranges S given.


def narrow_band(mom: SpectralMoments, s: np.ndarray):
    r"""Rayleigh ranges: :math:`p(S) = S/(4 m_0)\,e^{-S^2/(8 m_0)}` at
    :math:`\nu_0` (Bendat, 1964)."""
    m0 = mom.m0
    return mom.nu0, s / (4.0 * m0) * np.exp(-s * s / (8.0 * m0))


def dirlik(mom: SpectralMoments, s: np.ndarray):
    r"""Dirlik (1985): with :math:`Z = S/(2\sqrt{m_0})`,
    :math:`p(Z) = \frac{D_1}{Q}e^{-Z/Q} + \frac{D_2 Z}{R^2}e^{-Z^2/(2R^2)}
    + D_3 Z e^{-Z^2/2}` at the peak rate, where
    :math:`x_m = \frac{m_1}{m_0}\sqrt{m_2/m_4}`, :math:`\gamma = \alpha_2`,
    :math:`D_1 = 2(x_m - \gamma^2)/(1 + \gamma^2)`,
    :math:`R = (\gamma - x_m - D_1^2)/(1 - \gamma - D_1 + D_1^2)`,
    :math:`D_2 = (1 - \gamma - D_1 + D_1^2)/(1 - R)`,
    :math:`D_3 = 1 - D_1 - D_2`, :math:`Q = 1.25(\gamma - D_3 - D_2 R)/D_1`."""
    c = dirlik_coefficients(mom)
    d1, d2, d3, q, r = c["D1"], c["D2"], c["D3"], c["Q"], c["R"]
    sd = math.sqrt(mom.m0)
    z = s / (2.0 * sd)
    pz = (d1 / q * np.exp(-z / q) + d2 * z / (r * r) * np.exp(-z * z / (2 * r * r))
          + d3 * z * np.exp(-z * z / 2.0))
    return mom.nu_p, pz / (2.0 * sd)


def dirlik_coefficients(mom: SpectralMoments) -> dict:
    """Dirlik's D1, D2, D3, Q and R (see :func:`dirlik`)."""
    g = mom.alpha2
    xm = mom.m1 / mom.m0 * math.sqrt(mom.m2 / mom.m4)
    d1 = 2.0 * (xm - g * g) / (1.0 + g * g)
    denom = 1.0 - g - d1 + d1 * d1
    r = (g - xm - d1 * d1) / denom
    d2 = denom / (1.0 - r)
    d3 = 1.0 - d1 - d2
    q = 1.25 * (g - d3 - d2 * r) / d1
    return {"D1": d1, "D2": d2, "D3": d3, "Q": q, "R": r, "xm": xm}


def tovo_benasciutti_weight(mom: SpectralMoments) -> float:
    r"""Benasciutti and Tovo's weight b of the narrow-band density (2005):
    :math:`b = \frac{(\alpha_1 - \alpha_2)[1.112(1 + \alpha_1\alpha_2 -
    (\alpha_1 + \alpha_2))e^{2.11\alpha_2} + (\alpha_1 - \alpha_2)]}
    {(\alpha_2 - 1)^2}`, bounded to [0, 1]."""
    a1, a2 = mom.alpha1, mom.alpha2
    if abs(a2 - 1.0) < 1e-12:
        return 1.0
    b = ((a1 - a2) * (1.112 * (1 + a1 * a2 - (a1 + a2)) * math.exp(2.11 * a2) + (a1 - a2))
         / (a2 - 1.0) ** 2)
    return min(max(b, 0.0), 1.0)


def tovo_benasciutti(mom: SpectralMoments, s: np.ndarray):
    r"""Benasciutti and Tovo (2005): :math:`b` times the narrow-band density
    plus :math:`1 - b` times the range-counting density (Rayleigh with
    variance :math:`\alpha_2^2 m_0`, at the peak rate), both expressed at
    :math:`\nu_0`: :math:`p = b\,p_{NB}(S) + (1 - b)\,p_{NB}(S/\alpha_2)/\alpha_2^2`
    (the second's rate :math:`\nu_p = \nu_0/\alpha_2` folded into it), so
    that on one slope :math:`D = [b + (1 - b)\alpha_2^{m-1}] D_{NB}`."""
    b = tovo_benasciutti_weight(mom)
    a2 = mom.alpha2
    m0 = mom.m0
    nb = s / (4.0 * m0) * np.exp(-s * s / (8.0 * m0))
    rc_var = a2 * a2 * m0
    rc = s / (4.0 * rc_var) * np.exp(-s * s / (8.0 * rc_var))
    return mom.nu0, b * nb + (1.0 - b) * rc / a2


def zhao_baker(mom: SpectralMoments, s: np.ndarray):
    r"""Zhao and Baker (1992): amplitudes :math:`Z = S/(2\sqrt{m_0})` with
    :math:`p(Z) = w\,\alpha\beta Z^{\beta-1}e^{-\alpha Z^\beta} +
    (1 - w)\,Z e^{-Z^2/2}` at the peak rate; :math:`\alpha = 8 - 7\alpha_2`,
    :math:`\beta = 1.1` for :math:`\alpha_2 < 0.9`, else
    :math:`1.1 + 9(\alpha_2 - 0.9)`, and
    :math:`w = (1 - \alpha_2)/(1 - \sqrt{2/\pi}\,\Gamma(1 + 1/\beta)
    \alpha^{-1/\beta})`."""
    c = zhao_baker_coefficients(mom)
    w, a, b = c["w"], c["alpha"], c["beta"]
    sd = math.sqrt(mom.m0)
    z = s / (2.0 * sd)
    with np.errstate(divide="ignore", invalid="ignore"):
        weib = np.where(z > 0, a * b * np.power(z, b - 1.0) * np.exp(-a * np.power(z, b)), 0.0)
    pz = w * weib + (1.0 - w) * z * np.exp(-z * z / 2.0)
    return mom.nu_p, pz / (2.0 * sd)


def zhao_baker_coefficients(mom: SpectralMoments) -> dict:
    g = mom.alpha2
    a = 8.0 - 7.0 * g
    b = 1.1 if g < 0.9 else 1.1 + 9.0 * (g - 0.9)
    w = (1.0 - g) / (1.0 - math.sqrt(2.0 / math.pi) * math.gamma(1.0 + 1.0 / b)
                     * a ** (-1.0 / b))
    return {"w": w, "alpha": a, "beta": b}


def wirsching_light_factor(mom: SpectralMoments, slope: float) -> float:
    r"""Wirsching and Light (1980): :math:`\lambda = a + (1 - a)(1 - \varepsilon)^b`
    with :math:`\varepsilon = \sqrt{1 - \alpha_2^2}`, :math:`a = 0.926 - 0.033m`,
    :math:`b = 1.587m - 2.323`."""
    eps = math.sqrt(max(0.0, 1.0 - mom.alpha2 ** 2))
    a = 0.926 - 0.033 * slope
    b = 1.587 * slope - 2.323
    return a + (1.0 - a) * (1.0 - eps) ** b


def wirsching_light(mom: SpectralMoments, s: np.ndarray, slope: float = 3.0):
    """The narrow-band density scaled by :func:`wirsching_light_factor`."""
    rate, p = narrow_band(mom, s)
    return rate * wirsching_light_factor(mom, slope), p


#: Method name -> density function.
RANGE_DENSITIES = {"narrow_band": narrow_band, "wirsching_light": wirsching_light,
                   "dirlik": dirlik, "tovo_benasciutti": tovo_benasciutti,
                   "zhao_baker": zhao_baker}


def range_density(mom: SpectralMoments, method: str, s, slope: float = 3.0):
    """``(rate [1/s], p(S) [1/MPa])`` of ``method`` on the ranges ``s`` [MPa]."""
    if method not in RANGE_DENSITIES:
        raise unknown("method", method, RANGE_DENSITIES)
    s = np.asarray(s, dtype=np.float64)
    if method == "wirsching_light":
        return wirsching_light(mom, s, slope)
    return RANGE_DENSITIES[method](mom, s)


def range_edges(mom: SpectralMoments, knees=(), bins: int = RANGE_BINS) -> np.ndarray:
    """Range bin edges from 0 to far in the tail, with ``knees`` [MPa] among
    them (the integrand changes slope or stops there)."""
    top = 2.0 * _TAIL * math.sqrt(mom.m0)
    edges = np.linspace(0.0, top, bins + 1)
    extra = [k for k in knees if 0.0 < k < top]
    return np.unique(np.concatenate([edges, extra])) if extra else edges


def expected_cycles(mom: SpectralMoments, method: str, exposure_s: float, edges,
                    slope: float = 3.0) -> tuple[np.ndarray, np.ndarray]:
    """``(centres, counts)``: the expected cycles in each range bin over
    ``exposure_s`` (midpoint rule). [MPa], [cycles]"""
    edges = np.asarray(edges)
    centres = 0.5 * (edges[:-1] + edges[1:])
    rate, p = range_density(mom, method, centres, slope)
    return centres, rate * exposure_s * p * np.diff(edges)


#: Gauss-Legendre nodes per piece of the range axis, and the pieces the
#: axis from 0 to the tail is cut into before the knees are added.
GAUSS_NODES = 24
_PIECES = 8


@functools.lru_cache(maxsize=8)
def _gauss(n: int) -> tuple[np.ndarray, np.ndarray]:
    return np.polynomial.legendre.leggauss(n)


def quadrature(mom: SpectralMoments, knees=(), nodes: int = GAUSS_NODES):
    """``(ranges, weights)``: Gauss-Legendre nodes and weights over the
    range axis from 0 to far in the tail, cut at ``knees`` [MPa] (where
    the integrand changes slope or stops) so that each piece is smooth.
    [MPa], [MPa]"""
    top = 2.0 * _TAIL * math.sqrt(mom.m0)
    cuts = np.linspace(0.0, top, _PIECES + 1)
    extra = [k for k in knees if 0.0 < k < top]
    if extra:
        cuts = np.unique(np.concatenate([cuts, extra]))
    x, w = _gauss(nodes)
    half = 0.5 * np.diff(cuts)
    mid = 0.5 * (cuts[:-1] + cuts[1:])
    return (mid[:, None] + half[:, None] * x[None, :]).ravel(), (half[:, None] * w).ravel()


def cycle_table(centres, counts, mean_stress: float = 0.0) -> CycleTable:
    """Expected cycles as a cycle table (from mean - S/2 to mean + S/2)."""
    keep = counts > 0
    s = np.asarray(centres)[keep]
    idx = np.zeros(s.shape[0], np.int64)
    return CycleTable(mean_stress - 0.5 * s, mean_stress + 0.5 * s,
                      np.asarray(counts, np.float64)[keep], idx, idx.copy())


def narrow_band_damage(mom: SpectralMoments, exposure_s: float, slope: float,
                       intercept: float) -> float:
    r"""Bendat's closed form for :math:`N = C\,S^{-m}` on ranges:
    :math:`D = \nu_0 T / C\,(2\sqrt{2 m_0})^m\,\Gamma(1 + m/2)`. [-]"""
    return (mom.nu0 * exposure_s / intercept * (2.0 * math.sqrt(2.0 * mom.m0)) ** slope
            * gamma_fn(1.0 + slope / 2.0))


def dirlik_damage(mom: SpectralMoments, exposure_s: float, slope: float,
                  intercept: float) -> float:
    r"""Dirlik's damage in closed form for :math:`N = C\,S^{-m}`:
    :math:`D = \nu_p T/C\,(2\sqrt{m_0})^m [D_1 Q^m \Gamma(1 + m) +
    \sqrt{2}^m \Gamma(1 + m/2)(D_2 |R|^m + D_3)]`. [-]"""
    c = dirlik_coefficients(mom)
    m = slope
    return (mom.nu_p * exposure_s / intercept * (2.0 * math.sqrt(mom.m0)) ** m
            * (c["D1"] * c["Q"] ** m * gamma_fn(1.0 + m)
               + math.sqrt(2.0) ** m * gamma_fn(1.0 + m / 2.0)
               * (c["D2"] * abs(c["R"]) ** m + c["D3"])))


#: Methods assessed when a request names none; the first governs.
DEFAULT_METHODS = ("dirlik", "tovo_benasciutti", "narrow_band", "wirsching_light",
                   "zhao_baker")


@dataclass(frozen=True)
class LoadCase:
    """One PSD of a test profile with its exposure.

    Attributes
    ----------
    name : str
    frequency : ndarray
        Rising line frequencies. [Hz]
    psd : ndarray
        One-sided stress PSD. [MPa^2/Hz]
    exposure_s : float
        Time the load case acts per repeat of the profile. [s]
    mean_stress : float
        Static mean stress the random stress rides on. [MPa]
    """

    name: str
    frequency: np.ndarray
    psd: np.ndarray
    exposure_s: float
    mean_stress: float = 0.0


@dataclass(frozen=True)
class SpectralResult:
    """One method's assessment of a profile.

    Attributes
    ----------
    method : str
    assessment : PointAssessment
        From ``damage.assess`` of the expected cycles of every load case
        (damage of one repeat of the profile, lives in repeats and hours,
        reserve factor, flags).
    damage_per_case : dict
        Damage of each load case over its exposure. [-]
    centres, density : list of ndarray
        Per load case the range bin centres [MPa] and the expected cycles
        per second per MPa, :math:`\\nu p(S)` [1/(s MPa)] (for plots).
    largest_range : dict
        Per load case the range expected once over its exposure. [MPa]
    not_applicable : str or None
        Why the method does not apply to one of the spectra (its density
        would have negative weights); then ``assessment`` is None and
        nothing else is filled.
    """

    method: str
    assessment: object
    damage_per_case: dict
    centres: list
    density: list
    largest_range: dict
    not_applicable: str | None = None


def outside_range(mom: SpectralMoments, method: str) -> str | None:
    """Why ``method``'s density is not a density for this spectrum (a
    weight outside [0, 1], a scale not positive), or None. Using it anyway
    would give negative or lost damage."""
    if method == "dirlik":
        c = dirlik_coefficients(mom)
        if min(c["D1"], c["D2"], c["D3"]) < 0 or c["Q"] <= 0 or not 0 < c["R"] < 1:
            return (f"Dirlik's weights D1 {c['D1']:.3g}, D2 {c['D2']:.3g}, D3 {c['D3']:.3g} "
                    f"(Q {c['Q']:.3g}, R {c['R']:.3g}) are not a mixture for this spectrum")
    elif method == "zhao_baker":
        w = zhao_baker_coefficients(mom)["w"]
        if not 0.0 <= w <= 1.0:
            return (f"Zhao and Baker's weight w = {w:.3g} is outside [0, 1] for "
                    f"alpha2 = {mom.alpha2:.3g}: the method does not cover so wide a band")
    return None

def _knees(curve, opts) -> list[float]:
    """Ranges of the history at which the curve changes slope or stops
    (exact when no mean-stress method reshapes the ranges)."""
    if opts.mean_stress_method != "none":
        return []
    factor = opts.load_factor * opts.thickness_factor * opts.strength_factor
    out = [float(k) / factor for k in np.atleast_1d(curve.knee_ranges)]
    if curve.cutoff_cycles is not None:
        out.append(float(curve.cutoff_range) / factor)
    return out


def _tail_counts(counts: np.ndarray) -> np.ndarray:
    """Expected cycles in each bin and every bin above it."""
    return np.cumsum(counts[::-1])[::-1]


def largest_expected_range(centres, counts) -> float:
    """The range exceeded once, on average, over the exposure (the last bin
    whose tail count reaches one cycle). [MPa]"""
    tail = _tail_counts(np.asarray(counts))
    above = np.flatnonzero(tail >= 1.0)
    return float(np.asarray(centres)[above[-1]]) if above.size else 0.0


def assess_spectrum(cases, curve, options=None, methods=DEFAULT_METHODS,
                    bins: int = GAUSS_NODES) -> dict[str, SpectralResult]:
    r"""
    Damage of a test profile of PSD load cases by each spectral method.

    Parameters
    ----------
    cases : sequence of LoadCase
        The profile: each PSD acts for its exposure, once per repeat.
    curve : SNCurve
    options : AssessmentOptions, optional
    methods : sequence of str
        Keys of :data:`RANGE_DENSITIES`.
    bins : int
        Gauss-Legendre nodes per smooth piece of the range axis.

    Returns
    -------
    dict
        ``{method: SpectralResult}``.

    Notes
    -----
    For each case the expected cycles :math:`\nu T p(S)\,w` at the
    Gauss-Legendre nodes of :func:`quadrature` (the curve's knees and
    cut-off, at the history's scale, cut the axis into smooth pieces)
    become rows of one cycle table at the case's mean; :math:`D = \sum n_i/N_i` on the curve with every option
    (factors, mean-stress correction) as for a recording. The reserve
    factor scales the stress, so the PSD by its square.
    """
    from dataclasses import replace

    from .assessment import AssessmentOptions
    from .damage import assess

    opts = options or AssessmentOptions()
    if not cases:
        raise InvalidParameter("a profile needs at least one load case", field="load_cases")
    for m in methods:
        if m not in RANGE_DENSITIES:
            raise unknown("method", m, RANGE_DENSITIES)
    slope = float(curve.slopes[0])
    knees = _knees(curve, opts)
    moms = [moments(c.frequency, c.psd) for c in cases]
    for c in cases:
        if not (math.isfinite(c.exposure_s) and c.exposure_s > 0):
            raise InvalidParameter(f"load case {c.name!r}: exposure_s must be > 0",
                                   field="exposure_s")
    plain = replace(opts, reserve_factor=False, top_cycles=0)
    full = replace(opts, top_cycles=0)
    profile_s = float(sum(c.exposure_s for c in cases))
    nodes = [quadrature(mom, knees, bins) for mom in moms]
    out = {}
    for method in methods:
        why = next((w for w in (outside_range(mom, method) for mom in moms) if w), None)
        if why is not None:
            out[method] = SpectralResult(method, None, {}, [], [], {}, why)
            continue
        tables, per_case, centres, density, largest = [], {}, [], [], {}
        for c, mom, (s, w) in zip(cases, moms, nodes):
            rate, p = range_density(mom, method, s, slope)
            n = rate * c.exposure_s * p * w
            n = np.where(_tail_counts(n) >= TAIL_CYCLES, n, 0.0)
            t = cycle_table(s, n, c.mean_stress)
            tables.append(t)
            if len(cases) > 1:
                per_case[c.name] = assess(t, curve, plain, weighted=True).damage if len(t) else 0.0
            centres.append(s)
            density.append(rate * p)
            largest[c.name] = largest_expected_range(s, n)
        r = assess(tables[0] if len(tables) == 1 else CycleTable.concat(tables), curve, full,
                   duration_s=profile_s, weighted=True)
        if len(cases) == 1:
            per_case[cases[0].name] = r.damage
        out[method] = SpectralResult(method, r, per_case, centres, density, largest)
    return out
