"""The dashboard in a real headless Chromium (Debian's chromium and chromium-driver):
the page loads, each view draws its charts, a bad upload shows the loader's message, a
good upload and a re-plan redraw the charts, and plan.xlsx downloads.

Screenshots of each view are saved under the test's temporary folder.  The app is served
in a thread on 127.0.0.1; nothing else is contacted.
"""

from __future__ import annotations

import datetime as dt
import os
import shutil
import time
from pathlib import Path

import pytest

from reagentplan.dashboard.testing import CHROMEDRIVER, CHROMIUM, chromium_driver  # noqa: E402

if not os.path.exists(CHROMIUM):
    pytest.skip(f"no Chromium at {CHROMIUM} (Debian package 'chromium')", allow_module_level=True)
if not os.path.exists(CHROMEDRIVER):
    pytest.skip(f"no chromedriver at {CHROMEDRIVER} (Debian package 'chromium-driver')",
                allow_module_level=True)
webdriver = pytest.importorskip("selenium.webdriver")

from selenium.webdriver.common.by import By  # noqa: E402
from selenium.webdriver.common.keys import Keys  # noqa: E402
from selenium.webdriver.support.ui import WebDriverWait  # noqa: E402

from helpers import minimal_sheets, write_workbook  # noqa: E402

pytestmark = pytest.mark.slow

TIMEOUT = 60


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    from reagentplan.dashboard.app import create_app
    from reagentplan.dashboard.testing import serve_in_thread
    from reagentplan.demo.build_demo import build_demo_workbook

    folder = tmp_path_factory.mktemp("dash")
    workbook = build_demo_workbook(folder / "demo60.xlsx", horizon_days=60)
    app = create_app(workbook, futures=100, time_limit=30, work_dir=folder / "work")
    # the production server, with the origin check: every callback below (upload,
    # re-plan, download) is a POST from Chromium that must pass it
    url, stop = serve_in_thread(app)
    yield url, folder
    stop()


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    profile = tmp_path_factory.mktemp("chrome-profile")
    downloads = tmp_path_factory.mktemp("downloads")
    driver = chromium_driver(profile, downloads)
    driver.downloads = downloads
    yield driver
    driver.quit()


def wait(driver, condition, what: str, timeout: float = TIMEOUT):
    return WebDriverWait(driver, timeout, poll_frequency=0.1).until(
        lambda d: condition(d), message=f"timed out waiting for {what}")


def drawn_graphs(driver) -> int:
    """Plotly graphs in the selected view that have drawn their SVG."""
    return driver.execute_script(
        "return document.querySelectorAll('.rp-view .js-plotly-plot .main-svg.plotly, "
        ".rp-view .js-plotly-plot svg.main-svg').length") // 2


def text(driver, element_id: str) -> str:
    """The element's text, read in the page (no stale references while Dash redraws)."""
    return driver.execute_script(
        "var e = document.getElementById(arguments[0]); return e ? e.innerText : '';", element_id)


def classes(driver, element_id: str) -> str:
    return driver.execute_script(
        "var e = document.getElementById(arguments[0]); return e ? e.className : '';", element_id)


def graph_count(driver) -> int:
    return driver.execute_script("return document.querySelectorAll('.rp-view .js-plotly-plot').length")


def trace_points(driver, graph_id: str) -> int:
    """Points of the first trace of a graph, read from plotly's own data."""
    return driver.execute_script(
        "var g = document.querySelector('#' + arguments[0] + ' .js-plotly-plot');"
        "return g && g.data && g.data.length ? g.data[0].x.length : -1;", graph_id)


def show_tab(driver, name: str, expected: int) -> None:
    driver.find_element(By.ID, f"tab-{name}").click()
    wait(driver, lambda d: d.find_element(By.ID, f"tab-{name}").get_attribute("class").find("selected") >= 0
         and graph_count(d) >= expected and drawn_graphs(d) >= expected, f"{expected} charts in {name}")


def screenshot(driver, path: Path) -> None:
    height = driver.execute_script("return document.documentElement.scrollHeight")
    driver.set_window_size(1500, min(max(1100, height + 40), 4000))
    time.sleep(0.6)  # let plotly settle after the resize
    driver.save_screenshot(str(path))
    driver.set_window_size(1500, 1100)


def upload(driver, path: Path) -> None:
    field = driver.find_element(By.CSS_SELECTOR, "#upload input[type=file]")
    driver.execute_script("arguments[0].style.display = 'block';", field)
    field.send_keys(str(path))


def test_dashboard_in_chromium(server, browser, tmp_path):
    url, folder = server
    d = browser
    t0 = time.perf_counter()
    d.get(url)
    wait(d, lambda d: graph_count(d) >= 3 and drawn_graphs(d) >= 3, "the first view's charts")
    first_render = time.perf_counter() - t0
    print(f"first render {first_render:.2f} s")

    from reagentplan import CAUTION

    assert CAUTION in text(d, "caution")
    assert "Velmora Bend" in text(d, "header-title")
    assert "60 days" in text(d, "header-sub")

    # coordinator: calendar, contracts, lane use, and the order lists
    show_tab(d, "coordinator", 3)
    for gid in ("coord-calendar", "coord-contracts", "coord-lane-use"):
        assert d.find_element(By.ID, gid).find_elements(By.CSS_SELECTOR, ".js-plotly-plot")
    assert d.find_elements(By.ID, "haulouts-table")
    assert text(d, "coord-orders").strip()
    screenshot(d, tmp_path / "coordinator.png")

    # plant manager: four stores, SO2, headlines
    show_tab(d, "plant", 5)
    for store in ("limestone", "gypsum", "fly_ash", "bottom_ash"):
        assert d.find_elements(By.CSS_SELECTOR, f"#store-{store} .js-plotly-plot")
        assert text(d, f"headline-{store}")
    assert trace_points(d, "plant-so2") == 60
    screenshot(d, tmp_path / "plant.png")

    # sales: shipments, quality, season, landfill, airspace
    show_tab(d, "sales", 4)
    assert "Years left" in text(d, "airspace-table")
    screenshot(d, tmp_path / "sales.png")

    # a bad upload shows the loader's own message, and changes nothing
    sheets = minimal_sheets()
    del sheets["buyers"]
    bad = write_workbook(sheets, tmp_path / "no_buyers.xlsx")
    upload(d, bad)
    wait(d, lambda d: "bad" in classes(d, "upload-message"), "the bad upload's message")
    message = text(d, "upload-message")
    assert "no_buyers.xlsx: The workbook has" in message and "sheet 'buyers'" in message
    screenshot(d, tmp_path / "bad_upload.png")

    # a good upload (another station: 35 days from March) and a re-plan with a what-if
    from reagentplan.demo.build_demo import build_demo_workbook

    good = build_demo_workbook(tmp_path / "spring.xlsx", start_date=dt.date(2027, 3, 1),
                               horizon_days=35)
    upload(d, good)
    wait(d, lambda d: "good" in classes(d, "upload-message"), "the good upload's message")
    assert "spring.xlsx: the workbook is sound" in text(d, "upload-message")
    assert "60 days" in text(d, "header-sub")  # not planned yet

    thumb = d.find_element(By.CSS_SELECTOR, "#removal [role=slider]")
    for _ in range(5):
        thumb.send_keys(Keys.ARROW_LEFT)  # 97.5 % -> 97.0 %
    wait(d, lambda d: thumb.get_attribute("aria-valuenow") == "97", "the removal slider")
    d.find_element(By.ID, "replan-btn").click()
    wait(d, lambda d: "busy" in classes(d, "replan-box"), "the re-plan's progress state", timeout=10)
    assert not d.find_element(By.ID, "replan-btn").is_enabled()
    assert d.find_element(By.ID, "replan-progress-text").is_displayed()
    # the page stays responsive while the plan runs: switching views still works
    show_tab(d, "plant", 5)
    wait(d, lambda d: "good" in classes(d, "replan-message"), "the re-plan to finish", timeout=120)
    wait(d, lambda d: "SO2 removal 97 %" in text(d, "plan-whatif"), "the new plan's label")
    wait(d, lambda d: "35 days" in text(d, "header-sub"), "the new header")
    wait(d, lambda d: trace_points(d, "plant-so2") == 35, "the SO2 chart of the new plan")
    assert "spring.xlsx" in text(d, "header-sub")
    screenshot(d, tmp_path / "plant_after_replan.png")
    show_tab(d, "coordinator", 3)
    screenshot(d, tmp_path / "coordinator_after_replan.png")

    # download the plan
    d.find_element(By.ID, "download-btn").click()
    target = d.downloads / "plan.xlsx"
    wait(d, lambda d: target.exists() and target.stat().st_size > 0
         and not list(d.downloads.glob("*.crdownload")), "plan.xlsx in the download folder")
    assert target.read_bytes()[:2] == b"PK"  # an .xlsx is a zip file

    errors = [e for e in d.get_log("browser") if e.get("level") == "SEVERE"]
    assert not errors, errors
    keep = os.environ.get("REAGENTPLAN_SCREENSHOTS")
    if keep:  # copy the screenshots somewhere to look at them
        Path(keep).mkdir(parents=True, exist_ok=True)
        for png in tmp_path.glob("*.png"):
            shutil.copy(png, Path(keep) / png.name)


def test_startup_page_shows_the_steps_then_the_views(browser, tmp_path_factory):
    """Started in the background (as `reagentplan dashboard` does), the page first says
    what is being done and updates it, then opens the views by itself when the plan is
    ready; screenshots of both are saved in the test's folder."""
    from reagentplan.dashboard.app import create_app
    from reagentplan.dashboard.testing import serve_in_thread

    folder = tmp_path_factory.mktemp("startup")
    app = create_app(None, futures=100, time_limit=30, demo_days=90, background=True,
                     plan_cache=folder / "cache", work_dir=folder / "work")
    url, stop = serve_in_thread(app)
    try:
        browser.get(url)
        wait(browser, lambda d: "What is being done" in d.find_element(By.TAG_NAME, "body").text,
             "the startup page", 20)
        assert not app.reagentplan.ready
        wait(browser, lambda d: "Sampling 100 futures" in text(d, "startup-steps")
             or "Solving the plan" in text(d, "startup-steps"), "a later step shown", 60)
        screenshot(browser, folder / "startup.png")
        wait(browser, lambda d: text(d, "kpi-cost") != "", "the views after the plan", 300)
        assert "plan cost" in text(browser, "kpi-cost").lower()
        assert not browser.find_elements(By.ID, "startup-steps")
        wait(browser, lambda d: graph_count(d) >= 1 and drawn_graphs(d) >= 1, "a chart drawn")
        screenshot(browser, folder / "first-view.png")
        assert not [e for e in browser.get_log("browser") if e["level"] == "SEVERE"]
    finally:
        stop()
