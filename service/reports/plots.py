"""Plots of an assessment, drawn with matplotlib (Agg) into SVG or PNG bytes.

Each function takes plain arrays or the engine's results and returns a
figure; :func:`render` turns it into bytes. Nothing here reads a request or
the store. Long histories are drawn as a min/max envelope per pixel column
(:func:`envelope`), so every peak and valley that matters for fatigue stays
visible however long the recording is; taking every n-th sample would hide
them.
"""

from __future__ import annotations

import io
import math

import matplotlib
import numpy as np
from matplotlib.figure import Figure

from service.engine import histograms

#: The report's own palette: ink, teal, amber, rose, and a pale ground. Rose is
#: the alarm colour: only for what is past a limit (damage over the allowable
#: sum, static overload, the allowable line itself), never for a series.
INK, TEAL, AMBER, ROSE, GROUND = "#23313b", "#17707f", "#d48a0b", "#b0384f", "#eef3f4"
#: Series colours (several points on one plot): the colour-blind-safe set of
#: Okabe and Ito (2008, "Color Universal Design"), black replaced by the ink and
#: the yellow darkened for contrast on white; eight colours, no repeat within
#: eight series. The ninth and later series repeat them dashed.
SERIES = ("#0072b2", "#e69f00", "#009e73", "#cc79a7", "#56b4e9", "#d55e00", "#23313b",
          "#b8a500")


def series_style(k: int) -> dict:
    """Colour and line style of the ``k``-th series (0-based)."""
    return {"color": SERIES[k % len(SERIES)],
            "linestyle": "-" if k < len(SERIES) else (0, (5, 2))}
_STYLE = {
    "font.family": "DejaVu Sans", "font.size": 9, "axes.edgecolor": INK,
    "axes.labelcolor": INK, "xtick.color": INK, "ytick.color": INK,
    "axes.facecolor": "white", "figure.facecolor": "white", "axes.grid": True,
    "grid.color": "#d5dee0", "grid.linewidth": 0.6, "axes.spines.top": False,
    "axes.spines.right": False, "svg.fonttype": "none",
    # Element ids from a fixed salt: the same plot is the same bytes (for
    # caches, and for the test that threads draw what they draw in turn).
    "svg.hashsalt": "cycleledger",
}
# Figures are made with matplotlib's object API (``Figure``), never pyplot:
# pyplot's figure manager and a temporary rc_context are process-wide state,
# and two request threads drawing at once changed each other's style. The
# report's style is set here once, when the module loads, and never changed
# after, so every thread reads the same settings.
matplotlib.rcParams.update(_STYLE)


def envelope(x: np.ndarray, columns: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Min and max of ``x`` in ``columns`` equal slices (fewer if ``x`` is short).

    Returns ``(index, low, high)``: the first sample index of each slice and
    its minimum and maximum. The global extremes of ``x`` are always among
    them.
    """
    x = np.asarray(x, dtype=np.float64)
    n = x.shape[0]
    if n <= 2 * columns:
        idx = np.arange(n)
        return idx, x.copy(), x.copy()
    edges = np.linspace(0, n, columns + 1).astype(np.int64)
    starts = edges[:-1]
    return starts, np.minimum.reduceat(x, starts), np.maximum.reduceat(x, starts)


def render(fig, fmt: str = "svg") -> bytes:
    """The figure as SVG or PNG bytes (a ``Figure`` needs no closing: it is
    not registered with pyplot, and goes with its last reference)."""
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, dpi=110, bbox_inches="tight",
                metadata={"Date": None} if fmt == "svg" else None)
    return buf.getvalue()


def _figure(w=7.0, h=2.6):
    fig = Figure(figsize=(w, h))
    return fig, fig.subplots()


#: Colours of the screening findings marked on a history.
FINDING_COLOURS = {"spike": "#c0392b", "clipping": "#8e44ad", "held": "#7f8c8d",
                   "zeros": "#7f8c8d", "flat": "#7f8c8d", "dead": "#7f8c8d",
                   "repeated": "#b9770e"}


def history(samples: dict[str, np.ndarray], sample_rate_hz: float | None,
            columns: int = 800, findings: dict | None = None, title: str | None = None):
    """Every point's history as an envelope, one row each. [MPa]

    ``findings`` ({point: [finding dicts]}) are marked where they are: a
    band over each listed event (spikes red, clipping purple, held runs
    grey, repeated buffers amber), with the kinds named in the row's label.
    """
    names = list(samples)
    fig = Figure(figsize=(7.0, 1.3 + 1.1 * len(names)))
    axes = fig.subplots(len(names), 1, sharex=True, squeeze=False)
    for ax, name in zip(axes[:, 0], names):
        idx, lo, hi = envelope(samples[name], columns)
        t = idx / sample_rate_hz if sample_rate_hz else idx
        ax.fill_between(t, lo, hi, color=TEAL, linewidth=0.4, step="post")
        label = f"{name}\n[MPa]"
        marked = [f for f in (findings or {}).get(name, []) if f["kind"] in FINDING_COLOURS]
        for f in marked:
            for a, b in f.get("events") or [[f["first_sample"], f["last_sample"]]]:
                x0, x1 = (a / sample_rate_hz, (b + 1) / sample_rate_hz) if sample_rate_hz \
                    else (a, b + 1)
                # At least three envelope columns wide, and a marker over
                # the axes, so a one-sample spike shows at any length.
                width = 3 * (t[-1] - t[0]) / columns if len(t) > 1 else 1.0
                ax.axvspan(x0 - width / 2, max(x1, x0 + width / 2),
                           color=FINDING_COLOURS[f["kind"]], alpha=0.35, linewidth=0)
                ax.plot([(x0 + x1) / 2], [1.0], marker="v", markersize=6, clip_on=False,
                        color=FINDING_COLOURS[f["kind"]], transform=ax.get_xaxis_transform())
        if marked:
            label += "\n" + ", ".join(sorted({f["kind"] for f in marked}))
        ax.set_ylabel(label, rotation=0, ha="right", va="center")
    axes[-1, 0].set_xlabel("time [s]" if sample_rate_hz else "sample")
    fig.suptitle(title or "History (min/max envelope per column)", color=INK, fontsize=10, x=0.02,
                 ha="left")
    return fig


def kept_stretches(samples: dict[str, np.ndarray], kept_index: np.ndarray,
                   sample_rate_hz: float | None, columns: int = 800,
                   title: str | None = None):
    """Each channel of the original recording as an envelope (grey) with the
    stretches an edit kept drawn over it (teal): which parts the rig will
    run. [MPa]"""
    names = list(samples)
    n = next(iter(samples.values())).shape[0]
    kept = np.zeros(n, bool)
    kept[kept_index] = True
    starts = np.flatnonzero(np.diff(np.concatenate([[0], kept.astype(np.int8)])) == 1)
    stops = np.flatnonzero(np.diff(np.concatenate([kept.astype(np.int8), [0]])) == -1) + 1
    fig = Figure(figsize=(7.0, 1.3 + 1.1 * len(names)))
    axes = fig.subplots(len(names), 1, sharex=True, squeeze=False)
    scale = 1.0 / sample_rate_hz if sample_rate_hz else 1.0
    for ax, name in zip(axes[:, 0], names):
        idx, lo, hi = envelope(samples[name], columns)
        ax.fill_between(idx * scale, lo, hi, color="#b8c4c8", linewidth=0.4, step="post")
        for a, b in zip(starts, stops):
            ax.axvspan(a * scale, b * scale, color=TEAL, alpha=0.25, linewidth=0)
        ax.set_ylabel(f"{name}\n[MPa]", rotation=0, ha="right", va="center")
    axes[-1, 0].set_xlabel("time in the recording [s]" if sample_rate_hz else "sample")
    fig.suptitle(title or "Recording (grey envelope) and the stretches kept (teal)", color=INK,
                 fontsize=10, x=0.02, ha="left")
    return fig


def range_mean(table, range_bins: int = 24, mean_bins: int = 24, title: str | None = None):
    """The range-mean rainflow matrix as a heat map (cycles per bin)."""
    fig, ax = _figure(5.4, 4.0)
    if len(table):
        m = histograms.range_mean_matrix(table, range_bins=range_bins, mean_bins=mean_bins)
        counts = np.where(m.counts > 0, m.counts, np.nan)
        mesh = ax.pcolormesh(m.col_edges, m.row_edges, counts, cmap="cividis", shading="flat")
        fig.colorbar(mesh, ax=ax, label="cycles")
    ax.set_xlabel("mean [MPa]")
    ax.set_ylabel("range [MPa]")
    ax.set_title(title or "Rainflow matrix", color=INK, loc="left")
    return fig


def exceedance(tables: dict, title: str | None = None):
    """Range exceedance spectra: cycles at or above each range, log cycles."""
    fig, ax = _figure(5.4, 3.6)
    for k, (name, table) in enumerate(tables.items()):
        rng, cum = histograms.exceedance(table)
        if rng.size:
            ax.step(cum, rng, where="post", label=name, **series_style(k))
    ax.set_xscale("log")
    ax.set_xlabel("cycles at or above the range [-] (log)")
    ax.set_ylabel("range [MPa]")
    ax.set_title(title or "Exceedance spectrum", color=INK, loc="left")
    if tables:
        ax.legend(frameon=False)
    return fig


def entered_ranges(table, opts) -> np.ndarray:
    """Each cycle's range as it enters the curve: the load factor on the
    stresses, the mean-stress correction, then the thickness and strength
    factors (what the damage used; ``inf`` for a static overload). [MPa]"""
    from service.engine.mean_stress import equivalent_amplitude

    lf = opts.load_factor
    amp, _ = equivalent_amplitude(
        table.stress_amplitude * lf, table.stress_mean * lf, opts.mean_stress_method,
        ultimate_strength=opts.ultimate_strength, yield_strength=opts.yield_strength,
        fatigue_strength_coefficient=opts.fatigue_strength_coefficient,
        walker_exponent=opts.walker_exponent, compressive_mean=opts.compressive_mean,
        haigh_diagram=opts.haigh_diagram, haigh_stress_ratio=opts.haigh_stress_ratio)
    return 2.0 * amp * opts.thickness_factor * opts.strength_factor


def sn_with_spectrum(curve, table, damage_per_cycle, corrected_range=None, bins: int = 20,
                     title: str | None = None):
    """The S-N curve where the model defines it, the spectrum the damage
    used, and each range bin's share of damage.

    The curve is drawn from 1e3 cycles to its cut-off (then a dashed line
    at the cut-off range: no damage below it) or on to 1e9 when it has none,
    with its knees marked. ``corrected_range`` (see :func:`entered_ranges`)
    is the spectrum plotted when given: the ranges as they enter the curve,
    mean-corrected and factored; else the counted ranges.
    """
    fig, ax = _figure(6.0, 4.0)
    end = curve.cutoff_cycles or 1e9
    n = np.logspace(3, np.log10(end), 200)
    ax.loglog(n, curve.range_at(n), color=INK, linewidth=1.6, label=curve.name)
    knees = np.asarray(curve.knee_cycles, dtype=float)
    if knees.size:
        ax.plot(knees, curve.knee_ranges, "o", color=INK, markersize=4, label="knee")
    if curve.cutoff_cycles:
        ax.hlines(curve.cutoff_range, curve.cutoff_cycles, 1e10, colors=INK,
                  linestyles="dashed", linewidth=1.0, label="cut-off: no damage below")
    ranges = table.stress_range if corrected_range is None else np.asarray(corrected_range)
    finite_ranges = ranges[np.isfinite(ranges)]
    handles = []
    if len(table) and finite_ranges.size:
        order = np.argsort(-finite_ranges, kind="stable")
        counts = table.count[np.isfinite(ranges)][order]
        cum = np.cumsum(counts)
        ax.step(np.maximum(cum, 1.0), finite_ranges[order], where="post", color=TEAL,
                label=("spectrum as it enters the curve (mean-corrected, factored)"
                       if corrected_range is not None else "counted spectrum"))
        edges = np.linspace(0.0, float(finite_ranges.max()) * 1.0001, bins + 1)
        which = np.clip(np.searchsorted(edges, np.where(np.isfinite(ranges), ranges, 0.0),
                                        side="right") - 1, 0, bins - 1)
        finite = np.isfinite(damage_per_cycle) & np.isfinite(ranges)
        share = np.bincount(which[finite], weights=damage_per_cycle[finite], minlength=bins)
        total = share.sum()
        if total > 0:
            ax2 = ax.twiny()
            ax2.barh(0.5 * (edges[1:] + edges[:-1]), 100 * share / total,
                     height=np.diff(edges) * 0.9, color=AMBER, alpha=0.55,
                     label="share of damage by range bin")
            ax2.set_xlabel("share of damage by range bin [%]", color=AMBER)
            ax2.set_xlim(0, max(100 * share.max() / total * 1.6, 1.0))
            ax2.spines["top"].set_visible(True)
            handles = ax2.get_legend_handles_labels()
    # Down to a third of the curve's cut-off (or its range at 1e8): smaller
    # ranges do no damage and would only squash the plot.
    floor = curve.cutoff_range or float(curve.range_at(1e8))
    ax.set_ylim(bottom=max(floor / 3.0, 1e-3))
    ax.set_xlim(1.0, 1e10)  # the spectrum's cumulative count starts at one cycle
    ax.set_xlabel("cycles to failure / cumulative cycles [-] (log)")
    ax.set_ylabel("stress range [MPa] (log)")
    ax.set_title(title or "S-N curve and spectrum", color=INK, loc="left")
    h, lab = ax.get_legend_handles_labels()
    if handles:
        h, lab = h + handles[0], lab + handles[1]
    # Below the axes: inside, it would hide part of the curve or the bars.
    ax.legend(h, lab, frameon=False, loc="upper center", bbox_to_anchor=(0.5, -0.16), ncol=2,
              fontsize=7)
    return fig


def strain_life(material, loops: dict, title: str | None = None, worst: int = 4):
    """A strain-life point: the strain-life curve (elastic, plastic and total
    strain amplitude against reversals, the transition life marked) with
    the counted loops' amplitudes as a cumulative spectrum; and the
    hysteresis loops of the most damaging cycles, drawn by Masing's rule
    from their tips. ``material`` is a ``StrainLifeMaterial``; ``loops`` the
    per-loop columns of ``assess_strain_life``."""
    from service.engine.strain_life import masing_strain_range

    m = material
    fig = Figure(figsize=(9.0, 3.8))
    left, right = fig.subplots(1, 2, gridspec_kw={"width_ratios": [1.3, 1.0]})
    rev = np.logspace(0, 9, 200)
    elastic = m.fatigue_strength_coefficient / m.youngs_modulus * rev ** m.fatigue_strength_exponent
    plastic = m.fatigue_ductility_coefficient * rev ** m.fatigue_ductility_exponent
    left.loglog(rev, elastic + plastic, color=INK, linewidth=1.6, label="total (Coffin-Manson-"
                "Basquin)")
    left.loglog(rev, elastic, color=INK, linewidth=0.8, linestyle="dashed", label="elastic")
    left.loglog(rev, plastic, color=INK, linewidth=0.8, linestyle="dotted", label="plastic")
    nt = m.transition_reversals()
    left.axvline(nt, color=AMBER, linewidth=0.8, label=f"transition 2N_t = {nt:.3g}")
    amp = np.asarray(loops["strain_amplitude"])
    if amp.size:
        order = np.argsort(-amp, kind="stable")
        cum = np.cumsum(2.0 * np.asarray(loops["count"])[order])
        left.step(np.maximum(cum, 1.0), np.maximum(amp[order], 1e-9), where="post",
                  color=TEAL, label="counted loops: cumulative reversals")
    left.set_xlabel("reversals to failure / cumulative reversals 2N [-] (log)")
    left.set_ylabel("strain amplitude [-] (log)")
    left.set_ylim(bottom=max(float(elastic[-1]) / 3.0, 1e-6))
    left.legend(frameon=False, fontsize=7, loc="upper right")
    dmg = np.asarray(loops["damage"])
    top = [i for i in np.argsort(-dmg, kind="stable")[:worst] if dmg[i] > 0]
    for k, i in enumerate(top):
        s_mean, e_amp = float(loops["stress_mean"][i]), float(loops["strain_amplitude"][i])
        ds = _loop_stress_range(m, 2.0 * e_amp)
        s_lo, s_hi = s_mean - 0.5 * ds, s_mean + 0.5 * ds
        d = np.linspace(0.0, ds, 60)
        de = masing_strain_range(d, m)
        e_lo = -float(masing_strain_range(ds, m)) / 2.0
        # Lower tip up to the upper tip and back (Masing: the same branch turned).
        stress = np.concatenate([s_lo + d, s_hi - d])
        strain = np.concatenate([e_lo + de, -e_lo - de])
        right.plot(strain, stress, label=f"loop {k + 1}: {100 * dmg[i] / dmg.sum():.0f} % of "
                   "damage", **series_style(k))
    right.set_xlabel("local strain about the loop centre [-]")
    right.set_ylabel("local stress [MPa]")
    right.set_title("Worst hysteresis loops", color=INK, loc="left", fontsize=9)
    if top:
        right.legend(frameon=False, fontsize=7)
    fig.suptitle(title or "Strain-life curve and loops", color=INK, fontsize=10, x=0.02,
                 ha="left")
    fig.tight_layout()
    return fig


def _loop_stress_range(material, strain_range: float) -> float:
    """The stress range of a Masing branch of this strain range [MPa]."""
    from service.engine.strain_life import local_states

    half = local_states(np.array([0.5 * strain_range]), material, "strain")[0][0]
    return 2.0 * float(half)


def damage_by_point(damage: dict[str, float | None], allowable: dict[str, float],
                    title: str | None = None, what: str = "of the recording"):
    """Damage of each point with its allowable damage sum marked."""
    names = list(damage)
    fig, ax = _figure(6.0, 0.8 + 0.35 * max(len(names), 1))
    vals = [np.nan if damage[p] is None else damage[p] for p in names]
    finite = [v if math.isfinite(v) else np.nan for v in vals]
    colors = [ROSE if (v is None or not math.isfinite(v) or v >= allowable[p]) else TEAL
              for p, v in zip(names, vals)]
    y = np.arange(len(names))
    ax.barh(y, finite, color=colors)
    for k, p in enumerate(names):
        ax.plot([allowable[p]] * 2, [k - 0.45, k + 0.45], color=INK, linewidth=1.4)
        if not math.isfinite(vals[k]):
            ax.text(0, k, " static overload", va="center", color=ROSE)
    ax.set_yticks(y, names)
    ax.invert_yaxis()
    ax.set_xscale("symlog", linthresh=1e-6)
    # Room to the right of the allowable line (and of any bar past it), so
    # the line is never hidden in the frame.
    top = max([allowable[p] for p in names] + [v for v in finite if np.isfinite(v)] + [1e-6])
    ax.set_xlim(0, top * 3.0)
    ax.set_xlabel(f"Miner damage {what} (bar) and the allowable sum (line) [-] "
                  "(log above 1e-6)")
    ax.set_title(title or "Damage by point", color=INK, loc="left")
    return fig


def event_shares(shares: dict[str, dict[str, float]], title: str | None = None):
    """Each point's design damage split by event (stacked bars, shares of 1).

    ``shares`` is ``{point: {event: share}}``; the events keep one colour
    each across points."""
    names = list(shares)
    events = list(dict.fromkeys(e for p in names for e in shares[p]))
    fig, ax = _figure(6.4, 1.0 + 0.35 * max(len(names), 1))
    y = np.arange(len(names))
    left = np.zeros(len(names))
    for k, ev in enumerate(events):
        width = np.array([shares[p].get(ev) or 0.0 for p in names])
        ax.barh(y, width, left=left, color=SERIES[k % len(SERIES)], label=ev,
                hatch=None if k < len(SERIES) else "//")
        left += width
    ax.set_yticks(y, names)
    ax.invert_yaxis()
    ax.set_xlim(0, 1)
    ax.set_xlabel("share of the design damage [-] (a cycle between two events counts half "
                  "to each)")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, fontsize=8)
    ax.set_title(title or "Which events do the damage", color=INK, loc="left")
    return fig


def psd(cases: dict[str, tuple[np.ndarray, np.ndarray]], title: str | None = None):
    """Each load case's stress PSD on log-log axes. ``cases``: {name: (f, G)}."""
    fig, ax = _figure(6.4, 3.0)
    for k, (name, (f, g)) in enumerate(cases.items()):
        keep = (f > 0) & (g > 0)
        ax.plot(f[keep], g[keep], label=name, linewidth=1.2, **series_style(k))
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("frequency [Hz] (log)")
    ax.set_ylabel("stress PSD [MPa^2/Hz] (log)")
    ax.legend(frameon=False, fontsize=8)
    ax.set_title(title or "Load cases", color=INK, loc="left")
    return fig


def range_densities(centres: np.ndarray, densities: dict[str, np.ndarray],
                    rainflow: np.ndarray | None, title: str | None = None):
    """Each method's predicted range density (lines) and, where a history
    exists, its rainflow histogram (dots), as cycles per second per MPa."""
    fig, ax = _figure(6.4, 3.0)
    for k, (name, d) in enumerate(densities.items()):
        keep = d > 0
        ax.plot(centres[keep], d[keep], label=name, linewidth=1.2, **series_style(k))
    if rainflow is not None:
        keep = rainflow > 0
        ax.plot(centres[keep], rainflow[keep], "o", color=INK, markersize=2.5,
                label="rainflow of the history")
    ax.set_yscale("log")
    ax.set_xlabel("stress range [MPa]")
    ax.set_ylabel("cycles per second per MPa (log)")
    ax.legend(frameon=False, fontsize=8)
    ax.set_title(title or "Range densities", color=INK, loc="left")
    return fig


def ledger_point(history_rows: list[dict], allowable: float, rate_per_hour: float | None,
                 title: str | None = None):
    """Cumulative damage over recorded hours, with the projection to the allowable sum.

    Measured damage is a solid step line ending in a dot ("now"); the projection
    is dashed. When the projection runs more than :data:`ZOOM_RATIO` times past
    the recorded hours, the measured part would be a sliver at the origin: a
    second panel on the left then shows it alone, on its own scales.
    """
    hours = np.array([r["hours"] for r in history_rows], dtype=float)
    dmg = np.array([np.nan if r["damage"] is None else r["damage"] for r in history_rows])
    h_end = None
    if (hours.size and rate_per_hour and rate_per_hour > 0 and np.isfinite(dmg[-1])
            and dmg[-1] < allowable):
        h_end = hours[-1] + (allowable - dmg[-1]) / rate_per_hour
    zoom = h_end is not None and h_end > ZOOM_RATIO * max(hours[-1], 1e-12)
    if zoom:
        fig = Figure(figsize=(8.4, 3.2), layout="constrained")
        near, ax = fig.subplots(1, 2, width_ratios=[1, 1.6])
        _measured(near, hours, dmg)
        near.set_xlabel("recorded hours [h]")
        near.set_ylabel("damage [-]")
        near.set_title("Measured (own scales)", color=INK, loc="left")
        if np.nanmax(dmg, initial=0.0) < allowable:
            near.text(0.02, 0.95, f"allowable sum {allowable:g}: above this scale",
                      transform=near.transAxes, va="top", fontsize=7, color=INK)
    else:
        fig, ax = _figure(6.0, 3.2)
    if hours.size:
        _measured(ax, hours, dmg)
        if h_end is not None:
            ax.plot([hours[-1], h_end], [dmg[-1], allowable], color=AMBER, linestyle="--",
                    label="projection at the recorded rate")
    ax.axhline(allowable, color=ROSE, linewidth=1.2, label="allowable damage sum")
    ax.set_xlabel("recorded hours [h]")
    ax.set_ylabel("damage [-]")
    ax.set_title(title or "Running damage", color=INK, loc="left")
    ax.legend(frameon=False, fontsize=7)
    return fig


#: Projection length (times the recorded hours) past which the running-damage
#: plot adds a panel of the measured part alone.
ZOOM_RATIO = 20.0


def _measured(ax, hours: np.ndarray, dmg: np.ndarray) -> None:
    ax.step(hours, dmg, where="post", color=TEAL, linewidth=1.6, label="measured damage")
    if np.isfinite(dmg[-1]):
        ax.plot(hours[-1:], dmg[-1:], "o", color=TEAL, markersize=4, label="now")
