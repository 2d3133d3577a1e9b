"""Gather what a report shows from the store and draw it.

The per-point cycle tables are recounted from the stored samples exactly as
the cycles endpoint does (``runs.point_cycles``), so plots, tables and the
API agree.
"""

from __future__ import annotations

from service import ledger, runs
from service.engine.settings import is_strain_life, point_from_dict
from service.store import ledger as ledger_sql

from . import pages, plots

#: Plots of an assessment: name -> whether it needs a point.
ASSESSMENT_PLOTS = {"damage": False, "history": False, "exceedance": False, "sn": True,
                    "range-mean": True}


class _Reads:
    """A point's samples and recounted cycles, read once for all the plots
    of one page (a page draws each point's cycles in three plots)."""

    def __init__(self, con, data_dir, row: dict):
        self.con, self.data_dir, self.row = con, data_dir, row
        self._samples, self._cycles = {}, {}

    def samples(self, point: str):
        if point not in self._samples:
            self._samples[point] = runs.point_samples(self.data_dir, self.row, point, self.con)
        return self._samples[point]

    def cycles(self, point: str):
        if point not in self._cycles:
            self._cycles[point] = runs.point_cycles(self.data_dir, self.row, point, self.con)
        return self._cycles[point]


def assessment_plot(con, data_dir, row: dict, resource: dict, name: str,
                    point: str | None, fmt: str = "svg", reads: _Reads | None = None) -> bytes:
    """One plot of an assessment as SVG or PNG bytes (``reads``: the page's
    shared reads, when drawing a whole page)."""
    reads = reads or _Reads(con, data_dir, row)
    points = resource["points"]
    of = f"assessment {row['id']}"
    if name == "damage":
        fig = plots.damage_by_point({p: v["damage"] for p, v in points.items()},
                                    {p: v["options"]["allowable_damage"]
                                     for p, v in points.items()},
                                    title=f"Damage by point ({of})")
    elif name == "history":
        rate = None
        if resource.get("duration_s"):
            n = len(reads.samples(next(iter(points))))
            rate = n / resource["duration_s"]
        fig = plots.history({p: reads.samples(p) for p in points}, rate,
                            findings={p: (v.get("screening") or {}).get("findings") or []
                                      for p, v in points.items()},
                            title=f"History, min/max envelope per column ({of})")
    elif name == "exceedance":
        fig = plots.exceedance({p: reads.cycles(p)[0] for p in points},
                               title=f"Exceedance spectrum ({of})")
    else:
        table, dmg = reads.cycles(point)
        if name == "sn" and is_strain_life(points[point]["settings_used"]):
            fig = _strain_life_plot(reads, points[point], point, of)
        elif name == "sn":
            curve, opts, _ = point_from_dict(points[point]["settings_used"])
            fig = plots.sn_with_spectrum(
                curve, table, dmg, plots.entered_ranges(table, opts),
                title=f"S-N curve and spectrum: point {point} ({of})")
        else:
            fig = plots.range_mean(table, title=f"Rainflow matrix: point {point} ({of})")
    return plots.render(fig, fmt)


def _strain_life_plot(reads, res: dict, point: str, of: str):
    """The strain-life curve and the worst loops of a strain-life point."""
    from service import point_methods

    material, r = point_methods.recount_strain_life(reads.samples(point), res)
    return plots.strain_life(material, r.loops,
                             title=f"Strain-life curve and loops: point {point} ({of})")


def assessment_page(con, data_dir, row: dict, resource: dict) -> str:
    reads = _Reads(con, data_dir, row)
    svgs = {}
    for name, per_point in ASSESSMENT_PLOTS.items():
        if per_point:
            for p in resource["points"]:
                svgs[f"{name}-{p}"] = assessment_plot(con, data_dir, row, resource, name, p,
                                                      reads=reads)
        else:
            svgs[name] = assessment_plot(con, data_dir, row, resource, name, None,
                                         reads=reads)
    return pages.assessment_page(resource, svgs)


def ledger_plot(con, asset_id: str, point: str, fmt: str = "svg") -> bytes:
    row = ledger_sql.get_point(con, asset_id, point)
    status = ledger.status(row)
    fig = plots.ledger_point(ledger_sql.point_history(con, asset_id, point),
                             status["allowable_damage"], status["damage_rate_per_hour"],
                             title=f"Running damage: point {point} (asset {status['asset']})")
    return plots.render(fig, fmt)


def asset_page(con, asset_row: dict) -> str:
    rows = ledger_sql.list_points(con, asset_row["project"], asset_row["id"])
    statuses = [ledger.status(r) for r in rows]
    svgs = {f"ledger-{r['point']}": ledger_plot(con, asset_row["id"], r["point"])
            for r in rows}
    return pages.asset_page(asset_row, statuses, svgs)


#: Plots of a duty cycle.
DUTY_CYCLE_PLOTS = ("damage", "events")


def duty_cycle_plots(resource: dict, fmt: str = "svg") -> dict[str, bytes]:
    """The plots of a duty cycle: design damage by point, event shares."""
    pts = resource["result"]["points"]
    damage = plots.damage_by_point(
        {p: r["damage"] for p, r in pts.items()},
        {p: r["allowable_damage"] for p, r in pts.items()},
        title="Design damage by point", what="of the design life")
    shares = plots.event_shares({p: {e["name"]: e["damage_share"] for e in r["events"]}
                                 for p, r in pts.items()})
    return {"damage": plots.render(damage, fmt), "events": plots.render(shares, fmt)}


def duty_cycle_page(resource: dict) -> str:
    return pages.duty_cycle_page(resource, duty_cycle_plots(resource))


#: Plots of a spectral assessment.
SPECTRUM_PLOTS = ("psd", "ranges")


def spectrum_plot(name: str, dens: dict, case: str | None, fmt: str = "svg") -> bytes:
    if name == "psd":
        fig = plots.psd({k: (v["frequency"], v["psd"]) for k, v in dens.items()})
    else:
        d = dens[case]
        fig = plots.range_densities(d["centres"], d["densities"], d["rainflow"],
                                    title=f"Range densities: {case}")
    return plots.render(fig, fmt)


def spectrum_page(resource: dict, dens: dict) -> str:
    svgs = {"psd": spectrum_plot("psd", dens, None)}
    for case in dens:
        svgs[f"ranges-{case}"] = spectrum_plot("ranges", dens, case)
    return pages.spectrum_page(resource, svgs)


def edit_page(resource: dict, original: dict | None, kept_index, rate) -> str:
    """The page of an edit; the kept stretches drawn over the original when
    the history it was made from is still stored."""
    svg = None
    if original is not None:
        svg = plots.render(plots.kept_stretches(original, kept_index, rate))
    return pages.edit_page(resource, svg)
