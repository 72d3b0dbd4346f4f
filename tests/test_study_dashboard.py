"""The dashboard's Studies tab: a study folder written by `reagentplan study` drawn as
cost against risk with the varied values on hover, an uploaded study.csv, a bad
upload, and the tab in a real headless Chromium.  Invented test station (helpers.py)."""

from __future__ import annotations

import base64
import logging
import os
import threading

import pandas as pd
import pytest

from helpers import minimal_sheets, workbook_bytes, write_workbook
from reagentplan.cli import main
from reagentplan.pipeline import run_plan
from reagentplan.scenario import load_scenario
from reagentplan.study.results import read_study_table

from reagentplan.dashboard.views import study as view

SPECS = ["scrubber.removal_pct=96,98", "storage[gypsum].capacity_t=3000,4000"]


@pytest.fixture(scope="module")
def study_dir(tmp_path_factory):
    folder = tmp_path_factory.mktemp("studydash")
    book = write_workbook(minimal_sheets(days=15), folder / "station.xlsx")
    out = folder / "study"
    assert main(["study", str(book), "--out", str(out), "--cluster", "serial", "--futures", "20",
                 "--time-limit", "20", *sum((["--vary", s] for s in SPECS), [])]) == 0
    return out


@pytest.fixture(scope="module")
def small_run():
    return run_plan(load_scenario(workbook_bytes(minimal_sheets(days=15))), futures=10,
                    time_limit=20)


def _data_url(raw: bytes) -> str:
    return "data:text/csv;base64," + base64.b64encode(raw).decode()


def test_the_view_draws_every_planned_case_with_its_values_on_hover(study_dir):
    frame, meta = read_study_table(study_dir)
    body = view.content(frame, meta)
    fig = body[view.CHART]
    xs = [x for t in fig.data for x in t.x]
    assert len(xs) == 4
    hover = " ".join(h for t in fig.data for h in t.hovertext)
    for v in ("scrubber.removal_pct = 96", "scrubber.removal_pct = 98",
              "storage[gypsum].capacity_t = 3000", "storage[gypsum].capacity_t = 4000"):
        assert v in hover
    # the winner named by study.json is the marker drawn as the winner
    win = next(t for t in fig.data if t.name == "winner")
    assert list(win.text) == [str(meta["winner"])]
    assert body[view.WINNER].startswith("Winner: case")
    # x is the risk in percent, y the expected cost, as in study.csv
    points = view.study_points(frame, meta["winner"])
    expected = 100 * frame[["p_limestone_below_safety", "p_any_over_capacity"]].max(axis=1)
    assert sorted(points["risk_pct"]) == pytest.approx(sorted(expected))
    assert sorted(y for t in fig.data for y in t.y) == pytest.approx(sorted(frame["expected_cost"]))


def test_an_uploaded_study_csv_is_read_and_a_bad_one_named(study_dir):
    raw = (study_dir / "study.csv").read_bytes()
    frame, message, ok = view.parse_study_upload(_data_url(raw), "study.csv")
    assert ok and message == "study.csv: 4 cases." and len(frame) == 4
    # without study.json the winner is picked at the default risk level
    assert "(risk level 5 % assumed)" in view.content(frame)[view.WINNER]
    bad = pd.DataFrame({"case": [1], "x": [2]}).to_csv(index=False).encode()
    frame, message, ok = view.parse_study_upload(_data_url(bad), "../../etc/other.csv")
    assert not ok and frame is None
    assert message.startswith("other.csv: the file is not a study.csv")  # the name only
    assert "'status'" in message and "'expected_cost'" in message


def test_the_app_has_a_studies_tab_filled_from_the_folder(study_dir, small_run, tmp_path):
    from reagentplan.dashboard.app import create_app

    app = create_app(run=small_run, study_dir=study_dir, work_dir=tmp_path / "work")
    tab = app.layout["tab-study"]
    assert tab.label == "Studies"
    assert len(app.layout[view.CHART].figure.data) >= 1
    with pytest.raises(ValueError, match="does not exist"):
        create_app(run=small_run, study_dir=tmp_path / "nowhere", work_dir=tmp_path / "w2")


def test_cli_dashboard_with_a_missing_study_exits_2(tmp_path, capsys):
    assert main(["dashboard", "--study", str(tmp_path / "none"), "--demo-days", "10",
                 "--futures", "5"]) == 2
    assert "--study:" in capsys.readouterr().err


CHROMIUM_OK = all(os.path.exists(p) for p in ("/usr/bin/chromium", "/usr/bin/chromedriver"))


@pytest.mark.skipif(not CHROMIUM_OK, reason="needs Debian's chromium and chromium-driver")
def test_the_studies_tab_in_chromium_shows_the_values_on_hover(study_dir, small_run, tmp_path):
    pytest.importorskip("selenium")
    from selenium.webdriver.common.action_chains import ActionChains
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait
    from werkzeug.serving import make_server

    from reagentplan.dashboard.app import create_app
    from reagentplan.dashboard.testing import chromium_driver

    app = create_app(run=small_run, study_dir=study_dir, work_dir=tmp_path / "work")
    logging.getLogger("werkzeug").setLevel(logging.ERROR)
    srv = make_server("127.0.0.1", 0, app.server, threaded=True)
    thread = threading.Thread(target=srv.serve_forever, daemon=True)
    thread.start()
    driver = chromium_driver(tmp_path / "profile")
    try:
        wait = WebDriverWait(driver, 60, poll_frequency=0.1)
        driver.get(f"http://127.0.0.1:{srv.server_port}/")
        wait.until(lambda d: d.find_elements(By.ID, "tab-study"), "the Studies tab")
        driver.find_element(By.ID, "tab-study").click()
        wait.until(lambda d: len(d.find_elements(
            By.CSS_SELECTOR, f"#{view.CHART} .scatterlayer .point")) == 4, "four case markers")
        point = driver.find_elements(By.CSS_SELECTOR, f"#{view.CHART} .scatterlayer .point")[0]
        ActionChains(driver).move_to_element(point).perform()
        wait.until(lambda d: d.find_elements(By.CSS_SELECTOR, f"#{view.CHART} .hovertext"),
                   "the hover label")
        text = driver.find_element(By.CSS_SELECTOR, f"#{view.CHART} .hovertext").text
        assert "scrubber.removal_pct =" in text and "storage[gypsum].capacity_t =" in text
        driver.save_screenshot(str(tmp_path / "studies.png"))
        if os.environ.get("STUDY_SCREENSHOT"):
            driver.save_screenshot(os.environ["STUDY_SCREENSHOT"])
    finally:
        driver.quit()
        srv.shutdown()
        thread.join(10)
