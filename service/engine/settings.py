"""Point settings from plain dictionaries (JSON, CLI files, API bodies).

One function turns the settings of a measured point into the engine's
objects, so the CLI, the API and the ledger accept exactly the same fields
(the glossary names) and give the same errors.
"""

from __future__ import annotations

from dataclasses import fields

from .damage import AssessmentOptions
from .errors import EngineError, InvalidParameter, unknown
from .mean_stress import check_strengths
from .screening import SCREENING_POLICIES, Thresholds
from .sn_catalogue import catalogue_curve, thickness_correction
from .sn_curve import SNCurve, basquin_amplitude, basquin_range, from_points
from .sn_estimate import EstimatedCurve, shigley

_OPTION_FIELDS = {f.name for f in fields(AssessmentOptions)}
_CURVE_KEYS = {"curve", "estimate", "curve_points", "basquin", "below_limit", "thickness_mm",
               "thickness_exponent", "joint", "attachment_length_mm", "design_fatigue_factor"}
#: Settings of the signal screening (see ``screening_from_dict``).
_SCREENING_KEYS = {"screening", "screening_thresholds"}


def curve_from_dict(settings: dict) -> tuple[SNCurve, EstimatedCurve | None]:
    """The S-N curve a point's settings name, and the estimate if one was made.

    Exactly one of ``curve`` (a catalogue designation), ``estimate`` (tensile
    data for :func:`shigley`), ``curve_points`` (``{"cycles": [...],
    "stress": [...], "quantity": ...}``) or ``basquin`` (``{"slope",
    "intercept"}`` or ``{"fatigue_strength_coefficient",
    "fatigue_strength_exponent"}``) must be given. ``below_limit`` then
    applies a treatment of cycles below the fatigue limit.
    """
    given = [k for k in ("curve", "estimate", "curve_points", "basquin") if k in settings]
    if len(given) != 1:
        raise InvalidParameter(
            "give exactly one of curve, estimate, curve_points or basquin"
            + (f" (got {', '.join(given)})" if given else ""), field="curve")
    estimate = None
    kind = given[0]
    spec = settings[kind]
    try:
        if kind == "curve":
            curve = catalogue_curve(spec)
        elif kind == "estimate":
            estimate = shigley(**_mapping(spec, "estimate"))
            curve = estimate.curve
        elif kind == "curve_points":
            curve = from_points(**_mapping(spec, "curve_points"))
        elif "slope" in _mapping(spec, "basquin"):
            curve = basquin_range(**spec)
        else:
            curve = basquin_amplitude(**spec)
    except EngineError:
        raise
    except (TypeError, ValueError) as exc:
        # e.g. text where a number belongs, or arrays that do not fit
        raise InvalidParameter(f"{kind}: {exc}", field=kind) from exc
    if "below_limit" in settings:
        curve = curve.below_limit(settings["below_limit"])
    return curve, estimate


def _mapping(value, field: str) -> dict:
    if not isinstance(value, dict):
        raise InvalidParameter(f"{field} must be an object", field=field)
    return value


def options_from_dict(settings: dict, curve: SNCurve | None = None) -> AssessmentOptions:
    """:class:`AssessmentOptions` from the option fields of ``settings``.

    ``thickness_mm`` (with ``thickness_exponent``, ``joint`` and
    ``attachment_length_mm`` as the code needs them) sets
    ``thickness_factor`` by :func:`~.sn_catalogue.thickness_correction`.
    Unknown keys are refused, naming them, so a misspelt option never
    passes silently.
    """
    unknown_keys = set(settings) - _OPTION_FIELDS - _CURVE_KEYS - _SCREENING_KEYS
    if unknown_keys:
        raise InvalidParameter(f"unknown setting(s): {', '.join(sorted(unknown_keys))}",
                               field=sorted(unknown_keys)[0])
    kwargs = {k: v for k, v in settings.items() if k in _OPTION_FIELDS}
    extra = [k for k in ("thickness_exponent", "joint", "attachment_length_mm")
             if k in settings]
    if extra and "thickness_mm" not in settings:
        raise InvalidParameter(f"{extra[0]} belongs to a thickness correction: give "
                               f"thickness_mm too", field=extra[0])
    if "thickness_mm" in settings:
        if curve is None:
            raise InvalidParameter("thickness_mm applies to the codes' curves",
                                   field="thickness_mm")
        if "thickness_factor" in settings:
            raise InvalidParameter("give thickness_mm or thickness_factor, not both",
                                   field="thickness_factor")
        kwargs["thickness_factor"] = thickness_correction(
            curve.name, settings["thickness_mm"], exponent=settings.get("thickness_exponent"),
            joint=settings.get("joint"),
            attachment_length_mm=settings.get("attachment_length_mm")).factor
    if "design_fatigue_factor" in settings:
        dff = settings["design_fatigue_factor"]
        if "allowable_damage" in settings:
            raise InvalidParameter("give allowable_damage or design_fatigue_factor (which sets "
                                   "it to 1/DFF), not both", field="design_fatigue_factor")
        if isinstance(dff, bool) or not isinstance(dff, (int, float)) or not 1 <= dff <= 100:
            raise InvalidParameter(f"design_fatigue_factor {dff!r} must be a number from 1 to "
                                   f"100", field="design_fatigue_factor", value=dff)
        kwargs["allowable_damage"] = 1.0 / float(dff)
    try:
        return AssessmentOptions(**kwargs)
    except TypeError as exc:
        raise InvalidParameter(str(exc), field="options") from exc


#: How a point's life is assessed.
METHODS = ("stress_life", "strain_life")
#: Keys of a strain-life point's ``strain_life`` block.
STRAIN_LIFE_KEYS = {"material", "estimate", "input", "kt", "notch_rule", "mean_stress_method"}
#: Settings a strain-life point takes beside ``method`` and ``strain_life``.
_STRAIN_LIFE_OPTIONS = {"allowable_damage"} | _SCREENING_KEYS
#: A request's default settings a strain-life point takes over.
STRAIN_LIFE_SHARED = _STRAIN_LIFE_OPTIONS


def strain_life_from_dict(settings: dict):
    """``(material, params, opts)`` of a strain-life point's settings:
    ``strain_life`` holds ``material`` (the seven constants of
    :class:`~.strain_life.StrainLifeMaterial`) or ``estimate`` ({``method``:
    uniform_material_law, medians or hardness, ``ultimate_strength``,
    ``brinell_hardness``, ``material_class``, ``youngs_modulus``}),
    ``input`` (nominal, local_elastic, local_strain), ``kt``,
    ``notch_rule`` (neuber, glinka) and ``mean_stress_method`` (morrow,
    smith_watson_topper, walker with the material's walker_exponent, none)."""
    from . import strain_life as sl

    extra = set(settings) - {"method", "strain_life"} - _STRAIN_LIFE_OPTIONS
    if extra:
        raise InvalidParameter(f"a strain_life point takes its material and mean-stress form "
                               f"in strain_life; not: {', '.join(sorted(extra))}",
                               field=sorted(extra)[0])
    block = _mapping(settings.get("strain_life"), "strain_life")
    unknown_keys = set(block) - STRAIN_LIFE_KEYS
    if unknown_keys:
        raise InvalidParameter(f"strain_life: unknown field(s) {', '.join(sorted(unknown_keys))};"
                               f" valid: {', '.join(sorted(STRAIN_LIFE_KEYS))}",
                               field="strain_life")
    if ("material" in block) == ("estimate" in block):
        raise InvalidParameter("strain_life needs exactly one of material (the cyclic and "
                               "strain-life constants) or estimate", field="strain_life")
    try:
        if "material" in block:
            material = sl.StrainLifeMaterial(**_mapping(block["material"], "material"))
        else:
            spec = dict(_mapping(block["estimate"], "estimate"))
            method = spec.pop("method", None)
            material = sl.estimate(method, **spec)
    except EngineError:
        raise
    except TypeError as exc:
        raise InvalidParameter(f"strain_life: {exc}", field="strain_life") from exc
    params = {"input_kind": block.get("input", "nominal"), "rule": block.get("notch_rule",
                                                                              "neuber"),
              "kt": block.get("kt", 1.0),
              "mean_stress_method": block.get("mean_stress_method", "smith_watson_topper")}
    if params["input_kind"] not in sl.INPUTS:
        raise unknown("input", params["input_kind"], sl.INPUTS)
    if params["rule"] not in sl.NOTCH_RULES:
        raise unknown("notch_rule", params["rule"], sl.NOTCH_RULES)
    if params["mean_stress_method"] not in sl.STRAIN_MEAN_STRESS:
        raise unknown("mean_stress_method", params["mean_stress_method"],
                      sl.STRAIN_MEAN_STRESS)
    if params["mean_stress_method"] == "walker" and material.walker_exponent is None:
        raise InvalidParameter("strain_life mean_stress_method walker needs walker_exponent "
                               "in the material (gamma, from tests at several R ratios)",
                               field="walker_exponent")
    kt = params["kt"]
    if isinstance(kt, bool) or not isinstance(kt, (int, float)) or not 1.0 <= kt <= 20.0:
        raise InvalidParameter(f"kt {kt!r} must be in [1, 20]", field="kt", value=kt)
    if params["input_kind"] != "nominal" and kt != 1.0:
        raise InvalidParameter("kt applies to a nominal stress input", field="kt", value=kt)
    opts = options_from_dict({k: v for k, v in settings.items() if k == "allowable_damage"})
    screening_from_dict(settings)
    return material, params, opts


def is_strain_life(settings: dict) -> bool:
    """Whether a point's settings ask for the local strain approach."""
    method = settings.get("method", "stress_life")
    if method not in METHODS:
        raise unknown("method", method, METHODS)
    return method == "strain_life"


def point_from_dict(settings: dict):
    """``(curve, options, estimate)`` for one point's settings dictionary."""
    if is_strain_life(settings):
        raise InvalidParameter("this point is assessed by strain-life (method strain_life): "
                               "it has no S-N curve here", field="method")
    settings = {k: v for k, v in settings.items() if k != "method"}
    curve, estimate = curve_from_dict(settings)
    opts = options_from_dict(settings, curve)
    screening_from_dict(settings)  # refused now, not when the point is screened
    return curve, opts, estimate


def screening_from_dict(settings: dict) -> tuple[str, Thresholds]:
    """``(policy, thresholds)`` of a point's signal screening: ``screening``
    (``report`` by default, ``refuse``, ``clean`` or ``off``) and
    ``screening_thresholds`` ({name: value} over the defaults of
    ``screening.Thresholds``)."""
    policy = settings.get("screening", "report")
    if policy not in SCREENING_POLICIES:
        raise unknown("screening", policy, SCREENING_POLICIES)
    given = settings.get("screening_thresholds") or {}
    if not isinstance(given, dict):
        raise InvalidParameter("screening_thresholds must be an object {name: value}",
                               field="screening_thresholds")
    names = {f.name for f in fields(Thresholds)}
    extra = set(given) - names
    if extra:
        raise InvalidParameter(f"unknown screening threshold(s): {', '.join(sorted(extra))} "
                               f"(known: {', '.join(sorted(names))})", field=sorted(extra)[0])
    try:
        return policy, Thresholds(**given)
    except TypeError as exc:
        raise InvalidParameter(str(exc), field="screening_thresholds") from exc


# ---------------------------------------------------------------- what users store by name

#: A point's ``curve`` naming a stored user curve starts with this.
USER_CURVE_PREFIX = "user:"
_CURVE_DEF_KEYS = {"curve_points", "basquin", "below_limit", "source"}
MATERIAL_KEYS = ("ultimate_strength", "yield_strength", "fatigue_strength_coefficient",
                 "walker_exponent")


def user_curve_definition(doc) -> dict:
    """Check a user curve: one of ``curve_points`` or ``basquin``, optionally
    ``below_limit`` and a free-text ``source``. Returns the definition to store."""
    doc = _mapping(doc, "definition")
    extra = set(doc) - _CURVE_DEF_KEYS - {"name"}
    if extra:
        raise InvalidParameter(f"unknown field(s) of a user curve: {', '.join(sorted(extra))}",
                               field=sorted(extra)[0])
    out = {k: doc[k] for k in _CURVE_DEF_KEYS if k in doc}
    if "source" in out and not isinstance(out["source"], str):
        raise InvalidParameter("source must be text", field="source")
    if sum(k in out for k in ("curve_points", "basquin")) != 1:
        raise InvalidParameter("a user curve has exactly one of curve_points or basquin",
                               field="curve_points")
    curve_from_dict({k: v for k, v in out.items() if k != "source"})
    return out


def material_properties(doc) -> dict:
    """Check a material: strengths in MPa (and Walker's exponent) with a free-text
    ``source`` (tensile test, data sheet). Returns the properties to store."""
    doc = _mapping(doc, "material")
    extra = set(doc) - set(MATERIAL_KEYS) - {"source", "name"}
    if extra:
        raise InvalidParameter(f"unknown field(s) of a material: {', '.join(sorted(extra))}",
                               field=sorted(extra)[0])
    out = {}
    for k in MATERIAL_KEYS:
        if k in doc and doc[k] is not None:
            v = doc[k]
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise InvalidParameter(f"{k} {v!r} must be a number", field=k)
            out[k] = float(v)
    if not out:
        raise InvalidParameter("a material needs at least one of "
                               + ", ".join(MATERIAL_KEYS), field="ultimate_strength")
    check_strengths(**out)
    if "source" in doc:
        if not isinstance(doc["source"], str):
            raise InvalidParameter("source must be text", field="source")
        out["source"] = doc["source"]
    return out


def resolve(settings: dict, lookup) -> dict:
    """``settings`` with stored references replaced by what they name.

    ``material``: the material's strengths fill in (a strength given in the
    settings wins). ``curve`` = ``user:<name>``: the stored definition takes
    its place. ``lookup(kind, name)`` returns the stored document or raises
    (kind is ``"material"`` or ``"curve"``).
    """
    out = dict(settings)
    if "material" in out:
        name = out.pop("material")
        if not isinstance(name, str):
            raise InvalidParameter("material must be the name of a stored material",
                                   field="material")
        props = lookup("material", name)
        for k in MATERIAL_KEYS:
            if k in props and out.get(k) is None:
                out[k] = props[k]
    curve = out.get("curve")
    if isinstance(curve, str) and curve.startswith(USER_CURVE_PREFIX):
        name = curve[len(USER_CURVE_PREFIX):]
        doc = lookup("curve", name)
        del out["curve"]
        kind = "curve_points" if "curve_points" in doc else "basquin"
        out[kind] = {**doc[kind], "name": curve, "source": doc.get("source") or "user"}
        if "below_limit" in doc and "below_limit" not in out:
            out["below_limit"] = doc["below_limit"]
    return out


def thickness_note(settings: dict, curve: SNCurve):
    """The caution that says how a point's thickness correction was made
    (None without ``thickness_mm``)."""
    if "thickness_mm" not in settings:
        return None
    from .cautions import caution

    c = thickness_correction(curve.name, settings["thickness_mm"],
                             exponent=settings.get("thickness_exponent"),
                             joint=settings.get("joint"),
                             attachment_length_mm=settings.get("attachment_length_mm"))
    return caution("thickness_correction", factor=c.factor, t=c.thickness_mm,
                   t_eff=c.effective_thickness_mm, t_ref=c.reference_thickness_mm,
                   n=c.exponent, source=c.source)
