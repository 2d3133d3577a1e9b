"""Points made of several channels, as requests declare them.

A multiaxial point (a rosette's three gauges, or stress components) and a
hot-spot point (gauges at reference distances from a weld toe) each name the
channels they are made of and how those combine. Here their declarations are
checked (every error before any counting), turned into the specs the
assessment runs on, and echoed back in results in the request's own names.
"""

from __future__ import annotations

import math

import numpy as np

from service.engine import hot_spot, multiaxial, weld_interaction
from service.engine import units as engine_units
from service.engine.errors import InvalidParameter, unknown

#: Keys of a multiaxial point's declaration.
MULTIAXIAL_KEYS = {"rosette", "gauges", "poisson_ratio", "transverse_sensitivity",
                   "calibration_poisson", "components", "reductions", "plane_step_deg",
                   "settings", "shear_settings", "shear_interaction"}
#: Keys of a multiaxial point's ``shear_interaction``.
INTERACTION_KEYS = {"rule", "normal", "loading", "comparison_value"}
PLANE_COMPONENTS = ("sxx", "syy", "sxy")
SOLID_COMPONENTS = ("sxx", "syy", "szz", "sxy", "syz", "szx")


def multiaxial_spec(name: str, spec, channels: dict, units: dict | None) -> dict:
    """A checked multiaxial declaration, with its channel names in order."""
    if not isinstance(spec, dict):
        raise InvalidParameter(f"multiaxial point {name!r} must be an object",
                               field="multiaxial")
    extra = set(spec) - MULTIAXIAL_KEYS
    if extra:
        raise InvalidParameter(f"multiaxial point {name!r}: unknown field(s) "
                               f"{', '.join(sorted(extra))}; valid: "
                               f"{', '.join(sorted(MULTIAXIAL_KEYS))}", field="multiaxial")
    out = {"reductions": spec.get("reductions", ["signed_von_mises", "critical_plane"]),
           "plane_step_deg": spec.get("plane_step_deg", 10.0)}
    if not isinstance(out["reductions"], list) or not out["reductions"]:
        raise InvalidParameter("reductions must be a non-empty list of "
                               f"{', '.join(multiaxial.REDUCTION_NAMES)}", field="reductions")
    for r in out["reductions"]:
        if r not in multiaxial.REDUCTION_NAMES:
            raise unknown("reductions", r, multiaxial.REDUCTION_NAMES)
    if ("rosette" in spec) == ("components" in spec):
        raise InvalidParameter(f"multiaxial point {name!r} needs exactly one of rosette "
                               f"(with gauges) or components", field="multiaxial")
    if "rosette" in spec:
        if not isinstance(spec["rosette"], str) or (
                spec["rosette"] not in multiaxial.ROSETTE_LAYOUTS):
            raise unknown("rosette", spec["rosette"], multiaxial.ROSETTE_LAYOUTS)
        gauges = spec.get("gauges")
        if not (isinstance(gauges, list) and len(gauges) == 3
                and all(isinstance(g, str) for g in gauges)):
            raise InvalidParameter("gauges must list the three channels a, b, c in layout "
                                   "order", field="gauges")
        nu = spec.get("poisson_ratio")
        if isinstance(nu, bool) or not isinstance(nu, (int, float)) or not 0 <= nu < 0.5:
            raise InvalidParameter("a rosette needs poisson_ratio in [0, 0.5)",
                                   field="poisson_ratio", value=nu)
        out.update(kind="rosette", layout=spec["rosette"], channels=list(gauges),
                   poisson_ratio=float(nu),
                   transverse_sensitivity=spec.get("transverse_sensitivity", 0.0),
                   calibration_poisson=spec.get("calibration_poisson",
                                                multiaxial.CALIBRATION_POISSON))
        for key in ("transverse_sensitivity", "calibration_poisson"):
            v = out[key]
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise InvalidParameter(f"{key} must be a number", field=key, value=v)
    else:
        comp = spec["components"]
        if not isinstance(comp, dict) or set(comp) not in (set(PLANE_COMPONENTS),
                                                           set(SOLID_COMPONENTS)) or not all(
                isinstance(v, str) for v in comp.values()):
            raise InvalidParameter("components maps sxx, syy, sxy (plane stress) or sxx, "
                                   "syy, szz, sxy, syz, szx (3-D) to channels",
                                   field="components")
        order = PLANE_COMPONENTS if len(comp) == 3 else SOLID_COMPONENTS
        out.update(kind="plane_stress" if len(comp) == 3 else "tensor",
                   channels=[comp[k] for k in order], components=list(order))
    for ch in out["channels"]:
        if ch not in channels:
            raise unknown("multiaxial channel", ch, channels)
        if units and ch in units:
            strain = engine_units.is_strain(units[ch])
            if out["kind"] == "rosette" and not strain:
                raise InvalidParameter(f"rosette gauge {ch!r} is in {units[ch]}: give the "
                                       f"gauges in a strain unit with youngs_modulus",
                                       field="gauges", value=ch)
            if out["kind"] != "rosette" and strain:
                raise InvalidParameter(f"stress component {ch!r} is a strain ({units[ch]})",
                                       field="components", value=ch)
    if out["kind"] == "plane_stress" or out["kind"] == "rosette":
        multiaxial.plane_normals(np.zeros((1, 3)), out["plane_step_deg"])  # checks the step
    if "shear_interaction" in spec:
        out["shear_interaction"] = interaction_spec(name, spec["shear_interaction"], out["kind"])
    return out


def interaction_spec(name: str, spec, kind: str) -> dict:
    """A checked ``shear_interaction`` of a plane-stress multiaxial point:
    ``rule`` (``engine.weld_interaction.SHEAR_INTERACTION_RULES``), ``normal``
    (sxx or syy: the component across the weld; the shear is sxy),
    ``loading`` (auto, proportional, non_proportional) and, for the IIW
    rule, a ``comparison_value`` other than the steel values."""
    if kind == "tensor":
        raise InvalidParameter("shear_interaction is for plane stress (rosettes, sxx/syy/sxy)",
                               field="shear_interaction")
    if not isinstance(spec, dict):
        raise InvalidParameter(f"multiaxial point {name!r}: shear_interaction must be an object "
                               f"with rule", field="shear_interaction")
    extra = set(spec) - INTERACTION_KEYS
    if extra:
        raise InvalidParameter(f"shear_interaction: unknown field(s) {', '.join(sorted(extra))};"
                               f" valid: {', '.join(sorted(INTERACTION_KEYS))}",
                               field="shear_interaction")
    rule = spec.get("rule")
    if rule not in weld_interaction.SHEAR_INTERACTION_RULES:
        raise unknown("rule", rule, weld_interaction.SHEAR_INTERACTION_RULES)
    normal = spec.get("normal", "sxx")
    if normal not in weld_interaction.NORMAL_COMPONENTS:
        raise unknown("normal", normal, weld_interaction.NORMAL_COMPONENTS)
    loading = spec.get("loading", "auto")
    if loading not in weld_interaction.LOADINGS:
        raise unknown("loading", loading, weld_interaction.LOADINGS)
    cv = spec.get("comparison_value")
    if cv is not None:
        if rule != "iiw":
            raise InvalidParameter("comparison_value belongs to the iiw rule",
                                   field="comparison_value", value=cv)
        if isinstance(cv, bool) or not isinstance(cv, (int, float)) or not 0 < cv <= 2:
            raise InvalidParameter("comparison_value must be in (0, 2]",
                                   field="comparison_value", value=cv)
    return {"rule": rule, "normal": normal, "loading": loading, "comparison_value": cv}


def components_of(spec: dict, samples: dict) -> tuple:
    """A multiaxial point's stress component columns (3 or 6) from its
    ``samples`` ({channel: history}). [MPa]

    Rosette gauges arrive as E times strain (a strain channel with its
    modulus, converted as a uniaxial gauge), so Hooke's law runs with E = 1.
    """
    cols = [samples[c] for c in spec["channels"]]
    if spec["kind"] == "rosette":
        return multiaxial.rosette_plane_stress(
            *cols, spec["layout"], poisson_ratio=spec["poisson_ratio"],
            transverse_sensitivity=spec["transverse_sensitivity"],
            calibration_poisson=spec["calibration_poisson"])
    return tuple(cols)


def echo(spec: dict) -> dict:
    """A multiaxial point's block in the request's own names: ``rosette`` and
    ``gauges``, or ``components`` as ``{component: channel}``."""
    out = dict(spec)
    channels = out.pop("channels")
    if out["kind"] == "rosette":
        out["rosette"], out["gauges"] = out.pop("layout"), channels
    else:
        out["components"] = dict(zip(out["components"], channels))
    return out


def unecho(block: dict) -> dict:
    """The planned spec from a stored block (:func:`echo` undone; results
    stored before the echo are rewritten by store migration 10)."""
    spec = dict(block)
    if spec["kind"] == "rosette":
        spec["layout"], spec["channels"] = spec.pop("rosette"), spec.pop("gauges")
    else:
        comps = spec.pop("components")
        spec["components"], spec["channels"] = list(comps), list(comps.values())
    return spec




#: Keys of a hot-spot point's declaration.
HOT_SPOT_KEYS = {"gauges", "extrapolation", "thickness_mm", "positions_mm", "settings"}


def hot_spot_spec(name: str, spec, channels: dict | None) -> dict:
    """A checked hot-spot declaration: ``gauges`` (channels, nearest the toe
    first), ``extrapolation`` (``engine.hot_spot.HOT_SPOT_METHODS``),
    ``thickness_mm`` and the ``positions_mm`` of the gauges (nominal when
    omitted), with the weights they give (``engine.hot_spot.plan``).
    ``channels`` None (a ledger point, registered before any block) skips
    the check that the gauges are channels."""
    if not isinstance(spec, dict):
        raise InvalidParameter(f"hot-spot point {name!r} must be an object", field="hot_spot")
    extra = set(spec) - HOT_SPOT_KEYS
    if extra:
        raise InvalidParameter(f"hot-spot point {name!r}: unknown field(s) "
                               f"{', '.join(sorted(extra))}; valid: "
                               f"{', '.join(sorted(HOT_SPOT_KEYS))}", field="hot_spot")
    method = spec.get("extrapolation")
    if method is None:
        raise InvalidParameter(f"hot-spot point {name!r} needs extrapolation: one of "
                               f"{', '.join(hot_spot.HOT_SPOT_METHODS)}", field="extrapolation")
    ex = hot_spot.plan(method, spec.get("thickness_mm"), spec.get("positions_mm"))
    gauges = spec.get("gauges")
    if not (isinstance(gauges, list) and all(isinstance(g, str) for g in gauges)
            and len(gauges) == len(ex.weights) and len(set(gauges)) == len(gauges)):
        raise InvalidParameter(f"the {method} extrapolation takes {len(ex.weights)} gauges: "
                               f"list their channels, nearest the toe first", field="gauges",
                               value=gauges)
    for g in gauges:
        if channels is not None and g not in channels:
            raise unknown("hot-spot gauge", g, channels)
    return {"kind": "hot_spot", "gauges": list(gauges), **ex.as_dict()}


def hot_spot_plan(spec: dict) -> hot_spot.Extrapolation:
    """The extrapolation of a checked (or stored) hot-spot spec."""
    return hot_spot.plan(spec["extrapolation"], spec["thickness_mm"], spec["positions_mm"])
