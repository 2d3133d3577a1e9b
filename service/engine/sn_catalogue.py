"""Published design S-N curves, selectable by their published designations.

Designations are ``<code>:<class>``, e.g. ``EN1993-1-9:71``,
``IIW:FAT90``, ``DNV-RP-C203:D``. Each entry carries its source. Welded
details in the as-welded condition are assessed on stress range without a
mean-stress correction: these curves already contain high residual stress.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from .errors import InvalidParameter, unknown
from .sn_curve import SNCurve

#: Said beside every value entered without the published text at hand.
CHECK_EDITION = "check against the edition in use"

_EN = ("EN 1993-1-9:2005, Eurocode 3: Design of steel structures - Part 1-9: "
       "Fatigue, sec. 7.1, eq. (7.1)-(7.2), Fig. 7.1 (normal stress) / Fig. 7.2 (shear)")
_IIW = ("A. Hobbacher, Recommendations for Fatigue Design of Welded Joints and "
        "Components, IIW document XIII-2460-13, 2nd ed. Cham, Switzerland: Springer, "
        f"2016, sec. 3.2.1 (S-N curves) and 4.3 (variable amplitude); slopes and knee "
        f"points entered without the text at hand, {CHECK_EDITION}")
_DNV = ("DNV-RP-C203, Fatigue design of offshore steel structures, DNV GL, 2016, "
        f"sec. 2.4.4, Table 2-1 (S-N curves in air); log a1, log a2 and k entered "
        f"without the text at hand, {CHECK_EDITION}")

#: EN 1993-1-9 detail categories for normal stress, Delta sigma_C at 2e6. [MPa]
EN1993_NORMAL = (160, 140, 125, 112, 100, 90, 80, 71, 63, 56, 50, 45, 40, 36)
#: EN 1993-1-9 detail categories for shear, Delta tau_C at 2e6. [MPa]
EN1993_SHEAR = (100, 80)
#: IIW FAT classes for normal stress in steel, range at 2e6. [MPa]
IIW_NORMAL = (160, 140, 125, 112, 100, 90, 80, 71, 63, 56, 50, 45, 40, 36, 32, 28, 25)
#: IIW FAT classes for shear stress in steel. [MPa]
IIW_SHEAR = (100, 80)

#: DNV-RP-C203 curves in air: (m1, log a1, m2, log a2, thickness exponent k).
#: Fatigue limit at 1e7 cycles; reference thickness 25 mm for welded joints.
DNV_AIR = {
    "B1": (4.0, 15.117, 5.0, 17.146, 0.00),
    "B2": (4.0, 14.885, 5.0, 16.856, 0.00),
    "C": (3.0, 12.592, 5.0, 16.320, 0.05),
    "C1": (3.0, 12.449, 5.0, 16.081, 0.10),
    "C2": (3.0, 12.301, 5.0, 15.835, 0.15),
    "D": (3.0, 12.164, 5.0, 15.606, 0.20),
    "E": (3.0, 12.010, 5.0, 15.350, 0.20),
    "F": (3.0, 11.855, 5.0, 15.091, 0.25),
    "F1": (3.0, 11.699, 5.0, 14.832, 0.25),
    "F3": (3.0, 11.546, 5.0, 14.576, 0.25),
    "G": (3.0, 11.398, 5.0, 14.330, 0.25),
    "W1": (3.0, 11.261, 5.0, 14.101, 0.25),
    "W2": (3.0, 11.107, 5.0, 13.845, 0.25),
    "W3": (3.0, 10.970, 5.0, 13.617, 0.25),
}
DNV_KNEE_CYCLES = 1e7
DNV_REFERENCE_THICKNESS_MM = 25.0


def en1993_normal(category: float) -> SNCurve:
    r"""
    EN 1993-1-9 curve for a detail category under normal stress.

    Notes
    -----
    :math:`N = 2\cdot10^6 (\Delta\sigma_C/\Delta\sigma)^3` down to the
    constant-amplitude limit :math:`\Delta\sigma_D = (2/5)^{1/3}\Delta\sigma_C`
    at :math:`5\cdot10^6`; then :math:`m = 5` down to the cut-off
    :math:`\Delta\sigma_L = (5/100)^{1/5}\Delta\sigma_D` at :math:`10^8`.

    References
    ----------
    .. [1] EN 1993-1-9:2005, sec. 7.1, eq. (7.1)-(7.2), Fig. 7.1.
    """
    return SNCurve((3.0, 5.0), (5e6,), float(category), 2e6, cutoff_cycles=1e8,
                   name=f"EN1993-1-9:{category:g}", source=_EN, fatigue_limit_cycles=5e6,
                   family="welded",
                   notes=("EN 1993-1-9:2005 assesses welded details on stress range without "
                          "mean-stress correction; its reduced compressive part for non-welded "
                          f"and stress-relieved details is sec. 7.2.1 ({CHECK_EDITION})",))


def en1993_shear(category: float) -> SNCurve:
    r"""
    EN 1993-1-9 curve for shear: :math:`m = 5` from :math:`\Delta\tau_C` at
    :math:`2\cdot10^6` to the cut-off at :math:`10^8`.

    References
    ----------
    .. [1] EN 1993-1-9:2005, sec. 7.1, Fig. 7.2.
    """
    return SNCurve((5.0,), (), float(category), 2e6, cutoff_cycles=1e8,
                   name=f"EN1993-1-9:shear-{category:g}", source=_EN, family="welded_shear")


#: IIW's slope beyond the knee under constant amplitude (a 1 % fall in
#: strength a decade), for normal and shear stress alike.
IIW_CONSTANT_AMPLITUDE_SLOPE = 22.0
_IIW_DAMAGE_SUM = (f"IIW recommends an allowable damage sum of 0.5 for variable amplitude "
                   f"(sec. 4.3; {CHECK_EDITION})")


def iiw_normal(fat: float, constant_amplitude: bool = False) -> SNCurve:
    r"""IIW curve for normal stress: m = 3 to the knee at 1e7 cycles.

    Below the knee: under variable amplitude (default) the curve continues
    with Haibach's :math:`m_2 = 2m - 1 = 5`; with ``constant_amplitude`` it
    continues with :math:`m = 22` (the designation ends in ``-CA``).

    References
    ----------
    .. [1] A. Hobbacher, IIW document XIII-2460-13, 2016, sec. 3.2.1, 4.3.
    """
    m2 = IIW_CONSTANT_AMPLITUDE_SLOPE if constant_amplitude else 5.0
    suffix = "-CA" if constant_amplitude else ""
    note = ("constant-amplitude variant: slope 22 below the knee; for spectra use the "
            "variable-amplitude curve" if constant_amplitude else _IIW_DAMAGE_SUM)
    return SNCurve((3.0, m2), (1e7,), float(fat), 2e6, name=f"IIW:FAT{fat:g}{suffix}",
                   source=_IIW, fatigue_limit_cycles=1e7, family="welded", notes=(note,))


def iiw_shear(fat: float, constant_amplitude: bool = False) -> SNCurve:
    r"""IIW curve for shear stress: m = 5 to the knee at 1e8 cycles.

    Below the knee: under variable amplitude (default) Haibach's
    :math:`m_2 = 2m - 1 = 9`, consistent with 5 for normal stress; with
    ``constant_amplitude`` :math:`m = 22` (designation ending in ``-CA``).

    References
    ----------
    .. [1] A. Hobbacher, IIW document XIII-2460-13, 2016, sec. 3.2.1, 4.3.
    .. [2] E. Haibach, *Betriebsfestigkeit*, 3rd ed. Berlin, Germany:
       Springer, 2006, sec. 3.2 (slope 2m - 1 below the fatigue limit).
    """
    m2 = IIW_CONSTANT_AMPLITUDE_SLOPE if constant_amplitude else 9.0
    suffix = "-CA" if constant_amplitude else ""
    note = ("constant-amplitude variant: slope 22 below the knee; for spectra use the "
            "variable-amplitude curve" if constant_amplitude else _IIW_DAMAGE_SUM)
    return SNCurve((5.0, m2), (1e8,), float(fat), 2e6, name=f"IIW:shear-FAT{fat:g}{suffix}",
                   source=_IIW, fatigue_limit_cycles=1e8, family="welded_shear",
                   notes=(note,))


def dnv_air(designation: str) -> SNCurve:
    r"""
    DNV-RP-C203 curve in air (before any thickness correction).

    Notes
    -----
    :math:`\log N = \log \bar a_1 - m_1 \log \Delta\sigma` for
    :math:`N \le 10^7`, :math:`\log \bar a_2 - m_2 \log \Delta\sigma` beyond,
    each with the standard's tabulated intercept (the two segments meet at the
    knee only to the rounding of the table); no cut-off.

    References
    ----------
    .. [1] DNV-RP-C203, 2016, Table 2-1.
    """
    m1, loga1, m2, loga2, k = DNV_AIR[designation]
    s_knee = 10 ** ((loga1 - np.log10(DNV_KNEE_CYCLES)) / m1)
    return SNCurve((m1, m2), (DNV_KNEE_CYCLES,), float(s_knee), DNV_KNEE_CYCLES,
                   name=f"DNV-RP-C203:{designation}", source=_DNV,
                   fatigue_limit_cycles=DNV_KNEE_CYCLES, segment_log_a=(loga1, loga2),
                   family="welded",
                   notes=(f"thickness exponent k = {k:g} above "
                          f"{DNV_REFERENCE_THICKNESS_MM:g} mm",))


#: DNV-RP-C203 seawater curves with cathodic protection: the knee at 1e6
#: cycles, below it the air line lowered by a factor 2.5 on life (log a1
#: less 0.4 for m1 = 3, 0.2 for m1 = 4), beyond it the air curve's m = 5 line.
DNV_CP_KNEE_CYCLES = 1e6
#: Free corrosion: one slope m = 3, lives a third of the air curve's first
#: segment (log a less log 3), no fatigue limit; for the m1 = 3 classes.
DNV_FREE_CORROSION_SHIFT = float(np.log10(3.0))

_DNV_CP = ("DNV-RP-C203, Fatigue design of offshore steel structures, DNV GL, 2016, sec. "
           "2.4.5, Table 2-2 (S-N curves in seawater with cathodic protection); log a1 "
           "derived from Table 2-1 by the table's own shift (0.4 for m1 = 3, 0.2 for m1 = 4) "
           f"and the knee at 1e6, {CHECK_EDITION}")
_DNV_FC = ("DNV-RP-C203, Fatigue design of offshore steel structures, DNV GL, 2016, sec. "
           "2.4.8, Table 2-4 (S-N curves for free corrosion); log a from Table 2-1's log a1 "
           f"less log 3, {CHECK_EDITION}")


def dnv_seawater_cp(designation: str) -> SNCurve:
    r"""
    DNV-RP-C203 curve in seawater with cathodic protection.

    :math:`\log N = \log ar a_1 - 0.4 - m_1 \log\Delta\sigma` (0.2 for
    :math:`m_1 = 4`) up to :math:`10^6` cycles, then the air curve's
    :math:`m = 5` segment; the two meet at the knee to the table's rounding
    (tested). Thickness exponent as in air.
    """
    m1, loga1, m2, loga2, k = DNV_AIR[designation]
    loga1 -= 0.2 if m1 == 4.0 else 0.4
    s_knee = 10 ** ((loga1 - np.log10(DNV_CP_KNEE_CYCLES)) / m1)
    return SNCurve((m1, m2), (DNV_CP_KNEE_CYCLES,), float(s_knee), DNV_CP_KNEE_CYCLES,
                   name=f"DNV-RP-C203:{designation}-CP", source=_DNV_CP,
                   fatigue_limit_cycles=DNV_CP_KNEE_CYCLES,
                   segment_log_a=(round(loga1, 3), loga2), family="welded",
                   notes=(f"seawater with cathodic protection; thickness exponent k = {k:g} "
                          f"above {DNV_REFERENCE_THICKNESS_MM:g} mm",))


def dnv_free_corrosion(designation: str) -> SNCurve:
    r"""
    DNV-RP-C203 curve for free corrosion: :math:`\log N = \log ar a_1 -
    \log 3 - 3 \log\Delta\sigma` throughout (no fatigue limit).
    """
    m1, loga1, _, _, k = DNV_AIR[designation]
    loga = round(loga1 - DNV_FREE_CORROSION_SHIFT, 3)
    ref = 10 ** ((loga - np.log10(2e6)) / m1)
    return SNCurve((m1,), (), float(ref), 2e6, name=f"DNV-RP-C203:{designation}-FC",
                   source=_DNV_FC, segment_log_a=(loga,), family="welded",
                   notes=("free corrosion: no fatigue limit; thickness exponent "
                          f"k = {k:g} above {DNV_REFERENCE_THICKNESS_MM:g} mm",))


@lru_cache(maxsize=1)
def _catalogue() -> dict:
    entries = {}
    for c in EN1993_NORMAL:
        entries[f"EN1993-1-9:{c}"] = (en1993_normal, c)
    for c in EN1993_SHEAR:
        entries[f"EN1993-1-9:shear-{c}"] = (en1993_shear, c)
    for c in IIW_NORMAL:
        entries[f"IIW:FAT{c}"] = (iiw_normal, (c, False))
    for c in IIW_SHEAR:
        entries[f"IIW:shear-FAT{c}"] = (iiw_shear, (c, False))
    for c in IIW_NORMAL:
        entries[f"IIW:FAT{c}-CA"] = (iiw_normal, (c, True))
    for c in IIW_SHEAR:
        entries[f"IIW:shear-FAT{c}-CA"] = (iiw_shear, (c, True))
    for d in DNV_AIR:
        entries[f"DNV-RP-C203:{d}"] = (dnv_air, d)
    for d in DNV_AIR:
        entries[f"DNV-RP-C203:{d}-CP"] = (dnv_seawater_cp, d)
    for d, row in DNV_AIR.items():
        if row[0] == 3.0:
            entries[f"DNV-RP-C203:{d}-FC"] = (dnv_free_corrosion, d)
    return entries


def designations() -> list[str]:
    """Every catalogue designation, in catalogue order."""
    return list(_catalogue())


def catalogue_curve(designation: str) -> SNCurve:
    """The published curve for ``designation``.

    Raises
    ------
    UnknownMethod
        If the designation is not in the catalogue (the message lists them).
    """
    entry = _catalogue().get(designation)
    if entry is None:
        raise unknown("curve", designation, designations())
    builder, arg = entry
    return builder(*arg) if isinstance(arg, tuple) else builder(arg)


#: IIW thickness-correction exponents n by joint (IIW recommendations 2016,
#: sec. 3.5.3; entered without the text at hand, check against the edition
#: in use).
IIW_THICKNESS_EXPONENTS = {
    "cruciform_as_welded": 0.3,        # cruciform, transverse T, transverse attachments,
                                       # ends of longitudinal stiffeners, as welded
    "cruciform_toe_ground": 0.2,       # the same, toe ground
    "transverse_butt_as_welded": 0.2,
    "butt_ground_flush": 0.1,          # also base material, longitudinal welds and attachments
}
#: Reference thickness of the IIW and EN 1993-1-9 size effect. [mm]
REFERENCE_THICKNESS_MM = 25.0


@dataclass(frozen=True)
class ThicknessCorrection:
    """A thickness (size) correction: the stress ranges are multiplied by
    ``factor`` = (t_eff / t_ref)^n for t_eff > t_ref (1 otherwise), which
    lowers the curve by the same factor. [-], mm"""

    factor: float
    thickness_mm: float
    effective_thickness_mm: float
    reference_thickness_mm: float
    exponent: float
    source: str

    def as_dict(self) -> dict:
        return {"factor": self.factor, "thickness_mm": self.thickness_mm,
                "effective_thickness_mm": self.effective_thickness_mm,
                "reference_thickness_mm": self.reference_thickness_mm,
                "exponent": self.exponent, "source": self.source}


def _positive(value, field: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not (
            np.isfinite(value) and value > 0):
        raise InvalidParameter(f"{field} {value!r} must be a positive number", field=field,
                               value=value)
    return float(value)


def thickness_correction(designation: str, thickness_mm: float, *, exponent=None,
                         joint: str | None = None,
                         attachment_length_mm=None) -> ThicknessCorrection:
    r"""
    The codes' thickness (size) effect for a catalogue curve.

    ``DNV-RP-C203:*``
        :math:`(t_{eff}/25)^k` with the curve's own :math:`k` (Table 2-1),
        :math:`t_{eff} = \min(14 + 0.66 L_t, t)` for a transverse attachment
        of length :math:`L_t` (``attachment_length_mm``), else :math:`t`
        [1]_ sec. 2.4.3.
    ``IIW:*``
        :math:`(t_{eff}/25)^n` with :math:`n` by ``joint``
        (:data:`IIW_THICKNESS_EXPONENTS`) or ``exponent``; :math:`t_{eff} =
        0.5 L` when the toe-to-toe distance :math:`L`
        (``attachment_length_mm``) is at most :math:`2t`, else :math:`t`
        [2]_ sec. 3.5.3.
    ``EN1993-1-9:*``
        :math:`k_s = (25/t)^n` on the detail category, for the details
        whose row in Tables 8.1-8.10 gives one; ``exponent`` is that
        :math:`n` (0.2 for the transverse butt welds that have it) [3]_.

    References
    ----------
    .. [1] DNV-RP-C203, 2016, sec. 2.4.3, eq. (2.4.3) (effective thickness
       entered without the text at hand, check against the edition in use).
    .. [2] IIW recommendations (Hobbacher 2016), sec. 3.5.3 (check against
       the edition in use).
    .. [3] EN 1993-1-9:2005, sec. 7.2.2 and Tables 8.1-8.10 (size effect
       k_s).
    """
    t = _positive(thickness_mm, "thickness_mm")
    code = designation.split(":", 1)[0]
    if code == "DNV-RP-C203":
        if joint is not None or exponent is not None:
            raise InvalidParameter("a DNV-RP-C203 curve has its own thickness exponent k",
                                   field="joint" if joint is not None else "thickness_exponent")
        n = DNV_AIR[designation.split(":", 1)[1].split("-")[0]][4]
        t_eff = t
        if attachment_length_mm is not None:
            t_eff = min(14.0 + 0.66 * _positive(attachment_length_mm, "attachment_length_mm"), t)
        ref, source = DNV_REFERENCE_THICKNESS_MM, "DNV-RP-C203 (2016) sec. 2.4.3"
    elif code == "IIW":
        if joint is not None:
            if joint not in IIW_THICKNESS_EXPONENTS:
                raise unknown("joint", joint, IIW_THICKNESS_EXPONENTS)
            if exponent is not None:
                raise InvalidParameter("give joint or thickness_exponent, not both",
                                       field="thickness_exponent")
            n = IIW_THICKNESS_EXPONENTS[joint]
        elif exponent is not None:
            n = _positive(exponent, "thickness_exponent")
        else:
            raise InvalidParameter("an IIW thickness correction needs the joint ("
                                   + ", ".join(IIW_THICKNESS_EXPONENTS)
                                   + ") or thickness_exponent", field="joint")
        t_eff = t
        if attachment_length_mm is not None:
            length = _positive(attachment_length_mm, "attachment_length_mm")
            t_eff = 0.5 * length if length <= 2.0 * t else t
        ref = REFERENCE_THICKNESS_MM
        source = f"IIW recommendations (2016) sec. 3.5.3, {CHECK_EDITION}"
    elif code == "EN1993-1-9":
        if joint is not None or attachment_length_mm is not None:
            raise InvalidParameter("EN 1993-1-9's size factor takes thickness_exponent (the "
                                   "detail's k_s) only", field="joint")
        if exponent is None:
            raise InvalidParameter("an EN 1993-1-9 size factor needs thickness_exponent: the n "
                                   "of k_s = (25/t)^n in the detail's row of Tables 8.1-8.10",
                                   field="thickness_exponent")
        n = _positive(exponent, "thickness_exponent")
        t_eff, ref = t, REFERENCE_THICKNESS_MM
        source = "EN 1993-1-9:2005 sec. 7.2.2, Tables 8.1-8.10 (k_s)"
    else:
        raise InvalidParameter(f"a thickness correction applies to the codes' curves "
                               f"(EN 1993-1-9, IIW, DNV-RP-C203), not {designation!r}",
                               field="thickness_mm", value=thickness_mm)
    factor = 1.0 if t_eff <= ref else float((t_eff / ref) ** n)
    return ThicknessCorrection(factor, t, t_eff, ref, float(n), source)


def thickness_factor(designation: str, thickness_mm: float,
                     reference_thickness_mm: float = DNV_REFERENCE_THICKNESS_MM) -> float:
    r"""
    DNV-RP-C203 thickness factor on the stress range.

    Returns :math:`(t/t_{ref})^k` for :math:`t > t_{ref}`, else 1. The
    applied stress ranges are multiplied by it (equivalently the curve is
    lowered). [-]

    References
    ----------
    .. [1] DNV-RP-C203, 2016, sec. 2.4.3, eq. (2.4.3).
    """
    if not designation.startswith("DNV-RP-C203:"):
        raise InvalidParameter(f"a thickness correction applies to DNV-RP-C203 curves, "
                               f"not {designation!r}", field="thickness_mm", value=thickness_mm)
    if not np.isfinite(thickness_mm) or thickness_mm <= 0:
        raise InvalidParameter(f"thickness_mm {thickness_mm} must be positive",
                               field="thickness_mm", value=thickness_mm, limit=0.0)
    k = DNV_AIR[designation.split(":", 1)[1]][4]
    if thickness_mm <= reference_thickness_mm:
        return 1.0
    return float((thickness_mm / reference_thickness_mm) ** k)
