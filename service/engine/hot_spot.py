r"""Structural hot-spot stress at a weld toe, extrapolated from gauges near it.

The stress at a weld toe carries the local notch of the weld, which no gauge
can read and which the hot-spot S-N curves already contain. The structural
(hot-spot) stress is the stress of the plate's surface extrapolated to the
toe from reference points outside the notch's reach: gauges placed at fixed
distances from the toe, read at every sample and combined linearly,

.. math:: \sigma_{hs}(t) = \sum_i w_i\,\sigma_i(t),

where the weights :math:`w_i` are those of the straight line (two gauges)
or parabola (three gauges) through the gauge positions, evaluated at the toe
(Lagrange's interpolation formula at :math:`x = 0`). At the nominal
positions these are the published coefficients:

``linear`` (type a, toe on a plate surface; gauges at 0.4 t and 1.0 t)
    :math:`\sigma_{hs} = 1.67\,\sigma_{0.4t} - 0.67\,\sigma_{1.0t}`
``quadratic`` (type a, pronounced non-linear increase towards the toe;
0.4 t, 0.9 t, 1.4 t)
    :math:`\sigma_{hs} = 2.52\,\sigma_{0.4t} - 2.24\,\sigma_{0.9t} +
    0.72\,\sigma_{1.4t}`
``fixed_distance`` (type b, toe on a plate edge, where the stress does not
depend on the thickness; 4, 8 and 12 mm)
    :math:`\sigma_{hs} = 3\,\sigma_{4mm} - 3\,\sigma_{8mm} + \sigma_{12mm}`

[1]_ sec. 2.2.3 (structural hot-spot stress: types of hot spots, reference
points, extrapolation and measurement), [2]_ sec. 4.3 (hot-spot stress
derived from strain gauges). Gauges are rarely glued exactly at the nominal
points: the weights here are those of the positions the user measured, so
the extrapolation stays exact for a linear (or quadratic) stress field
(tested); the result gives both the weights used and the published ones,
and a caution when a gauge sits further from its reference point than
common practice accepts (:data:`POSITION_TOLERANCE`), or closer to the toe
than the method allows (the notch's own stress rise begins there).

Gauges read strain across the weld toe; a uniaxial gauge gives
:math:`\sigma = E\varepsilon`, which holds where the stress along the weld
is small. The hot-spot stress is assessed on the hot-spot curves (IIW
FAT 90 for load-carrying, FAT 100 for non-load-carrying fillet welds;
EN 1993-1-9 Annex B; DNV-RP-C203 curve D), not on a nominal-stress detail
category.

References
----------
.. [1] A. Hobbacher, *Recommendations for Fatigue Design of Welded Joints
   and Components*, IIW document XIII-2460-13, 2nd ed. Cham, Switzerland:
   Springer, 2016, sec. 2.2.3 and 3.3 (structural hot-spot S-N curves);
   coefficients checked here by their defining interpolation, clause
   numbers entered without the text at hand (check against the edition
   in use).
.. [2] DNV-RP-C203, *Fatigue design of offshore steel structures*, DNV GL,
   2016, sec. 4.3 (hot-spot stress from finite element analysis and
   measurements); check against the edition in use.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .cautions import Caution, caution
from .errors import InvalidParameter, unknown

#: Extrapolations offered; each has its nominal gauge positions.
HOT_SPOT_METHODS = ("linear", "quadratic", "fixed_distance")

#: Nominal positions: multiples of the plate thickness t for type a, mm for
#: type b (``fixed_distance``).
NOMINAL_POSITIONS = {"linear": (0.4, 1.0), "quadratic": (0.4, 0.9, 1.4),
                     "fixed_distance": (4.0, 8.0, 12.0)}

#: The published coefficients (rounded in the texts to two decimals).
PUBLISHED_WEIGHTS = {"linear": (1.67, -0.67), "quadratic": (2.52, -2.24, 0.72),
                     "fixed_distance": (3.0, -3.0, 1.0)}

#: How far a gauge may sit from its nominal point before a caution: 0.1 t
#: for type a, 1 mm for type b (common practice: a gauge's own length is of
#: that order, and the extrapolation is exact at any position only for the
#: field shape it assumes).
POSITION_TOLERANCE = {"linear": 0.1, "quadratic": 0.1, "fixed_distance": 1.0}

#: Nearest a first gauge may be to the toe: 0.3 t (type a) or 3 mm (type b)
#: (common practice: the notch's own stress rise reaches about that far).
NEAREST_TO_TOE = {"linear": 0.3, "quadratic": 0.3, "fixed_distance": 3.0}

#: Curves made for the structural hot-spot stress.
HOT_SPOT_CURVES = ("IIW:FAT90", "IIW:FAT100", "IIW:FAT90-CA", "IIW:FAT100-CA",
                   "EN1993-1-9:90", "EN1993-1-9:100", "DNV-RP-C203:D", "DNV-RP-C203:D-CP",
                   "DNV-RP-C203:D-FC")


@dataclass(frozen=True)
class Extrapolation:
    """How a hot-spot point's gauges combine.

    ``positions_mm`` [mm] the gauges' distances from the toe, nearest first;
    ``weights`` [-] the factors on each gauge's stress; ``nominal_mm`` [mm]
    and ``published_weights`` [-] what the method prescribes;
    ``cautions`` about positions the method does not assume.
    """

    method: str
    thickness_mm: float | None
    positions_mm: tuple
    weights: tuple
    nominal_mm: tuple
    published_weights: tuple
    cautions: tuple = ()

    def as_dict(self) -> dict:
        return {"extrapolation": self.method, "thickness_mm": self.thickness_mm,
                "positions_mm": list(self.positions_mm), "weights": list(self.weights),
                "nominal_positions_mm": list(self.nominal_mm),
                "published_weights": list(self.published_weights)}


def lagrange_weights_at_zero(positions) -> np.ndarray:
    r"""Weights :math:`w_i` with :math:`p(0) = \sum_i w_i\,p(x_i)` for every
    polynomial :math:`p` of degree below the number of positions (Lagrange):
    :math:`w_i = \prod_{j\ne i} x_j/(x_j - x_i)`. [-]"""
    x = np.asarray(positions, dtype=float)
    w = np.ones(x.size)
    for i in range(x.size):
        for j in range(x.size):
            if j != i:
                w[i] *= x[j] / (x[j] - x[i])
    return w


def plan(method: str, thickness_mm: float | None = None,
         positions_mm=None) -> Extrapolation:
    """
    The extrapolation of a hot-spot point, checked.

    Parameters
    ----------
    method : str
        One of :data:`HOT_SPOT_METHODS`.
    thickness_mm : float, optional
        Plate thickness t at the toe (needed by ``linear`` and
        ``quadratic``, whose points are multiples of t). [mm]
    positions_mm : sequence of float, optional
        Where the gauges are, from the toe, nearest first; the nominal
        positions when omitted. [mm]

    Returns
    -------
    Extrapolation
    """
    if method not in HOT_SPOT_METHODS:
        raise unknown("extrapolation", method, HOT_SPOT_METHODS)
    type_a = method != "fixed_distance"
    scale = 1.0
    if type_a:
        if thickness_mm is None or isinstance(thickness_mm, bool) or not isinstance(
                thickness_mm, (int, float)) or not (0 < thickness_mm < 1000):
            raise InvalidParameter(f"the {method} hot-spot extrapolation places its gauges at "
                                   f"multiples of the plate thickness: give thickness_mm "
                                   f"(0 < t < 1000 mm)", field="thickness_mm",
                                   value=thickness_mm)
        scale = float(thickness_mm)
    nominal = tuple(scale * p for p in NOMINAL_POSITIONS[method])
    if positions_mm is None:
        positions = nominal
    else:
        if not isinstance(positions_mm, (list, tuple)) or not all(
                isinstance(p, (int, float)) and not isinstance(p, bool) and np.isfinite(p)
                for p in positions_mm):
            raise InvalidParameter("positions_mm must be a list of distances from the toe "
                                   "[mm]", field="positions_mm", value=positions_mm)
        positions = tuple(float(p) for p in positions_mm)
        if len(positions) != len(nominal):
            raise InvalidParameter(f"the {method} extrapolation takes {len(nominal)} gauges; "
                                   f"{len(positions)} positions were given",
                                   field="positions_mm", value=list(positions))
        if positions[0] <= 0 or any(b <= a for a, b in zip(positions, positions[1:])):
            raise InvalidParameter("gauge positions must be positive and increase away from "
                                   "the toe (nearest first)", field="positions_mm",
                                   value=list(positions))
    notes: list[Caution] = []
    unit = "t" if type_a else "mm"
    tol = POSITION_TOLERANCE[method] * scale
    off = [(p, n) for p, n in zip(positions, nominal) if abs(p - n) > tol]
    if off:
        notes.append(caution(
            "hot_spot_gauge_position", method=method,
            where=", ".join(f"{p / scale:.3g} {unit} (nominal {n / scale:.3g} {unit})"
                            for p, n in off),
            tolerance=f"{POSITION_TOLERANCE[method]:g} {unit}"))
    if positions[0] < NEAREST_TO_TOE[method] * scale:
        notes.append(caution("hot_spot_gauge_in_notch", position=f"{positions[0]:.3g} mm",
                             nearest=f"{NEAREST_TO_TOE[method]:g} {unit}"))
    w = lagrange_weights_at_zero(positions)
    return Extrapolation(method, float(thickness_mm) if type_a else thickness_mm, positions,
                         tuple(float(v) for v in w), nominal, PUBLISHED_WEIGHTS[method],
                         tuple(notes))


def extrapolate(gauges, weights) -> np.ndarray:
    """The hot-spot stress history :math:`\\sum_i w_i \\sigma_i(t)` from the
    gauges' stress histories (nearest to the toe first). [MPa]"""
    cols = [np.asarray(g, dtype=np.float64) for g in gauges]
    if len(cols) != len(weights):
        raise InvalidParameter(f"{len(weights)} gauges expected, {len(cols)} given",
                               field="gauges")
    n = cols[0].shape[0]
    if any(c.shape != (n,) for c in cols):
        raise InvalidParameter("the gauges' histories must have one length", field="gauges")
    out = weights[0] * cols[0]
    for w, c in zip(weights[1:], cols[1:]):
        out += w * c
    return out
