"""Spectral methods against counting a history synthesised from the same PSD.

Run:  python tests/benchmarks/bench_spectral.py [--quick]

Three seeded spectra of 4096 lines (narrow: one peak; wide: a flat band;
bimodal: two peaks). Timing: assessing the wide one by every method
(``engine.spectral.assess_spectrum``: moments, five densities, damage and
reserve factor on EN 1993-1-9 curve 71) against counting and assessing a
1e6-sample history synthesised from it (``damage.assess_history``; the
synthesis itself not timed), medians of alternating repetitions in one
process. Target (issue 22): ``psd_over_time_domain`` <= 0.02.

Accuracy: each method's damage over the damage counted on the synthesised
history (1e6 samples; ``--quick`` 2e5: more scatter), on Basquin curves of
slope 3 and 5, for the three spectra; ``dirlik_max_rel_error`` is the
largest |ratio - 1| of Dirlik's (asked for <= 0.15). Last line: JSON.
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
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import numpy as np  # noqa: E402

from service.engine import spectral as sp  # noqa: E402
from service.engine.damage import assess_history  # noqa: E402
from service.engine.rainflow import astm_e1049  # noqa: E402
from service.engine.sn_catalogue import catalogue_curve  # noqa: E402

RATE = 256.0
F = np.linspace(0.0, 100.0, 4096)
SPECTRA = {
    "narrow": np.exp(-0.5 * ((F - 10.0) / 0.5) ** 2) * 400.0,
    "wide": np.where((F >= 2.0) & (F <= 60.0), 30.0, 0.0),
    "bimodal": (np.exp(-0.5 * ((F - 5.0) / 1.0) ** 2) * 300.0
                + np.exp(-0.5 * ((F - 50.0) / 3.0) ** 2) * 60.0),
}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    n = 200_000 if args.quick else 1_000_000
    repeats = 5 if args.quick else 9
    duration = n / RATE
    curve = catalogue_curve("EN1993-1-9:71")
    histories = {k: sp.synthesize(F, g, duration, RATE, seed=7) for k, g in SPECTRA.items()}
    wide = sp.LoadCase("wide", F, SPECTRA["wide"], duration)
    sp.assess_spectrum([wide], curve)  # kernels compiled or loaded
    assess_history(histories["wide"][:5000], curve)
    t_td, t_psd = [], []
    for _ in range(repeats):
        t0 = time.perf_counter()
        assess_history(histories["wide"], curve)
        t1 = time.perf_counter()
        sp.assess_spectrum([wide], curve)
        t2 = time.perf_counter()
        t_td.append(t1 - t0)
        t_psd.append(t2 - t1)
    td, psd = statistics.median(t_td), statistics.median(t_psd)
    t0 = time.perf_counter()
    sp.synthesize(F, SPECTRA["wide"], duration, RATE, seed=8)
    synth = time.perf_counter() - t0
    errors = {}
    for name, g in SPECTRA.items():
        t = astm_e1049(histories[name])
        case = sp.LoadCase(name, F, g, duration)
        for slope in (3.0, 5.0):
            truth = float(np.sum(t.count * t.stress_range ** slope)) / 1e14
            from service.engine.sn_curve import basquin_range

            r = sp.assess_spectrum([case], basquin_range(slope, 1e14))
            for method, res in r.items():
                errors.setdefault(method, {})[f"{name}_m{slope:g}"] = round(
                    res.assessment.damage / truth - 1.0, 4)
    print(f"4096-line PSD, every method ({len(sp.DEFAULT_METHODS)}): {psd * 1e3:7.3f} ms")
    print(f"counting and assessing {n} samples:          {td * 1e3:7.3f} ms")
    print(f"synthesising them from the PSD (not in the ratio): {synth * 1e3:7.3f} ms")
    print("relative error against counting the synthesised history:")
    for method, e in errors.items():
        print(f"  {method:<18} " + "  ".join(f"{k} {v:+.3f}" for k, v in e.items()))
    worst = {m: max(abs(v) for v in e.values()) for m, e in errors.items()}
    print(json.dumps({"psd_over_time_domain": round(psd / td, 4),
                      "dirlik_max_rel_error": worst["dirlik"],
                      "max_rel_error": worst, "psd_ms": round(psd * 1e3, 3),
                      "time_domain_ms": round(td * 1e3, 2),
                      "psd_over_synthesis_and_time_domain": round(psd / (td + synth), 4),
                      "samples": n,
                      "quick": args.quick}))


if __name__ == "__main__":
    main()
