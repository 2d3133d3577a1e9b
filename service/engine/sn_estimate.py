"""S-N curve estimated from tensile data when no fatigue test exists.

The textbook route for steels: an endurance limit from the ultimate
strength, reduced by modifying factors for surface, size, load type,
temperature and reliability, and a straight line in log-log from a fraction
of the ultimate strength at 1e3 cycles to that limit at 1e6. Every factor
is returned with its value and source so a reader can check it.

Factor values are recalled from the textbook cited (from memory); check the
edition you rely on.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.stats import norm

from .errors import InvalidParameter, unknown
from .mean_stress import check_strengths
from .sn_curve import SNCurve

_SHIGLEY = ("R. G. Budynas and J. K. Nisbett, Shigley's Mechanical Engineering Design, "
            "10th ed. New York, NY, USA: McGraw-Hill, 2015, sec. 6-7 to 6-9")

#: Surface factor k_a = a * Su^b, Su in MPa: (a, b). Shigley Table 6-2.
SURFACE_FINISH = {
    "ground": (1.58, -0.085),
    "machined": (4.51, -0.265),
    "cold_drawn": (4.51, -0.265),
    "hot_rolled": (57.7, -0.718),
    "as_forged": (272.0, -0.995),
}

#: Load factor k_c. Shigley eq. (6-26).
LOAD_TYPE = {"bending": 1.0, "axial": 0.85, "torsion": 0.59}

#: Temperature factor k_d = S_T / S_RT against temperature in deg C.
#: Shigley Table 6-4.
_TEMPERATURE_C = np.array([20, 50, 100, 150, 200, 250, 300, 350, 400, 450, 500, 550, 600.0])
_TEMPERATURE_RATIO = np.array([1.000, 1.010, 1.020, 1.025, 1.020, 1.000, 0.975, 0.943,
                               0.900, 0.843, 0.768, 0.672, 0.549])


@dataclass(frozen=True)
class Factor:
    """One modifying factor: its symbol, value, the input it came from, its source."""

    symbol: str
    value: float
    basis: str
    source: str

    def as_dict(self) -> dict:
        return {"symbol": self.symbol, "value": self.value, "basis": self.basis,
                "source": self.source}


@dataclass(frozen=True)
class EstimatedCurve:
    """An estimated curve together with how it was made.

    Attributes
    ----------
    curve : SNCurve
        The curve on stress range (fully reversed).
    endurance_limit : float
        Modified endurance limit :math:`S_e` (amplitude). [MPa]
    unmodified_endurance_limit : float
        :math:`S_e'` of a polished rotating-beam specimen (amplitude). [MPa]
    strength_at_1e3 : float
        Amplitude at 1e3 cycles, :math:`f S_u`. [MPa]
    factors : tuple of Factor
    """

    curve: SNCurve
    endurance_limit: float
    unmodified_endurance_limit: float
    strength_at_1e3: float
    factors: tuple

    def as_dict(self) -> dict:
        return {"curve": self.curve.describe(), "endurance_limit": self.endurance_limit,
                "unmodified_endurance_limit": self.unmodified_endurance_limit,
                "strength_at_1e3": self.strength_at_1e3,
                "factors": [f.as_dict() for f in self.factors]}


def surface_factor(ultimate_strength: float, finish: str) -> float:
    """Surface factor :math:`k_a = a S_u^b` (Shigley Table 6-2). [-]"""
    if finish not in SURFACE_FINISH:
        raise unknown("surface_finish", finish, SURFACE_FINISH)
    a, b = SURFACE_FINISH[finish]
    return float(min(1.0, a * ultimate_strength ** b))


def size_factor(diameter_mm: float | None, load_type: str) -> float:
    r"""
    Size factor :math:`k_b` for a round section in bending or torsion.

    :math:`k_b = 1.24 d^{-0.107}` for 2.79 <= d <= 51 mm,
    :math:`1.51 d^{-0.157}` for 51 < d <= 254 mm; 1 for axial load or no
    diameter (Shigley eq. 6-20). [-]
    """
    if diameter_mm is None or load_type == "axial":
        return 1.0
    d = float(diameter_mm)
    if not np.isfinite(d) or d <= 0:
        raise InvalidParameter(f"diameter_mm {d} must be positive", field="diameter_mm",
                               value=d, limit=0.0)
    if d < 2.79:
        return 1.0
    if d <= 51.0:
        return float(1.24 * d ** -0.107)
    if d <= 254.0:
        return float(1.51 * d ** -0.157)
    raise InvalidParameter(f"diameter_mm {d} is beyond the 254 mm the size factor covers",
                           field="diameter_mm", value=d, limit=254.0)


def temperature_factor(temperature_c: float) -> float:
    """Temperature factor :math:`k_d` by linear interpolation in Shigley Table 6-4. [-]"""
    t = float(temperature_c)
    if not (_TEMPERATURE_C[0] <= t <= _TEMPERATURE_C[-1]):
        if t < _TEMPERATURE_C[0] and t >= -40.0:
            return 1.0
        raise InvalidParameter(f"temperature_c {t} is outside -40..600 deg C",
                               field="temperature_c", value=t, limit=[-40.0, 600.0])
    return float(np.interp(t, _TEMPERATURE_C, _TEMPERATURE_RATIO))


def reliability_factor(reliability: float) -> float:
    r"""
    Reliability factor :math:`k_e = 1 - 0.08\,z_a` (Shigley eq. 6-29).

    :math:`z_a` is the standard normal variate for the reliability, on an 8 %
    coefficient of variation of the endurance limit. [-]
    """
    r = float(reliability)
    if not (0.5 <= r < 1.0):
        raise InvalidParameter(f"reliability {r} must be in [0.5, 1)", field="reliability",
                               value=r, limit=[0.5, 1.0])
    return float(1.0 - 0.08 * norm.ppf(r))


def shigley(ultimate_strength: float, *, surface_finish: str = "machined",
            diameter_mm: float | None = None, load_type: str = "bending",
            temperature_c: float = 20.0, reliability: float = 0.5,
            strength_fraction_1e3: float = 0.9,
            yield_strength: float | None = None) -> EstimatedCurve:
    r"""
    Estimate a fully reversed S-N curve of a steel from its tensile strength.

    Parameters
    ----------
    ultimate_strength : float
        :math:`S_u` from a tensile test or the supplier's sheet. [MPa]
    surface_finish : str
        A key of :data:`SURFACE_FINISH`.
    diameter_mm : float, optional
        Diameter of a round section (size factor). [mm]
    load_type : {"bending", "axial", "torsion"}
    temperature_c : float
        Operating temperature. [deg C]
    reliability : float
        Probability of survival the curve stands for, e.g. 0.5, 0.9, 0.99. [-]
    strength_fraction_1e3 : float
        :math:`f`: the amplitude at 1e3 cycles is :math:`f S_u`. [-]
    yield_strength : float, optional
        Only checked against :math:`S_u`. [MPa]

    Returns
    -------
    EstimatedCurve

    Notes
    -----
    :math:`S_e' = 0.5 S_u` for :math:`S_u \le 1400` MPa, else 700 MPa;
    :math:`S_e = k_a k_b k_c k_d k_e S_e'`. The line :math:`S = a N^b` with
    :math:`a = (f S_u)^2 / S_e` and :math:`b = -\tfrac13 \log_{10}(f S_u / S_e)`
    runs from 1e3 to 1e6 cycles; below :math:`S_e` the estimate assumes an
    endurance limit (no damage) unless a below-limit treatment is chosen.

    References
    ----------
    .. [1] R. G. Budynas and J. K. Nisbett, *Shigley's Mechanical Engineering
       Design*, 10th ed. New York, NY, USA: McGraw-Hill, 2015, eqs. (6-8),
       (6-14), (6-15), (6-18) to (6-29), Tables 6-2, 6-4, 6-5.
    """
    su = float(ultimate_strength)
    check_strengths(ultimate_strength=su, yield_strength=yield_strength)
    if load_type not in LOAD_TYPE:
        raise unknown("load_type", load_type, LOAD_TYPE)
    if not (0.5 <= strength_fraction_1e3 <= 1.0):
        raise InvalidParameter(
            f"strength_fraction_1e3 {strength_fraction_1e3} must be in [0.5, 1]",
            field="strength_fraction_1e3", value=strength_fraction_1e3, limit=[0.5, 1.0])
    se_prime = 0.5 * su if su <= 1400.0 else 700.0
    factors = (
        Factor("k_a", surface_factor(su, surface_finish), f"surface {surface_finish}",
               _SHIGLEY + ", Table 6-2"),
        Factor("k_b", size_factor(diameter_mm, load_type),
               f"diameter {diameter_mm} mm, {load_type}" if diameter_mm else "no diameter given",
               _SHIGLEY + ", eq. (6-20)"),
        Factor("k_c", LOAD_TYPE[load_type], f"load {load_type}", _SHIGLEY + ", eq. (6-26)"),
        Factor("k_d", temperature_factor(temperature_c), f"{temperature_c:g} deg C",
               _SHIGLEY + ", Table 6-4"),
        Factor("k_e", reliability_factor(reliability), f"reliability {reliability:g}",
               _SHIGLEY + ", eq. (6-29), Table 6-5"),
    )
    se = se_prime * float(np.prod([f.value for f in factors]))
    s1e3 = strength_fraction_1e3 * su
    if se >= s1e3:
        raise InvalidParameter(
            f"endurance limit {se:.1f} MPa is not below f*Su = {s1e3:.1f} MPa; "
            f"check the factors", field="strength_fraction_1e3", value=strength_fraction_1e3)
    b = -np.log10(s1e3 / se) / 3.0
    curve = SNCurve((-1.0 / b,), (), 2.0 * se, 1e6, cutoff_cycles=1e6,
                    name=f"estimate Su={su:g} MPa", source=_SHIGLEY,
                    fatigue_limit_cycles=1e6,
                    notes=("estimated from tensile data; confirm with fatigue tests",
                           "valid from 1e3 cycles; fully reversed amplitudes doubled to ranges"))
    return EstimatedCurve(curve, float(se), float(se_prime), float(s1e3), factors)
