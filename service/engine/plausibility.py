"""Plausibility of material values: slips of unit that change results by
orders of magnitude are refused, naming the value that was probably meant.

A Young's modulus typed in GPa (206 for a steel) makes every strain gauge
read a thousand times too little stress; a strength typed in psi (75000)
makes the Goodman line flat and the static checks blind. Such values lie
outside what any engineering material has, so they are refused with the
conversion that would make them plausible; values that are possible but
unusual pass with a caution (see :func:`strength_note`).

The bounds are deliberately wide (common practice: stated here, and in every
message that uses them): moduli of engineering materials run from about
0.5 GPa (polymers) to about 1200 GPa (diamond); tensile strengths of metals
up to about 5 GPa (the strongest wires), fatigue strength coefficients a
little above that.
"""

from __future__ import annotations

import math

from .errors import InvalidParameter

#: Young's modulus bounds of engineering materials. [MPa]
MODULUS_RANGE_MPA = (500.0, 1.2e6)
#: Upper bound of a strength (ultimate, yield) of any engineering metal. [MPa]
STRENGTH_MAX_MPA = 5000.0
#: The fatigue strength coefficient sigma_f' may exceed the ultimate strength. [MPa]
COEFFICIENT_MAX_MPA = 8000.0
#: Strengths below this are possible (soft alloys, polymers) but unusual for
#: gauged structures: cautioned, with the ksi reading. [MPa]
STRENGTH_UNUSUAL_MPA = 50.0

_PSI_MPA = 6.894757e-3
_KSI_MPA = 6.894757


class ImplausibleValue(InvalidParameter):
    """A value no engineering material has; ``probable_value`` is the value
    it has if it was given in ``probable_unit`` (converted to MPa)."""

    def __init__(self, message: str, *, field: str, value, probable_value: float,
                 probable_unit: str):
        super().__init__(message, field=field, value=value)
        self.details["probable_value"] = probable_value
        self.details["probable_unit"] = probable_unit
        self.probable_value = probable_value
        self.probable_unit = probable_unit


def check_modulus(value, field: str = "youngs_modulus") -> float:
    """``value`` [MPa] if it is a plausible Young's modulus, else raise
    :class:`ImplausibleValue` naming the unit it was probably given in."""
    e = float(value)
    lo, hi = MODULUS_RANGE_MPA
    if not math.isfinite(e) or lo <= e <= hi or e <= 0:
        return e  # non-positive and non-finite values have their own errors
    if e < lo:
        meant, unit = e * 1000.0, "GPa"
    elif e < 1e8:
        meant, unit = e * _PSI_MPA, "psi"
    else:
        meant, unit = e / 1e6, "Pa"
    raise _refused(field, e, f"outside the moduli of engineering materials ({lo:g} to {hi:g} "
                   f"MPa)", meant, unit)


def check_strength(value, field: str) -> float:
    """``value`` [MPa] if it can be a strength of a metal, else raise
    :class:`ImplausibleValue` with its reading in psi (or Pa)."""
    s = float(value)
    top = COEFFICIENT_MAX_MPA if field == "fatigue_strength_coefficient" else STRENGTH_MAX_MPA
    if not math.isfinite(s) or s <= top:
        return s
    meant, unit = (s * _PSI_MPA, "psi") if s < 1e7 else (s / 1e6, "Pa")
    raise _refused(field, s, f"above any engineering metal's ({top:g} MPa)", meant, unit)


def _refused(field: str, value: float, why: str, meant: float, unit: str) -> ImplausibleValue:
    return ImplausibleValue(
        f"{field} {value:g} MPa is {why}; if it was given in {unit}, it is {meant:.6g} MPa",
        field=field, value=value, probable_value=meant, probable_unit=unit)


def strength_note(value: float, field: str) -> dict | None:
    """Values for the ``implausible_value`` caution when a strength is
    possible but unusual (below ``STRENGTH_UNUSUAL_MPA``), else None."""
    if value is None or not 0 < value < STRENGTH_UNUSUAL_MPA:
        return None
    return {"field": field, "value": float(value), "unit": "MPa",
            "what": "a strength of a gauged metal part",
            "hint": f"if it was given in ksi, it is {value * _KSI_MPA:.4g} MPa"}
