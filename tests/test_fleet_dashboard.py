"""The fleet dashboard in a real headless Chromium (Debian's chromium and
chromium-driver): the fleet view draws each pooled contract and the car set, lists every
station's stores, and the station picker shows the chosen station's own views of its
part of the fleet plan.  Served in a thread on 127.0.0.1; nothing else is contacted."""

from __future__ import annotations

import os
import time

import pytest

from reagentplan.dashboard.testing import CHROMEDRIVER, CHROMIUM, chromium_driver

if not os.path.exists(CHROMIUM) or not os.path.exists(CHROMEDRIVER):
    pytest.skip("no Chromium / chromedriver (Debian packages 'chromium', 'chromium-driver')",
                allow_module_level=True)
pytest.importorskip("selenium.webdriver")

from selenium.webdriver.common.by import By  # noqa: E402
from selenium.webdriver.support.ui import WebDriverWait  # noqa: E402

from fleet_helpers import write_fleet  # noqa: E402

pytestmark = pytest.mark.slow
TIMEOUT = 60


def wait(driver, condition, what: str):
    return WebDriverWait(driver, TIMEOUT, poll_frequency=0.1).until(lambda d: condition(d),
                                                                    message=f"timed out waiting for {what}")


def drawn(driver) -> int:
    return driver.execute_script(
        "return document.querySelectorAll('.rp-view .js-plotly-plot .main-svg.plotly, "
        ".rp-view .js-plotly-plot svg.main-svg').length") // 2


def text(driver, element_id: str) -> str:
    return driver.execute_script("var e = document.getElementById(arguments[0]); return e ? e.innerText : '';",
                                 element_id)


def first_x(driver, graph_id: str):
    return driver.execute_script(
        "var g = document.querySelector('#' + arguments[0] + ' .js-plotly-plot') "
        "|| document.getElementById(arguments[0]);"
        "return g && g.data ? JSON.stringify(g.data.map(t => t.y)) : null;", graph_id)


@pytest.fixture(scope="module")
def served(tmp_path_factory):
    from reagentplan.dashboard.fleet import create_fleet_app
    from reagentplan.dashboard.testing import serve_in_thread
    from reagentplan.settings import PLAN
    import dataclasses

    folder = tmp_path_factory.mktemp("fleetdash")
    path = write_fleet(folder / "in", days=42)
    app = create_fleet_app(path, settings=dataclasses.replace(PLAN, futures=5, firm_days=14))
    url, stop = serve_in_thread(app)
    yield url, app
    stop()


def test_fleet_dashboard_in_chromium(served, tmp_path):
    url, app = served
    profile = tmp_path / "profile"
    d = chromium_driver(profile)
    try:
        d.get(url)
        wait(d, lambda d: drawn(d) >= 3, "the pooled contracts' and the car set's charts")
        assert "Test fleet" in text(d, "header-title")
        stores = text(d, "fleet-stores")
        for name in ("north", "south", "east"):
            assert name in stores
        assert "Board pool" in text(d, "fleet-room")
        d.save_screenshot(str(tmp_path / "fleet.png"))
        # the station picker: north's, then south's plant view
        d.find_element(By.ID, "tab-plant").click()
        wait(d, lambda d: drawn(d) >= 2, "north's stores and risk")
        before = first_x(d, "plant-stores")
        assert before
        d.find_element(By.CSS_SELECTOR, "#fleet-station input[value='south']").click()
        wait(d, lambda d: first_x(d, "plant-stores") not in (before, None), "south's stores")
        wait(d, lambda d: drawn(d) >= 2, "south's stores and risk")
        d.find_element(By.ID, "tab-coordinator").click()
        wait(d, lambda d: drawn(d) >= 3, "south's deliveries")
        time.sleep(0.3)
        d.save_screenshot(str(tmp_path / "south-coordinator.png"))
    finally:
        d.quit()
