"""Plans that hold up when remade every week: the cost of moving a load the plan in force
held, and the preference for the earlier of two equally cheap departures."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest

from helpers import minimal_sheets, workbook_bytes
from reagentplan.scenario import load_scenario
from reagentplan.schedule import make_plan
from test_schedule import tiny


def previous_train_on(day: str) -> pd.DataFrame:
    """The plan in force: one train of the March row on ``day``."""
    return pd.DataFrame({"lane": ["Quarry Q rail (Jan-Mar)"], "date": [pd.Timestamp(day)], "loads": [1]})


def test_moving_a_held_train_costs_the_change_cost():
    """The tiny station's cheapest plan takes its one train on Monday 1 April (April
    freight 1,000 against 3,000 in March: test_schedule's hand-worked optimum, without the
    late-train margin).  If the
    plan in force held it on Friday 29 March, moving it saves 2,000: worth a 250 change
    cost, not a 5,000 one."""
    scn = load_scenario(workbook_bytes(tiny()))
    held = previous_train_on("2030-03-29")
    moved = make_plan(scn, firm_days=10, previous=held, late_days=0)
    inbound = moved.movements[moved.movements["direction"] == "in"]
    assert list(inbound["date"]) == [pd.Timestamp("2030-04-01")]
    kept = make_plan(scn, firm_days=10, previous=held, change_cost_per_load=5000.0, late_days=0)
    inbound = kept.movements[kept.movements["direction"] == "in"]
    assert list(inbound["date"]) == [pd.Timestamp("2030-03-29")]
    assert moved.summary()["stability"] == {"change_cost_per_load": 250.0, "loads_held_in_firm_window": 1,
                                            "of_them_kept_on_their_day": 0}
    assert kept.summary()["stability"]["of_them_kept_on_their_day"] == 1
    # the change cost is the model's, not the plan's: the plan kept costs 2,000 more
    assert kept.evaluation.total_cost - moved.evaluation.total_cost == pytest.approx(2000.0)


def test_equal_sales_settle_on_the_earliest_day():
    """A buyer who takes one 25 t load of gypsum a month at one price on any weekday of
    April, the shed with stock from the first day: whichever day the solve left the load
    on (here forced onto 23 April), settling moves it to the first open day, 1 April, at
    the same cost; a load may not move where the shed would fall under its safety stock."""
    from reagentplan.balance import balance_frame
    from reagentplan.schedule.evaluate import evaluate
    from reagentplan.schedule.lanes import build_lanes, firm_loads
    from reagentplan.schedule.baseline import baseline_plan
    from reagentplan.schedule.settle import earliest_departures

    start = dt.date(2030, 4, 1)  # a whole month: its maximum is not pro-rated
    s = minimal_sheets(days=30)
    s["plant"][2][1] = start
    s["generation"] = [s["generation"][0]] + [[start + dt.timedelta(days=i), "U1", 2500] for i in range(30)]
    s["coal_blend"][1][0] = start
    s["buyers"][1][8] = 25  # Board Co: at most one load a month
    scn = load_scenario(workbook_bytes(s))
    bal = balance_frame(scn)
    lanes = build_lanes(scn, bal)
    plan = baseline_plan(scn, bal, lanes, firm_loads(scn, lanes))
    name = next(l.name for l in lanes if l.party == "Board Co")
    plan.quantity[name][:] = 0
    plan.quantity[name][22] = 1
    settled, moved = earliest_departures(scn, bal, lanes, plan)
    assert moved == 1 and list(np.flatnonzero(settled.quantity[name])) == [0]
    assert evaluate(scn, bal, lanes, settled).total_cost == pytest.approx(evaluate(scn, bal, lanes, plan).total_cost)
    assert plan.quantity[name][22] == 1  # the plan given is left as it was
    # with the shed at 10 t and a 20 t safety stock nothing may move before the stock is there
    s["storage"][2] = ["gypsum", 3000, 20, 10]
    scn = load_scenario(workbook_bytes(s))
    settled, moved = earliest_departures(scn, bal, lanes, plan)
    first = int(np.flatnonzero(settled.quantity[name])[0])
    level = 10 + np.cumsum(bal["gypsum_wet_t"].to_numpy())
    assert level[first] - 25 >= 20 and (first == 0 or level[first - 1] - 25 < 20 + 1e-9)


def test_late_train_margin_counts_a_booked_train():
    """A booked train is as likely to be late as a planned one: with the only train of the
    tiny station booked for Monday 1 April (day 7) the margin still asks for stock that
    covers it being two days late: day 8 would end at 700 − 9 × 63.045 = 132.6 t, 17.4 t
    under the 150 t safety stock, were it late (4,350 at the guard's 250 per tonne), so
    the plan adds a train on Friday 29 March (9,000 less the 7,000 its stone is worth at
    the end); the silo is made big enough to take both."""
    s = tiny(capacity=2500)
    s["firm_orders"] = [["date", "material", "party", "mode", "loads", "tonnes"],
                        [dt.date(2030, 4, 1), "limestone", "Quarry Q", "rail", 1, 600]]
    scn = load_scenario(workbook_bytes(s))
    without = make_plan(scn, firm_days=10, late_days=0)
    assert (without.movements["direction"] == "in").sum() == 1  # the booked train alone
    r = make_plan(scn, firm_days=10, late_days=2)
    inbound = r.movements[r.movements["direction"] == "in"]
    assert len(inbound) == 2 and inbound["date"].min() < pd.Timestamp("2030-04-01")
