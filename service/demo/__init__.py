"""Generate the bundled demo: strain-gauge records from a loader-arm rig test.

Scenario (invented for the demo): the lift arm of a compact wheel loader runs
on a servo-hydraulic rig through a digging-and-dumping duty cycle. Four
uniaxial gauges, read in microstrain at 500 Hz for 120 s:

* ``weld_toe_upper``  - fillet-weld toe of the upper cross tube (as welded)
* ``weld_toe_lower``  - same detail on the lower side (mostly compressive)
* ``pin_lug``         - machined lug of the bucket pin (no fatigue data:
                         curve estimated from the tensile test)
* ``cylinder_mount``  - bracket of the lift cylinder (as welded); its cable
                         runs past the pump motor, and two switching spikes
                         from the motor's contactor got into the recording

Seeded, so every run writes the same file. ``cycleledger demo`` writes it,
and so does ``python examples/make_demo.py [OUTPUT_CSV]``; the settings per
gauge are :func:`points` (``loader_arm_points.json`` beside this module,
package data).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

RATE_HZ = 500.0
DURATION_S = 120.0
SEED = 20261202
YOUNGS_MODULUS_MPA = 206_000.0
#: The demo's rig-test target: hours of the dig-and-dump cycle.
DESIGN_HOURS = 100

#: Where the demo recording goes when no path is given: under the working
#: folder (an installed package's own folder may not be writable).
DEFAULT_CSV = Path("cycleledger-demo") / "loader_arm_rig.csv"


def points() -> dict:
    """The demo's assessment settings per gauge (package data)."""
    import json
    from importlib import resources

    return json.loads(resources.files(__package__).joinpath("loader_arm_points.json")
                      .read_text(encoding="utf-8"))


def _narrow_band(rng, n, centre_hz, width_hz, rms):
    """Gaussian noise filtered to a band by FFT shaping. [same unit as rms]"""
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1.0 / RATE_HZ)
    spec[np.abs(f - centre_hz) > width_hz / 2] = 0.0
    x = np.fft.irfft(spec, n)
    return x * (rms / x.std())


def generate(seed: int = SEED):
    """Time [s] and the four channels [microstrain] as a dict of arrays."""
    rng = np.random.default_rng(seed)
    n = int(RATE_HZ * DURATION_S)
    t = np.arange(n) / RATE_HZ
    # Duty cycle: 8 s period, digging (high load) then dumping, with a
    # slowly wandering payload.
    phase = (t % 8.0) / 8.0
    duty = np.where(phase < 0.45, np.sin(np.pi * phase / 0.45) ** 2, 0.0)
    duty -= 0.35 * np.where((phase > 0.6) & (phase < 0.85),
                            np.sin(np.pi * (phase - 0.6) / 0.25) ** 2, 0.0)
    payload = 1.0 + 0.15 * np.sin(2 * np.pi * t / 47.0)
    vib = _narrow_band(rng, n, 14.0, 4.0, 1.0)      # arm bending mode
    hyd = _narrow_band(rng, n, 38.0, 10.0, 1.0)     # pump ripple
    noise = rng.standard_normal(n)
    channels = {
        "weld_toe_upper": 120 + 480 * duty * payload + 60 * vib + 12 * hyd + 4 * noise,
        "weld_toe_lower": -150 - 420 * duty * payload - 55 * vib + 10 * hyd + 4 * noise,
        "pin_lug": 200 + 900 * duty * payload + 90 * vib + 25 * hyd + 5 * noise,
        "cylinder_mount": 40 + 260 * duty * payload + 35 * vib + 30 * hyd + 4 * noise,
    }
    # Interference: the pump contactor switching twice, one sample each.
    for at in (int(31.4 * RATE_HZ), int(77.9 * RATE_HZ)):
        channels["cylinder_mount"][at] += 2400.0
    return t, {k: np.round(v, 2) for k, v in channels.items()}


def write(path: Path = DEFAULT_CSV) -> Path:
    """Write the demo CSV (time_s plus one column per gauge) and return its path."""
    t, channels = generate()
    path.parent.mkdir(parents=True, exist_ok=True)
    cols = [np.round(t, 4)] + list(channels.values())
    header = ",".join(["time_s"] + list(channels))
    tmp = path.with_suffix(".tmp")
    np.savetxt(tmp, np.column_stack(cols), delimiter=",", header=header, comments="",
               fmt=["%.4f"] + ["%.2f"] * len(channels))
    tmp.replace(path)
    return path

