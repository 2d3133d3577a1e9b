r"""Normal and shear stress in a weld combined by the codes' interaction rules.

A weld loaded across (normal stress :math:`\sigma`, on a normal-stress detail
curve) and along (shear :math:`\tau`, on a shear curve) at once is checked by
counting and assessing each stress history on its own curve and combining
the two results. With the damage-equivalent ranges at 2e6 cycles taken from
each part's damage on its curve's slope there (:math:`\Delta\sigma_{E,2} =
\Delta\sigma_C D_\sigma^{1/m_\sigma}`, see ``miner.py``), each ratio
:math:`(\Delta\sigma_{E,2}/\Delta\sigma_C)^{m}` is the part's Miner sum, so
the rules read, with :math:`u = D/D_{allowable}` the usage of each part:

``en1993-1-9``
    :math:`(\gamma_{Ff}\Delta\sigma_{E,2}/(\Delta\sigma_C/\gamma_{Mf}))^3 +
    (\gamma_{Ff}\Delta\tau_{E,2}/(\Delta\tau_C/\gamma_{Mf}))^5 \le 1`, i.e.
    :math:`u_\sigma + u_\tau \le 1` for the codes' slopes 3 and 5 [1]_
    (the partial factors are the point's ``load_factor`` and
    ``strength_factor``, already in each damage).
``iiw``
    Gough-Pollard: :math:`(\Delta\sigma/\Delta\sigma_R)^2 +
    (\Delta\tau/\Delta\tau_R)^2 \le CV`, and for spectra the same with the
    damage sums, :math:`u_\sigma^{2/m_\sigma} + u_\tau^{2/m_\tau} \le CV`;
    the comparison value CV is 1.0 for proportional and 0.5 for
    non-proportional loading of steel [2]_. Proportionality is taken from
    the point's principal rotation (``planes.ROTATION_WARNING_DEG``) unless
    the user sets the loading or CV.

Life follows the rule: the repeats :math:`k` of the recording at which the
left side reaches the limit (for ``en1993-1-9`` :math:`k = 1/(u_\sigma +
u_\tau)`; for ``iiw`` the root of :math:`(k u_\sigma)^{2/m_\sigma} + (k
u_\tau)^{2/m_\tau} = CV`, unique since the left side increases with
:math:`k`).

References
----------
.. [1] EN 1993-1-9:2005, Eurocode 3: Design of steel structures - Part 1-9:
   Fatigue, sec. 8(3), eq. (8.3) (combined stress ranges in welds).
.. [2] A. Hobbacher, *Recommendations for Fatigue Design of Welded Joints
   and Components*, IIW document XIII-2460-13, 2nd ed. Springer, 2016,
   combined normal and shear stress (Gough-Pollard interaction with the
   comparison value CV); entered without the text at hand, check against
   the edition in use.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .cautions import Caution, caution
from .errors import InvalidParameter, unknown

#: Interaction rules offered for normal and shear stress in welds.
SHEAR_INTERACTION_RULES = ("en1993-1-9", "iiw")
#: How the loading is taken for the IIW comparison value.
LOADINGS = ("auto", "proportional", "non_proportional")
#: Components that can be the normal stress across the weld (the shear is sxy).
NORMAL_COMPONENTS = ("sxx", "syy")
#: IIW comparison values for steel. [-]
IIW_CV = {"proportional": 1.0, "non_proportional": 0.5}


def interaction_value(rule: str, u_sigma: float, u_tau: float, m_sigma: float,
                      m_tau: float) -> float:
    """The left side of the rule from the usages of the two parts. [-]"""
    if rule == "en1993-1-9":
        return u_sigma + u_tau
    if rule == "iiw":
        return u_sigma ** (2.0 / m_sigma) + u_tau ** (2.0 / m_tau)
    raise unknown("shear_interaction", rule, SHEAR_INTERACTION_RULES)


def repeats_to_limit(rule: str, u_sigma: float, u_tau: float, m_sigma: float, m_tau: float,
                     limit: float) -> float:
    """Repeats of the recording until the left side reaches ``limit`` (inf
    when neither part takes damage, 0 for a static overload). [-]"""
    if not (math.isfinite(u_sigma) and math.isfinite(u_tau)):
        return 0.0
    if u_sigma <= 0.0 and u_tau <= 0.0:
        return math.inf
    if rule == "en1993-1-9":
        return limit / (u_sigma + u_tau)

    def excess(log_k: float) -> float:
        k = math.exp(log_k)
        return interaction_value(rule, k * u_sigma, k * u_tau, m_sigma, m_tau) - limit

    # Bracket the root in log k, then bisect (the left side is monotonic).
    lo, hi = -1.0, 1.0
    while excess(lo) > 0.0:
        lo -= 2.0 * abs(lo)
    while excess(hi) < 0.0:
        hi += 2.0 * abs(hi)
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if excess(mid) > 0.0:
            hi = mid
        else:
            lo = mid
        if hi - lo < 1e-13:
            break
    return math.exp(0.5 * (lo + hi))


@dataclass(frozen=True)
class Interaction:
    """The interaction check of a weld under normal and shear stress.

    ``normal`` and ``shear`` are the two parts'
    :class:`~service.engine.assessment.PointAssessment`; ``value`` [-] the
    left side of the rule for the recording, ``limit`` [-] its right side,
    ``life_repeats`` [-] the repeats at which they meet.
    """

    rule: str
    normal_component: str
    normal: object
    shear: object
    usage_normal: float
    usage_shear: float
    value: float
    limit: float
    loading: str
    life_repeats: float
    duration_s: float | None
    cautions: tuple = ()

    @property
    def passed(self) -> bool:
        return self.value <= self.limit

    def summary(self) -> dict:
        def part(r, usage):
            return {"damage": r.damage, "usage": usage, "equivalent_range": r.equivalent_range,
                    "equivalent_slope": r.equivalent_slope,
                    "equivalent_cycles": r.equivalent_cycles, "curve": r.curve["name"],
                    "cycles_counted": r.cycles_counted, "max_range": r.max_range}
        hours = (self.life_repeats * self.duration_s / 3600.0
                 if self.duration_s and math.isfinite(self.life_repeats) else
                 (math.inf if self.duration_s else None))
        return {"rule": self.rule, "normal_component": self.normal_component,
                "normal": part(self.normal, self.usage_normal),
                "shear": part(self.shear, self.usage_shear),
                "value": self.value, "limit": self.limit, "loading": self.loading,
                "passed": self.passed, "life_repeats": self.life_repeats,
                "life_hours": hours}


def check(rule: str, normal_part, shear_part, *, normal_component: str = "sxx",
          non_proportional: bool = False, loading: str = "auto",
          comparison_value: float | None = None,
          duration_s: float | None = None) -> Interaction:
    """
    Combine the assessed normal and shear parts of a weld by ``rule``.

    Parameters
    ----------
    rule : str
        One of :data:`SHEAR_INTERACTION_RULES`.
    normal_part, shear_part : PointAssessment
        The normal stress history on a normal-stress curve and the shear
        stress history on a shear curve, assessed with their options
        (partial factors, allowable damage).
    normal_component : str
        Which component is the normal stress across the weld (reported).
    non_proportional : bool
        From the point's principal rotation; used when ``loading`` is auto.
    loading : str
        ``auto``, ``proportional`` or ``non_proportional`` (IIW's CV).
    comparison_value : float, optional
        IIW's CV set by the user (another material, or the code's text).
    duration_s : float, optional
        Duration of the recording, for the life in hours. [s]
    """
    if rule not in SHEAR_INTERACTION_RULES:
        raise unknown("shear_interaction", rule, SHEAR_INTERACTION_RULES)
    if loading not in LOADINGS:
        raise unknown("loading", loading, LOADINGS)
    kind = ("non_proportional" if non_proportional else "proportional") \
        if loading == "auto" else loading
    notes: list[Caution] = []
    if rule == "iiw":
        limit = IIW_CV[kind] if comparison_value is None else float(comparison_value)
    else:
        if comparison_value is not None:
            raise InvalidParameter("comparison_value belongs to the iiw rule; EN 1993-1-9 "
                                   "limits its sum to 1", field="comparison_value",
                                   value=comparison_value)
        limit = 1.0
        if kind == "non_proportional":
            notes.append(caution("interaction_non_proportional_en"))
    u_s = normal_part.damage / float(normal_part.options.get("allowable_damage", 1.0))
    u_t = shear_part.damage / float(shear_part.options.get("allowable_damage", 1.0))
    m_s, m_t = normal_part.equivalent_slope, shear_part.equivalent_slope
    value = (math.inf if not (math.isfinite(u_s) and math.isfinite(u_t))
             else interaction_value(rule, u_s, u_t, m_s, m_t))
    life = repeats_to_limit(rule, u_s, u_t, m_s, m_t, limit)
    notes.append(caution("shear_interaction", rule=_RULE_NAMES[rule], value=value, limit=limit,
                         loading=kind.replace("_", "-")))
    if not value <= limit:
        notes.append(caution("shear_interaction_exceeded", value=value, limit=limit))
    return Interaction(rule, normal_component, normal_part, shear_part, u_s, u_t, value, limit,
                       kind, life, duration_s, tuple(notes))


_RULE_NAMES = {"en1993-1-9": "EN 1993-1-9:2005 sec. 8(3), eq. (8.3)",
               "iiw": "the IIW recommendations' Gough-Pollard rule (2016; check against the "
                      "edition in use)"}
