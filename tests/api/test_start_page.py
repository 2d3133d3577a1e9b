"""The start page (GET /): served, public, and driven in a real headless
browser (Chromium through Selenium): the numbers it shows equal the API's,
the upload form assesses a recording end to end, and a typed key works."""

from __future__ import annotations

import os
import shutil
import tempfile
import threading

import numpy as np
import pytest

from service import formatting
from service.api import create_app
from service.store import keys, sqlite
from tests.api.conftest import stop_waitress
from tests.api.test_ledger import pq_bytes, post, setup_asset

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
DRIVER = shutil.which("chromedriver")


def test_the_page_is_public_and_self_contained(tmp_path):
    app = create_app({"DATA_DIR": str(tmp_path / "d"), "WARM_KERNELS": False})
    con = sqlite.connect(tmp_path / "d")
    keys.create(con, "rig", "read")  # keys exist: the API now needs one, the page does not
    c = app.test_client()
    r = c.get("/")
    assert r.status_code == 200 and r.mimetype == "text/html"
    page = r.get_data(as_text=True)
    assert "<script" in page and "src=" not in page.split("<script")[1][:20]  # inline only
    assert "http://" not in page and "https://" not in page  # nothing fetched from elsewhere
    from service.reports.pages import BASE_CSS

    assert BASE_CSS in page and "shared style goes here" not in page  # the pages' one style
    assert "default-src 'self'" in r.headers["Content-Security-Policy"]
    assert c.get("/v1/assets").status_code == 401
    app.extensions["cycleledger.jobs"].shutdown()


@pytest.fixture
def browser(tmp_path):
    missing = [n for n, p in (("chromium", CHROMIUM), ("chromedriver", DRIVER)) if p is None]
    try:
        from selenium import webdriver
        from selenium.webdriver.chrome.service import Service
    except ImportError:
        missing.append("selenium")
    if missing:
        if os.environ.get("CYCLELEDGER_REQUIRE_BROWSER"):
            pytest.fail(f"{', '.join(missing)} required here (.ci/run installs them)")
        pytest.skip(f"{', '.join(missing)} not installed")
    from waitress import create_server

    app = create_app({"DATA_DIR": str(tmp_path / "d")})
    server = create_server(app, host="127.0.0.1", port=0, threads=4)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    profile = tempfile.mkdtemp(prefix="cycleledger-chromium-")
    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for flag in ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
                 "--no-first-run", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--window-size=1200,1600",
                 f"--user-data-dir={profile}"):
        opts.add_argument(flag)
    opts.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    driver = webdriver.Chrome(options=opts, service=Service(executable_path=DRIVER))
    driver.set_page_load_timeout(60)
    try:
        yield app, f"http://127.0.0.1:{server.effective_port}", driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)
        stop_waitress(server, thread)
        app.extensions["cycleledger.jobs"].shutdown()


def wait_for(driver, css, timeout=30):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support import expected_conditions as ec
    from selenium.webdriver.support.ui import WebDriverWait

    return WebDriverWait(driver, timeout).until(
        ec.presence_of_element_located((By.CSS_SELECTOR, css)))


def cells(driver, row_css):
    from selenium.webdriver.common.by import By

    row = driver.find_element(By.CSS_SELECTOR, row_css)
    return {td.get_attribute("data-field"): td.text
            for td in row.find_elements(By.CSS_SELECTOR, "td[data-field]")}


def console_errors(driver):
    return [e for e in driver.get_log("browser") if e["level"] in ("SEVERE", "WARNING")]


def test_assets_and_assessments_show_the_api_numbers(browser):
    app, url, driver = browser
    c = app.test_client()
    setup_asset(c, "arm", ("a", "b"))
    rng = np.random.default_rng(5)
    assert post(c, "arm", 1, {"a": rng.standard_normal(3000) * 80,
                              "b": rng.standard_normal(3000) * 40}).status_code == 201
    made = c.post("/v1/assessments", json={
        "samples": {"g": (rng.standard_normal(2000) * 50).tolist()}, "unit": "MPa",
        "sample_rate_hz": 50, "settings": {"curve": "EN1993-1-9:71"}}).get_json()
    driver.get(url + "/")
    wait_for(driver, 'tr[data-asset="arm"][data-point="b"]')
    for p in ("a", "b"):
        api = c.get("/v1/feeds/points?asset=arm").get_json()["items"]
        row = next(r for r in api if r["point"] == p)
        shown = cells(driver, f'tr[data-asset="arm"][data-point="{p}"]')
        assert shown["damage"] == formatting.number(row["damage"])
        assert shown["consumed_percent"] == formatting.number(row["consumed_percent"])
        assert shown["recorded_hours"] == formatting.number(row["recorded_hours"])
    wait_for(driver, f'tr[data-assessment="{made["id"]}"] a')
    assert not console_errors(driver), console_errors(driver)


def test_the_form_assesses_a_recording_end_to_end(browser, tmp_path):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import Select

    app, url, driver = browser
    c = app.test_client()
    rng = np.random.default_rng(8)
    t = np.arange(4000) / 200.0
    g1 = 90 * np.sin(2 * np.pi * 1.3 * t) + 20 * rng.standard_normal(t.size) + 40
    g2 = 0.4 * g1
    rec = tmp_path / "rig run 7.csv"  # a rig's dialect: semicolons, decimal commas, units row
    lines = ["time;g1;g2", "s;MPa;MPa"] + [
        f"{a:.4f};{b:.3f};{d:.3f}".replace(".", ",") for a, b, d in zip(t, g1, g2)]
    rec.write_text("\n".join(lines) + "\n")
    driver.get(url + "/")
    wait_for(driver, '#curve option[value="IIW:FAT90"]')
    driver.find_element(By.ID, "file").send_keys(str(rec))
    Select(driver.find_element(By.ID, "curve")).select_by_value("IIW:FAT90")
    Select(driver.find_element(By.ID, "method")).select_by_value("goodman")
    driver.find_element(By.ID, "ultimate").send_keys("520")
    driver.find_element(By.ID, "run").click()
    wait_for(driver, '#result-rows tr[data-point="g2"]', timeout=60)
    aid = driver.find_element(By.ID, "result-id").text
    a = c.get(f"/v1/assessments/{aid}").get_json()
    assert a["request"]["settings"]["curve"] == "IIW:FAT90"
    assert a["request"]["settings"]["mean_stress_method"] == "goodman"
    for name, p in a["points"].items():
        shown = cells(driver, f'#result-rows tr[data-point="{name}"]')
        assert shown["cycles_counted"] == formatting.count(p["cycles_counted"])
        for field in ("max_range", "damage", "life_hours", "reserve_factor",
                      "equivalent_range"):
            assert shown[field] == formatting.number(p[field]), field
    codes = [li.get_attribute("data-code")
             for li in driver.find_elements(By.CSS_SELECTOR, "#result-cautions li")]
    assert codes == [x["code"] for x in a["cautions"]] and codes
    hist = c.get(f"/v1/histories/{a['history_id']}").get_json()
    assert hist["sample_rate_hz"] == 200.0 and hist["name"] == "rig run 7.csv"
    # The new assessment heads the list, with its report link.
    wait_for(driver, f'tr[data-assessment="{aid}"] a')
    assert not console_errors(driver), console_errors(driver)


def test_a_key_typed_into_the_page_is_used(browser):
    from selenium.webdriver.common.by import By

    app, url, driver = browser
    c = app.test_client()
    setup_asset(c, "frame", ("weld",))
    con = sqlite.connect(app.config["DATA_DIR"])
    _, secret = keys.create(con, "default", "read")
    driver.get(url + "/")
    status = wait_for(driver, "#status.problem")
    assert "API key" in status.text  # no key: the page says what to do
    assert not driver.find_elements(By.CSS_SELECTOR, 'tr[data-asset="frame"]')
    driver.find_element(By.ID, "key").send_keys(secret)
    driver.find_element(By.CSS_SELECTOR, "#key-form button[type=submit]").click()
    wait_for(driver, 'tr[data-asset="frame"][data-point="weld"]')
    assert driver.execute_script("return sessionStorage.getItem('cycleledger.key')") == secret
    assert driver.execute_script("return localStorage.length") == 0
    # The 401s before the key are expected console messages; nothing else.
    other = [e for e in console_errors(driver) if "401" not in e["message"]]
    assert not other, other


def test_duty_cycles_and_vibration_profiles_show_the_api_numbers(browser):
    app, url, driver = browser
    c = app.test_client()
    r = c.post("/v1/histories?unit=MPa&sample_rate_hz=50",
               data=pq_bytes({"g": np.tile([-80.0, 80.0], 200)}),
               content_type="application/vnd.apache.parquet")
    hid = r.get_json()["id"]
    duty = c.post("/v1/duty-cycles", json={
        "name": "yard shift", "settings": {"curve": "EN1993-1-9:71"}, "target": {"repeats": 1e4},
        "events": [{"name": "lifts", "history_id": hid, "repeats": 3}]}).get_json()
    spec = c.post("/v1/spectra", json={
        "name": "shaker z", "settings": {"curve": "EN1993-1-9:71"},
        "load_cases": [{"exposure_s": 600, "psd": {"frequency_hz": [2, 40], "psd": [20, 20]}}]
    }).get_json()
    driver.get(url + "/")
    wait_for(driver, f'tr[data-duty-cycle="{duty["id"]}"]')
    shown = cells(driver, f'tr[data-duty-cycle="{duty["id"]}"]')
    assert shown["passed"] == ("pass" if duty["passed"] else "fail")
    assert shown["worst_point"] == duty["worst_point"] == "g"
    wait_for(driver, f'tr[data-spectrum="{spec["id"]}"]')
    shown = cells(driver, f'tr[data-spectrum="{spec["id"]}"]')
    assert shown["damage"] == formatting.number(spec["damage"])
    assert shown["reserve_factor"] == formatting.number(spec["reserve_factor"])
    assert shown["governing_method"] == "dirlik"
    assert not console_errors(driver), console_errors(driver)
