"""HTML pages of an assessment and of an asset: one self-contained file each.

Everything is inline (styles, SVG plots), so a page works offline, can be
mailed or archived, and prints cleanly. The numbers in the tables are the
ones the API returns for the same resource.
"""

from __future__ import annotations

import html

from service import formatting
from service.engine.cautions import as_dict as caution_dict
from service.engine.cautions import caution
from service.engine.cautions import general as general_cautions

#: The style every page shares (report pages and the start page).
BASE_CSS = """
:root { --ink:#23313b; --teal:#17707f; --amber:#d48a0b; --rose:#b0384f; --ground:#eef3f4; }
* { box-sizing: border-box; }
body { margin: 0; font: 14px/1.45 "DejaVu Sans", "Segoe UI", sans-serif; color: var(--ink);
       background: var(--ground); }
header { background: var(--ink); color: #fff; padding: 18px 28px; }
header h1 { margin: 0 0 4px; font-size: 20px; font-weight: 600; }
header p { margin: 0; opacity: .8; }
main { max-width: 1080px; margin: 0 auto; padding: 18px 28px 40px; }
section { background: #fff; border-radius: 6px; padding: 14px 18px; margin: 14px 0;
          box-shadow: 0 1px 2px rgba(0,0,0,.08); }
h2 { font-size: 16px; margin: 0 0 10px; color: var(--teal); }
table { border-collapse: collapse; width: 100%; font-variant-numeric: tabular-nums; }
th, td { padding: 5px 8px; border-bottom: 1px solid #dde5e7; text-align: right; }
th:first-child, td:first-child { text-align: left; }
th { font-weight: 600; background: var(--ground); }
td.flag { color: var(--rose); text-align: left; }
.caution { border-left: 4px solid var(--amber); background: #fff8ea; padding: 10px 14px; }
.caution ul { margin: 6px 0 0 18px; padding: 0; }
.caution h3 { font-size: 13px; margin: 10px 0 0; }
td.text { text-align: left; }
.plots { display: grid; grid-template-columns: repeat(auto-fit, minmax(440px, 1fr)); gap: 12px; }
figure { margin: 0; } figure svg { width: 100%; height: auto; }
figcaption { font-size: 12px; opacity: .75; }
dl { display: grid; grid-template-columns: max-content 1fr; gap: 4px 14px; margin: 0; }
dt { font-weight: 600; }
@media print { body { background: #fff; } section { box-shadow: none; break-inside: avoid; }
               header { color: var(--ink); background: #fff; border-bottom: 2px solid var(--ink); } }
"""


def fmt(v) -> str:
    """A value for a table: numbers by the one policy of ``service.formatting``
    (counts as counts are formatted by the caller), text escaped."""
    if v is None or isinstance(v, (bool, int, float)):
        return formatting.number(v)
    return html.escape(str(v))


def _svg(svg: bytes) -> str:
    text = svg.decode("utf-8")
    return text[text.find("<svg"):]  # drop the XML prolog: inline in HTML


def _flags_cell(flags) -> str:
    """Flags in the alarm colour; none is a plain ``-`` (the colour means an alarm)."""
    if not flags:
        return "<td class='text' data-field='flags'>-</td>"
    return f"<td class='flag' data-field='flags'>{html.escape(', '.join(flags))}</td>"


def _caution_groups(cautions) -> list[tuple[str, list[dict]]]:
    """Cautions grouped by point: those for every point (the general ones, and
    any that concern all the points named) first, then each point's own, each
    group in severity order (as given: :func:`service.engine.cautions.merge`
    sorts them)."""
    cautions = [caution_dict(c) for c in cautions]
    named = sorted({p for c in cautions for p in c.get("points") or ()})
    groups: dict[str, list[dict]] = {"All points": []}
    for c in cautions:
        pts = c.get("points") or []
        if not pts or (len(named) > 1 and sorted(pts) == named):
            groups["All points"].append(c)
            continue
        for p in pts:
            groups.setdefault(f"Point {p}", []).append(c)
    return [(k, v) for k, v in groups.items() if v]


def _page(title: str, subtitle: str, body: list[str], cautions) -> str:
    def item(c: dict) -> str:
        tag = "" if c["severity"] == "general" else f"<b>{html.escape(c['severity'])}:</b> "
        return (f"<li data-code='{html.escape(c['code'])}' data-severity='{c['severity']}'>"
                f"{tag}{html.escape(c['text'])}</li>")

    groups = _caution_groups(cautions)
    items = "".join(
        (f"<h3 data-group='{html.escape(name)}'>{html.escape(name)}</h3>"
         if len(groups) > 1 else "")
        + f"<ul>{''.join(item(c) for c in group)}</ul>" for name, group in groups)
    return (
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
        f"<meta name='viewport' content='width=device-width, initial-scale=1'>"
        f"<title>{html.escape(title)}</title><style>{BASE_CSS}</style></head><body>"
        f"<header><h1>{html.escape(title)}</h1><p>{html.escape(subtitle)}</p></header><main>"
        f"<section class='caution' id='cautions'><strong>Read before use.</strong>{items}"
        "</section>" + "".join(body) + "</main></body></html>")


def _figure(plot_id: str, svg: bytes, caption: str) -> str:
    return (f"<figure id='{html.escape(plot_id)}' class='plot'>{_svg(svg)}"
            f"<figcaption>{html.escape(caption)}</figcaption></figure>")


SUMMARY_COLUMNS = (("damage", "damage [-]"), ("damage_per_repeat", "per repeat [-]"),
                   ("life_repeats", "life [repeats]"),
                   ("life_hours", "life [h]"), ("reserve_factor", "reserve factor [-]"),
                   ("reserve_limited_by", "reserve set by"),
                   ("equivalent_range", "eq. range [MPa]"), ("max_range", "max range [MPa]"),
                   ("cycles_counted", "cycles"))


def assessment_page(resource: dict, plots: dict[str, bytes]) -> str:
    """The page of an assessment: summary, settings and sources, plots, cautions.

    ``plots`` maps plot ids (``damage``, ``history``, ``exceedance``,
    ``sn-<point>``, ``range-mean-<point>``) to SVG bytes.
    """
    points = resource["points"]
    head = "".join(f"<th>{label}</th>" for _, label in SUMMARY_COLUMNS)
    rows = []
    for name, p in points.items():
        cells = "".join(f"<td data-field='{k}'>"
                        f"{formatting.count(p.get(k)) if k == 'cycles_counted' else fmt(p.get(k))}"
                        "</td>" for k, _ in SUMMARY_COLUMNS)
        rows.append(f"<tr data-point='{html.escape(name)}'><td>{html.escape(name)}</td>{cells}"
                    f"{_flags_cell(p['flags'])}</tr>")
    summary = ("<section id='summary'><h2>Per point</h2><table><thead><tr><th>point</th>"
               f"{head}<th>flags</th></tr></thead><tbody>{''.join(rows)}</tbody></table>"
               "<p>Damage is the Miner sum of one pass of the recording (what is left open at "
               "the end counted as half cycles); per repeat, the open part is closed as the "
               "repetition closes it, and life is how many repeats (and hours) reach the "
               "allowable damage sum; the reserve factor scales the whole recording to reach "
               "it, and says whether fatigue or static strength sets it. The equivalent range "
               "gives the damage at its reference cycles on the curve's own slope.</p>"
               "</section>")
    settings = []
    for name, p in points.items():
        s = p["options"]
        curve = p["curve"]
        est = p.get("estimate")
        factors = ""
        if est:
            factors = "<ul>" + "".join(
                f"<li>{html.escape(f['symbol'])} = {fmt(f['value'])}: "
                f"{html.escape(f['basis'])} ({html.escape(f['source'])})</li>"
                for f in est["factors"]) + "</ul>"
        sl = p.get("strain_life")
        if sl:
            mat = sl["material"]
            settings.append(
                f"<h3>{html.escape(name)}</h3><dl>"
                f"<dt>method</dt><dd>local strain approach: {html.escape(sl['input'])} input"
                + ("" if sl.get("notch_rule") is None else
                   f", {html.escape(sl['notch_rule'])} rule, Kt {fmt(sl['kt'])}")
                + f", mean stress {html.escape(sl['mean_stress_method'])}</dd>"
                f"<dt>material</dt><dd>{html.escape(mat['source'])}: E "
                f"{fmt(mat['youngs_modulus'])} MPa, K' {fmt(mat['cyclic_strength_coefficient'])}"
                f" MPa, n' {fmt(mat['cyclic_hardening_exponent'])}, sigma_f' "
                f"{fmt(mat['fatigue_strength_coefficient'])} MPa, b "
                f"{fmt(mat['fatigue_strength_exponent'])}, epsilon_f' "
                f"{fmt(mat['fatigue_ductility_coefficient'])}, c "
                f"{fmt(mat['fatigue_ductility_exponent'])}; 2N_t "
                f"{fmt(sl['transition_reversals'])}</dd>"
                f"<dt>largest loop</dt><dd>strain amplitude {fmt(sl['max_strain_amplitude'])},"
                f" peak stress {fmt(sl['max_stress'])} MPa</dd>"
                f"<dt>allowable damage</dt><dd>{fmt(s['allowable_damage'])}</dd>"
                f"<dt>counting</dt><dd>ASTM E1049-85 rainflow, residue "
                f"{html.escape(s['residue'])}</dd></dl>")
            continue
        settings.append(
            f"<h3>{html.escape(name)}</h3><dl>"
            f"<dt>S-N curve</dt><dd>{html.escape(curve['name'])} - {html.escape(curve['source'])}</dd>"
            f"<dt>mean stress</dt><dd>{html.escape(s['mean_stress_method'])} "
            f"(compressive means: {html.escape(s['compressive_mean'])})</dd>"
            f"<dt>allowable damage</dt><dd>{fmt(s['allowable_damage'])}</dd>"
            f"<dt>partial factors</dt><dd>load {fmt(s['load_factor'])}, strength "
            f"{fmt(s['strength_factor'])}, thickness {fmt(s['thickness_factor'])}</dd>"
            f"<dt>counting</dt><dd>ASTM E1049-85 rainflow, residue "
            f"{html.escape(s['residue'])}, gate {fmt(p.get('gate_mpa'))} MPa</dd></dl>{factors}")
    figs = [_figure("plot-damage", plots["damage"], "Damage of each point against its "
                    "allowable sum.")]
    if "history" in plots:
        figs.append(_figure("plot-history", plots["history"], "Each history as a min/max "
                            "envelope per column: no peak is dropped."))
    figs.append(_figure("plot-exceedance", plots["exceedance"], "Cycles at or above each "
                        "range."))
    for name in points:
        figs.append(_figure(f"plot-sn-{name}", plots[f"sn-{name}"],
                            f"{name}: S-N curve, counted spectrum, damage share by range."))
        figs.append(_figure(f"plot-range-mean-{name}", plots[f"range-mean-{name}"],
                            f"{name}: rainflow matrix (range x mean)."))
    findings = [(name, f) for name, p in points.items()
                for f in ((p.get("screening") or {}).get("findings") or [])]
    if findings:
        items = "".join(
            f"<li data-point='{html.escape(name)}' data-kind='{html.escape(f['kind'])}'>"
            f"<strong>{html.escape(name)}</strong>: {html.escape(f['description'])}"
            + ("" if f.get("damage_share") is None
               else f" ({fmt(100 * f['damage_share'])} % of the damage)") + "</li>"
            for name, f in findings)
        links = (resource.get("links") or {}).get("points") or {}
        cleaned = "".join(
            f"<li data-point='{html.escape(name)}' class='cleaned'><strong>"
            f"{html.escape(name)}</strong> was cleaned before counting ("
            f"{html.escape('; '.join(c.get('done') or []) or 'nothing to clean')}); damage "
            f"before cleaning {fmt(c.get('damage_before_cleaning'))}"
            + (f"; <a href='{html.escape(links[name]['samples'])}?format=csv'>the signal "
               "counted, with the recording (CSV, from the service)</a>"
               if "samples" in links.get(name, {}) else "") + "</li>"
            for name, p in points.items()
            if (c := (p.get("screening") or {}).get("cleaned")) is not None)
        summary += ("<section id='screening' class='caution'><h2>Signal screening</h2>"
                    f"<p>Faults found in the signals before counting (marked on the history)."
                    f"</p><ul>{items}{cleaned}</ul></section>")
    body = [summary, "<section id='plots'><h2>Plots</h2><div class='plots'>"
            + "".join(figs) + "</div></section>",
            "<section id='settings'><h2>Settings and sources</h2>" + "".join(settings)
            + "<p>Stresses in MPa. Cycles counted by ASTM E1049-85; damage by the "
            "Palmgren-Miner rule.</p></section>"]
    stored = resource.get("cautions")
    if stored and isinstance(stored[0], dict) and "points" in stored[0]:
        cautions = stored
    else:  # an assessment stored before cautions had codes
        cautions = general_cautions() + [
            caution_dict(c) for c in dict.fromkeys(
                c if isinstance(c, str) else c["text"]
                for p in points.values() for c in p["cautions"])]
    sub = f"assessment {resource['id']} - {resource['created_at']}"
    if resource.get("history_id"):
        sub += f" - history {resource['history_id']}"
    return _page("Fatigue assessment", sub, body, cautions)


def asset_page(asset: dict, points: list[dict], plots: dict[str, bytes]) -> str:
    """The page of a ledger asset: running figures per point and their curves."""
    cols = (("damage", "damage [-]"), ("damage_if_ended", "with residue [-]"),
            ("consumed_percent", "life used [%]"), ("recorded_hours", "recorded [h]"),
            ("projected_hours_remaining", "hours left [h]"),
            ("settings_version", "settings"))
    head = "".join(f"<th>{label}</th>" for _, label in cols)
    rows = "".join(
        f"<tr data-point='{html.escape(p['point'])}'><td>{html.escape(p['point'])}</td>"
        + "".join(f"<td data-field='{k}'>{fmt(p.get(k))}</td>" for k, _ in cols)
        + f"{_flags_cell(p['flags'])}</tr>"
        for p in points)
    figs = "".join(_figure(f"plot-ledger-{p['point']}", plots[f"ledger-{p['point']}"],
                           f"{p['point']}: cumulative damage and projection.")
                   for p in points)
    body = [f"<section id='summary'><h2>Points</h2><table><thead><tr><th>point</th>{head}"
            f"<th>flags</th></tr></thead><tbody>{rows}</tbody></table></section>",
            f"<section id='plots'><h2>Running damage</h2><div class='plots'>{figs}</div>"
            "</section>"]
    return _page(f"Asset {asset['name']}", asset.get("description") or "running damage",
                 body, general_cautions() + [caution("projection_assumes_same_loads")])


DUTY_COLUMNS = (("damage", "design damage [-]"), ("allowable_damage", "allowable [-]"),
                ("reserve_factor", "reserve factor [-]"),
                ("life_duty_cycles", "life [duty cycles]"), ("life_hours", "life [h]"),
                ("equivalent_range", "eq. range [MPa]"), ("dominant_event", "dominant event"),
                ("between_events_share", "between events [-]"))


def _verdict(passed) -> str:
    if passed is None:
        return "<td class='text' data-field='passed'>no target</td>"
    if passed:
        return "<td class='text' data-field='passed'>pass</td>"
    return "<td class='flag' data-field='passed'>fail</td>"


def duty_cycle_page(resource: dict, plots: dict[str, bytes]) -> str:
    """The page of a duty cycle: verdict per point, events, variants, plots."""
    res = resource["result"]
    head = "".join(f"<th>{label}</th>" for _, label in DUTY_COLUMNS)
    rows = "".join(
        f"<tr data-point='{html.escape(p)}'><td>{html.escape(p)}</td>{_verdict(r['passed'])}"
        + "".join(f"<td data-field='{k}'>{fmt(r.get(k))}</td>" for k, _ in DUTY_COLUMNS)
        + f"{_flags_cell(r['flags'])}</tr>" for p, r in res["points"].items())
    events = "".join(
        f"<tr data-event='{html.escape(e['name'])}'><td>{html.escape(e['name'])}</td>"
        f"<td class='text'>{html.escape(', '.join(f'{k} {v}' for k, v in e['source'].items()))}"
        f"</td><td class='text'>{html.escape(', '.join(f'{k} {v:g}' for k, v in e['exposure'].items()))}"
        f"</td><td data-field='repeats'>{fmt(e['repeats'])}</td>"
        f"<td data-field='hours_per_pass'>{fmt(e['hours_per_pass'])}</td></tr>"
        for e in res["events"])
    target = res.get("target") or {}
    said = ", ".join(f"{k} {v}" for k, v in target.items()) or "none (one duty cycle)"
    facts = (f"<dl><dt>target</dt><dd>{html.escape(said)}</dd>"
             f"<dt>duty cycles in the target</dt><dd>{fmt(res['duty_cycles'])}</dd>"
             f"<dt>hours per duty cycle</dt><dd>{fmt(res['duty_cycle_hours'])}</dd>"
             f"<dt>distance per duty cycle</dt><dd>{fmt(res['duty_cycle_distance'])}</dd></dl>")
    body = [f"<section id='summary'><h2>Design life</h2>{facts}<table><thead><tr>"
            f"<th>point</th><th>verdict</th>{head}<th>flags</th></tr></thead><tbody>{rows}"
            "</tbody></table></section>",
            "<section id='events'><h2>Events</h2><table><thead><tr><th>event</th>"
            "<th>source</th><th>exposure</th><th>repeats per duty cycle</th>"
            f"<th>hours per pass</th></tr></thead><tbody>{events}</tbody></table></section>"]
    variants = [(p, n, v) for p, r in res["points"].items() for n, v in r["variants"].items()]
    if variants:
        vrows = "".join(
            f"<tr data-point='{html.escape(p)}' data-variant='{html.escape(n)}'>"
            f"<td>{html.escape(p)}</td><td class='text'>{html.escape(n)}</td>"
            f"<td class='text'>{html.escape(str(v['curve']))}</td>{_verdict(v['passed'])}"
            f"<td data-field='damage'>{fmt(v['damage'])}</td>"
            f"<td data-field='reserve_factor'>{fmt(v['reserve_factor'])}</td>"
            f"<td data-field='life_duty_cycles'>{fmt(v['life_duty_cycles'])}</td></tr>"
            for p, n, v in variants)
        body.append("<section id='variants'><h2>What if</h2><table><thead><tr><th>point</th>"
                    "<th>variant</th><th>curve</th><th>verdict</th><th>design damage [-]</th>"
                    "<th>reserve factor [-]</th><th>life [duty cycles]</th></tr></thead>"
                    f"<tbody>{vrows}</tbody></table></section>")
    figs = (_figure("plot-damage", plots["damage"], "Design damage of each point and its "
                    "allowable sum.")
            + _figure("plot-events", plots["events"], "Share of each point's design damage "
                      "by event."))
    body.append(f"<section id='plots'><h2>Plots</h2><div class='plots'>{figs}</div></section>")
    return _page(f"Duty cycle {resource.get('name') or resource['id']}",
                 f"{len(res['events'])} events, {len(res['points'])} points", body,
                 res["cautions"])


SPECTRUM_COLUMNS = (("damage", "damage [-]"), ("life_repeats", "life [profiles]"),
                    ("life_hours", "life [h]"), ("reserve_factor", "reserve factor [-]"),
                    ("equivalent_range", "eq. range [MPa]"),
                    ("relative_to_time_domain", "vs counting [-]"))


def spectrum_page(resource: dict, plots: dict[str, bytes]) -> str:
    """The page of a spectral assessment: each method's figures, the load
    cases with their moments, the plots."""
    res = resource["result"]
    head = "".join(f"<th>{label}</th>" for _, label in SPECTRUM_COLUMNS)
    rows = "".join(
        f"<tr data-method='{html.escape(m)}'><td>{html.escape(m)}</td>"
        "<td class='text' colspan='7'>not applicable (see the cautions)</td></tr>"
        if not r.get("applicable", True) else
        f"<tr data-method='{html.escape(m)}'><td>{html.escape(m)}"
        f"{' (governs)' if m == res['governing_method'] else ''}</td>"
        + "".join(f"<td data-field='{k}'>{fmt(r.get(k))}</td>" for k, _ in SPECTRUM_COLUMNS)
        + f"{_flags_cell(r['flags'])}</tr>" for m, r in res["methods"].items())
    cases = "".join(
        f"<tr data-case='{html.escape(c['name'])}'><td>{html.escape(c['name'])}</td>"
        f"<td class='text'>{html.escape(c['source'])}</td>"
        f"<td data-field='exposure_s'>{fmt(c['exposure_s'])}</td>"
        f"<td data-field='rms'>{fmt(c['moments']['rms'])}</td>"
        f"<td data-field='nu0'>{fmt(c['moments']['nu0'])}</td>"
        f"<td data-field='nu_p'>{fmt(c['moments']['nu_p'])}</td>"
        f"<td data-field='alpha2'>{fmt(c['moments']['alpha2'])}</td>"
        f"<td data-field='mean_stress_mpa'>{fmt(c['mean_stress_mpa'])}</td></tr>"
        for c in res["load_cases"])
    td = res.get("time_domain")
    counted = ("" if not td else f"<p>Time-domain damage of the histories (rainflow counting, "
               f"scaled to the exposures): <b data-field='time_domain'>{fmt(td['damage'])}</b>"
               "</p>")
    curve = res["curve"]
    body = [f"<section id='summary'><h2>Damage by method</h2><p>Curve "
            f"{html.escape(str(curve.get('name')))}: {html.escape(str(curve.get('source')))}. "
            f"Profile {fmt(res['profile_s'])} s.</p>{counted}<table><thead><tr><th>method</th>"
            f"{head}<th>flags</th></tr></thead><tbody>{rows}</tbody></table></section>",
            "<section id='cases'><h2>Load cases</h2><table><thead><tr><th>case</th>"
            "<th>source</th><th>exposure [s]</th><th>rms [MPa]</th><th>nu0 [1/s]</th>"
            "<th>nu_p [1/s]</th><th>alpha2 [-]</th><th>mean [MPa]</th></tr></thead>"
            f"<tbody>{cases}</tbody></table></section>"]
    figs = _figure("plot-psd", plots["psd"], "Stress PSD of each load case.") + "".join(
        _figure(f"plot-{k}", v, f"{k[len('ranges-'):]}: predicted range densities by "
                "method, with the rainflow histogram of its history where there is one.")
        for k, v in plots.items() if k.startswith("ranges-"))
    body.append(f"<section id='plots'><h2>Plots</h2><div class='plots'>{figs}</div></section>")
    return _page(f"Spectral assessment {resource.get('name') or resource['id']}",
                 f"{len(res['load_cases'])} load cases, governing method "
                 f"{res['governing_method']}", body, res["cautions"])


def edit_page(resource: dict, svg: bytes | None) -> str:
    """The page of an edited drive signal: what each channel kept, and where."""
    res = resource["result"]
    cols = (("keep", "asked [-]"), ("damage_before", "damage before [-]"),
            ("damage_after", "after [-]"), ("damage_kept", "kept [-]"))
    head = "".join(f"<th>{label}</th>" for _, label in cols)
    rows = "".join(
        f"<tr data-channel='{html.escape(name)}'><td>{html.escape(name)}</td>"
        + "".join(f"<td data-field='{k}'>{fmt(ch.get(k))}</td>" for k, _ in cols)
        + f"<td class='text' data-field='largest_ranges_before'>"
        f"{', '.join(fmt(v) for v in ch['largest_ranges_before'][:3])}</td>"
        f"<td class='text' data-field='largest_ranges_after'>"
        f"{', '.join(fmt(v) for v in ch['largest_ranges_after'][:3])}</td></tr>"
        for name, ch in res["channels"].items())
    facts = (f"<dl><dt>method</dt><dd>{html.escape(res['method'])}</dd>"
             f"<dt>samples kept</dt><dd data-field='samples_after'>{res['samples_after']} of "
             f"{res['samples_before']} ({fmt(res['length_kept'])})</dd>"
             f"<dt>pieces joined</dt><dd>{res['pieces']}</dd>"
             f"<dt>duration after</dt><dd>{fmt(res.get('duration_after_s'))} s</dd></dl>")
    body = [f"<section id='summary'><h2>What each channel keeps</h2>{facts}<table><thead><tr>"
            f"<th>channel</th>{head}<th>largest ranges before [MPa]</th>"
            f"<th>largest ranges after [MPa]</th></tr></thead><tbody>{rows}</tbody></table>"
            f"<p><a href='{html.escape(resource['links']['signal'])}?format=csv'>The edited "
            "signal (CSV)</a></p></section>"]
    if svg is not None:
        body.append("<section id='plots'><h2>Where</h2>" + _figure(
            "plot-kept", svg, "The recording's envelope per channel and the stretches kept.")
            + "</section>")
    return _page(f"Edited drive signal {resource['id']}", f"from history {res['history_id']}",
                 body, res["cautions"])
