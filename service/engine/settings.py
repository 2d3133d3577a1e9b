"""Point settings from plain dictionaries (JSON, CLI files, API bodies).

One function turns the settings of a measured point into the engine's
objects, so the CLI, the API and the ledger accept exactly the same fields
(the glossary names) and give the same errors.
"""

from __future__ import annotations

from dataclasses import fields

from .damage import AssessmentOptions
from .errors import InvalidParameter
from .sn_catalogue import catalogue_curve, thickness_factor
from .sn_curve import SNCurve, basquin_amplitude, basquin_range, from_points
from .sn_estimate import EstimatedCurve, shigley

_OPTION_FIELDS = {f.name for f in fields(AssessmentOptions)}
_CURVE_KEYS = {"curve", "estimate", "curve_points", "basquin", "below_limit", "thickness_mm"}


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
    except TypeError as exc:
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

    ``thickness_mm`` with a DNV-RP-C203 curve sets ``thickness_factor``.
    Unknown keys are refused, naming them, so a misspelt option never
    passes silently.
    """
    unknown_keys = set(settings) - _OPTION_FIELDS - _CURVE_KEYS
    if unknown_keys:
        raise InvalidParameter(f"unknown setting(s): {', '.join(sorted(unknown_keys))}",
                               field=sorted(unknown_keys)[0])
    kwargs = {k: v for k, v in settings.items() if k in _OPTION_FIELDS}
    if "thickness_mm" in settings:
        if curve is None or not curve.name.startswith("DNV-RP-C203:"):
            raise InvalidParameter("thickness_mm applies to DNV-RP-C203 curves only",
                                   field="thickness_mm")
        kwargs["thickness_factor"] = thickness_factor(curve.name, float(settings["thickness_mm"]))
    try:
        return AssessmentOptions(**kwargs)
    except TypeError as exc:
        raise InvalidParameter(str(exc), field="options") from exc


def point_from_dict(settings: dict):
    """``(curve, options, estimate)`` for one point's settings dictionary."""
    curve, estimate = curve_from_dict(settings)
    return curve, options_from_dict(settings, curve), estimate
