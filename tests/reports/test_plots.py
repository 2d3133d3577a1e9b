"""Plots: honest decimation, and every plot draws what it claims."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from service.engine import astm_e1049
from service.engine.damage import assess
from service.engine.sn_catalogue import catalogue_curve
from service.reports import plots


@given(st.lists(st.floats(-1e3, 1e3), min_size=1, max_size=500), st.integers(1, 60))
def test_envelope_keeps_every_extreme(values, columns):
    # Common practice for plotting long signals: a min/max envelope per
    # pixel column keeps every extreme (taking every n-th sample does not).
    x = np.asarray(values)
    idx, lo, hi = plots.envelope(x, columns)
    assert lo.min() == x.min() and hi.max() == x.max()
    assert np.all(lo <= hi)
    # Each slice's extremes are those of the samples it covers.
    bounds = list(idx) + [x.size]
    for k in range(len(idx)):
        part = x[bounds[k]:bounds[k + 1]] if x.size > 2 * columns else x[k:k + 1]
        assert lo[k] == part.min() and hi[k] == part.max()


def test_envelope_of_a_long_history_is_short():
    x = np.random.default_rng(0).standard_normal(1_000_000)
    idx, lo, hi = plots.envelope(x, 800)
    assert idx.size == 800 and lo.min() == x.min() and hi.max() == x.max()


@pytest.fixture(scope="module")
def assessed():
    x = np.random.default_rng(1).standard_normal(5000) * 70 + 10
    table = astm_e1049(x)
    curve = catalogue_curve("EN1993-1-9:71")
    return x, table, curve, assess(table, curve)


@pytest.mark.parametrize("kind", ["history", "range_mean", "exceedance", "sn", "damage",
                                  "ledger"])
@pytest.mark.parametrize("fmt", ["svg", "png"])
def test_each_plot_renders(assessed, kind, fmt):
    x, table, curve, r = assessed
    fig = {
        "history": lambda: plots.history({"a": x, "b": -x}, 100.0),
        "range_mean": lambda: plots.range_mean(table),
        "exceedance": lambda: plots.exceedance({"a": table}),
        "sn": lambda: plots.sn_with_spectrum(curve, table, r.damage_per_cycle),
        "damage": lambda: plots.damage_by_point({"a": r.damage, "b": None},
                                                {"a": 1.0, "b": 1.0}),
        "ledger": lambda: plots.ledger_point(
            [{"hours": h, "damage": 0.01 * h} for h in range(1, 6)], 1.0, 0.01),
    }[kind]()
    out = plots.render(fig, fmt)
    if fmt == "svg":
        text = out.decode()
        assert text.lstrip().startswith("<?xml") and "<svg" in text and "</svg>" in text
        assert text.count("<path") > 5
    else:
        assert out[:8] == b"\x89PNG\r\n\x1a\n" and len(out) > 5000


def test_plots_drawn_from_threads_at_once_equal_those_drawn_in_turn():
    # Issue 18: figures come from matplotlib's object API and one fixed
    # style, so threads drawing at once cannot change each other's output.
    from concurrent.futures import ThreadPoolExecutor

    from service.reports import plots

    rng = np.random.default_rng(3)
    xs = [rng.standard_normal(5000) * (10 + 5 * i) for i in range(8)]

    def draw(i):
        return plots.render(plots.history({f"g{i}": xs[i]}, 100.0), "svg")

    alone = [draw(i) for i in range(8)]
    with ThreadPoolExecutor(4) as pool:
        together = list(pool.map(draw, range(8)))
    assert together == alone


def test_sn_plot_draws_the_curve_where_defined_and_the_spectrum_the_damage_used():
    # Issue 17: the curve stops at its cut-off (EN 1993-1-9: 1e8 cycles,
    # eq. 7.2), with a dashed line below which nothing counts and its knee
    # marked; the spectrum is the ranges as they enter the curve, so the
    # damage of those ranges on the curve is the assessment's damage.
    from service.engine.damage import AssessmentOptions
    from service.engine.miner import palmgren_miner

    curve = catalogue_curve("EN1993-1-9:71")
    x = np.random.default_rng(5).standard_normal(3000) * 60 + 80
    table = astm_e1049(x)
    opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=500.0,
                             load_factor=1.1, strength_factor=1.2)
    r = assess(table, curve, opts)
    entered = plots.entered_ranges(table, opts)
    d = palmgren_miner(table.count, curve.cycles_to_failure(entered)).sum()
    assert d == pytest.approx(r.damage, rel=1e-9)
    fig = plots.sn_with_spectrum(curve, table, r.damage_per_cycle, entered, title="p")
    ax = fig.axes[0]
    line = ax.get_lines()[0]
    assert line.get_xdata()[-1] == pytest.approx(1e8)           # stops at the cut-off
    labels = ax.get_legend().get_texts()
    text = [t.get_text() for t in labels]
    assert "knee" in text and any("cut-off" in t for t in text)
    assert any("mean-corrected" in t for t in text)
    spectrum = next(l for l in ax.get_lines() if "spectrum" in l.get_label())
    assert max(spectrum.get_ydata()) == pytest.approx(entered.max())


def test_series_colours_are_distinct_for_eight_and_never_the_alarm_colour():
    # Issue 17: eight series, eight colours (Okabe & Ito 2008 set); rose is the alarm
    # colour and never marks a series; the ninth series is told apart by its dashes.
    from matplotlib.colors import to_hex

    rng = np.random.default_rng(4)
    tables = {f"p{k}": astm_e1049(rng.standard_normal(400) * (10 + k)) for k in range(9)}
    fig = plots.exceedance(tables)
    lines = fig.axes[0].get_lines()
    colours = [to_hex(line.get_color()) for line in lines]
    assert len(set(colours[:8])) == 8
    assert plots.ROSE not in colours
    assert lines[8].get_linestyle() != lines[0].get_linestyle()


def test_running_damage_keeps_the_measured_part_visible_when_the_projection_is_long():
    # A quarter of an hour recorded, a projection 4000 times longer: the measured
    # line gets its own panel whose scales span it; a short projection needs none.
    rows = [{"hours": h, "damage": 2e-5 * h} for h in (0.05, 0.1, 0.2, 0.25)]
    fig = plots.ledger_point(rows, 1.0, 2e-5 / 1.0 * 0.001)
    assert len(fig.axes) == 2
    near = fig.axes[0]
    lo, hi = near.get_ylim()
    assert hi < 1e-4 and near.get_xlim()[1] < 1.0  # the measured part fills its panel
    labels = [line.get_label() for line in fig.axes[1].get_lines()]
    assert "measured damage" in labels and "projection at the recorded rate" in labels
    short = plots.ledger_point([{"hours": h, "damage": 0.1 * h} for h in (1, 2, 3)], 1.0, 0.1)
    assert len(short.axes) == 1
    assert plots.render(fig, "svg").count(b"<path") > 5
