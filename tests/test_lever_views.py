"""The removal lever and the allowances where people see them: the "Scrubber and permit"
sheet of plan.xlsx, the console lines, and the plant manager's "SO2 removal and permit"
panel."""

from __future__ import annotations


import numpy as np
import openpyxl
import pandas as pd
import pytest

from helpers import START, minimal_sheets, workbook_bytes
from test_removal_lever import outage_station
from reagentplan.output.plan_workbook import write_plan_workbook
from reagentplan.pipeline import run_plan
from reagentplan.scenario import load_scenario
from reagentplan.schedule.lever import lever_days
from reagentplan.summary import describe_lever, describe_plan

from reagentplan.dashboard import callbacks, figures
from reagentplan.dashboard.views import plant

SHEET = "Scrubber and permit"


@pytest.fixture(scope="module")
def lever_run():
    """The late-train station: a removal range of 95-99 %, a 7-day permit average and
    allowances; the plan dips below its 98.5 % setpoint while no train can come."""
    return run_plan(load_scenario(workbook_bytes(outage_station())), futures=0, firm_days=15,
                    time_limit=20)


@pytest.fixture(scope="module")
def fixed_run():
    """The tests' plain station: a fixed removal and no allowances."""
    return run_plan(load_scenario(workbook_bytes(minimal_sheets(days=10))), futures=0, time_limit=20)


def _sheet_table(ws, header_row: int, width: int) -> pd.DataFrame:
    rows = list(ws.iter_rows(min_row=header_row, max_col=width, values_only=True))
    head, body = rows[0], [r for r in rows[1:] if r[0] is not None]
    return pd.DataFrame(body, columns=head)


def test_the_lever_run_dips_and_trades(lever_run):
    s = lever_run.plan.summary()
    assert lever_run.plan.plan.removal is not None
    assert s["removal"]["dips"], "the fixture should dip below the setpoint"
    assert "allowances" in s


# --------------------------------------------------------------------------- plan.xlsx


def test_sheet_has_the_daily_removal_and_permit_equal_to_the_balance(lever_run, tmp_path):
    path = write_plan_workbook(lever_run, tmp_path / "plan.xlsx")
    wb = openpyxl.load_workbook(path)
    assert SHEET in wb.sheetnames
    ws = wb[SHEET]
    assert ws.freeze_panes == "A5"
    table = _sheet_table(ws, 4, 8)
    assert list(table.columns) == ["date", "SO2 removal chosen [%]", "removal min [%]", "removal max [%]",
                                   "setpoint [%]", "SO2 emitted [t]", "rolling average [kg/GJ]",
                                   "permit limit [kg/GJ]"]
    bal = lever_run.plan.balance
    assert len(table) == len(bal)
    assert [pd.Timestamp(d) for d in table["date"]] == list(pd.to_datetime(bal["date"]))
    np.testing.assert_allclose(table["SO2 removal chosen [%]"].astype(float), bal["removal_pct"], rtol=1e-12)
    np.testing.assert_allclose(table["SO2 removal chosen [%]"].astype(float), lever_run.plan.plan.removal,
                               atol=1e-9)
    np.testing.assert_allclose(table["SO2 emitted [t]"].astype(float), bal["so2_emitted_t"], rtol=1e-12)
    np.testing.assert_allclose(table["rolling average [kg/GJ]"].astype(float), bal["so2_rolling_kg_per_gj"],
                               rtol=1e-12)
    np.testing.assert_allclose(table["permit limit [kg/GJ]"].astype(float), bal["so2_limit_kg_per_gj"],
                               rtol=1e-12)
    assert set(table["removal min [%]"]) == {95} and set(table["removal max [%]"]) == {99}
    assert set(table["setpoint [%]"]) == {98.5}
    assert len(ws._charts) == 2
    # the dips, with their cause, at the top right beside the daily table
    cells = {c.value: c for row in ws.iter_rows(min_row=1, max_row=12) for c in row if c.value is not None}
    assert "Days the plan runs the scrubber below its setpoint" in cells
    head = cells["lowest removal [%]"]
    first = lever_run.plan.summary()["removal"]["dips"][0]
    assert ws.cell(head.row + 1, head.column).value == pytest.approx(first["lowest_pct"])
    assert ws.cell(head.row + 1, head.column - 2).value == first["first_date"]
    assert ws.cell(head.row + 1, head.column + 2).value == first["cause"]


def test_sheet_has_the_allowance_months_and_costs_their_lines(lever_run, tmp_path):
    wb = openpyxl.load_workbook(write_plan_workbook(lever_run, tmp_path / "plan.xlsx"))
    ws = wb[SHEET]
    month_cell = next(c for row in ws.iter_rows(min_row=1, max_row=40) for c in row if c.value == "month")
    r, c0 = month_cell.row, month_cell.column
    head = [ws.cell(r, c0 + j).value for j in range(7)]
    assert head == ["month", "SO2 emitted [t]", "allocated [t]", "bought [t]", "sold [t]",
                    "money paid [USD]", "holding at month end [t]"]
    months = lever_run.plan.summary()["allowances"]["months"]
    for i, m in enumerate(months, start=1):
        got = [ws.cell(r + i, c0 + j).value for j in range(7)]
        assert got == [m["month"], m["emitted_t"], m["allocated_t"], m["bought_t"], m["sold_t"], m["cost"],
                       m["holding_end_t"]]
    costs = {row[0]: row[1] for row in wb["Costs"].iter_rows(min_row=5, values_only=True)}
    ev = lever_run.plan.evaluation.costs
    for key in ("permit_penalty", "allowances", "allowance_penalty"):
        assert costs[key.replace("_", " ")] == pytest.approx(round(ev[key], 2))


def test_no_sheet_without_a_range_or_allowances(fixed_run, tmp_path):
    wb = openpyxl.load_workbook(write_plan_workbook(fixed_run, tmp_path / "plan.xlsx"))
    assert SHEET not in wb.sheetnames
    assert lever_days(fixed_run.plan) is None


def test_allowances_alone_give_the_sheet_with_the_fixed_removal(tmp_path):
    s = minimal_sheets(days=10)
    s["allowances"] = [["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
                        "max_trade_t_per_month"], [START, 50, None, 300, 250, None]]
    run = run_plan(load_scenario(workbook_bytes(s)), futures=0, time_limit=20)
    assert run.plan.plan.removal is None
    ws = openpyxl.load_workbook(write_plan_workbook(run, tmp_path / "plan.xlsx"))[SHEET]
    table = _sheet_table(ws, 4, 6)
    assert list(table.columns) == ["date", "SO2 removal [%]", "setpoint [%]", "SO2 emitted [t]",
                                   "rolling average [kg/GJ]", "permit limit [kg/GJ]"]
    np.testing.assert_allclose(table["SO2 removal [%]"].astype(float), run.plan.balance["removal_pct"])


# --------------------------------------------------------------------------- console


def test_console_names_the_removal_the_dips_and_the_allowances(lever_run):
    s = lever_run.plan.summary()
    text = describe_plan(lever_run.plan)
    r = s["removal"]
    assert (f"SO2 removal chosen: mean {r['mean_pct']:.2f} %, lowest {r['lowest_pct']:.2f} % "
            f"(setpoint 98.5 %, range 95-99 %)") in text
    d = r["dips"][0]
    assert f"below the setpoint {d['first_date']}" in text and d["cause"] in text
    months = s["allowances"]["months"]
    bought = sum(m["bought_t"] for m in months)
    sold = sum(m["sold_t"] for m in months)
    assert (f"SO2 allowances: held 10,000 t at the start, bought {bought:,.0f} t, sold {sold:,.0f} t"
            in text)
    assert f"holding {months[-1]['holding_end_t']:,.0f} t at the end" in text


def test_console_shows_three_dips_then_counts_the_rest():
    dips = [{"first_date": f"2030-03-{d:02d}", "last_date": f"2030-03-{d:02d}", "lowest_pct": 96.0,
             "setpoint_pct": 98.0, "cause": f"cause {d}", "kind": "cheaper"} for d in range(1, 6)]
    summary = {"currency": "USD", "removal": {"min_pct": 95.0, "max_pct": 99.0, "setpoint_pct": 98.0,
                                              "mean_pct": 97.25, "lowest_pct": 96.0, "highest_pct": 99.0,
                                              "days_below_setpoint": 5, "days_above_setpoint": 2,
                                              "dips": dips},
               "allowances": {"opening_t": 100.0, "months": [
                   {"month": "2030-03", "emitted_t": 40.0, "allocated_t": 0.0, "bought_t": 10.0,
                    "sold_t": 0.0, "cost": 3000.0, "holding_end_t": 70.0}]}}
    lines = describe_lever(summary)
    assert lines[0] == ("  SO2 removal chosen: mean 97.25 %, lowest 96.00 % (setpoint 98 %, range 95-99 %); "
                        "5 day(s) below the setpoint, 2 above")
    assert [ln for ln in lines if "cause " in ln] == [
        f"    - below the setpoint 2030-03-0{d}, down to 96.00 %; cause: cause {d}" for d in (1, 2, 3)]
    assert "    ... and 2 more in summary.json" in lines
    assert lines[-1] == ("  SO2 allowances: held 100 t at the start, bought 10 t, sold 0 t (paid 3,000 USD), "
                         "holding 70 t at the end")
    assert describe_lever({"currency": "USD"}) == []


def test_console_is_silent_on_the_lever_without_one(fixed_run):
    assert "SO2 removal chosen" not in describe_plan(fixed_run.plan)
    assert "allowances" not in describe_plan(fixed_run.plan)


# --------------------------------------------------------------------------- dashboard


def test_removal_figure_draws_the_chosen_removal_band_setpoint_and_permit(lever_run):
    days = lever_days(lever_run.plan)
    dips = lever_run.plan.summary()["removal"]["dips"]
    fig = figures.removal_figure(days, dips, 7)
    by_name = {t.name: t for t in fig.data if t.name}
    chosen = by_name["SO2 removal chosen"]
    np.testing.assert_allclose(chosen.y, lever_run.plan.plan.removal, atol=1e-9)
    assert chosen.yaxis == "y"
    band = by_name["range the plan may choose (95-99 %)"]
    assert band.fill == "tonexty" and set(band.y) == {95.0}
    upper = fig.data[list(fig.data).index(band) - 1]
    assert set(upper.y) == {99.0}
    assert set(by_name["setpoint"].y) == {98.5}
    rolling = by_name["rolling average"]
    np.testing.assert_allclose(rolling.y, lever_run.plan.balance["so2_rolling_kg_per_gj"], rtol=1e-12)
    assert rolling.yaxis == "y2"
    assert set(by_name["permit limit"].y) == {lever_run.plan.scenario.plant.so2_limit_kg_per_gj}
    assert list(pd.to_datetime(chosen.x)) == list(pd.to_datetime(lever_run.plan.balance["date"]))
    # each dip shaded on both panels
    assert len(fig.layout.shapes) == 2 * len(dips)
    assert pd.Timestamp(fig.layout.shapes[0].x0) < pd.Timestamp(dips[0]["first_date"]) < pd.Timestamp(
        fig.layout.shapes[0].x1)


def test_plant_view_shows_the_panel_with_the_dips_in_words(lever_run):
    out = callbacks.view_outputs(plant, lever_run)
    assert len(out) == len(plant.OUTPUTS)
    panel = plant.content(lever_run)[plant.LEVER]
    assert len(panel) == 1
    text = str(panel)
    assert "SO2 removal and permit" in text
    for d in lever_run.plan.summary()["removal"]["dips"]:
        assert plant.dip_sentence(d) in text
        assert d["cause"] in plant.dip_sentence(d)
    assert "plant-allowances" in text and "Held at month end" in text


def test_plant_view_has_no_panel_without_a_range(fixed_run):
    assert plant.content(fixed_run)[plant.LEVER] == []
    assert "SO2 removal and permit" not in str(callbacks.view_outputs(plant, fixed_run))


def test_dip_sentence_in_plain_words():
    d = {"first_date": "2030-03-04", "last_date": "2030-03-06", "lowest_pct": 96.0, "setpoint_pct": 98.5,
         "cause": "low limestone: a late train", "kind": "low limestone"}
    assert plant.dip_sentence(d) == ("From Mon 04 Mar 2030 to Wed 06 Mar 2030 the plan runs the scrubber "
                                     "down to 96.00 % SO2 removal (setpoint 98.5 %). Why: low limestone: "
                                     "a late train.")
    one = dict(d, last_date="2030-03-04")
    assert plant.dip_sentence(one).startswith("On Mon 04 Mar 2030 the plan")
