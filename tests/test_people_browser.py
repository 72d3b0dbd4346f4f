"""People in a real headless Chromium: a viewer signs in on the dashboard's own page and
cannot record facts (the server refuses, the page says why); a coordinator signs in,
records a file, and the record tab names them."""

from __future__ import annotations

import datetime as dt
import os

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
from test_people import PASSWORDS, _add_users, _count  # noqa: E402

pytestmark = pytest.mark.slow
AS_OF = START - dt.timedelta(days=1)


def wait(driver, condition, what: str, timeout: float = 60):
    return WebDriverWait(driver, timeout, poll_frequency=0.1).until(
        lambda d: condition(d), message=f"timed out waiting for {what}")


def sign_in(driver, base: str, name: str) -> None:
    driver.get(base)
    wait(driver, lambda d: d.find_elements(By.ID, "signin-name"), "the sign-in page")
    driver.find_element(By.ID, "signin-name").send_keys(name)
    driver.find_element(By.ID, "signin-password").send_keys(PASSWORDS[name])
    driver.find_element(By.ID, "signin-button").click()
    wait(driver, lambda d: d.find_elements(By.ID, "tab-record"), "the dashboard after signing in")
    assert driver.find_element(By.ID, "rp-signed-in-name").text == name


def upload(driver, path) -> str:
    driver.find_element(By.ID, "tab-record").click()
    field = driver.find_element(By.CSS_SELECTOR, "#record-upload input[type=file]")
    field.send_keys(str(path))
    wait(driver, lambda d: d.find_element(By.ID, "record-upload-message").text.strip(), "the upload's answer")
    return driver.find_element(By.ID, "record-upload-message").text


def test_viewer_cannot_record_and_coordinator_is_named(tmp_path, monkeypatch):
    from reagentplan.dashboard.app import create_app
    from reagentplan.dashboard.testing import serve_in_thread

    url = f"sqlite:///{tmp_path / 'r.db'}"
    wb = scenario_path(tmp_path)
    assert main(["db", "upgrade", "--db", url]) == 0
    assert main(["record", str(write_record(record_sheets(), tmp_path / "w.xlsx")), "--db", url,
                 "--scenario", str(wb), "--as-of", f"{AS_OF}"]) == 0
    _add_users(url, monkeypatch)
    app = create_app(str(wb), db=url, futures=0, time_limit=20, work_dir=tmp_path / "app")
    base, stop = serve_in_thread(app)
    good = tmp_path / "up" / "stock_surveys.csv"
    good.parent.mkdir()
    good.write_text(f"date,store,level_t\n{AS_OF},gypsum,1300\n", encoding="utf-8")
    surveys = _count(url, "stock_surveys")
    driver = chromium_driver(tmp_path / "profile")
    try:
        # without signing in, the page is the sign-in page; a wrong password stays there
        driver.get(base)
        wait(driver, lambda d: d.find_elements(By.ID, "signin-name"), "the sign-in page")
        driver.find_element(By.ID, "signin-name").send_keys("vic")
        driver.find_element(By.ID, "signin-password").send_keys("not-the-password")
        driver.find_element(By.ID, "signin-button").click()
        wait(driver, lambda d: d.find_elements(By.ID, "signin-message"), "the refusal")
        assert "Wrong name or password" in driver.find_element(By.ID, "signin-message").text

        sign_in(driver, base, "vic")
        text = upload(driver, good)
        assert "vic is a viewer" in text and "Nothing was changed" in text
        assert _count(url, "stock_surveys") == surveys
        driver.find_element(By.ID, "rp-sign-out").click()
        wait(driver, lambda d: d.find_elements(By.ID, "signin-name"), "the sign-in page after signing out")

        sign_in(driver, base, "ana")
        text = upload(driver, good)
        assert "1 added" in text
        assert _count(url, "stock_surveys") == surveys + 1
        wait(driver, lambda d: "ana" in d.find_element(By.ID, "record-imports-table").text,
             "the record tab naming who recorded it")
        rows = driver.find_elements(By.CSS_SELECTOR, "#record-imports-table tbody tr")
        assert "ana" in rows[0].text and "stock_surveys.csv" in rows[0].text
        driver.save_screenshot(str(tmp_path / "people.png"))
    finally:
        driver.quit()
        stop()
        app.reagentplan.people.engine.dispose()
