"""The record tab in a real headless Chromium: surveys drawn as points, the plan in
force named, an upload of actuals recorded (and a bad one refused with the place named)."""

from __future__ import annotations

import datetime as dt
import logging
import os
import threading

import pytest

from reagentplan.dashboard.testing import CHROMEDRIVER, CHROMIUM, chromium_driver

if not (os.path.exists(CHROMIUM) and os.path.exists(CHROMEDRIVER)):
    pytest.skip(f"no Chromium at {CHROMIUM} or chromedriver at {CHROMEDRIVER} (Debian packages "
                "'chromium', 'chromium-driver')", allow_module_level=True)
pytest.importorskip("selenium.webdriver")

from selenium.webdriver.common.by import By  # noqa: E402
from selenium.webdriver.support.ui import WebDriverWait  # noqa: E402

from reagentplan.cli import main  # noqa: E402

from helpers import START  # noqa: E402
from record_data import record_sheets, scenario_path, write_record  # noqa: E402

pytestmark = pytest.mark.slow
AS_OF = START - dt.timedelta(days=1)


def wait(driver, condition, what: str, timeout: float = 60):
    return WebDriverWait(driver, timeout, poll_frequency=0.1).until(
        lambda d: condition(d), message=f"timed out waiting for {what}")


def test_record_tab_in_chromium(tmp_path):
    from werkzeug.serving import make_server

    from reagentplan.dashboard.app import create_app

    url = f"sqlite:///{tmp_path / 'r.db'}"
    wb = scenario_path(tmp_path)
    assert main(["db", "upgrade", "--db", url]) == 0
    assert main(["record", str(write_record(record_sheets(), tmp_path / "w.xlsx")), "--db", url,
                 "--scenario", str(wb), "--as-of", f"{AS_OF}"]) == 0
    assert main(["plan", str(wb), "--db", url, "--as-of", f"{AS_OF}", "--out", str(tmp_path / "p"),
                 "--futures", "0"]) in (0, 1)
    app = create_app(str(wb), db=url, futures=0, time_limit=20, work_dir=tmp_path / "app")
    logging.getLogger("werkzeug").setLevel(logging.ERROR)
    srv = make_server("127.0.0.1", 0, app.server, threaded=True)
    thread = threading.Thread(target=srv.serve_forever, daemon=True)
    thread.start()
    driver = chromium_driver(tmp_path / "profile")
    try:
        driver.get(f"http://127.0.0.1:{srv.server_port}/")
        wait(driver, lambda d: d.find_elements(By.ID, "tab-record"), "the record tab")
        driver.find_element(By.ID, "tab-record").click()
        wait(driver, lambda d: d.execute_script(
            "const g = document.getElementById('record-store-limestone');"
            "return g && g.querySelectorAll('.scatterlayer .point').length > 0;"), "the survey point")
        assert "Plan version 1 in force" in driver.find_element(By.ID, "record-plan-in-force").text
        good = tmp_path / "up" / "stock_surveys.csv"
        good.parent.mkdir()
        good.write_text(f"date,store,level_t\n{AS_OF},gypsum,1300\n", encoding="utf-8")
        field = driver.find_element(By.CSS_SELECTOR, "#record-upload input[type=file]")
        field.send_keys(str(good))
        wait(driver, lambda d: "1 added" in d.find_element(By.ID, "record-upload-message").text,
             "the upload recorded")
        bad = tmp_path / "up2" / "arrivals.csv"
        bad.parent.mkdir()
        bad.write_text(f"date,supplier,loads,tonnes,ticket\n{AS_OF},Quarry W,1,990,X1\n", encoding="utf-8")
        field = driver.find_element(By.CSS_SELECTOR, "#record-upload input[type=file]")
        field.send_keys(str(bad))
        wait(driver, lambda d: "did you mean" in d.find_element(By.ID, "record-upload-message").text,
             "the bad upload refused")
        assert "row 2" in driver.find_element(By.ID, "record-upload-message").text
        driver.save_screenshot(str(tmp_path / "record_tab.png"))
    finally:
        driver.quit()
        srv.shutdown()
        thread.join(10)
