"""Fatigue editing against assessing the same recording.

Run:  python tests/benchmarks/bench_editing.py [--quick]

A seeded rig-like recording of 8 channels and 1e6 samples each (``--quick``:
2e5): bursts of narrow-band load with quiet stretches of sensor noise
between them, every channel with its own carrier and level. Editing
(``engine.editing.edit_recording``: count, damage windows, joins, the
edited signal counted again) with ``keep = 0.95`` against assessing the 8
channels (``engine.damage.assess_history`` with its reserve factor, as an
assessment does), medians of alternating repetitions in one process.
Targets (issue 21): ``editing_over_assessment`` <= 3 and ``damage_kept_min``
>= 0.95; ``length_kept`` is the share of samples the edited signal keeps.
Last line: JSON.
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
from scipy.signal import lfilter  # noqa: E402

from service.engine.assessment import AssessmentOptions  # noqa: E402
from service.engine.damage import assess_history  # noqa: E402
from service.engine.editing import edit_recording  # noqa: E402
from service.engine.sn_catalogue import catalogue_curve  # noqa: E402

CHANNELS = 8


def rig_like(n: int, seed: int = 21) -> np.ndarray:
    """Bursts (2-15 thousand samples) between quiet stretches (5-40 thousand)."""
    rng = np.random.default_rng(seed)
    gain = np.zeros(n)
    pos = 0
    while pos < n:
        quiet, busy = int(rng.integers(5000, 40000)), int(rng.integers(2000, 15000))
        gain[pos + quiet:pos + quiet + busy] = rng.uniform(0.5, 1.5)
        pos += quiet + busy
    x = np.empty((CHANNELS, n))
    t = np.arange(n)
    for c in range(CHANNELS):
        w = lfilter([1.0], [1.0, -1.6 + 0.05 * c, 0.7], rng.normal(size=n))
        x[c] = (60.0 * gain * w / np.std(w) + 0.6 * rng.normal(size=n)
                + 20.0 * np.sin(2 * np.pi * 3 * t / n + c))
    return x


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    n = 200_000 if args.quick else 1_000_000
    repeats = 3 if args.quick else 5
    x = rig_like(n)
    curve = catalogue_curve("EN1993-1-9:71")
    opts = AssessmentOptions()
    models = [(curve, opts)] * CHANNELS
    edit_recording(x[:, :5000], models)          # kernels compiled or loaded
    assess_history(x[0, :5000], curve, opts)

    def assessing():
        for row in x:
            assess_history(row, curve, opts)

    result = {}

    def editing():
        result["e"] = edit_recording(x, models, keep=0.95)

    t_assess, t_edit = [], []
    for _ in range(repeats):  # alternating, so both see the same machine
        t0 = time.perf_counter()
        assessing()
        t1 = time.perf_counter()
        editing()
        t_assess.append(t1 - t0)
        t_edit.append(time.perf_counter() - t1)
    a, e = statistics.median(t_assess), statistics.median(t_edit)
    ed = result["e"]
    print(f"{CHANNELS} channels x {n} samples, rig-like (quiet stretches), EN 1993-1-9 curve 71")
    print(f"assessing (8 x assess_history, reserve factor): {a * 1e3:8.1f} ms")
    print(f"editing (keep 0.95, window {ed.window} samples):  {e * 1e3:8.1f} ms")
    print(f"damage kept per channel: {np.round(ed.damage_kept, 4).tolist()}")
    print(f"length kept: {ed.length_kept:.3f} in {ed.pieces} pieces")
    print(json.dumps({"editing_over_assessment": round(e / a, 3),
                      "damage_kept_min": round(float(ed.damage_kept.min()), 4),
                      "length_kept": round(ed.length_kept, 4),
                      "assessment_ms": round(a * 1e3, 1), "editing_ms": round(e * 1e3, 1),
                      "samples": n, "channels": CHANNELS, "quick": args.quick}))


if __name__ == "__main__":
    main()
