"""What an assessment of one point takes and gives: options and result types.

``AssessmentOptions`` holds how a point is assessed (mean-stress method,
strengths, partial factors, allowable damage); ``PointAssessment`` holds
everything reported for it. The model is in ``miner.py`` and ``damage.py``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from .cautions import GENERAL_CODES
from .errors import InvalidParameter
from .mean_stress import check_haigh, equivalent_amplitude

@dataclass(frozen=True)
class AssessmentOptions:
    """How a point is assessed. Stresses in MPa; the rest dimensionless.

    Attributes
    ----------
    mean_stress_method : str
        A key of ``MEAN_STRESS_METHODS``; ``none`` for as-welded details.
    compressive_mean : str
        Policy for compressive means, see ``equivalent_amplitude``.
    ultimate_strength, yield_strength, fatigue_strength_coefficient : float
        Material strengths. [MPa]
    walker_exponent : float
        Walker's gamma. [-]
    haigh_diagram : tuple of (mean, amplitude), optional
        For ``mean_stress_method`` haigh: the constant-life line of a
        Haigh diagram from test data. [MPa]
    haigh_stress_ratio : float
        R of the S-N curve the diagram is used with (-1: fully reversed). [-]
    allowable_damage : float
        Miner sum at which failure is predicted (1.0; 0.5 is common for
        variable-amplitude welded details). [-]
    load_factor : float
        Partial factor on the fatigue load, gamma_Ff: multiplies the history. [-]
    strength_factor : float
        Partial factor on fatigue strength, gamma_Mf: divides the curve. [-]
    thickness_factor : float
        Multiplies the range entering the curve (e.g. (t/t_ref)^k). [-]
    equivalent_slope : float or None
        Slope m of the equivalent range; ``None`` (default): the curve's own
        slope at ``equivalent_cycles`` (3 for the codes' normal-stress
        curves, 5 for their shear curves). [-]
    equivalent_cycles : float
        Reference cycles of the equivalent range (2e6 as in the codes). [cycles]
    top_cycles : int
        How many of the most damaging cycles to report.
    reserve_factor : bool
        Whether to solve for the stress reserve factor.
    """

    mean_stress_method: str = "none"
    compressive_mean: str = "no_benefit"
    ultimate_strength: float | None = None
    yield_strength: float | None = None
    fatigue_strength_coefficient: float | None = None
    walker_exponent: float | None = None
    haigh_diagram: tuple | None = None
    haigh_stress_ratio: float = -1.0
    allowable_damage: float = 1.0
    load_factor: float = 1.0
    strength_factor: float = 1.0
    thickness_factor: float = 1.0
    equivalent_slope: float | None = None
    equivalent_cycles: float = 2e6
    top_cycles: int = 5
    reserve_factor: bool = True

    def __post_init__(self):
        # Reuse the dispatcher's checks so every caller gets the same errors.
        equivalent_amplitude(np.zeros(1), np.zeros(1), self.mean_stress_method,
                             ultimate_strength=self.ultimate_strength,
                             yield_strength=self.yield_strength,
                             fatigue_strength_coefficient=self.fatigue_strength_coefficient,
                             walker_exponent=self.walker_exponent,
                             compressive_mean=self.compressive_mean,
                             haigh_diagram=self.haigh_diagram,
                             haigh_stress_ratio=self.haigh_stress_ratio)
        if self.haigh_diagram is not None:
            object.__setattr__(self, "haigh_diagram", check_haigh(self.haigh_diagram))
        for name in ("allowable_damage", "load_factor", "strength_factor",
                     "thickness_factor", "equivalent_slope", "equivalent_cycles"):
            v = getattr(self, name)
            if v is None and name == "equivalent_slope":
                continue
            if not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
                raise InvalidParameter(f"{name} {v} must be a positive number",
                                       field=name, value=v, limit=0.0)
        if not isinstance(self.top_cycles, int) or self.top_cycles < 0:
            raise InvalidParameter(f"top_cycles {self.top_cycles} must be a whole number >= 0",
                                   field="top_cycles", value=self.top_cycles, limit=0)

    def echo(self) -> dict:
        """The options as a plain dict (every value is a scalar or a string)."""
        return {f.name: getattr(self, f.name) for f in fields(self)}


@dataclass(frozen=True)
class PointAssessment:
    """Everything reported for one point. Stresses in MPa.

    ``damage`` [-] is the Miner sum of one pass of the history (open
    residue as half cycles); ``damage_per_repeat`` [-] that of one period
    when the recording repeats (the residue closed by the repetition), and
    ``residue_damage_share`` [-] the residue's part of ``damage``.
    ``life_repeats`` [-], ``life_hours`` [h] and ``life_cycles`` [cycles]
    are how long the point lasts, repeating the recording, until
    ``allowable_damage``; ``reserve_factor`` [-] is the factor on the whole
    history that brings the damage to ``allowable_damage``, and
    ``reserve_limited_by`` says whether fatigue or static strength sets it.
    ``equivalent_range`` [MPa] is the constant range that, applied
    ``equivalent_cycles`` times, gives ``damage`` on the curve's segment of
    slope ``equivalent_slope`` through that many cycles. ``below_limit``
    says how much of the spectrum lies below the curve's fatigue limit.
    Infinite values mean no damage (lives, reserve) or static overload
    (damage); they are never NaN.
    """

    damage: float
    life_repeats: float
    life_hours: float | None
    life_cycles: float
    reserve_factor: float | None
    equivalent_range: float
    cycles_counted: float
    max_range: float
    overload_cycles: int
    flags: tuple
    top_cycles: list
    cautions: tuple
    options: dict
    curve: dict
    damage_per_cycle: np.ndarray = field(repr=False, compare=False)
    damage_per_repeat: float = 0.0
    residue_damage_share: float | None = None
    equivalent_slope: float = 3.0
    equivalent_cycles: float = 2e6
    reserve_limited_by: str | None = None
    below_limit: dict | None = None

    def summary(self) -> dict:
        """Plain values for a table or JSON (no per-cycle array)."""
        out = {k: getattr(self, k) for k in (
            "damage", "damage_per_repeat", "residue_damage_share", "life_repeats",
            "life_hours", "life_cycles", "reserve_factor", "reserve_limited_by",
            "equivalent_range", "equivalent_slope", "equivalent_cycles", "cycles_counted",
            "max_range", "overload_cycles")}
        out["below_limit"] = None if self.below_limit is None else dict(self.below_limit)
        out["flags"] = list(self.flags)
        return out

    def caution_dicts(self) -> list[dict]:
        """The point's own cautions (not the general three) as plain dicts."""
        return [c.as_dict() for c in self.cautions if c.code not in GENERAL_CODES]

