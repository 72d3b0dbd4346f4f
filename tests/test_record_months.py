"""Contract months belong to the calendar month (with or without a record): tonnes
already moved count against the first month's maximum and toward its minimum; a
month that ends after the horizon keeps its whole maximum and has its minimum
pro-rated.  Expected values are worked by hand from the calendar."""

from __future__ import annotations

import dataclasses
import datetime as dt

import pytest

from reagentplan.scenario import load_scenario
from reagentplan.schedule import make_plan
from reagentplan.schedule.lanes import build_lanes, contract_month_note
from reagentplan.balance import balance_frame

from helpers import minimal_sheets, set_value, workbook_bytes


def scenario(start: dt.date, days: int, lo: float | None, hi: float | None, mtd=None):
    s = minimal_sheets(days)
    set_value(s, "plant", "start_date", None, start)
    s["generation"] = [["date", "unit", "mwh"]] + [[start + dt.timedelta(days=i), "U1", 2500.0]
                                                   for i in range(days)]
    s["coal_blend"][1][0] = start
    s["suppliers"][1] = ["Quarry Q", "rail", 1000, 1, 0, "", 15, 2000, lo, hi]
    scn = load_scenario(workbook_bytes(s))
    return dataclasses.replace(scn, month_to_date=mtd)


def lane_limits(scn):
    lane = next(l for l in build_lanes(scn, balance_frame(scn)) if l.party == "Quarry Q")
    return lane.month_min_t, lane.month_max_t


def test_last_month_keeps_its_whole_maximum_and_a_pro_rated_minimum():
    # 2030-03-25 .. 2030-04-05: March has 24 days before the start (31-day month), April 5
    # of its 30 days planned and 25 after the horizon
    scn = scenario(dt.date(2030, 3, 25), 12, 3100, 6200)
    lo, hi = lane_limits(scn)
    assert hi[0] == pytest.approx(6200 * 7 / 31)   # March: 24 days assumed used at the even pace
    assert lo[0] == pytest.approx(3100 * 7 / 31)
    assert hi[1] == pytest.approx(6200)            # April: the whole maximum
    assert lo[1] == pytest.approx(3100 * 5 / 30)
    note = contract_month_note(scn)
    assert "assumed" in note and "April 2030" in note and "kept whole" in note


def test_recorded_month_to_date_counts_against_the_first_month():
    scn = scenario(dt.date(2030, 3, 25), 12, 3100, 6200, mtd={"Quarry Q rail": 5000.0})
    lo, hi = lane_limits(scn)
    assert hi[0] == pytest.approx(1200)  # 6,200 - 5,000 moved
    assert lo[0] == pytest.approx(0)     # the minimum is already met
    scn = scenario(dt.date(2030, 3, 25), 12, 3100, 6200, mtd={"Quarry Q rail": 1000.0})
    lo, hi = lane_limits(scn)
    assert (lo[0], hi[0]) == (pytest.approx(2100), pytest.approx(5200))
    scn = scenario(dt.date(2030, 3, 25), 12, 3100, 6200, mtd={"Quarry Q rail": 7000.0})
    assert lane_limits(scn)[1][0] == 0   # more than the maximum already: nothing left
    assert "recorded" in contract_month_note(scn)


def test_one_month_horizon_inside_a_month():
    # 2030-03-10 .. 2030-03-19 with 3,100 t/month minimum: 9 days before (assumed even pace,
    # 900 t), 10 planned, 12 after: the rest (2,200 t) pro-rated 10/22
    scn = scenario(dt.date(2030, 3, 10), 10, 3100, 6200)
    lo, hi = lane_limits(scn)
    assert hi[0] == pytest.approx(6200 - 6200 * 9 / 31)
    assert lo[0] == pytest.approx((3100 - 3100 * 9 / 31) * 10 / 22)


def test_plan_may_use_the_last_months_whole_maximum():
    """A low store, a 2,000 t/month maximum: 5 April days planned.  Pro-rated, April
    would allow 333 t (no whole train); the calendar month allows both trains."""
    s_start = dt.date(2030, 3, 27)
    scn = scenario(s_start, 10, None, 2000)
    store = dataclasses.replace(scn.storage["limestone"], initial_t=1200, safety_t=500)
    scn = dataclasses.replace(scn, storage={**scn.storage, "limestone": store})
    r = make_plan(scn, firm_days=10, time_limit=20)
    mv = r.movements
    april = mv[(mv["lane"] == "Quarry Q rail") & (mv["date"] >= "2030-04-01")]
    march = mv[(mv["lane"] == "Quarry Q rail") & (mv["date"] < "2030-04-01")]
    assert march["tonnes"].sum() <= 2000 * 5 / 31 + 1e-6  # 322.6 t: no train in March
    assert april["tonnes"].sum() > 2000 * 5 / 30         # more than a pro-rated April allows
    assert april["tonnes"].sum() <= 2000 + 1e-6
