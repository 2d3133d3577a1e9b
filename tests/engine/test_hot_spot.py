"""Hot-spot stress from gauges at a weld toe (issue 19).

Sources: IIW recommendations (A. Hobbacher, IIW document XIII-2460-13,
2016) sec. 2.2.3 and DNV-RP-C203 (2016) sec. 4.3 give the extrapolations
sigma_hs = 1.67 s(0.4t) - 0.67 s(1.0t) (linear), 2.52 s(0.4t) - 2.24 s(0.9t)
+ 0.72 s(1.4t) (quadratic) and 3 s(4 mm) - 3 s(8 mm) + s(12 mm) (type b)
(coefficients from memory; checked here by their definition: the line or
parabola through the reference points, evaluated at the toe).
"""

import numpy as np
import pytest

from service.engine import hot_spot
from service.engine.errors import EngineError


@pytest.mark.parametrize("method, published, digits", [
    ("linear", (1.67, -0.67), 2),              # 5/3 and -2/3, printed to two decimals
    ("quadratic", (2.52, -2.24, 0.72), 12),    # exact at the nominal points
    ("fixed_distance", (3.0, -3.0, 1.0), 12),
])
def test_the_weights_at_the_nominal_points_are_the_published_coefficients(method, published,
                                                                         digits):
    ex = hot_spot.plan(method, thickness_mm=20.0)
    np.testing.assert_allclose(ex.weights, published, atol=0.5 * 10.0 ** -digits)
    assert ex.published_weights == published and ex.cautions == ()
    # The weights of an extrapolation to x = 0 sum to one (a uniform field
    # is its own hot-spot stress).
    assert sum(ex.weights) == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("method, t, positions", [
    ("linear", 12.0, None), ("linear", 12.0, [5.5, 11.0]),
    ("quadratic", 25.0, None), ("quadratic", 25.0, [9.0, 23.5, 34.0]),
    ("fixed_distance", None, None), ("fixed_distance", None, [4.5, 8.2, 12.9]),
])
def test_a_linear_and_a_quadratic_field_are_extrapolated_exactly(method, t, positions):
    # The structural stress grows towards the toe; a field of the degree the
    # rule assumes is extrapolated exactly, wherever the gauges sit.
    ex = hot_spot.plan(method, t, positions)
    x = np.array(ex.positions_mm)
    fields = [lambda s: 180.0 - 2.5 * s]
    if len(x) == 3:
        fields.append(lambda s: 210.0 - 6.0 * s + 0.08 * s ** 2)
    for f in fields:
        got = sum(w * f(p) for w, p in zip(ex.weights, x))
        assert got == pytest.approx(f(0.0), rel=1e-12)


def test_histories_are_combined_sample_by_sample():
    # A load history h(t) scaling a quadratic field: the extrapolated history
    # is h(t) times the field at the toe.
    rng = np.random.default_rng(3)
    h = rng.normal(0, 1, 2000).cumsum()
    ex = hot_spot.plan("quadratic", 16.0)
    field = [1.0 - 0.02 * p + 0.0003 * p * p for p in ex.positions_mm]
    gauges = [h * f for f in field]
    np.testing.assert_allclose(hot_spot.extrapolate(gauges, ex.weights), h, rtol=1e-12,
                               atol=1e-12)


def test_gauges_away_from_their_points_or_in_the_notch_are_cautioned():
    ex = hot_spot.plan("linear", 10.0, [5.5, 10.0])        # 0.55 t: 0.15 t off
    assert [c.code for c in ex.cautions] == ["hot_spot_gauge_position"]
    assert "0.55 t (nominal 0.4 t)" in ex.cautions[0].text
    ex = hot_spot.plan("linear", 10.0, [2.0, 8.0])         # 0.2 t: in the notch too
    assert [c.code for c in ex.cautions] == ["hot_spot_gauge_position",
                                            "hot_spot_gauge_in_notch"]
    ex = hot_spot.plan("fixed_distance", None, [4.4, 8.0, 12.6])   # within 1 mm
    assert ex.cautions == ()


@pytest.mark.parametrize("args, field", [
    (("linear", None), "thickness_mm"),
    (("quadratic", -3.0), "thickness_mm"),
    (("cubic", 10.0), "extrapolation"),
    (("linear", 10.0, [10.0, 4.0]), "positions_mm"),           # must increase
    (("linear", 10.0, [4.0, 10.0, 14.0]), "positions_mm"),     # two gauges
    (("fixed_distance", None, [0.0, 8.0, 12.0]), "positions_mm"),
])
def test_what_the_rules_cannot_use_is_refused(args, field):
    with pytest.raises(EngineError) as err:   # a problem naming the field
        hot_spot.plan(*args)
    assert err.value.field == field
