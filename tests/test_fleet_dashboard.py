"""The fleet dashboard: the fleet view draws each pooled contract and the car set, lists
every station's stores, and the station picker shows the chosen station's own views of
its part of the fleet plan; a station with an operations record (a real SQLite record,
``db`` in the fleet's ``stations`` sheet) shows its record behind the picker, a station
without one says so; ``--study DIR`` adds the Studies tab.  The browser tests run a real
headless Chromium (Debian's chromium and chromium-driver), served in a thread on
127.0.0.1; nothing else is contacted."""

from __future__ import annotations

import dataclasses
import datetime as dt
import json
import os
import time

import pytest

from reagentplan.cli import main
from reagentplan.dashboard.testing import CHROMEDRIVER, CHROMIUM, chromium_driver

from fleet_helpers import fleet_rows, write_fleet
from helpers import START, write_workbook
from record_data import record_sheets, write_record

pytestmark = pytest.mark.slow
TIMEOUT = 60
AS_OF = START - dt.timedelta(days=1)
#: the station with a record: not the picker's first, so the browser test has to pick it
RECORDED = "south"
CHROMIUM_OK = os.path.exists(CHROMIUM) and os.path.exists(CHROMEDRIVER)
browser = pytest.mark.skipif(not CHROMIUM_OK,
                             reason="no Chromium / chromedriver (Debian packages 'chromium', 'chromium-driver')")


def recorded_fleet(folder, db: str | None) -> object:
    """The three-station test fleet (fleet_helpers) written to ``folder`` with ``db`` as
    the record of `RECORDED` (the others have none); returns the fleet workbook's path."""
    write_fleet(folder, days=42)
    rows = fleet_rows({}, [["Quarry pool", "Quarry Q", "limestone", None, 12000, None],
                           ["Board pool", "Board Co", "gypsum", None, 4000, None]], [["Q set", 2, 7]])
    rows["stations"] = [["station", "workbook", "db"]] + [
        [n, f"{n}.xlsx", db if n == RECORDED else None] for n in ("north", "south", "east")]
    return write_workbook(rows, folder / "recorded.xlsx")


def write_study(folder):
    """A study folder as `reagentplan study FLEET.xlsx` writes it (study.csv with the
    columns of DESIGN §7, study.json); invented values, two cases varying a pooled limit."""
    folder.mkdir(parents=True, exist_ok=True)
    varied = "shared_contracts[Quarry pool].max_t_per_month"
    head = ["case", varied, "status", "total_cost", "cost_p10", "cost_p50", "cost_p90",
            "p_limestone_below_safety", "p_any_over_capacity", "trains", "trucks", "sold_t", "landfilled_t",
            "solve_seconds", "expected_cost", "baseline_total_cost", "gap", "breaches", "futures",
            "case_seconds", "message"]
    rows = [[1, 10000, "optimal", 900000, 880000, 900000, 940000, 0.02, 0.0, 6, 10, 4000, 900, 1.0, 905000,
             990000, 0.0, 0, 5, 2.0, ""],
            [2, 14000, "optimal", 860000, 850000, 860000, 890000, 0.01, 0.0, 7, 2, 4000, 900, 1.0, 862000,
             990000, 0.0, 0, 5, 2.0, ""]]
    (folder / "study.csv").write_text("\n".join(",".join(map(str, r)) for r in [head, *rows]) + "\n")
    (folder / "study.json").write_text(json.dumps({"winner": 2, "winner_reason": "case 2 costs least",
                                                   "risk_level": 0.05, "currency": "USD"}))
    return folder


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """The fleet with south's record (a week of facts and one plan version, made by the
    CLI as a station's coordinator makes them), planned once, with a study."""
    from reagentplan.dashboard.fleet import create_fleet_app
    from reagentplan.settings import PLAN

    folder = tmp_path_factory.mktemp("fleetdash")
    url = f"sqlite:///{folder / 'south.db'}"
    path = recorded_fleet(folder / "in", url)
    south = folder / "in" / "south.xlsx"
    assert main(["db", "upgrade", "--db", url]) == 0
    assert main(["record", str(write_record(record_sheets(), folder / "week.xlsx")), "--db", url,
                 "--scenario", str(south), "--as-of", f"{AS_OF}"]) == 0
    assert main(["plan", str(south), "--db", url, "--as-of", f"{AS_OF}", "--out", str(folder / "plan"),
                 "--futures", "0"]) in (0, 1)
    study = write_study(folder / "study")
    app = create_fleet_app(path, settings=dataclasses.replace(PLAN, futures=5, firm_days=14), study_dir=study)
    return app, path, study


def pick(app, station: str) -> dict:
    """What the page gets back when ``station`` is picked: a real request to the app's
    callback endpoint (the station picker's callback), as ``{id: {property: value}}``."""
    key = next(k for k in app.callback_map if "fleet-record.children" in k)
    outputs = [dict(zip(("id", "property"), o.rsplit(".", 1))) for o in key.strip(".").split("...")]
    body = {"output": key, "outputs": outputs,
            "inputs": [{"id": "fleet-station", "property": "value", "value": station}],
            "changedPropIds": ["fleet-station.value"], "state": []}
    client = app.server.test_client()
    answer = client.post("/_dash-update-component", data=json.dumps(body),
                         headers={"Content-Type": "application/json", "Origin": "http://localhost"})
    assert answer.status_code == 200, answer.data[:300]
    return answer.get_json()["response"]


def test_the_picked_station_shows_its_record_and_a_station_without_one_says_so(built):
    from reagentplan.dashboard.views import record as R

    app, _, _ = built
    assert app.layout["tab-record"].label == "Record & changes"
    south = pick(app, RECORDED)
    body = json.dumps(south["fleet-record"]["children"])
    # south's record: its plan version in force, its recorded survey as a point, the
    # weekly movements recorded against it; read-only (no upload on the fleet page)
    assert "Plan version 1 in force" in body and f"as of {AS_OF:%a %d %b %Y}" in body
    assert '"id": "record-store-limestone"' in body and '"name": "surveyed"' in body
    assert "limestone in: recorded" in body
    assert R.UPLOAD not in body and "Read-only here" in body
    assert "has no operations record" not in body
    # north has none: the tab says so plainly, and shows nothing of south's record
    north = json.dumps(pick(app, "north")["fleet-record"]["children"])
    assert "north has no operations record" in north and "fleet-record-none" in north
    assert "Plan version" not in north and "record-store-limestone" not in north
    # the station views behind the picker follow the pick too
    assert pick(app, "north")["plant-stores"] != south["plant-stores"]


def test_the_record_tab_is_absent_when_no_station_has_a_record_and_the_studies_tab_needs_a_study(built):
    from reagentplan.dashboard.fleet import create_fleet_app
    from reagentplan.dashboard.views import study as S

    app, path, study = built
    tab = app.layout["tab-study"]
    assert tab.label == "Studies"
    chart = app.layout[S.CHART].figure
    assert sorted(y for t in chart.data for y in t.y) == [862000, 905000]  # study.csv's expected costs
    assert "shared_contracts[Quarry pool].max_t_per_month = 14000" in " ".join(
        h for t in chart.data for h in t.hovertext)
    # the same fleet plan, no station with a record, no study: neither tab
    result = app.reagentplan_fleet
    bare = dataclasses.replace(result, fleet=dataclasses.replace(
        result.fleet, stations=tuple(dataclasses.replace(s, db=None) for s in result.fleet.stations)))
    plain = create_fleet_app(path, result=bare)
    tabs = [t.id for t in plain.layout["views"].children]
    assert tabs == ["tab-fleet", "tab-coordinator", "tab-plant", "tab-sales"]
    assert not any("fleet-record" in k for k in plain.callback_map)


def test_a_station_has_one_colour_in_every_fleet_figure_and_the_stores_show_no_minus_zero(built):
    """The pooled contracts' and the car set's figures colour a station alike (they did
    not: one took the sorted names, the other the table's order), their legends sit at
    the foot, below the axis title; a solver's -1e-9 t shows as 0 in the stores table."""
    from reagentplan.dashboard import fleet_figures
    from reagentplan.fleet import fleet_frames

    app = built[0]
    frames = fleet_frames(app.reagentplan_fleet)
    pooled = fleet_figures.pooled_figure(frames["Pooled contracts"], "Quarry pool")
    cars = fleet_figures.cars_figure(frames["Car sets"], "Q set")
    colour = {t.name: t.marker.color for t in pooled.data if t.type == "bar"}
    assert set(colour) == {"north", "south", "east"} and len(set(colour.values())) == 3
    assert {t.name: t.marker.color for t in cars.data if t.type == "bar"} == colour
    for fig in (pooled, cars):
        assert fig.layout.legend.yref == "container" and fig.layout.legend.yanchor == "bottom"
    cells = [c.children for row in app.layout["fleet-stores"].children[1].children for c in row.children]
    assert "-0" not in cells and "fly ash" in cells


def test_a_station_record_that_cannot_be_opened_names_its_row(tmp_path, capsys):
    from reagentplan.dashboard.fleet import station_records
    from reagentplan.errors import ScenarioError
    from reagentplan.fleet import load_fleet

    path = recorded_fleet(tmp_path / "in", f"sqlite:///{tmp_path / 'nowhere' / 'south.db'}")
    with pytest.raises(ScenarioError) as err:
        station_records(load_fleet(path))
    assert "sheet 'stations', row 3, column 'db': station 'south'" in err.value.report()
    assert "does not exist" in err.value.report()
    # on the command line: exit 2 with the same line, before the fleet is planned
    assert main(["dashboard", str(path), "--futures", "0"]) == 2
    assert "row 3, column 'db': station 'south'" in capsys.readouterr().err


def test_cli_fleet_dashboard_with_a_missing_study_exits_2_before_planning(tmp_path, capsys):
    path = write_fleet(tmp_path / "in", days=14)
    assert main(["dashboard", str(path), "--study", str(tmp_path / "none"), "--futures", "0"]) == 2
    err = capsys.readouterr().err
    assert "--study:" in err and "does not exist" in err


# ------------------------------------------------------------------------- in Chromium


def wait(driver, condition, what: str):
    from selenium.webdriver.support.ui import WebDriverWait

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
def served(built):
    from reagentplan.dashboard.testing import serve_in_thread

    app = built[0]
    url, stop = serve_in_thread(app)
    yield url, app
    stop()


@browser
def test_fleet_dashboard_in_chromium(served, tmp_path):
    from selenium.webdriver.common.by import By

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


@browser
def test_picking_the_station_with_a_record_shows_its_record_tab_in_chromium(served, tmp_path):
    from selenium.webdriver.common.by import By

    url, app = served
    d = chromium_driver(tmp_path / "profile")
    try:
        d.get(url)
        wait(d, lambda d: drawn(d) >= 3, "the fleet view")
        d.find_element(By.ID, "tab-record").click()
        # north (picked first) has no record: said plainly
        wait(d, lambda d: "north has no operations record" in text(d, "fleet-record"), "north's line")
        d.find_element(By.CSS_SELECTOR, f"#fleet-station input[value='{RECORDED}']").click()
        wait(d, lambda d: "Plan version 1 in force" in text(d, "record-plan-in-force"), "south's plan in force")
        wait(d, lambda d: drawn(d) >= 2, "south's record charts")
        assert first_x(d, "record-store-limestone")
        assert "Who recorded what" in text(d, "fleet-record")
        assert not d.find_elements(By.ID, "record-upload")  # read-only here
        time.sleep(0.3)
        d.save_screenshot(str(tmp_path / "south-record.png"))
        # back to north: south's record goes
        d.find_element(By.CSS_SELECTOR, "#fleet-station input[value='north']").click()
        wait(d, lambda d: "north has no operations record" in text(d, "fleet-record"), "north's line again")
        assert not d.find_elements(By.ID, "record-plan-in-force")
        # the Studies tab from --study
        d.find_element(By.ID, "tab-study").click()
        wait(d, lambda d: "Winner: case 2" in text(d, "study-winner"), "the study's winner")
    finally:
        d.quit()
