"""Strain-life against stress-life on the same notch history.

Run:  python tests/benchmarks/bench_strain_life.py [--quick]

A 1e6-sample (``--quick``: 2e5) narrow-band nominal stress history at a
notch (Kt = 2.5) is assessed by the local strain approach
(``engine.strain_life.assess_strain_life``: Neuber, Masing branches with
memory, SWT) and by stress-life (``engine.damage.assess_history`` on a
Basquin curve of the same material with SWT), both with their reserve
factor, medians of alternating repetitions in one process. Target
(issue 20): ``strain_life_over_stress_life`` <= 5. Also printed without the
reserve factor (one local analysis against one damage pass). Last line:
JSON.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_api import narrow_band  # noqa: E402
from service.engine import strain_life as sl  # noqa: E402
from service.engine.assessment import AssessmentOptions  # noqa: E402
from service.engine.damage import assess_history  # noqa: E402
from service.engine.sn_curve import basquin_amplitude  # noqa: E402

MATERIAL = sl.StrainLifeMaterial(206_000.0, 1150.0, 0.16, 1050.0, -0.085, 0.45, -0.6)
KT = 2.5


def timed(fn, repeats):
    out = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return statistics.median(out)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    n = 200_000 if args.quick else 1_000_000
    repeats = 3 if args.quick else 5
    x = narrow_band(n, 11, 1)["g0"] * 2.5 + 40.0        # nominal stress [MPa]
    curve = basquin_amplitude(1050.0, -0.085)
    opts = AssessmentOptions(mean_stress_method="smith_watson_topper",
                             load_factor=KT)  # the same pseudo stress K_t S
    sl.assess_strain_life(x[:1000], MATERIAL, kt=KT)
    assess_history(x[:1000], curve, opts)

    def strain(reserve):
        return lambda: sl.assess_strain_life(x, MATERIAL, kt=KT,
                                             mean_stress_method="smith_watson_topper",
                                             reserve_factor=reserve)

    def stress(reserve):
        o = AssessmentOptions(mean_stress_method="smith_watson_topper", load_factor=KT,
                              reserve_factor=reserve)
        return lambda: assess_history(x, curve, o)

    t_sl = timed(strain(True), repeats)
    t_st = timed(stress(True), repeats)
    t_sl1 = timed(strain(False), repeats)
    t_st1 = timed(stress(False), repeats)
    r = sl.assess_strain_life(x, MATERIAL, kt=KT, mean_stress_method="smith_watson_topper")
    print(f"{n} samples, Kt {KT}: strain-life {t_sl * 1e3:.1f} ms (reserve {r.reserve_factor:.3g},"
          f" damage {r.damage:.3g}), stress-life {t_st * 1e3:.1f} ms; without the reserve "
          f"search {t_sl1 * 1e3:.1f} / {t_st1 * 1e3:.1f} ms")
    print(json.dumps({"strain_life_over_stress_life": round(t_sl / t_st, 3),
                      "one_pass_ratio": round(t_sl1 / t_st1, 3), "samples": n}))


if __name__ == "__main__":
    main()
