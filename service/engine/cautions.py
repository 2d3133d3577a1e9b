"""Cautions: a stable machine code and a sentence for people.

Every caution a result can carry is listed in :data:`CAUTION_TEXTS` under a
code that never changes meaning (clients may match on it); the sentence may
be reworded. :func:`caution` fills a template with this occurrence's
numbers. :func:`merge` gathers the cautions of many points into one list,
each once, naming the points it concerns.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

from .errors import unknown

_CHECK = "check against the edition in use"

#: code -> sentence template (``str.format`` fields are this occurrence's values).
CAUTION_TEXTS = {
    # Shown with every result.
    "estimate_scatter": "Fatigue lives scatter by a factor of several; this is an estimate, to "
                        "be confirmed by test.",
    "method_choice": "The result depends on the chosen S-N curve, mean-stress method and "
                     "factors; check them against the applicable code.",
    "engineer_sign_off": "Decisions on safety need the judgment and sign-off of a qualified "
                         "engineer.",
    # From flags.
    "static_overload": "At least one cycle reaches the static strength: this is not a fatigue "
                       "problem; damage is infinite and life zero.",
    "below_fatigue_limit": "Every cycle is below the curve's limit or cut-off: no damage is "
                           "predicted, which holds only if the curve's limit holds for this "
                           "detail and loading.",
    "no_cycles": "The history has no cycles (constant, or everything under the gate).",
    "low_cycle_regime": "Some cycles fail in under 1e4 cycles, where stress-based life "
                        "estimates lose accuracy (plasticity); consider a strain-life method.",
    # Static strength.
    "above_yield": "The largest peak stress, {peak:.4g} MPa (load factor included), exceeds the "
                   "yield strength {yield_strength:.4g} MPa: the point yields, and elastic "
                   "stress-life results do not hold there.",
    "range_above_static_limit": "The largest stress range, {range:.4g} MPa (load factor "
                                "included), exceeds {limit:.4g} MPa ({rule}), the limit "
                                "EN 1993-1-9:2005 sec. 8(1) sets before its fatigue curves "
                                "apply ({check}).",
    "yield_not_checked": "The yield strength (yield_strength) was not given: peak stresses were "
                         "not checked against yield{extra}.",
    "reserve_limited_by_static_strength": "The reserve factor {reserve:.4g} is set by static "
                                          "strength (a peak reaches the ultimate strength or "
                                          "the mean-stress correction breaks down), not by "
                                          "fatigue.",
    # Method and curve.
    "mean_stress_on_welded_curve": "A mean-stress correction ({method}) is applied to a code's "
                                   "curve for welded details, which already contains high "
                                   "residual stress; the codes assess as-welded joints on "
                                   "stress range alone (mean_stress_method none).",
    "tensile_mean_uncorrected": "{share:.0%} of the damage comes from cycles with a tensile "
                                "mean, but the curve is for fully reversed loading (R = -1) "
                                "and no mean-stress correction is applied: life may be "
                                "overestimated.",
    "below_limit_damage": "{share:.0%} of the damage, with the curve continued below its "
                          "fatigue limit ({limit:.4g} MPa) by Haibach's slope, comes from "
                          "{cycles_share:.0%} of the cycles that lie below that limit; the curve "
                          "in use gives them {kept:.0%} of it.",
    "residue_share": "The open residue (the half cycles left at the end) carries {share:.0%} of "
                     "the damage of one pass: the recording is short for its largest cycles; "
                     "life in repeats closes the residue as the repetition would.",
    "estimate_not_steel": "The tensile-data estimate is made for steels; this material class "
                          "has no true endurance limit, so the line is continued without a "
                          "cut-off. Use fatigue test data for this material.",
    "curve_note": "{note}",
    # Multiaxial.
    "non_proportional": "The principal directions turn by {rotation:.0f} deg (above {limit:g}): "
                        "the loading is non-proportional and a scalar equivalent stress may be "
                        "unconservative; the critical-plane result is the better guide.",
    "sign_ambiguous": "For {share:.0%} of the damage of the {reduction} history the sign of "
                      "the equivalent stress is ambiguous (the stress state has little "
                      "normal stress along the reference direction): the counted ranges "
                      "there depend on the sign rule; compare with the critical plane.",
    # Superposition and ledger.
    "superposition_linear": "Superposition assumes the structure responds linearly to each load "
                            "case (no contact, plasticity or large deflection); check the "
                            "unit-load model.",
    "projection_assumes_same_loads": "Projections assume the future loads like the recorded "
                                     "ones.",
    # Signal screening.
    "signal_findings": "Signal screening flagged this point's recording ({kinds}){share}: the "
                       "faults are counted as if they were load unless cleaned; check the "
                       "gauge and the recording before trusting the damage.",
    "signal_cleaned": "The signal was cleaned before counting ({done}); the damage before "
                      "cleaning was {before:.4g}. Faults that cannot be cleaned (clipping, held "
                      "runs, undersampling) stay in the signal.",
    # Hot-spot points (engine/hot_spot.py).
    "hot_spot_extrapolated": "The hot-spot stress is extrapolated to the weld toe from gauges at "
                             "{positions} by the {method} rule (weights {weights}; IIW "
                             "recommendations 2016 sec. 2.2.3, DNV-RP-C203 sec. 4.3, " + _CHECK
                             + "); gauges read as uniaxial (sigma = E epsilon), which holds "
                             "where the stress along the weld is small.",
    "hot_spot_gauge_position": "Gauges of the {method} hot-spot rule sit away from their "
                               "reference points by more than {tolerance}: {where}; the "
                               "extrapolation uses the positions given, exact only for the "
                               "field shape the rule assumes.",
    "hot_spot_gauge_in_notch": "The gauge nearest the toe is at {position}, closer than "
                               "{nearest}: it may read the weld's own notch stress, which the "
                               "hot-spot curves already contain.",
    "hot_spot_curve": "The hot-spot stress is assessed on {curve}, which is not a structural "
                      "hot-spot curve (IIW FAT 90 or 100, EN 1993-1-9 Annex B categories 90 "
                      "and 100, DNV-RP-C203 curve D): check the curve against the joint.",
    # Normal and shear in welds (engine/weld_interaction.py).
    "shear_interaction": "Normal and shear stress combined by {rule} for {loading} loading: "
                         "{value:.4g} against {limit:g} for the recording.",
    "shear_interaction_exceeded": "The combined normal and shear check gives {value:.4g}, "
                                  "beyond its limit {limit:g}, although each part may pass "
                                  "alone.",
    "interaction_non_proportional_en": "The principal directions turn (non-proportional "
                                       "loading): EN 1993-1-9's sum of the two parts may be "
                                       "unconservative there; the IIW rule lowers its limit "
                                       "for such loading.",
    # Thickness (engine/sn_catalogue.thickness_correction).
    "thickness_correction": "Stress ranges multiplied by the thickness factor {factor:.4g} "
                            "((t_eff/t_ref)^n with t = {t:g} mm, t_eff = {t_eff:.4g} mm, t_ref "
                            "= {t_ref:g} mm, n = {n:g}; {source}).",
    # Strain-life (engine/strain_life.py).
    "strain_life_method": "Assessed by the local strain approach: {input} input{rule}, Masing "
                          "branches with material memory, Coffin-Manson-Basquin with {mean}; "
                          "material: {source}.",
    "strain_life_estimate": "The strain-life constants are an {source}: lives from such "
                            "estimates scatter by a factor of several; use test data for "
                            "decisions.",
    "strain_life_short_lives": "{count} loop(s) have lives below {limit:g} reversals (the "
                               "shortest {least:.3g}): the notch's ductility is used up within "
                               "a few cycles, beyond the strain-controlled test data the "
                               "Coffin-Manson-Basquin constants come from; treat them as a "
                               "static failure risk and check by test or plastic analysis.",
    "strain_life_incompatible": "The cyclic stress-strain curve and the strain-life curve "
                                "give stress amplitudes {gap:+.0%} apart at the largest loop's "
                                "plastic strain amplitude ({strain:.2g}): the constants were "
                                "not fitted together (Morrow's compatibility n' = b/c = "
                                "{ratio:.3g}, here n' = {n:.3g}), so the local stresses and the "
                                "lives disagree; check the material data.",
    "strain_life_long_lives": "{share:.0%} of the damage is in loops with lives above "
                              "{limit:.0e} reversals, longer than strain-controlled tests usually "
                              "run: there the curve is extrapolated along its elastic line, with "
                              "no endurance limit; check the material data's test range.",
    "haigh_ratio_mismatch": "The Haigh diagram is referred to R = {diagram:g}, but the S-N "
                            "curve is for R = {curve:g}: set haigh_stress_ratio to the curve's "
                            "ratio, or the correction shifts every cycle.",
    # Duty cycles (engine/duty_cycle.py).
    "duty_cycle_order": "Cycles formed between events carry {share:.0%} of the design damage; "
                        "they depend on the order of the events, taken as listed ({order}); "
                        "in service the order may differ.",
    "duty_cycle_governing": "Each event's own governing history of this multiaxial or hot-spot "
                            "point is combined; where the governing reduction or plane differs "
                            "between events ({which}), the combination mixes planes.",
    "duty_cycle_short_event": "The event {event!r} is {repeats:.3g} repeats of its recording: "
                              "fewer than one pass scales its cycles, which holds only if "
                              "the part of the recording used is like the whole.",
    "rig_field_same_curve": "The rig-field ratio holds for the curve and settings given: "
                            "damage ratios change with the S-N slope, and a rig that loads "
                            "in another way (frequency, mean, direction) tests something "
                            "else.",
    "extrapolation_extremes": "The extrapolation expects {above:.3g} cycles above the largest "
                              "recorded range ({top:.4g} MPa) over {factor:g} times the usage, "
                              "from the way the recorded cycles fall off; real extremes come "
                              "from events a recording may not hold (misuse, faults, rare "
                              "manoeuvres): check the largest loads the part must survive "
                              "apart.",
    # Spectral methods (engine/spectral.py).
    "spectral_gaussian": "Spectral methods assume a stationary Gaussian stress of zero mean (a "
                         "static mean taken apart): transients, shocks, clipped or peaky "
                         "signals and tests that change over time need counting of a time "
                         "history.",
    "wirsching_light_slope": "Wirsching and Light's factor is for one slope: on this curve "
                             "with knees it is taken at the first slope (m = {slope:g}).",
    "zhao_baker_coefficients": "Zhao and Baker's coefficients were entered without the paper "
                               "at hand (check against the paper); on this project's test "
                               "spectra they overestimate the counted damage, by up to a "
                               "factor of 2 on bimodal spectra.",
    "spectral_not_applicable": "{method} is not applied: {why}.",
    "non_gaussian": "The history of load case {case!r} has skewness {skew:.2g} and kurtosis "
                    "{kurtosis:.3g} (a Gaussian has 0 and 3): spectral damage may be far off; "
                    "compare with the time-domain damage given.",
    # Edited drive signals (engine/editing.py).
    "edit_scope": "The edited signal keeps the damage on the curves and settings given; another "
                  "curve, slope or mean-stress treatment weighs the removed cycles differently, "
                  "and the joins change the frequency content: check the rig's response to "
                  "the edited drive before relying on it.",
    "edit_peak_valley": "Peak-valley reduction keeps the turning points, not the time between "
                        "them: the rig's waveform and rate set the loading speed, which matters "
                        "for resonances and rate-sensitive materials.",
    "edit_short": "A channel keeps {kept:.1%} of its damage, less than the {keep:.0%} asked: "
                  "the recording could not be cut further without losing more.",
    # Inputs.
    "implausible_value": "The value {field} = {value:.6g} {unit} is unusual for {what}; {hint}.",
}

#: The three cautions every result carries.
GENERAL_CODES = ("estimate_scatter", "method_choice", "engineer_sign_off")

#: Severity of each caution, in the order lists show them: ``critical`` (the
#: number is not a fatigue result, or the part does not stay elastic),
#: ``warning`` (the result may be wrong by a large factor: check before use),
#: ``general`` (true of every result), ``note`` (how the result was made).
SEVERITIES = ("critical", "warning", "general", "note")
_SEVERITY = {
    "static_overload": "critical", "above_yield": "critical",
    "range_above_static_limit": "critical", "reserve_limited_by_static_strength": "critical",
    "below_limit_damage": "warning", "tensile_mean_uncorrected": "warning",
    "mean_stress_on_welded_curve": "warning", "sign_ambiguous": "warning",
    "non_proportional": "warning", "signal_findings": "warning", "residue_share": "warning",
    "implausible_value": "warning", "estimate_not_steel": "warning",
    "hot_spot_gauge_position": "warning", "hot_spot_gauge_in_notch": "warning",
    "hot_spot_curve": "warning", "shear_interaction_exceeded": "warning",
    "interaction_non_proportional_en": "warning", "strain_life_estimate": "warning",
    "strain_life_short_lives": "critical", "strain_life_long_lives": "warning",
    "strain_life_incompatible": "warning",
    "haigh_ratio_mismatch": "warning", "duty_cycle_order": "warning",
    "duty_cycle_governing": "warning", "edit_short": "warning",
    "extrapolation_extremes": "warning", "non_gaussian": "warning",
    "zhao_baker_coefficients": "warning", "spectral_not_applicable": "warning",
    "low_cycle_regime": "warning", "below_fatigue_limit": "warning",
    "yield_not_checked": "warning",
    "estimate_scatter": "general", "method_choice": "general", "engineer_sign_off": "general",
}


def severity(code: str) -> str:
    """The severity of a caution code (``note`` unless listed)."""
    return _SEVERITY.get(code, "note")


@dataclass(frozen=True)
class Caution:
    """One caution: its stable ``code`` and the sentence ``text``."""

    code: str
    text: str

    def as_dict(self) -> dict:
        return {"code": self.code, "severity": severity(self.code), "text": self.text}


def caution(code: str, **values) -> Caution:
    """The caution ``code`` with its sentence filled from ``values``."""
    try:
        return _cached(code, tuple(sorted(values.items())))
    except TypeError:  # a value that cannot be a cache key
        return _make(code, values)


@functools.lru_cache(maxsize=1024)
def _cached(code: str, items: tuple) -> Caution:
    # Most cautions repeat with the same values point after point.
    return _make(code, dict(items))


def _make(code: str, values: dict) -> Caution:
    if code not in CAUTION_TEXTS:
        raise unknown("caution", code, CAUTION_TEXTS)
    values.setdefault("check", _CHECK)
    text = CAUTION_TEXTS[code].format(**values)
    return Caution(code, text[:1].upper() + text[1:])  # sentence case, whatever fills it


#: The general cautions, as objects.
GENERAL = tuple(caution(c) for c in GENERAL_CODES)


def general() -> list[dict]:
    """The general cautions as plain dicts (``points`` empty: every point).

    Sentences are in sentence case; every code has a severity
    (:func:`severity`)."""
    return [{**c.as_dict(), "points": []} for c in GENERAL]


def as_dict(value) -> dict:
    """A caution as a dict: a :class:`Caution`, a dict already, or the plain
    sentence stored by an older version (code ``note``)."""
    if isinstance(value, Caution):
        return value.as_dict()
    if isinstance(value, dict):
        return {**value, "severity": value.get("severity") or severity(value["code"])}
    return {"code": "note", "severity": "note", "text": str(value)}


def unique(cautions) -> tuple:
    """``cautions`` with repeats (same code and text) removed, first kept."""
    seen = set()
    out = []
    for c in cautions:
        key = (c.code, c.text)
        if key not in seen:
            seen.add(key)
            out.append(c)
    return tuple(out)


def merge(per_point: dict) -> list[dict]:
    """One list for many points: ``{point: [caution dicts]}`` in, each
    caution once (by code and text) with the sorted ``points`` it concerns
    (the general ones concern every point: ``points`` empty), ordered by
    severity (:data:`SEVERITIES`), then as they first appear."""
    out: dict = {}
    for c in GENERAL:
        out[(c.code, c.text)] = {**c.as_dict(), "points": []}
    for name in sorted(per_point):
        for c in per_point[name]:
            key = (c["code"], c["text"])
            if key in out and not out[key]["points"] and c["code"] in GENERAL_CODES:
                continue
            out.setdefault(key, {**as_dict(c), "points": []})
            out[key]["points"].append(name)
    rank = {s: i for i, s in enumerate(SEVERITIES)}
    return sorted(out.values(), key=lambda c: rank[c["severity"]])
