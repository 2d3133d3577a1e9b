"""Mean-stress correction: the zero-mean amplitude that gives the same life.

Each model is a pure function of cycle amplitudes and means (arrays, MPa).
Where a model breaks down (a mean at or beyond the strength it is scaled by)
the cycle is a static failure, not a fatigue cycle: the function returns
``inf`` there rather than raising, so one bad cycle never stops a batch of
points; :func:`equivalent_amplitude` also returns a mask of those cycles.
"""

from __future__ import annotations

import numpy as np

from .errors import InvalidParameter, unknown
from .plausibility import check_strength

#: How compressive means (sigma_m < 0) are treated, see equivalent_amplitude.
COMPRESSIVE_MEAN_POLICIES = ("no_benefit", "zero", "formula")


def _ratio_denominator(ratio: np.ndarray) -> np.ndarray:
    # 1 - ratio, with every cycle at or past breakdown mapped to 0 so the
    # division yields inf (amplitudes are > 0) and never a negative value.
    den = 1.0 - ratio
    return np.where(den > 0.0, den, 0.0)


def _divide(stress_amplitude, den):
    a = np.asarray(stress_amplitude, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = a / den
    # A zero amplitude is no cycle, even past breakdown: 0/0 -> 0.
    return np.where(a == 0.0, 0.0, out)


def none(stress_amplitude, stress_mean):
    """No correction: the amplitude itself, whatever the mean. [MPa]"""
    return np.array(stress_amplitude, dtype=np.float64)


def goodman(stress_amplitude, stress_mean, ultimate_strength):
    r"""
    Equivalent fully reversed amplitude by the Goodman line.

    Parameters
    ----------
    stress_amplitude : array-like
        Alternating stress of each cycle, :math:`\sigma_a`. [MPa]
    stress_mean : array-like
        Mean stress of each cycle, :math:`\sigma_m`. [MPa]
    ultimate_strength : float
        Ultimate tensile strength, :math:`S_u`. [MPa]

    Returns
    -------
    ndarray
        :math:`\sigma_{ar}`; ``inf`` where :math:`\sigma_m \ge S_u`. [MPa]

    Notes
    -----
    :math:`\sigma_{ar} = \sigma_a / (1 - \sigma_m / S_u)`. Applied literally a
    compressive mean lowers :math:`\sigma_{ar}`; see ``compressive_mean`` in
    :func:`equivalent_amplitude` for the policy.

    References
    ----------
    .. [1] J. Goodman, *Mechanics Applied to Engineering*. London, U.K.:
       Longmans, Green, 1899.
    .. [2] N. E. Dowling, *Mechanical Behavior of Materials*, 4th ed.
       Boston, MA, USA: Pearson, 2013, sec. 9.7.
    """
    ratio = np.asarray(stress_mean, dtype=np.float64) / ultimate_strength
    return _divide(stress_amplitude, _ratio_denominator(ratio))


def gerber(stress_amplitude, stress_mean, ultimate_strength):
    r"""
    Equivalent fully reversed amplitude by the Gerber parabola.

    Returns :math:`\sigma_{ar} = \sigma_a / (1 - (\sigma_m / S_u)^2)`, ``inf``
    where :math:`|\sigma_m| \ge S_u`. [MPa]

    Notes
    -----
    Even in :math:`\sigma_m`: a compressive mean penalises as much as a
    tensile one of the same size unless the policy clips it.

    References
    ----------
    .. [1] H. Gerber, "Bestimmung der zulässigen Spannungen in
       Eisen-Constructionen," *Z. Bayer. Archit. Ing.-Ver.*, vol. 6,
       pp. 101-110, 1874.
    .. [2] N. E. Dowling, *Mechanical Behavior of Materials*, 4th ed.
       Boston, MA, USA: Pearson, 2013, sec. 9.7.
    """
    ratio = np.asarray(stress_mean, dtype=np.float64) / ultimate_strength
    return _divide(stress_amplitude, _ratio_denominator(ratio * ratio))


def soderberg(stress_amplitude, stress_mean, yield_strength):
    r"""
    Equivalent fully reversed amplitude by the Soderberg line.

    Returns :math:`\sigma_{ar} = \sigma_a / (1 - \sigma_m / S_y)`, ``inf``
    where :math:`\sigma_m \ge S_y`. [MPa]

    References
    ----------
    .. [1] C. R. Soderberg, "Factor of safety and working stress," *Trans.
       ASME*, vol. 52, pp. 13-28, 1930.
    """
    ratio = np.asarray(stress_mean, dtype=np.float64) / yield_strength
    return _divide(stress_amplitude, _ratio_denominator(ratio))


def morrow(stress_amplitude, stress_mean, fatigue_strength_coefficient):
    r"""
    Equivalent fully reversed amplitude by Morrow's mean-stress correction.

    Returns :math:`\sigma_{ar} = \sigma_a / (1 - \sigma_m / \sigma_f')`,
    ``inf`` where :math:`\sigma_m \ge \sigma_f'`. [MPa]

    Parameters
    ----------
    fatigue_strength_coefficient : float
        :math:`\sigma_f'` of the material's Basquin curve. [MPa]

    References
    ----------
    .. [1] J. Morrow, "Fatigue properties of metals," in *Fatigue Design
       Handbook*, AE-4. Warrendale, PA, USA: SAE, 1968, sec. 3.2.
    """
    ratio = np.asarray(stress_mean, dtype=np.float64) / fatigue_strength_coefficient
    return _divide(stress_amplitude, _ratio_denominator(ratio))


def asme_elliptic(stress_amplitude, stress_mean, yield_strength):
    r"""
    Equivalent fully reversed amplitude by the ASME elliptic locus.

    Returns :math:`\sigma_{ar} = \sigma_a / \sqrt{1 - (\sigma_m / S_y)^2}`,
    ``inf`` where :math:`|\sigma_m| \ge S_y`. [MPa]

    Notes
    -----
    The locus :math:`(\sigma_a/S_e)^2 + (\sigma_m/S_y)^2 = 1` solved for the
    zero-mean amplitude of the same life. Like Gerber it is even in
    :math:`\sigma_m`; the compressive-mean policy decides what a compressive
    mean does.

    References
    ----------
    .. [1] R. G. Budynas and J. K. Nisbett, *Shigley's Mechanical Engineering
       Design*, 10th ed. New York, NY, USA: McGraw-Hill, 2015, sec. 6-12,
       Table 6-8 (ASME-elliptic failure criterion).
    """
    ratio = np.asarray(stress_mean, dtype=np.float64) / yield_strength
    q = _ratio_denominator(ratio * ratio)
    return _divide(stress_amplitude, np.sqrt(q))


def smith_watson_topper(stress_amplitude, stress_mean):
    r"""
    Equivalent fully reversed amplitude by Smith, Watson and Topper.

    Returns :math:`\sigma_{ar} = \sqrt{\sigma_{max}\,\sigma_a}` with
    :math:`\sigma_{max} = \sigma_m + \sigma_a`; zero (no damage) where
    :math:`\sigma_{max} \le 0`. [MPa]

    References
    ----------
    .. [1] K. N. Smith, P. Watson, and T. H. Topper, "A stress-strain function
       for the fatigue of metals," *J. Mater.*, vol. 5, no. 4, pp. 767-778, 1970.
    """
    a = np.asarray(stress_amplitude, dtype=np.float64)
    smax = np.asarray(stress_mean, dtype=np.float64) + a
    return np.sqrt(np.where(smax > 0.0, smax * a, 0.0))


def walker(stress_amplitude, stress_mean, walker_exponent):
    r"""
    Equivalent fully reversed amplitude by Walker's relation.

    Returns :math:`\sigma_{ar} = \sigma_{max}^{1-\gamma}\,\sigma_a^{\gamma}`;
    zero where :math:`\sigma_{max} \le 0`. :math:`\gamma = 0.5` is
    Smith-Watson-Topper. [MPa]

    Parameters
    ----------
    walker_exponent : float
        :math:`\gamma`, in (0, 1]. [-]

    References
    ----------
    .. [1] K. Walker, "The effect of stress ratio during crack propagation
       and fatigue for 2024-T3 and 7075-T6 aluminum," in *Effects of
       Environment and Complex Load History on Fatigue Life*, ASTM STP 462,
       1970, pp. 1-14. doi:10.1520/STP32032S
    """
    a = np.asarray(stress_amplitude, dtype=np.float64)
    smax = np.asarray(stress_mean, dtype=np.float64) + a
    pos = smax > 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.power(np.where(pos, smax, 1.0), 1.0 - walker_exponent) * np.power(
            a, walker_exponent)
    return np.where(pos, out, 0.0)


def reduced_compression(stress_amplitude, stress_mean, compression_factor):
    r"""
    Effective amplitude of a cycle whose compressive part counts only in part.

    Returns :math:`(\Delta\sigma_t + k\,\Delta\sigma_c)/2` with
    :math:`\Delta\sigma_t = \max(\sigma_{max},0) - \max(\sigma_{min},0)` the
    part of the range in tension and :math:`\Delta\sigma_c =
    \min(\sigma_{max},0) - \min(\sigma_{min},0)` the part in compression. [MPa]

    Parameters
    ----------
    compression_factor : float
        :math:`k`: 0.6 in EN 1993-1-9 for non-welded or stress-relieved
        welded details [1]_; DNV-RP-C203 takes 0.6 for base material and 0.8
        for welded connections that are post-weld heat treated [2]_
        (:math:`f_m = (\sigma_t + k\sigma_c)/(\sigma_t + \sigma_c)` on the
        range, the same rule).

    References
    ----------
    .. [1] EN 1993-1-9:2005, sec. 7.2.1(2) and Fig. 7.1 note (reduced
       effective stress range where part or all of the cycle is
       compressive).
    .. [2] DNV-RP-C203, *Fatigue design of offshore steel structures*, DNV GL,
       2016, sec. 2.5 (mean stress effect); entered without the text at
       hand, check against the edition in use.
    """
    a = np.asarray(stress_amplitude, dtype=np.float64)
    m = np.asarray(stress_mean, dtype=np.float64)
    hi, lo = m + a, m - a
    tension = np.maximum(hi, 0.0) - np.maximum(lo, 0.0)
    compression = np.minimum(hi, 0.0) - np.minimum(lo, 0.0)
    return 0.5 * (tension + compression_factor * compression)


#: IIW enhancement cases: (c0, f_max) of f(R) = min(max(c0 - 0.4 R, 1), f_max).
IIW_ENHANCEMENT = {1: (1.2, 1.6), 2: (0.9, 1.3)}


def iiw_enhancement_factor(stress_amplitude, stress_mean, case: int):
    r"""
    The IIW enhancement factor :math:`f(R)` of each cycle. [-]

    :math:`R = \sigma_{min}/\sigma_{max}`. Case 1 (base material and wrought
    products with negligible residual stress, stress-relieved welded
    components): 1.6 for :math:`R < -1`, :math:`1.2 - 0.4R` for :math:`-1
    \le R \le 0.5`, 1 above. Case 2 (small thin-walled simple elements with
    short welds, thermally cut edges): 1.3, :math:`0.9 - 0.4R` for :math:`-1
    \le R \le -0.25`, 1 above. Case 3 (complex welded components, high
    residual stress) is no enhancement (``none``). A cycle with no tensile
    peak (:math:`\sigma_{max} \le 0`) is taken as :math:`R < -1`, the most
    compressive case (common practice).

    References
    ----------
    .. [1] A. Hobbacher, *Recommendations for Fatigue Design of Welded Joints
       and Components*, IIW document XIII-2460-13, 2nd ed. Springer, 2016,
       sec. 3.5.2 (enhancement factor f(R) for low residual stress); entered
       without the text at hand, check against the edition in use.
    """
    c0, f_max = IIW_ENHANCEMENT[int(case)]
    a = np.asarray(stress_amplitude, dtype=np.float64)
    m = np.asarray(stress_mean, dtype=np.float64)
    hi, lo = m + a, m - a
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.where(hi > 0.0, lo / np.where(hi > 0.0, hi, 1.0), -2.0)
    return np.minimum(np.maximum(c0 - 0.4 * r, 1.0), f_max)


def iiw_enhancement(stress_amplitude, stress_mean, case):
    r"""
    Equivalent amplitude with the IIW enhancement: :math:`\sigma_a / f(R)`
    (the FAT class raised by :math:`f(R)`, :func:`iiw_enhancement_factor`). [MPa]
    """
    a = np.asarray(stress_amplitude, dtype=np.float64)
    return a / iiw_enhancement_factor(a, stress_mean, case)


def check_haigh(points) -> tuple:
    """A Haigh diagram's points ``[[mean, amplitude], ...]`` [MPa], checked:
    at least two, means increasing, amplitudes positive (the last may be 0,
    the static limit), reaching zero amplitude (itself or by extending its
    last segment) only at a tensile mean. Returns them as a tuple of pairs."""
    try:
        pts = tuple((float(m), float(a)) for m, a in points)
    except (TypeError, ValueError):
        raise InvalidParameter("haigh_diagram points must be [[mean, amplitude], ...] in MPa",
                               field="haigh_diagram") from None
    if len(pts) < 2 or len(pts) > 64:
        raise InvalidParameter("a Haigh diagram needs 2 to 64 points", field="haigh_diagram")
    means = [m for m, _ in pts]
    amps = [a for _, a in pts]
    if not all(np.isfinite(means)) or not all(np.isfinite(amps)):
        raise InvalidParameter("Haigh diagram values must be finite", field="haigh_diagram")
    if any(b <= a for a, b in zip(means, means[1:])):
        raise InvalidParameter("Haigh diagram means must increase", field="haigh_diagram")
    if any(a <= 0 for a in amps[:-1]) or amps[-1] < 0:
        raise InvalidParameter("Haigh diagram amplitudes must be positive (the last may be 0)",
                               field="haigh_diagram")
    if haigh_zero_mean(pts) <= 0:
        raise InvalidParameter("the Haigh diagram must reach zero amplitude at a tensile mean",
                               field="haigh_diagram")
    return pts


def haigh_zero_mean(points) -> float:
    """The mean at which the diagram (its last segment extended) reaches zero
    amplitude: a cycle at or beyond it is a static failure. [MPa]"""
    (m1, a1), (m2, a2) = points[-2], points[-1]
    if a2 == 0.0:
        return m2
    slope = (a2 - a1) / (m2 - m1)
    return m2 - a2 / slope if slope < 0 else np.inf


def haigh_amplitude(points, mean) -> np.ndarray:
    """The diagram's amplitude at each ``mean``: linear between points, held
    below the first (no benefit beyond the data), the last segment extended
    above the last (to zero). [MPa]"""
    m = np.asarray([p[0] for p in points])
    a = np.asarray([p[1] for p in points])
    x = np.asarray(mean, dtype=np.float64)
    inside = np.interp(x, m, a)
    slope = (a[-1] - a[-2]) / (m[-1] - m[-2])
    return np.where(x > m[-1], a[-1] + slope * (x - m[-1]), inside)


def haigh_reference(points, stress_ratio: float) -> float:
    r"""The diagram's amplitude at the stress ratio R of the S-N curve it is
    used with: where the line :math:`\sigma_m = \kappa\sigma_a`,
    :math:`\kappa = (1+R)/(1-R)`, meets it (R = -1: at zero mean). [MPa]"""
    if not -np.inf < stress_ratio < 1.0:
        raise InvalidParameter("the Haigh diagram's stress_ratio must be below 1",
                               field="haigh_stress_ratio", value=stress_ratio)
    kappa = (1.0 + stress_ratio) / (1.0 - stress_ratio)
    # A(kappa a) - a falls from A(0) > 0 as a grows: bisect it.
    lo, hi = 0.0, max(p[1] for p in points) * 1.0001
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if float(haigh_amplitude(points, kappa * mid)) > mid:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def haigh(stress_amplitude, stress_mean, points, reference_amplitude):
    r"""
    Equivalent amplitude from a user's Haigh diagram (constant-life line
    through test points): :math:`\sigma_{eq} = \sigma_a\,A_{ref}/A(\sigma_m)`,
    with :math:`A` the diagram's amplitude at the cycle's mean and
    :math:`A_{ref}` its amplitude at the curve's stress ratio
    (:func:`haigh_reference`); ``inf`` (static) where :math:`A \le 0`. The
    constant-life lines of other lives are taken as the same shape scaled
    (the normalised Haigh diagram; common practice). [MPa]
    """
    a = np.asarray(stress_amplitude, dtype=np.float64)
    amp_at = haigh_amplitude(points, stress_mean)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(amp_at > 0.0, a * reference_amplitude / np.where(amp_at > 0, amp_at, 1.0),
                       np.inf)
    return np.where(a == 0.0, 0.0, out)


#: Code rules whose parameter is fixed by the code, not a material value.
FIXED_PARAMETERS = {"en1993_reduced_compression": 0.6, "dnv_base_material": 0.6,
                    "dnv_stress_relieved": 0.8, "iiw_enhancement_case1": 1.0,
                    "iiw_enhancement_case2": 2.0}

#: name -> (function, the strength parameter it needs or None)
MEAN_STRESS_METHODS = {
    "none": (none, None),
    "goodman": (goodman, "ultimate_strength"),
    "gerber": (gerber, "ultimate_strength"),
    "soderberg": (soderberg, "yield_strength"),
    "morrow": (morrow, "fatigue_strength_coefficient"),
    "smith_watson_topper": (smith_watson_topper, None),
    "walker": (walker, "walker_exponent"),
    "asme_elliptic": (asme_elliptic, "yield_strength"),
    "en1993_reduced_compression": (reduced_compression, None),
    "dnv_base_material": (reduced_compression, None),
    "dnv_stress_relieved": (reduced_compression, None),
    "iiw_enhancement_case1": (iiw_enhancement, None),
    "iiw_enhancement_case2": (iiw_enhancement, None),
    "haigh": (haigh, "haigh_diagram"),
}

#: The codes' own rules for welded and base-material details (their curves
#: are used with them; the other methods scale a material curve).
CODE_RULES = tuple(FIXED_PARAMETERS)

# Methods that take a compressive mean through the policy (their formula
# is written in the mean itself; SWT and Walker work on the peak).
MEAN_BASED_METHODS = ("goodman", "gerber", "soderberg", "morrow", "asme_elliptic")


def clips_compressive_mean(method: str, compressive_mean: str) -> bool:
    """Whether a compressive mean counts as zero under the policy.

    ``no_benefit`` and ``zero`` both do, for every mean-based method: a
    compressive mean neither lowers the amplitude (Goodman, Soderberg,
    Morrow as written) nor raises it (Gerber and the ASME ellipse are even
    in the mean, and would penalise compression as much as tension).
    """
    return method in MEAN_BASED_METHODS and compressive_mean in ("no_benefit", "zero")


def check_strengths(ultimate_strength=None, yield_strength=None,
                    fatigue_strength_coefficient=None, walker_exponent=None) -> None:
    """Raise :class:`InvalidParameter` for impossible material values."""
    for name, value in (("ultimate_strength", ultimate_strength),
                        ("yield_strength", yield_strength),
                        ("fatigue_strength_coefficient", fatigue_strength_coefficient)):
        if value is not None and (not np.isfinite(value) or value <= 0):
            raise InvalidParameter(f"{name} {value} MPa must be positive and finite",
                                   field=name, value=value, limit=0.0)
        if value is not None:
            check_strength(value, name)
    if (ultimate_strength is not None and yield_strength is not None
            and yield_strength > ultimate_strength):
        raise InvalidParameter(
            f"yield_strength {yield_strength} MPa exceeds ultimate_strength "
            f"{ultimate_strength} MPa", field="yield_strength", value=yield_strength,
            limit=ultimate_strength)
    if walker_exponent is not None and not (0.0 < walker_exponent <= 1.0):
        raise InvalidParameter(f"walker_exponent {walker_exponent} must be in (0, 1]",
                               field="walker_exponent", value=walker_exponent,
                               limit=[0.0, 1.0])


def equivalent_amplitude(stress_amplitude, stress_mean, method: str = "goodman", *,
                         ultimate_strength: float | None = None,
                         yield_strength: float | None = None,
                         fatigue_strength_coefficient: float | None = None,
                         walker_exponent: float | None = None,
                         compressive_mean: str = "no_benefit",
                         haigh_diagram=None, haigh_stress_ratio: float = -1.0):
    """
    Equivalent fully reversed amplitude by a method chosen at run time.

    Parameters
    ----------
    stress_amplitude, stress_mean : array-like
        Amplitude and mean of each cycle. [MPa]
    method : str
        A key of :data:`MEAN_STRESS_METHODS`.
    ultimate_strength, yield_strength, fatigue_strength_coefficient : float
        Strengths, as the method needs them. [MPa]
    walker_exponent : float
        Walker's gamma, for ``walker``. [-]
    compressive_mean : {"no_benefit", "zero", "formula"}
        ``no_benefit`` (default, common practice): a compressive mean
        counts as zero for every mean-based method, so it neither helps
        (Goodman, Soderberg, Morrow as written) nor hurts (Gerber and the
        ASME ellipse, which are even in the mean). ``zero`` is the same
        rule under its older name. ``formula``: the equations as written.
        Smith-Watson-Topper and Walker work on the peak stress and are not
        affected.

    Returns
    -------
    (amplitude, overload) : (ndarray, ndarray of bool)
        Equivalent amplitude [MPa] (``inf`` at breakdown) and, per cycle,
        whether it is a static overload: past the model's breakdown, or
        a peak above ``ultimate_strength`` where that is given.

    Raises
    ------
    UnknownMethod
        Unknown ``method`` or ``compressive_mean`` (the valid names are listed).
    InvalidParameter
        A strength the method needs is missing, or a strength is impossible.
    """
    if method not in MEAN_STRESS_METHODS:
        raise unknown("mean_stress_method", method, MEAN_STRESS_METHODS)
    if compressive_mean not in COMPRESSIVE_MEAN_POLICIES:
        raise unknown("compressive_mean", compressive_mean, COMPRESSIVE_MEAN_POLICIES)
    check_strengths(ultimate_strength, yield_strength, fatigue_strength_coefficient,
                    walker_exponent)
    func, needs = MEAN_STRESS_METHODS[method]
    params = {"ultimate_strength": ultimate_strength, "yield_strength": yield_strength,
              "fatigue_strength_coefficient": fatigue_strength_coefficient,
              "walker_exponent": walker_exponent, "haigh_diagram": haigh_diagram}
    if haigh_diagram is not None:
        haigh_diagram = check_haigh(haigh_diagram)
    if needs is not None and params[needs] is None:
        unit = {"walker_exponent": "", "haigh_diagram": " (points [[mean, amplitude], ...] "
                "in MPa)"}.get(needs, " (MPa)")
        raise InvalidParameter(f"mean_stress_method {method!r} needs {needs}{unit}",
                               field=needs)
    amp = np.asarray(stress_amplitude, dtype=np.float64)
    mean = np.asarray(stress_mean, dtype=np.float64)
    used_mean = mean
    if clips_compressive_mean(method, compressive_mean):
        used_mean = np.maximum(mean, 0.0)
    if method == "haigh":
        out = haigh(amp, mean, haigh_diagram, haigh_reference(haigh_diagram,
                                                               float(haigh_stress_ratio)))
    elif method in FIXED_PARAMETERS:
        out = func(amp, used_mean, FIXED_PARAMETERS[method])
    else:
        out = func(amp, used_mean, params[needs]) if needs else func(amp, used_mean)
    overload = ~np.isfinite(out)
    if ultimate_strength is not None:
        overload |= (mean + amp) > ultimate_strength
    out = np.where(overload, np.inf, out)
    return out, overload
