"""Normal and shear stress in a weld combined by the codes' rules (issue 19).

Sources: EN 1993-1-9:2005 sec. 8(3), eq. (8.3): (gFf dsE2 / (dsC / gMf))^3 +
(gFf dtE2 / (dtC / gMf))^5 <= 1, with dsE2 the damage-equivalent range at
2e6 cycles; the curves by eq. (7.1) (N = 2e6 (dsC/ds)^3 above the knee) and
Fig. 7.2 (shear, m = 5). IIW recommendations (Hobbacher 2016): Gough-Pollard
(ds/dsR)^2 + (dt/dtR)^2 <= CV, CV = 1.0 proportional, 0.5 non-proportional
for steel (from memory). Each case below is worked by hand in the test.
"""

import math

import numpy as np
import pytest

from service.engine import weld_interaction as wi
from service.engine.assessment import AssessmentOptions
from service.engine.damage import assess
from service.engine.rainflow import CycleTable
from service.engine.sn_catalogue import catalogue_curve

EN71 = catalogue_curve("EN1993-1-9:71")
EN_SHEAR = catalogue_curve("EN1993-1-9:shear-100")
FAT90 = catalogue_curve("IIW:FAT90")
IIW_SHEAR = catalogue_curve("IIW:shear-FAT100")


def constant(range_mpa: float, cycles: int) -> CycleTable:
    """``cycles`` full cycles of one range about zero."""
    a = range_mpa / 2.0
    n = cycles
    return CycleTable(np.full(n, -a), np.full(n, a), np.ones(n), np.arange(n), np.arange(n) + 1)


def parts(ds, dt, n, curve_s=EN71, curve_t=EN_SHEAR, opts=None):
    opts = opts or AssessmentOptions()
    return assess(constant(ds, n), curve_s, opts), assess(constant(dt, n), curve_t, opts)


def test_en1993_eq_8_3_by_hand():
    # 100 MPa on category 71 and 60 MPa in shear on category 100, 2e5 times.
    ds, dt, n = 100.0, 60.0, 200_000
    s, t = parts(ds, dt, n)
    # By hand: the equivalent ranges at 2e6 of n cycles on slopes 3 and 5.
    ds_e2 = ds * (n / 2e6) ** (1 / 3)
    dt_e2 = dt * (n / 2e6) ** (1 / 5)
    by_hand = (ds_e2 / 71.0) ** 3 + (dt_e2 / 100.0) ** 5
    got = wi.check("en1993-1-9", s, t)
    assert got.value == pytest.approx(by_hand, rel=1e-12)
    assert got.summary()["normal"]["equivalent_range"] == pytest.approx(ds_e2, rel=1e-12)
    assert got.summary()["shear"]["equivalent_range"] == pytest.approx(dt_e2, rel=1e-12)
    assert got.limit == 1.0 and got.passed == (by_hand <= 1.0)


def test_en1993_with_partial_factors_by_hand():
    # gFf = 1.0, gMf = 1.35 (EN 1993-1-9 Table 3.1, safe life, high
    # consequence: from memory): the factors enter as the code writes them.
    ds, dt, n = 80.0, 50.0, 300_000
    s, t = parts(ds, dt, n, opts=AssessmentOptions(load_factor=1.0, strength_factor=1.35))
    by_hand = (ds * (n / 2e6) ** (1 / 3) / (71.0 / 1.35)) ** 3 + (
        dt * (n / 2e6) ** (1 / 5) / (100.0 / 1.35)) ** 5
    assert wi.check("en1993-1-9", s, t).value == pytest.approx(by_hand, rel=1e-12)


def test_an_interaction_at_the_limit_and_the_life_it_gives():
    # Cycles chosen so that the EN sum is exactly 1: n = 1 / (1/Ns + 1/Nt).
    ds, dt = 110.0, 75.0
    ns = 2e6 * (71.0 / ds) ** 3
    nt = 2e6 * (100.0 / dt) ** 5
    n_limit = 1.0 / (1.0 / ns + 1.0 / nt)
    s, t = parts(ds, dt, 1000)
    got = wi.check("en1993-1-9", s, t)
    assert got.value == pytest.approx(1000 / n_limit, rel=1e-12)
    assert got.life_repeats * 1000 == pytest.approx(n_limit, rel=1e-12)
    # Each part alone passes at the limit's cycles; together they just reach 1.
    assert n_limit / ns < 1 and n_limit / nt < 1


@pytest.mark.parametrize("loading, cv", [("proportional", 1.0), ("non_proportional", 0.5)])
def test_iiw_gough_pollard_by_hand(loading, cv):
    # Constant amplitude: dsR(n) = FAT (2e6/n)^(1/m) is the resistance at the
    # cycles applied, and the rule is (ds/dsR)^2 + (dt/dtR)^2 <= CV.
    ds, dt, n = 95.0, 70.0, 250_000
    s, t = parts(ds, dt, n, FAT90, IIW_SHEAR)
    ds_r = 90.0 * (2e6 / n) ** (1 / 3)
    dt_r = 100.0 * (2e6 / n) ** (1 / 5)
    by_hand = (ds / ds_r) ** 2 + (dt / dt_r) ** 2
    got = wi.check("iiw", s, t, loading=loading)
    assert got.value == pytest.approx(by_hand, rel=1e-12)
    assert got.limit == cv and got.loading == loading
    # The life: repeats k with (k us)^(2/3) + (k ut)^(2/5) = CV.
    k = got.life_repeats
    assert wi.interaction_value("iiw", k * got.usage_normal, k * got.usage_shear, 3, 5) == \
        pytest.approx(cv, rel=1e-9)


def test_auto_loading_follows_the_rotation_and_cv_can_be_set():
    s, t = parts(95.0, 70.0, 10_000, FAT90, IIW_SHEAR)
    assert wi.check("iiw", s, t, non_proportional=True).limit == 0.5
    assert wi.check("iiw", s, t, non_proportional=False).limit == 1.0
    assert wi.check("iiw", s, t, comparison_value=0.7).limit == 0.7
    en = wi.check("en1993-1-9", s, t, non_proportional=True)
    assert "interaction_non_proportional_en" in [c.code for c in en.cautions]
    with pytest.raises(Exception):
        wi.check("en1993-1-9", s, t, comparison_value=0.5)


def test_exceeding_the_limit_is_said_and_no_damage_is_runout():
    s, t = parts(150.0, 120.0, 3_000_000)
    got = wi.check("en1993-1-9", s, t)
    assert not got.passed and got.life_repeats < 1
    assert "shear_interaction_exceeded" in [c.code for c in got.cautions]
    s0, t0 = parts(10.0, 10.0, 100)        # below both cut-offs: no damage
    assert math.isinf(wi.check("iiw", s0, t0).life_repeats)
