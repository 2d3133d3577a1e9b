"""A stored point's rainflow matrix extrapolated to longer usage, and its damage.

Between the API and ``engine.extrapolation``: recounts the point as the
assessment did, extrapolates its range-mean matrix by ``factor`` and
assesses both the extrapolated matrix and the recorded one scaled by the
factor on the same bins and the point's own curve, so the difference is the
extrapolation's alone.
"""

from __future__ import annotations

import math
from dataclasses import replace

from service.engine import cautions
from service.engine.damage import assess
from service.engine.errors import InvalidParameter
from service.engine.extrapolation import extrapolate_matrix
from service.engine.rainflow import astm_e1049
from service.engine.settings import is_strain_life, point_from_dict
from service.runs import json_safe, point_samples

#: Named in every answer.
METHOD = ("kernel density of the range-mean matrix (K. Dressler et al., 'Extrapolation of "
          "rainflow matrices', SAE 960569, 1996), local widths by Abramson's square-root law "
          "(Ann. Statist. 10, 1982)")


def damages(e, curve, opts) -> tuple[float, float, float | None]:
    """``(extrapolated, scaled, effect)``: Miner's sums of an extrapolated
    matrix and of the recorded one scaled by the same factor (each bin's
    count an occurrence, no reserve search), and their ratio (None where
    the scaled sum is 0 or infinite)."""
    plain = replace(opts, reserve_factor=False, top_cycles=0)
    d_ex = assess(e.table(), curve, plain, weighted=True).damage
    d_sc = assess(e.table("scaled"), curve, plain, weighted=True).damage
    return d_ex, d_sc, d_ex / d_sc if d_sc > 0 and math.isfinite(d_sc) else None


def extrapolated(data_dir, assessment: dict, point: str, factor: float, range_bins: int,
                 mean_bins: int, con=None) -> dict:
    """The extrapolated matrix of a stored point and the damages it gives."""
    res = assessment["result"]["points"][point]
    if is_strain_life(res["settings_used"]):
        raise InvalidParameter("extrapolation weighs cycles on an S-N curve: not offered for "
                               "strain-life points", field="point")
    samples = point_samples(data_dir, assessment, point, con)
    table = astm_e1049(samples, gate=res["gate_mpa"], residue=res["options"]["residue"])
    e = extrapolate_matrix(table, factor, range_bins=range_bins, mean_bins=mean_bins)
    curve, opts, _ = point_from_dict(res["settings_used"])
    d_ex, d_sc, effect = damages(e, curve, opts)
    return json_safe({
        "point": point, "factor": factor, "method": METHOD,
        "range_edges_mpa": e.range_edges.tolist(), "mean_edges_mpa": e.mean_edges.tolist(),
        "cycles": e.counts.tolist(), "cycles_scaled": e.scaled.tolist(),
        "observed_max_range": e.observed_max_range,
        "expected_above_observed": e.expected_above_observed,
        "damage_extrapolated": d_ex, "damage_scaled": d_sc,
        "extrapolation_effect": effect,
        "curve": curve.name,
        "units": {"stress": "MPa", "cycles": "cycles", "damage": "-"},
        "cautions": [{k: v for k, v in c.items() if k != "points"}
                     for c in cautions.general()]
        + [cautions.caution("extrapolation_extremes", above=e.expected_above_observed,
                            top=e.observed_max_range, factor=factor).as_dict()],
    })
