"""Spectral assessments: a vibration test profile of PSD load cases, assessed.

Between the API (or the CLI) and ``engine.spectral``. A load case is a
stress PSD table, an acceleration PSD with the user's transfer function
(|H(f)|^2 G_a(f)), or a stored history's channel turned into a PSD by
Welch's method; each has an exposure per repeat of the profile. The profile
is assessed by every method asked on the point's curve; where a load case
comes from a history, its time-domain damage (rainflow counting of the same
samples, scaled to the exposure) is given beside each method's, with the
relative difference. Results are stored.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import signal as scipy_signal
from scipy import stats

from service.engine import cautions, spectral
from service.engine.damage import assess
from service.engine.errors import InvalidParameter, unknown
from service.engine.rainflow import astm_e1049
from service.events import MissingSource, fields, number, stress_life
from service.runs import json_safe
from service.store import parquet, sqlite

REQUEST_KEYS = {"name", "load_cases", "settings", "methods", "range_bins"}
CASE_KEYS = {"name", "psd", "acceleration_psd", "transfer", "history_id", "channel",
             "exposure_s", "mean_stress_mpa", "segment_s"}
#: What a load case is made from.
CASE_SOURCES = ("psd", "acceleration_psd", "history_id")
#: Skewness and excess kurtosis beyond which a history is not Gaussian
#: enough for spectral methods (common practice: a Gaussian has 0 and 0).
_SKEW, _EXCESS = 0.5, 1.0
#: Range bins of the densities returned for plots.
_PLOT_BINS = 200


def _table(doc, where: str, value_key: str) -> tuple[np.ndarray, np.ndarray]:
    if not isinstance(doc, dict) or set(doc) != {"frequency_hz", value_key}:
        raise InvalidParameter(f"{where} must be {{frequency_hz: [...], {value_key}: [...]}}",
                               field=where)
    try:
        f = np.asarray(doc["frequency_hz"], dtype=np.float64)
        v = np.asarray(doc[value_key], dtype=np.float64)
    except (TypeError, ValueError):
        raise InvalidParameter(f"{where} must hold numbers", field=where) from None
    return f, v


def _welch(x: np.ndarray, rate: float, segment_s) -> tuple[np.ndarray, np.ndarray, int]:
    n = x.shape[0]
    if segment_s is None:
        nper = min(n, max(256, 1 << int(math.floor(math.log2(max(n // 16, 2))))))
    else:
        nper = int(round(float(segment_s) * rate))
        if nper < 16 or nper > n:
            raise InvalidParameter(f"segment_s gives {nper} samples; it must be 16 to the "
                                   f"history's {n}", field="segment_s")
    f, g = scipy_signal.welch(x, fs=rate, nperseg=nper, detrend="constant", scaling="density")
    return f, g, nper


def _case(con, data_dir, project, spec, i) -> tuple[spectral.LoadCase, dict, object]:
    """``(load case, its echo, samples or None)``."""
    where = f"load_cases[{i}]"
    fields(spec, CASE_KEYS, where, "load_cases")
    name = spec.get("name", f"case-{i + 1}")
    if not isinstance(name, str) or not name:
        raise InvalidParameter(f"{where}: name must be a text", field="name")
    sources = [k for k in CASE_SOURCES if k in spec]
    if len(sources) != 1:
        raise InvalidParameter(f"load case {name!r}: give one of {', '.join(CASE_SOURCES)}",
                               field="load_cases")
    exposure = number(spec.get("exposure_s"), "exposure_s",
                      what=f"exposure_s of load case {name!r}")
    mean = spec.get("mean_stress_mpa")
    echo = {"name": name, "source": sources[0], "exposure_s": float(exposure)}
    samples = None
    if sources[0] == "psd":
        f, g = _table(spec["psd"], "psd", "psd")
        spectral.check_psd(f, g)
    elif sources[0] == "acceleration_psd":
        fa, ga = _table(spec["acceleration_psd"], "acceleration_psd", "psd")
        if "transfer" not in spec:
            raise InvalidParameter(f"load case {name!r}: an acceleration PSD needs transfer "
                                   "{frequency_hz, gain} (stress per unit acceleration)",
                                   field="transfer")
        fh, h = _table(spec["transfer"], "transfer", "gain")
        spectral.check_psd(fa, ga)
        spectral.check_psd(fh, np.abs(h))
        if fa[0] < fh[0] or fa[-1] > fh[-1]:
            raise InvalidParameter(f"load case {name!r}: the transfer function covers "
                                   f"{fh[0]:g}-{fh[-1]:g} Hz, the PSD {fa[0]:g}-{fa[-1]:g} Hz",
                                   field="transfer")
        f, g = fa, np.interp(fa, fh, np.abs(h)) ** 2 * ga
    else:
        hid = spec["history_id"]
        hist = sqlite.get_history(con, project, hid) if isinstance(hid, str) else None
        if hist is None:
            raise MissingSource(f"load case {name!r}: no history {hid!r}", "history_id")
        names = [c["name"] for c in hist["channels"]]
        channel = spec.get("channel", names[0] if len(names) == 1 else None)
        if channel not in names:
            raise unknown("channel", channel, names)
        rate = hist.get("sample_rate_hz")
        if not rate:
            raise InvalidParameter(f"load case {name!r}: the history has no sample rate",
                                   field="history_id")
        samples = parquet.read_channels(data_dir, hist["file"], [channel])[channel]
        f, g, nper = _welch(samples, rate, spec.get("segment_s"))
        if mean is None:
            mean = float(np.mean(samples))
        echo.update(history_id=hid, channel=channel, welch_segment_samples=nper,
                    history_duration_s=samples.shape[0] / rate,
                    skewness=float(stats.skew(samples)),
                    excess_kurtosis=float(stats.kurtosis(samples)))
    if mean is not None:
        mean = number(mean, "mean_stress_mpa", positive=False,
                      what=f"mean_stress_mpa of load case {name!r}")
    echo["mean_stress_mpa"] = float(mean or 0.0)
    echo["moments"] = spectral.moments(f, g).as_dict()
    case = spectral.LoadCase(name, f, g, float(exposure), float(mean or 0.0))
    return case, echo, samples


def evaluate(con, data_dir, project: str, request: dict, lookup=None) -> dict:
    """The result of a spectral assessment request (not stored)."""
    fields(request, REQUEST_KEYS, "the request", "body")
    specs = request.get("load_cases")
    if not isinstance(specs, list) or not specs:
        raise InvalidParameter("load_cases must be a non-empty list", field="load_cases")
    methods = request.get("methods") or list(spectral.DEFAULT_METHODS)
    if not isinstance(methods, list) or not methods:
        raise InvalidParameter("methods must be a list of names", field="methods")
    for m in methods:
        if m not in spectral.RANGE_DENSITIES:
            raise unknown("methods", m, spectral.RANGE_DENSITIES)
    settings = request.get("settings") or {}
    if not isinstance(settings, dict):
        raise InvalidParameter("settings must be an object", field="settings")
    settings, curve, opts, estimate = stress_life(
        settings, lookup, "spectral methods weigh ranges on an S-N curve: strain-life "
        "settings are not taken here")
    built = [_case(con, data_dir, project, s, i) for i, s in enumerate(specs)]
    names = [c.name for c, _, _ in built]
    if len(set(names)) != len(names):
        raise InvalidParameter("load case names must be unique", field="name")
    cases = [c for c, _, _ in built]
    results = spectral.assess_spectrum(cases, curve, opts, methods)
    profile_s = sum(c.exposure_s for c in cases)
    # Time-domain damage where every case has its samples.
    time_domain = None
    if all(s is not None for _, _, s in built):
        from dataclasses import replace

        plain = replace(opts, reserve_factor=False, top_cycles=0)
        per_case = {}
        for c, echo, s in built:
            one = assess(astm_e1049(s), curve, plain).damage
            per_case[c.name] = one * c.exposure_s / echo["history_duration_s"]
        total = sum(per_case.values())
        time_domain = {"damage": total, "damage_per_case": per_case,
                       "method": "rainflow counting of the histories (ASTM E1049-85), "
                                 "scaled to each exposure"}
    out_methods = {}
    for m, r in results.items():
        if r.not_applicable is not None:
            out_methods[m] = {"applicable": False, "not_applicable": r.not_applicable,
                              "damage": None, "life_repeats": None, "life_hours": None,
                              "reserve_factor": None, "flags": [], "cautions": []}
            continue
        a = r.assessment
        out_methods[m] = {
            "applicable": True, "damage": a.damage, "life_repeats": a.life_repeats,
            "life_hours": a.life_hours,
            "reserve_factor": a.reserve_factor, "reserve_limited_by": a.reserve_limited_by,
            "equivalent_range": a.equivalent_range, "equivalent_cycles": a.equivalent_cycles,
            "cycles_counted": a.cycles_counted, "below_limit": a.below_limit,
            "flags": list(a.flags), "damage_per_case": r.damage_per_case,
            "largest_range": r.largest_range,
            "relative_to_time_domain": (a.damage / time_domain["damage"] - 1.0
                                        if time_domain and time_domain["damage"] > 0 else None),
            "cautions": a.caution_dicts()}
    usable = [m for m in methods if out_methods[m]["applicable"]]
    if not usable:
        raise InvalidParameter("none of the methods asked applies to these spectra: "
                               + "; ".join(out_methods[m]["not_applicable"] for m in methods),
                               field="methods")
    governing = usable[0]
    notes = [cautions.caution("spectral_gaussian")]
    for m in methods:
        if not out_methods[m]["applicable"]:
            notes.append(cautions.caution("spectral_not_applicable", method=m,
                                          why=out_methods[m]["not_applicable"]))
    if "wirsching_light" in methods and len(curve.slopes) > 1:
        notes.append(cautions.caution("wirsching_light_slope", slope=curve.slopes[0]))
    if "zhao_baker" in methods:
        notes.append(cautions.caution("zhao_baker_coefficients"))
    for _, echo, s in built:
        if s is not None and (abs(echo["skewness"]) > _SKEW
                              or abs(echo["excess_kurtosis"]) > _EXCESS):
            notes.append(cautions.caution("non_gaussian", case=echo["name"],
                                          skew=echo["skewness"],
                                          kurtosis=echo["excess_kurtosis"] + 3.0))
    general = [{k: v for k, v in g.items() if k != "points"} for g in cautions.general()]
    gov = out_methods[governing]
    return json_safe({
        "governing_method": governing, "damage": gov["damage"],
        "life_repeats": gov["life_repeats"], "life_hours": gov["life_hours"],
        "reserve_factor": gov["reserve_factor"], "flags": gov["flags"],
        "profile_s": profile_s, "load_cases": [e for _, e, _ in built],
        "methods": out_methods, "time_domain": time_domain,
        "curve": curve.description, "options": opts.echo(),
        "estimate": estimate.as_dict() if estimate is not None else None,
        "settings_used": settings,
        "units": {"stress": "MPa", "psd": "MPa^2/Hz", "damage": "-", "life_hours": "h"},
        "cautions": general + [n.as_dict() for n in notes] + gov["cautions"],
    })


def densities(request: dict, result: dict, con, data_dir, project: str) -> dict:
    """For plots: each load case's PSD and each method's range density
    (expected cycles per second per MPa), and the rainflow histogram of its
    history when it has one."""
    out = {}
    for i, spec in enumerate(request["load_cases"]):
        case, echo, samples = _case(con, data_dir, project, spec, i)
        mom = spectral.moments(case.frequency, case.psd)
        edges = spectral.range_edges(mom, bins=_PLOT_BINS)
        dens = {}
        for m, r in result["methods"].items():
            if not r.get("applicable", True):
                continue
            centres, counts = spectral.expected_cycles(mom, m, 1.0, edges)
            dens[m] = counts / np.diff(edges)
        hist = None
        if samples is not None:
            t = astm_e1049(samples)
            h, _ = np.histogram(t.stress_range, bins=edges, weights=t.count)
            hist = h / (echo["history_duration_s"] * np.diff(edges))
        out[case.name] = {"frequency": case.frequency, "psd": case.psd,
                          "centres": 0.5 * (edges[:-1] + edges[1:]), "densities": dens,
                          "rainflow": hist}
    return out


def run(con, data_dir, project: str, request: dict, lookup=None) -> dict:
    """Evaluate and store; the stored row."""
    result = evaluate(con, data_dir, project, request, lookup)
    return sqlite.store_doc(con, "spectra", "s", project, request.get("name"),
                            json_safe(request), result)
