"""S-N curve estimated from tensile data when no fatigue test exists.

The textbook route for steels: an endurance limit from the ultimate
strength, reduced by modifying factors for surface, size, load type,
temperature and reliability, and a straight line in log-log from a fraction
of the ultimate strength at 1e3 cycles to that limit at 1e6. Every factor
is returned with its value and source so a reader can check it.

The method holds for wrought steels. Aluminium alloys and cast irons have
no true endurance limit: for them the line is continued below 1e6 cycles
with its own slope (no cut-off) and the result carries a caution.
Factor values were entered without the textbook at hand; every source
string says to check them against the edition in use.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.stats import norm

from .errors import InvalidParameter, unknown
from .mean_stress import check_strengths
from .sn_curve import SNCurve

_BOOK = ("R. G. Budynas and J. K. Nisbett, Shigley's Mechanical Engineering Design, "
         "10th ed. New York, NY, USA: McGraw-Hill, 2015")
_CHECK = "check against the edition in use"
_SHIGLEY = f"{_BOOK}, sec. 6-7 to 6-10 ({_CHECK})"


def _src(clause: str) -> str:
    return f"{_BOOK}, {clause} ({_CHECK})"

#: Material classes the estimate is made for; only steels have the endurance
#: limit the method assumes.
MATERIAL_CLASSES = ("steel", "aluminium", "cast_iron")

#: Shear ultimate strength over tensile ultimate strength, S_su = 0.67 S_ut
#: (Shigley eq. (6-54)), the torsion curve's amplitude at 1e3 cycles.
SHEAR_ULTIMATE_RATIO = 0.67

#: Below this S_ut [MPa] (70 kpsi) the fraction f at 1e3 cycles is 0.9.
_F_LOW_STRENGTH_MPA = 70.0 * 6.894757

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
    material_class: str = "steel"
    load_type: str = "bending"
    reliability: float = 0.5

    def as_dict(self) -> dict:
        return {"curve": self.curve.describe(), "endurance_limit": self.endurance_limit,
                "unmodified_endurance_limit": self.unmodified_endurance_limit,
                "strength_at_1e3": self.strength_at_1e3,
                "material_class": self.material_class, "load_type": self.load_type,
                "reliability": self.reliability,
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

    :math:`k_b = (d/7.62)^{-0.107}` for 2.79 <= d <= 51 mm (the exact form;
    the textbook also prints it rounded as :math:`1.24 d^{-0.107}`),
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
        return float((d / 7.62) ** -0.107)
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


def fatigue_strength_fraction(ultimate_strength: float) -> float:
    r"""
    Fraction :math:`f` of :math:`S_{ut}` at 1e3 cycles (Shigley eq. (6-10)).

    :math:`f = \sigma'_F / S_{ut}\,(2\cdot10^3)^b` with
    :math:`\sigma'_F = S_{ut} + 345` MPa and
    :math:`b = -\log(\sigma'_F / S'_e) / \log(2\cdot10^6)`, :math:`S'_e` the
    unmodified endurance limit; 0.9 below 70 kpsi (483 MPa), where the
    textbook's figure 6-18 stops. Falls with strength: about 0.9 at 500 MPa,
    0.8 at 1000 MPa, 0.77 at 1380 MPa. [-]
    """
    su = float(ultimate_strength)
    if su < _F_LOW_STRENGTH_MPA:
        return 0.9
    se_prime = 0.5 * su if su <= 1400.0 else 700.0
    sigma_f = su + 345.0
    b = -np.log10(sigma_f / se_prime) / np.log10(2e6)
    return float(sigma_f / su * 2e3 ** b)


def shigley(ultimate_strength: float, *, surface_finish: str = "machined",
            diameter_mm: float | None = None, load_type: str = "bending",
            temperature_c: float = 20.0, reliability: float = 0.5,
            strength_fraction_1e3: float | None = None,
            yield_strength: float | None = None,
            material_class: str = "steel") -> EstimatedCurve:
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
    strength_fraction_1e3 : float, optional
        :math:`f`: the amplitude at 1e3 cycles is :math:`f S_u` (bending and
        axial). Default: :func:`fatigue_strength_fraction`. Not used in
        torsion, where the 1e3 point is the shear ultimate strength. [-]
    yield_strength : float, optional
        Only checked against :math:`S_u`. [MPa]
    material_class : {"steel", "aluminium", "cast_iron"}
        Steels have an endurance limit. For the others the method's
        :math:`S_e` is only a point of the line at 1e6 cycles: the line goes
        on below it with its own slope (no cut-off), and a caution says the
        estimate is outside what the method was made for.

    Returns
    -------
    EstimatedCurve

    Notes
    -----
    :math:`S_e' = 0.5 S_u` for :math:`S_u \le 1400` MPa, else 700 MPa;
    :math:`S_e = k_a k_b k_c k_d k_e S_e'`. The line :math:`S = a N^b` with
    :math:`a = (f S_u)^2 / S_e` and :math:`b = -\tfrac13 \log_{10}(f S_u / S_e)`
    runs from 1e3 to 1e6 cycles. In torsion the amplitude at 1e3 cycles is
    the shear ultimate strength :math:`S_{su} = 0.67 S_u` (eq. (6-54)) and
    the curve is one of shear stress. The default reliability 0.5 gives a
    median curve. For steels, :math:`S_e` is the endurance limit of constant
    amplitude; under a spectrum the curve continues below it with Haibach's
    slope :math:`2m - 1` (conservative: cycles under the limit still
    damage once larger ones have started a crack); ``below_limit: "ignore"``
    in a point's settings restores the textbook's infinite life.

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
    if material_class not in MATERIAL_CLASSES:
        raise unknown("material_class", material_class, MATERIAL_CLASSES)
    f_given = strength_fraction_1e3 is not None
    if not f_given:
        strength_fraction_1e3 = fatigue_strength_fraction(su)
    if not (0.5 <= strength_fraction_1e3 <= 1.0):
        raise InvalidParameter(
            f"strength_fraction_1e3 {strength_fraction_1e3} must be in [0.5, 1]",
            field="strength_fraction_1e3", value=strength_fraction_1e3, limit=[0.5, 1.0])
    se_prime = 0.5 * su if su <= 1400.0 else 700.0
    factors = (
        Factor("k_a", surface_factor(su, surface_finish), f"surface {surface_finish}",
               _src("Table 6-2")),
        Factor("k_b", size_factor(diameter_mm, load_type),
               f"diameter {diameter_mm} mm, {load_type}" if diameter_mm else "no diameter given",
               _src("eq. (6-20)")),
        Factor("k_c", LOAD_TYPE[load_type], f"load {load_type}", _src("eq. (6-26)")),
        Factor("k_d", temperature_factor(temperature_c), f"{temperature_c:g} deg C",
               _src("Table 6-4")),
        Factor("k_e", reliability_factor(reliability), f"reliability {reliability:g}",
               _src("eq. (6-29), Table 6-5")),
    )
    se = se_prime * float(np.prod([f.value for f in factors]))
    if load_type == "torsion":
        s1e3 = SHEAR_ULTIMATE_RATIO * su
        at_1e3 = f"shear ultimate strength 0.67 Su = {s1e3:.4g} MPa (eq. (6-54))"
    else:
        s1e3 = strength_fraction_1e3 * su
        at_1e3 = (f"f = {strength_fraction_1e3:.3f}"
                  + (" (given)" if f_given else " (eq. (6-10))") + f", f Su = {s1e3:.4g} MPa")
    if se >= s1e3:
        raise InvalidParameter(
            f"endurance limit {se:.1f} MPa is not below the amplitude at 1e3 cycles "
            f"{s1e3:.1f} MPa; check the factors", field="strength_fraction_1e3",
            value=strength_fraction_1e3)
    b = -np.log10(s1e3 / se) / 3.0
    m = -1.0 / b
    quantity = "shear stress" if load_type == "torsion" else "normal stress"
    notes = [f"estimated from tensile data ({quantity}, fully reversed); confirm with "
             f"fatigue tests",
             f"amplitude at 1e3 cycles: {at_1e3}; valid from 1e3 cycles",
             "median curve (reliability 0.5): half of such parts are expected to fail "
             "sooner" if reliability == 0.5 else
             f"curve for a reliability of {reliability:g} (k_e on an 8 % scatter of S_e)"]
    if material_class == "steel":
        notes.append(f"below the endurance limit {se:.4g} MPa (amplitude) the line "
                     f"continues with Haibach's slope {2 * m - 1:.3g}")
        curve = SNCurve((m, 2.0 * m - 1.0), (1e6,), 2.0 * se, 1e6,
                        name=f"estimate Su={su:g} MPa", source=_SHIGLEY,
                        fatigue_limit_cycles=1e6, family="estimate", stress_ratio=-1.0,
                        notes=tuple(notes))
    else:
        notes.append("no endurance limit for this material class: the line is continued "
                     "below 1e6 cycles without a cut-off")
        curve = SNCurve((m,), (), 2.0 * se, 1e6, name=f"estimate Su={su:g} MPa",
                        source=_SHIGLEY, family="estimate", stress_ratio=-1.0,
                        notes=tuple(notes))
    return EstimatedCurve(curve, float(se), float(se_prime), float(s1e3), factors,
                          material_class, load_type, float(reliability))
