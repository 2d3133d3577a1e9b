"""Run an assessment request: channels + settings in, stored results out.

Between the HTTP layer and the engine: resolves each point's settings (the
same dictionaries the CLI reads, see ``engine/settings.py``), counts and
assesses every point, turns the results into JSON-safe dictionaries and
stores them (metadata in SQLite, cycles in Parquet). Nothing here reads a
request; the API and, later, background jobs call :func:`run`.
"""

from __future__ import annotations

import math
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace

import numpy as np

from service.engine import cautions, histograms, hot_spot, multiaxial, screening
from service.engine._threads import in_one_thread
from service.engine.damage import assess, assess_history
from service.engine.errors import InvalidLoadHistory, InvalidParameter, unknown
from service.engine.rainflow import RESIDUE_TREATMENTS, CycleTable, astm_e1049, resolve_gate
from service.engine.settings import (STRAIN_LIFE_SHARED, USER_CURVE_PREFIX, is_strain_life,
                                     point_from_dict, resolve, screening_from_dict,
                                     strain_life_from_dict, thickness_note)
from service import declarations, point_methods
from service.store import parquet, sqlite

#: Mean samples a point above which points are assessed on worker threads.
THREADED_SAMPLES = 50_000
POINT_WORKERS = 2

#: Keys of an assessment request besides the samples themselves.
REQUEST_KEYS = {"history_id", "samples", "unit", "units", "youngs_modulus", "sample_rate_hz",
                "settings", "points", "gate", "gate_fraction", "residue", "multiaxial",
                "hot_spot"}

@dataclass
class PlannedPoint:
    """A point to assess: one channel's samples, or (``multiaxial`` set) the
    channels of a rosette or of stress components, reduced when assessed."""

    name: str
    samples: object  # ndarray, or {channel: ndarray} for a multi-channel point
    settings: dict
    multiaxial: dict | None = None
    hot_spot: dict | None = None

    @property
    def sample_count(self) -> int:
        if not isinstance(self.samples, dict):
            return self.samples.shape[0]
        return next(iter(self.samples.values())).shape[0]


def _merged_settings(own, defaults: dict, lookup, what: str, field: str) -> dict:
    """A point's own settings over the request's defaults, user references
    resolved, validated now (nothing is counted if any point is wrong)."""
    if not isinstance(own, dict):
        raise InvalidParameter(f"settings of {what} must be an object", field=field)
    if own.get("method") == "strain_life":
        # The request's stress-life defaults (a curve, a mean-stress method)
        # do not apply to a strain-life point; what both take does.
        defaults = {k: v for k, v in defaults.items() if k in STRAIN_LIFE_SHARED}
    merged = {**defaults, **own}
    if lookup is not None:
        merged = resolve(merged, lookup)
    if is_strain_life(merged):
        strain_life_from_dict(merged)
    else:
        point_from_dict(merged)
    return merged


def plan(request: dict, channels: dict[str, np.ndarray], lookup=None,
         units: dict | None = None) -> list[PlannedPoint]:
    """Which channels to assess with which settings; every error before any work.

    ``lookup(kind, name)`` resolves stored materials and user curves (see
    ``engine.settings.resolve``); each point keeps its resolved settings.
    ``units`` ({channel: unit as sent}), when known, lets multiaxial
    declarations check that rosette gauges are strains and components stresses.
    """
    unknown_keys = set(request) - REQUEST_KEYS
    if unknown_keys:
        raise InvalidParameter(f"unknown field(s): {', '.join(sorted(unknown_keys))}",
                               field=sorted(unknown_keys)[0])
    defaults = request.get("settings") or {}
    points = request.get("points")
    if not isinstance(defaults, dict):
        raise InvalidParameter("settings must be an object", field="settings")
    declared = request.get("multiaxial") or {}
    if not isinstance(declared, dict):
        raise InvalidParameter("multiaxial must be an object {point: declaration}",
                               field="multiaxial")
    for n in declared:
        if n in channels:
            raise InvalidParameter(f"multiaxial point {n!r} has the name of a channel: name it "
                                   f"apart from its channels", field="multiaxial", value=n)
    specs = {n: declarations.multiaxial_spec(n, s, channels, units) for n, s in declared.items()}
    toes = request.get("hot_spot") or {}
    if not isinstance(toes, dict):
        raise InvalidParameter("hot_spot must be an object {point: declaration}",
                               field="hot_spot")
    for n in toes:
        if n in channels or n in specs:
            raise InvalidParameter(f"hot-spot point {n!r} has the name of a channel or of a "
                                   f"multiaxial point: name it apart", field="hot_spot", value=n)
    hs_specs = {n: declarations.hot_spot_spec(n, s, channels) for n, s in toes.items()}
    used = {c for s in specs.values() for c in s["channels"]} | {
        g for s in hs_specs.values() for g in s["gauges"]}
    if points is None:
        points = {name: {} for name in channels if name not in used}
    if not isinstance(points, dict) or (not points and not specs and not hs_specs):
        raise InvalidParameter("points must be an object {channel: settings}", field="points")
    clash = set(points) & set(specs)
    if clash:
        raise InvalidParameter(f"{sorted(clash)[0]!r} is both a point and a multiaxial point",
                               field="multiaxial")
    out = []
    for name, own in points.items():
        if name not in channels:
            raise unknown("points", name, channels)
        merged = _merged_settings(own, defaults, lookup, f"point {name!r}", "points")
        out.append(PlannedPoint(name, channels[name], merged))
    for name, spec in specs.items():
        own = declared[name].get("settings") or {}
        merged = _merged_settings(own, defaults, lookup, f"multiaxial point {name!r}",
                                  "multiaxial")
        if is_strain_life(merged):
            raise InvalidParameter("strain-life is offered for single channels (a nominal "
                                   "stress with kt, an elastic local stress or a notch-root "
                                   "strain)", field="method")
        shear = declared[name].get("shear_settings")
        needs = [w for w, on in (("critical_plane_shear", "critical_plane_shear"
                                  in spec["reductions"]),
                                 ("shear_interaction", "shear_interaction" in spec)) if on]
        if needs:
            if not isinstance(shear, dict):
                raise InvalidParameter(f"multiaxial point {name!r}: {needs[0]} needs "
                                       f"shear_settings with a shear curve (for example "
                                       f"EN1993-1-9:shear-100)", field="shear_settings")
            if spec["kind"] == "tensor":
                raise InvalidParameter("critical_plane_shear is for plane stress (rosettes, "
                                       "sxx/syy/sxy)", field="reductions")
            shear = {**defaults, **shear}
            if lookup is not None:
                shear = resolve(shear, lookup)
            point_from_dict(shear)
            spec["shear_settings"] = shear
        elif shear is not None:
            raise InvalidParameter("shear_settings apply to the critical_plane_shear reduction "
                                   "and to shear_interaction", field="shear_settings")
        out.append(PlannedPoint(name, {c: channels[c] for c in spec["channels"]}, merged,
                                spec))
    for name, spec in hs_specs.items():
        own = toes[name].get("settings") or {}
        merged = _merged_settings(own, defaults, lookup, f"hot-spot point {name!r}", "hot_spot")
        if is_strain_life(merged):
            raise InvalidParameter("a hot-spot point is assessed on hot-spot S-N curves, not "
                                   "by strain-life", field="method")
        out.append(PlannedPoint(name, {g: channels[g] for g in spec["gauges"]}, merged,
                                hot_spot=spec))
    return out


def counting_options(request: dict) -> tuple[float | None, float | None, str]:
    gate = request.get("gate")
    frac = request.get("gate_fraction")
    for key, v in (("gate", gate), ("gate_fraction", frac)):
        if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float))):
            raise InvalidParameter(f"{key} {v!r} must be a number", field=key)
    if gate is not None and frac is not None:
        raise InvalidParameter("give gate or gate_fraction, not both", field="gate")
    residue = request.get("residue", "half_cycles")
    if residue not in RESIDUE_TREATMENTS:
        raise unknown("residue", residue, RESIDUE_TREATMENTS)
    return gate, frac, residue


def store_lookup(con, project: str):
    """``lookup(kind, name)`` over the materials and user curves of ``project``."""
    def lookup(kind: str, name: str) -> dict:
        table = "materials" if kind == "material" else "user_curves"
        doc = sqlite.get_named(con, project, table, name)
        if doc is None:
            names = [d["name"] for d in sqlite.list_named(con, project, table)]
            shown = names if kind == "material" else [USER_CURVE_PREFIX + n for n in names]
            raise unknown(kind, name if kind == "material" else USER_CURVE_PREFIX + name, shown)
        return doc
    return lookup


def json_safe(value):
    """Floats that JSON can carry: inf and NaN become None; numpy scalars become Python."""
    if isinstance(value, dict):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def assess_point(point: PlannedPoint, gate, gate_fraction, residue, duration_s):
    """``(result dict, per-cycle damage)`` of one point.

    The point's signal is screened first (``engine.screening``): by its
    ``screening`` policy the findings are reported with the result (and the
    share of damage in the cycles they touch), refused, or cleaned (spikes
    and drift) with the damage before cleaning kept. A multiaxial point is
    reduced by each of its reductions (every plane of a critical-plane scan
    counted and assessed); the worst governs and the result says which, by
    how much the others differ, and whether the principal directions rotate.
    Its gate fraction applies to the range of its signed von Mises history.
    """
    if point.hot_spot is not None:
        return point_methods.assess_hot_spot(point, gate, gate_fraction, residue, duration_s)
    if is_strain_life(point.settings):
        return point_methods.assess_strain_life(point, gate, gate_fraction, residue,
                                                duration_s)
    curve, opts, estimate = point_from_dict(point.settings)
    policy, thresholds = screening_from_dict(point.settings)
    rate = point.sample_count / duration_s if duration_s else None
    extra_cautions: list = []
    block = None
    settings_used = point.settings
    signal = None
    interaction_flag = None
    if point.multiaxial is None:
        samples, findings, cleaned = screen_channel(point.name, point.samples, rate, policy,
                                                    thresholds)
        g = resolve_gate(samples, gate or 0.0, gate_fraction)
        if findings:
            # Counted here to keep the cycles' sample indices for the shares.
            table = astm_e1049(samples, gate=g, residue=residue)
            r = assess(table, curve, opts, duration_s=duration_s)
            screening.damage_shares(findings, table.start_index, table.end_index,
                                    r.damage_per_cycle)
            if cleaned is not None:
                before = assess_history(point.samples, curve, opts, gate=g, residue=residue,
                                        duration_s=duration_s)
                cleaned["damage_before_cleaning"] = before.damage
                extra_cautions.append(cautions.caution(
                    "signal_cleaned", done="; ".join(cleaned["done"]) or "nothing to clean",
                    before=before.damage))
        else:
            r = assess_history(samples, curve, opts, gate=g, residue=residue,
                               duration_s=duration_s)
        signal = _signal_block(policy, findings, cleaned)
    else:
        spec = point.multiaxial
        findings = []
        for channel, x in point.samples.items():
            for f in _screened(channel, x, rate, policy, thresholds):
                f.description = f"{channel}: {f.description}"
                findings.append(f)
        comps = declarations.components_of(point.multiaxial, point.samples)
        g = resolve_gate(multiaxial.reduce(comps, "signed_von_mises"), gate or 0.0,
                         gate_fraction)
        shear_curve = shear_opts = None
        if "shear_settings" in spec:
            shear_curve, shear_opts, _ = point_from_dict(spec["shear_settings"])
        m = multiaxial.assess_multiaxial(comps, curve, opts, reductions=spec["reductions"],
                                         plane_step_deg=spec["plane_step_deg"], gate=g,
                                         residue=residue, duration_s=duration_s,
                                         workers=POINT_WORKERS, shear_curve=shear_curve,
                                         shear_options=shear_opts)
        r = m.governing
        extra_cautions += list(m.cautions)
        block = {**spec, **m.summary()}
        if "shear_interaction" in spec:
            inter = point_methods.interaction(spec, comps, curve, opts, shear_curve, shear_opts,
                                 m.non_proportional, g, residue, duration_s)
            block["shear_interaction"] = inter.summary()
            extra_cautions += list(inter.cautions)
            if not inter.passed:
                interaction_flag = "shear_interaction_exceeded"
        if m.reduction == "critical_plane_shear":
            settings_used = spec["shear_settings"]  # the governing result's curve
        # Cleaning a multiaxial point's channels is not offered: the
        # findings are reported (or refused).
        signal = _signal_block("report" if policy == "clean" else policy, findings, None)
    if findings:
        extra_cautions.append(findings_caution(findings))
    note = thickness_note(settings_used, curve) if point.multiaxial is None or \
        settings_used is point.settings else None
    if note is not None:
        extra_cautions.append(note)
    out = r.summary()
    if interaction_flag:
        out["flags"].append("shear_interaction_exceeded")
    out.update(
        point=point.name,
        runout=math.isinf(r.life_repeats),
        gate_mpa=g,
        top_cycles=r.top_cycles,
        curve=r.curve,
        estimate=estimate.as_dict() if estimate is not None else None,
        options={**r.options, "residue": residue},
        settings_used=settings_used,
        cautions=r.caution_dicts() + [c.as_dict() for c in extra_cautions],
        screening=signal,
    )
    if block is not None:
        out["multiaxial"] = declarations.echo(block)
    return json_safe(out), r.damage_per_cycle


def screen_channel(name: str, samples, rate, policy: str, thresholds):
    """``(samples, findings, cleaned)`` of one channel by its screening
    policy: the samples to count (cleaned under ``clean``), the findings,
    and what cleaning did (None when nothing was cleaned)."""
    findings = _screened(name, samples, rate, policy, thresholds)
    if findings and policy == "clean":
        samples, done = screening.clean(samples, findings, thresholds)
        return samples, findings, {"done": done}
    return samples, findings, None


def findings_caution(findings: list):
    """The ``signal_findings`` caution of a point's findings (with the
    largest damage share of the cycles they touch, when known)."""
    shares = [f.damage_share for f in findings if f.damage_share is not None]
    return cautions.caution(
        "signal_findings", kinds=", ".join(sorted({f.kind for f in findings})),
        share=(f" (up to {max(shares):.0%} of the damage in cycles they touch)"
               if shares else ""))


def _screened(channel: str, samples, rate, policy: str, thresholds) -> list:
    """The findings of one channel (none when screening is off); refused by
    the ``refuse`` policy with a problem naming the channel and samples."""
    if policy == "off":
        return []
    findings = screening.screen(samples, rate, thresholds)
    if findings and policy == "refuse":
        f = findings[0]
        raise InvalidLoadHistory(
            f"channel {channel!r} is refused by its screening: "
            + "; ".join(x.description for x in findings), sample_index=f.first_sample,
            channel=channel, field="screening")
    return findings


def _signal_block(policy: str, findings: list, cleaned: dict | None) -> dict:
    """What a result says of its signal's screening."""
    return {"policy": policy, "findings": [f.as_dict() for f in findings],
            "cleaned": cleaned}


def run(con, data_dir, request: dict, channels: dict[str, np.ndarray],
        duration_s: float | None, history_id: str | None, progress=None,
        samples_file: str | None = None, lookup=None, *, project: str,
        runner=None) -> dict:
    """Assess, store (in ``project``) and return the assessment row.

    ``samples_file`` is the stored history the channels came from; inline
    channels are stored with the assessment, in the database. Cycle tables are not
    stored: counting is exact and repeatable, so :func:`point_cycles`
    recounts a point from these samples when asked (a fraction of the cost
    of writing and keeping every cycle). ``progress(done, total)`` is called
    after each point, if given. ``runner(points, gate, gate_fraction, residue,
    duration_s, progress)``, if given, assesses the points elsewhere (a Dask
    cluster) and returns ``{name: result}``.
    """
    gate, frac, residue = counting_options(request)
    points = plan(request, channels, lookup)
    if runner is not None:
        done = runner(points, gate, frac, residue, duration_s, progress)
        return _store(con, request, {p.name: done[p.name] for p in points}, points, duration_s,
                      history_id, samples_file, project)
    results = {}

    def one(p):
        return assess_point(p, gate, frac, residue, duration_s)

    # Long points side by side on worker threads (the kernels release the
    # GIL); short ones in turn, as assess_many does (GIL hand-offs cost more).
    long_points = sum(p.sample_count for p in points) >= THREADED_SAMPLES * len(points)
    pool = ThreadPoolExecutor(POINT_WORKERS) if long_points and len(points) > 1 else None
    try:
        # On the pool each point keeps to its own thread (no engine helper).
        outcomes = pool.map(in_one_thread(one), points) if pool else map(one, points)
        for i, (p, (res, _dmg)) in enumerate(zip(points, outcomes)):
            results[p.name] = res
            if progress is not None:
                progress(i + 1, len(points))
    finally:
        if pool:
            pool.shutdown(cancel_futures=True)
    return _store(con, request, results, points, duration_s, history_id, samples_file, project)


def _store(con, request, results, points, duration_s, history_id, samples_file,
           project) -> dict:
    """Write an assessment's row (and its inline samples) in one transaction."""
    aid = sqlite.new_id("a")
    row = {"id": aid, "project": project, "history_id": history_id,
           "created_at": sqlite.now(), "state": "done",
           "request": json_safe({k: v for k, v in request.items() if k != "samples"}),
           "result": {"points": results, "duration_s": json_safe(duration_s),
                      "units": {"stress": "MPa", "damage": "-", "life_hours": "h",
                                "life_cycles": "cycles"},
                      "cautions": cautions.merge(
                          {name: r["cautions"] for name, r in results.items()})},
           "samples_file": samples_file}
    with sqlite.write(con):
        sqlite.insert_assessment(con, row)
        if samples_file is None:
            # Inline samples go into the same transaction: one commit (one
            # fsync) makes the result and what it was made from durable.
            kept = {}
            for p in points:
                kept.update({c: np.ascontiguousarray(x) for c, x in p.samples.items()}
                            if isinstance(p.samples, dict)
                            else {p.name: np.ascontiguousarray(p.samples)})
            sqlite.insert_samples(con, aid, kept)
    return row


def point_cycles(data_dir, assessment: dict, point: str,
                 con=None) -> tuple[CycleTable, np.ndarray]:
    """A point's cycle table and per-cycle damage, recounted from its samples.

    Uses the gate and residue treatment the assessment used and its settings,
    so the rows are the ones the stored result was computed from.
    """
    res = assessment["result"]["points"][point]
    samples = point_samples(data_dir, assessment, point, con)
    if is_strain_life(res["settings_used"]):
        return point_methods.strain_life_cycles(samples, res)
    table = astm_e1049(samples, gate=res["gate_mpa"], residue=res["options"]["residue"])
    curve, opts, _ = point_from_dict(res["settings_used"])
    r = assess(table, curve, replace(opts, reserve_factor=False, top_cycles=0))
    return table, r.damage_per_cycle


def point_samples(data_dir, assessment: dict, point: str, con=None) -> np.ndarray:
    """The history a stored point was counted from: its channel, or for a
    multiaxial point the governing reduction (or plane) rebuilt from its
    stored channels. [MPa]"""
    return point_signal(data_dir, assessment, point, con)[0]


def point_signal(data_dir, assessment: dict, point: str,
                 con=None) -> tuple[np.ndarray, np.ndarray | None]:
    """``(counted, recorded)``: the history a stored point was counted from
    (:func:`point_samples`) and, when its signal was cleaned before
    counting, the signal as recorded (else None). [MPa]"""
    toe = assessment["result"]["points"][point].get("hot_spot")
    spec = assessment["result"]["points"][point].get("multiaxial")
    spec = declarations.unecho(spec) if spec else None
    names = spec["channels"] if spec else toe["gauges"] if toe else [point]
    if assessment["samples_file"]:
        read = parquet.read_channels(data_dir, assessment["samples_file"], names)
    else:
        read = {n: sqlite.get_samples(con, assessment["id"], n) for n in names}
    if toe:
        # The weights the result was made with, as stored.
        return hot_spot.extrapolate([read[g] for g in toe["gauges"]], toe["weights"]), None
    if not spec:
        res = assessment["result"]["points"][point]
        if (res.get("screening") or {}).get("cleaned") is not None:
            # Counted from the cleaned signal: clean it again the same way.
            _, thresholds = screening_from_dict(res["settings_used"])
            found = screening.screen(read[point], None, thresholds)
            return screening.clean(read[point], found, thresholds)[0], read[point]
        return read[point], None
    comps = declarations.components_of(spec, read)
    return multiaxial.governing_history(comps, spec["reduction"],
                                        spec["plane_angle_deg"]), None


def range_mean(table: CycleTable, range_bins, mean_bins) -> dict:
    m = histograms.range_mean_matrix(table, range_bins=range_bins, mean_bins=mean_bins)
    return {"range_edges_mpa": m.row_edges.tolist(), "mean_edges_mpa": m.col_edges.tolist(),
            "cycles": m.counts.tolist(), "outside": m.outside}
