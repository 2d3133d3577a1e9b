"""Report pages and plots over HTTP, and the pages in a real headless browser."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
import threading

import numpy as np
import pytest

from service.api import create_app
from service.reports.pages import fmt
from tests.api.conftest import assert_problem, stop_waitress
from tests.api.test_ledger import post, setup_asset

SETTINGS = {"curve": "EN1993-1-9:71", "mean_stress_method": "goodman",
            "ultimate_strength": 500.0}


def make_assessment(client):
    x = np.random.default_rng(3).standard_normal(6000) * 60
    r = client.post("/v1/assessments", json={
        "samples": {"a": x.tolist(), "b": (0.5 * x + 30).tolist()}, "unit": "MPa",
        "sample_rate_hz": 100, "settings": SETTINGS})
    assert r.status_code == 201
    return r.get_json()


def test_report_page_holds_the_api_numbers(client):
    a = make_assessment(client)
    r = client.get(f"/v1/assessments/{a['id']}/report")
    assert r.status_code == 200 and r.mimetype == "text/html"
    page = r.get_data(as_text=True)
    for name, p in a["points"].items():
        row = re.search(rf"<tr data-point='{name}'>(.*?)</tr>", page).group(1)
        for field in ("damage", "life_repeats", "life_hours", "reserve_factor",
                      "equivalent_range"):
            cell = re.search(rf"<td data-field='{field}'>([^<]*)</td>", row).group(1)
            assert cell == fmt(p[field]), (name, field, cell, p[field])
    assert page.count("<svg") == 3 + 2 * len(a["points"])
    assert "EN 1993-1-9" in page and "qualified engineer" in page
    # Works offline: nothing is fetched (no external scripts, styles, images or fonts).
    assert not re.search(r"""(src|href)\s*=\s*["']?https?:|@import|url\(\s*["']?https?:""", page)


def test_plots_alone_as_svg_and_png(client):
    a = make_assessment(client)
    base = f"/v1/assessments/{a['id']}/plots"
    svg = client.get(f"{base}/damage")
    assert svg.mimetype == "image/svg+xml" and b"<svg" in svg.data
    png = client.get(f"{base}/sn?point=a", headers={"Accept": "image/png"})
    assert png.mimetype == "image/png" and png.data[:4] == b"\x89PNG"
    assert_problem(client.get(f"{base}/sn"), 400, "bad-request", field="point")
    assert_problem(client.get(f"{base}/pie"), 404, "not-found")
    assert_problem(client.get(f"{base}/damage?format=gif"), 400, "bad-request")


def test_a_plot_fetched_alone_names_its_subject_and_units(client):
    # Issue 17: a plot saved on its own still says what it is of.
    a = make_assessment(client)
    base = f"/v1/assessments/{a['id']}/plots"
    for plot in ("damage", "history", "exceedance", "sn?point=b", "range-mean?point=b"):
        text = client.get(f"{base}/{plot}").get_data(as_text=True)
        assert f"assessment {a['id']}" in text, plot
        if "point=" in plot:
            assert "point b" in text, plot
        assert "MPa" in text or plot == "damage", plot
    setup_asset(client, "boom", ("pin",))
    post(client, "boom", 1, {"pin": np.random.default_rng(2).standard_normal(2000) * 80})
    text = client.get("/v1/assets/boom/points/pin/plot").get_data(as_text=True)
    assert "point pin (asset boom)" in text and "[h]" in text


def test_asset_report_and_point_plot(client):
    setup_asset(client, "arm", ("a",))
    for i in range(3):
        post(client, "arm", i + 1, {"a": np.random.default_rng(i).standard_normal(2000) * 80})
    page = client.get("/v1/assets/arm/report").get_data(as_text=True)
    status = client.get("/v1/assets/arm/points/a").get_json()
    row = re.search(r"<tr data-point='a'>(.*?)</tr>", page).group(1)
    cell = re.search(r"<td data-field='damage'>([^<]*)</td>", row).group(1)
    assert cell == fmt(status["damage"])
    plot = client.get("/v1/assets/arm/points/a/plot?format=png")
    assert plot.mimetype == "image/png" and len(plot.data) > 5000


# ---------------------------------------------------------------- real browser

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--enable-logging=stderr", "--v=0"]


@pytest.fixture
def served(tmp_path):
    if CHROMIUM is None:
        if os.environ.get("CYCLELEDGER_REQUIRE_BROWSER"):
            pytest.fail("chromium is required here (.ci/run installs it)")
        pytest.skip("chromium is not installed")
    from waitress import create_server

    app = create_app({"DATA_DIR": str(tmp_path / "d")})
    server = create_server(app, host="127.0.0.1", port=0, threads=4)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    yield app, f"http://127.0.0.1:{server.effective_port}"
    stop_waitress(server, thread)
    app.extensions["cycleledger.jobs"].shutdown()


def chromium(*args, timeout=90):
    profile = tempfile.mkdtemp(prefix="cycleledger-chromium-")
    try:
        return subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *args],
                              capture_output=True, text=True, timeout=timeout)
    finally:
        shutil.rmtree(profile, ignore_errors=True)


@pytest.mark.parametrize("page", ["assessment", "asset"])
def test_pages_in_a_headless_browser(served, tmp_path, page):
    app, url = served
    c = app.test_client()
    if page == "assessment":
        a = make_assessment(c)
        path = f"/v1/assessments/{a['id']}/report"
        expected_svgs = 3 + 2 * len(a["points"])
        values = {n: fmt(p["damage"]) for n, p in a["points"].items()}
    else:
        setup_asset(c, "arm", ("a", "b"))
        post(c, "arm", 1, {"a": np.random.default_rng(1).standard_normal(3000) * 80,
                           "b": np.random.default_rng(2).standard_normal(3000) * 40})
        path = "/v1/assets/arm/report"
        expected_svgs = 2
        values = {p: fmt(c.get(f"/v1/assets/arm/points/{p}").get_json()["damage"])
                  for p in ("a", "b")}
    dom = chromium("--dump-dom", url + path)
    assert dom.returncode == 0, dom.stderr[-2000:]
    # Chromium logs every console message (errors included) as ":CONSOLE:";
    # the pages have no script, so any message at all is a fault.
    console = [line for line in dom.stderr.splitlines() if ":CONSOLE" in line]
    assert not console, console
    html = dom.stdout
    assert html.count("<svg") == expected_svgs
    for point, damage in values.items():
        row = re.search(rf"<tr data-point=\"{point}\">(.*?)</tr>", html).group(1)
        assert f'data-field="damage">{damage}<' in row
    for figure in re.findall(r"<figure[^>]*>(.*?)</figure>", html, flags=re.S):
        assert "<path" in figure  # every plot element holds drawing
    shot = tmp_path / "page.png"
    out = chromium("--window-size=1200,1600", f"--screenshot={shot}", url + path)
    assert out.returncode == 0 and shot.exists(), out.stderr[-2000:]
    from matplotlib.image import imread

    pixels = imread(shot)
    assert pixels.shape[0] >= 1000 and pixels[..., :3].std() > 0.05  # not blank


def test_screening_findings_on_the_page_and_marked_on_the_history(client):
    # A spike planted at sample 2500: listed on the page with its share of
    # the damage, and marked (and named) on the history plot.
    x = 70 * np.sin(np.arange(5000) / 25.0) + np.random.default_rng(2).normal(0, 0.4, 5000)
    x[2500] += 800.0
    r = client.post("/v1/assessments", json={
        "samples": {"g": x.tolist()}, "unit": "MPa", "sample_rate_hz": 100,
        "settings": {"curve": "EN1993-1-9:71"}})
    assert r.status_code == 201, r.get_json()
    a = r.get_json()
    page = client.get(f"/v1/assessments/{a['id']}/report").get_data(as_text=True)
    assert "id='screening'" in page and "data-kind='spike'" in page
    svg = client.get(f"/v1/assessments/{a['id']}/plots/history").get_data(as_text=True)
    assert "spike" in svg
    # Cleaned: the page says what was done and links the signal counted.
    r = client.post("/v1/assessments", json={
        "samples": {"g": x.tolist()}, "unit": "MPa", "sample_rate_hz": 100,
        "settings": {"curve": "EN1993-1-9:71", "screening": "clean"}})
    a = r.get_json()
    page = client.get(f"/v1/assessments/{a['id']}/report").get_data(as_text=True)
    assert "class='cleaned'" in page and "1 spike(s) replaced by linear interpolation" in page
    href = f"/v1/assessments/{a['id']}/points/g/samples?format=csv"
    assert f"href='{href}'" in page
    assert client.get(href).get_data(as_text=True).startswith("time_s,samples,recorded\n")


def test_reports_and_plots_are_cached_by_etag(client):
    # Issue 18: what never changes once made has a strong ETag; a repeat
    # with If-None-Match is 304 without drawing; another format is another
    # representation (another ETag).
    a = make_assessment(client)
    r = client.get(f"/v1/assessments/{a['id']}/report")
    etag = r.headers["ETag"]
    assert r.status_code == 200 and etag and "immutable" in r.headers["Cache-Control"]
    assert "private" in r.headers["Cache-Control"] and "Accept" in r.headers["Vary"]
    again = client.get(f"/v1/assessments/{a['id']}/report", headers={"If-None-Match": etag})
    assert again.status_code == 304 and again.data == b""
    svg = client.get(f"/v1/assessments/{a['id']}/plots/damage?format=svg")
    png = client.get(f"/v1/assessments/{a['id']}/plots/damage?format=png")
    assert svg.headers["ETag"] != png.headers["ETag"]
    assert client.get(f"/v1/assessments/{a['id']}/plots/damage?format=svg", headers={
        "If-None-Match": svg.headers["ETag"]}).status_code == 304
    # The same plot drawn again is the same bytes (what the ETag promises).
    assert client.get(f"/v1/assessments/{a['id']}/plots/damage?format=svg").data == svg.data


@pytest.mark.parametrize("path", ["", "/summary", "/summary?format=csv",
                                  "/points/a/cycles?format=parquet", "/points/a/range-mean"])
def test_results_revalidate_by_their_bytes(client, path):
    # Issue 18: an assessment's JSON, summary, cycles and matrix carry an
    # ETag of their bytes; a client holding them gets 304 without a body, and
    # one holding anything else gets the body again.
    a = make_assessment(client)
    url = f"/v1/assessments/{a['id']}{path}"
    first = client.get(url)
    etag = first.headers["ETag"]
    assert first.status_code == 200 and first.headers["Cache-Control"] == "private, no-cache"
    again = client.get(url, headers={"If-None-Match": etag})
    assert again.status_code == 304 and again.data == b"" and again.headers["ETag"] == etag
    stale = client.get(url, headers={"If-None-Match": '"0123"'})
    assert stale.status_code == 200 and stale.data == first.data


def test_cautions_on_the_page_are_grouped_by_point_in_severity_order(client):
    # Issue 17: cautions for every point once, then each point's own, each group
    # ordered critical, warning, general, note (service.engine.cautions.SEVERITIES).
    from service.engine.cautions import SEVERITIES

    x = np.random.default_rng(7).standard_normal(4000) * 60 + 40
    r = client.post("/v1/assessments", json={
        "samples": {"plain": x.tolist(), "corrected": x.tolist()}, "unit": "MPa",
        "sample_rate_hz": 100, "settings": {"curve": "EN1993-1-9:71"},
        "points": {"plain": {}, "corrected": {"mean_stress_method": "goodman",
                                              "ultimate_strength": 510.0}}})
    assert r.status_code == 201
    a = r.get_json()
    page = client.get(f"/v1/assessments/{a['id']}/report").get_data(as_text=True)
    section = re.search(r"<section class='caution' id='cautions'>(.*?)</section>", page,
                        flags=re.S).group(1)
    groups = dict(re.findall(r"<h3 data-group='([^']+)'>[^<]*</h3><ul>(.*?)</ul>", section))
    assert list(groups)[0] == "All points" and "Point corrected" in groups
    own = re.findall(r"data-code='([^']+)'", groups["Point corrected"])
    assert "mean_stress_on_welded_curve" in own
    assert "mean_stress_on_welded_curve" not in groups.get("Point plain", "")
    assert "mean_stress_on_welded_curve" not in groups["All points"]
    for body in groups.values():
        ranks = [SEVERITIES.index(s) for s in re.findall(r"data-severity='([^']+)'", body)]
        assert ranks == sorted(ranks)
    # Every caution of the resource is on the page, in some group.
    assert {c["code"] for c in a["cautions"]} <= set(re.findall(r"data-code='([^']+)'",
                                                                section))
