"""The scrubber's removal as a decision of the plan: the permit's rolling average, SO2
allowances, and a late train ridden out by a planned dip in removal."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from molmass import Formula

from helpers import START, minimal_sheets, workbook_bytes
from reagentplan.balance import balance_frame, trailing_sum
from reagentplan.scenario import load_scenario
from reagentplan.schedule import make_plan


def M(formula: str) -> float:
    """Molar mass [g/mol] from IUPAC standard atomic weights, through `molmass`."""
    return Formula(formula).mass


def set_kv(sheets, sheet, key, value):
    for row in sheets[sheet][1:]:
        if row[0] == key:
            row[1] = value
            return
    sheets[sheet].append([key, value] + [None] * (len(sheets[sheet][0]) - 2))


def one_day_station(days=7, so2_t=100.0, allowed_t=3.0, price_per_t=28.0, allowance=None,
                    removal=(95, 99), setpoint=98):
    """A station whose scrubber sees ``so2_t`` of SO2 a day (2 % S coal, 95 % of it to SO2,
    IUPAC molar masses), a permit of ``allowed_t`` a day (averaged over one day), stone of
    94 % CaCO3 whose delivered cost is ``price_per_t`` + 2 (freight 2,000 per 1,000 t
    train), gypsum landfilled at no cost, plenty of stone in the silo; no compliance margin
    unless a test sets one."""
    s = minimal_sheets(days=days)
    so2_per_t_coal = 0.02 * 0.95 * M("SO2") / M("S")
    coal = so2_t / so2_per_t_coal
    heat = coal * 25.0  # GJ at 25 MJ/kg
    mwh = heat / 10.0
    s["units"][1][1] = 400  # MW
    s["generation"] = [s["generation"][0]] + [[START + dt.timedelta(days=i), "U1", mwh] for i in range(days)]
    set_kv(s, "plant", "so2_limit_kg_per_gj", allowed_t * 1000 / heat)
    set_kv(s, "plant", "so2_limit_avg_days", 1)
    set_kv(s, "plant", "so2_limit_margin_pct", 0)
    set_kv(s, "scrubber", "removal_pct", setpoint)
    if removal is not None:
        set_kv(s, "scrubber", "removal_min_pct", removal[0])
        set_kv(s, "scrubber", "removal_max_pct", removal[1])
    s["storage"][1] = ["limestone", 100000, 500, 50000]
    s["storage"][2] = ["gypsum", 100000, 0, 0]
    s["suppliers"][1][6] = price_per_t
    del s["buyers"][1]  # no gypsum buyer: the gypsum's worth is nothing either way
    s["disposal"][1] = ["Cell 1", "gypsum", 0, 100000, 1e7]
    if allowance is not None:
        s["allowances"] = [["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
                            "max_trade_t_per_month"],
                           [START, 1000, None, allowance, allowance, None]]
    return s


def test_worked_example_cheapest_removal():
    """A day with 100 t of SO2 reaching the scrubber, a permit that allows 3 t emitted, a
    removal range of 95-99 %:

    - the permit needs 100 × (1 − r) ≤ 3, so r ≥ 97 %;
    - each point of removal takes 1 t more SO2 out, which needs 1.03 × 100.086 / 64.064
      = 1.6092 t CaCO3 (IUPAC molar masses, via molmass), i.e. 1.6092 / 0.94 = 1.7119 t of
      94 % stone at 30 per t delivered: 51.36 per point;
    - each point saves one allowance (1 t SO2);
    - moving the removal a point from the 98 % setpoint for a day costs the model a quarter
      of the stone of that point (`penalties.SETPOINT_MOVE_SHARE`): 12.84 per point-day;
    - with no compliance margin: at 30 per allowance a point down saves 51.36 − 30 = 21.36,
      more than 12.84: the plan runs at the permit's 97 %.  At 40 it saves 11.36, less than
      12.84: a saving not worth naming, the plan stays at the 98 % setpoint.  At 80 a point
      up saves 80 − 51.36 = 28.64: 99 %;
    - with a 5 % compliance margin the permit line is 0.95 × 3 = 2.85 t: at 30 the plan
      runs at 97.15 %;
    - without a permit limit or allowances, the stone alone decides: 95 %.
    (The gypsum is landfilled at no cost, so it weighs nothing either way.)"""
    from reagentplan.schedule.penalties import SETPOINT_MOVE_SHARE

    per_point = 1.03 * M("CaCO3") / M("SO2") / 0.94 * 30.0
    assert per_point == pytest.approx(51.36, abs=0.01)
    assert SETPOINT_MOVE_SHARE * per_point == pytest.approx(12.84, abs=0.01)
    for margin, price, expected in ((0, 30.0, 97.0), (0, 40.0, 98.0), (0, 80.0, 99.0), (5, 30.0, 97.15)):
        s = one_day_station(allowance=price)
        set_kv(s, "plant", "so2_limit_margin_pct", margin)
        scn = load_scenario(workbook_bytes(s))
        r = make_plan(scn, firm_days=7)
        assert r.balance["so2_formed_t"].to_numpy() == pytest.approx(100.0, rel=1e-4)  # periodictable and molmass differ in the 5th digit of S
        assert r.plan.removal == pytest.approx(np.full(7, expected), abs=1e-3), (margin, price)
        assert r.balance["removal_pct"].to_numpy() == pytest.approx(np.full(7, expected), abs=1e-3)
    s = one_day_station()
    set_kv(s, "plant", "so2_limit_kg_per_gj", None)
    r = make_plan(load_scenario(workbook_bytes(s)), firm_days=7)
    assert r.plan.removal == pytest.approx(np.full(7, 95.0), abs=1e-4)


def test_collapsed_range_plans_as_the_fixed_removal():
    """A range of one value plans exactly as the fixed removal does."""
    fixed = make_plan(load_scenario(workbook_bytes(one_day_station(removal=None, setpoint=97))), firm_days=7)
    one = make_plan(load_scenario(workbook_bytes(one_day_station(removal=(97, 97), setpoint=97))), firm_days=7)
    assert one.plan.removal is None
    pd.testing.assert_frame_equal(fixed.movements, one.movements)
    assert fixed.summary()["total_cost"] == one.summary()["total_cost"]
    pd.testing.assert_frame_equal(fixed.balance, one.balance)


def outage_station(removal=(95, 99)):
    """Fifteen days; the quarry's rail line is closed on days 3-6 and its lead time rules
    out days 0-2, so the first train can come on day 7; the silo starts with 6.9 days of
    stone above safety at the 98.5 % setpoint; a truck lane at 100 per tonne of freight;
    allowances at 200 per tonne of SO2 (each point of removal saves more than its stone
    costs, so the plan runs high when it can); the permit allows 96 % on a 7-day average."""
    days = 15
    s = minimal_sheets(days=days)
    set_kv(s, "plant", "so2_limit_kg_per_gj", None)
    set_kv(s, "scrubber", "removal_pct", 98.5)
    if removal is not None:
        set_kv(s, "scrubber", "removal_min_pct", removal[0])
        set_kv(s, "scrubber", "removal_max_pct", removal[1])
    scn = load_scenario(workbook_bytes(s))
    bal = balance_frame(scn)
    formed = float(bal["so2_formed_t"].iloc[0])
    heat = float(bal["heat_input_gj"].iloc[0])
    set_kv(s, "plant", "so2_limit_kg_per_gj", formed * 0.04 * 1000 / heat)
    set_kv(s, "plant", "so2_limit_avg_days", 7)
    use = float(bal["limestone_t"].iloc[0])
    s["storage"][1] = ["limestone", 5000, 500, 500 + 6.9 * use]
    s["suppliers"][1][3] = 2  # two trains a day once the line reopens
    s["suppliers"].append(["Quarry Q", "truck", 25, 40, 1, "Mon-Sun", 15, 2500, None, None])
    s["lane_closures"] = [["party", "mode", "first_date", "last_date"],
                          ["Quarry Q", "rail", START + dt.timedelta(days=3), START + dt.timedelta(days=6)]]
    s["allowances"] = [["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
                        "max_trade_t_per_month"], [START, 10000, None, 200, 200, None]]
    return s


def test_rail_outage_ridden_out_with_a_planned_dip():
    """With no train possible before day 7 and the silo 0.1 day of stone short of safety
    at the setpoint, the plan lowers the removal in the first week (inside the permit)
    instead of trucking or running the silo under safety, runs high once stone is there,
    names the dip's cause, and keeps the permit's rolling average, recomputed here
    independently from the chosen removals, under its limit."""
    scn = load_scenario(workbook_bytes(outage_station()))
    r = make_plan(scn, firm_days=15, late_days=0)  # the lever alone, no late-train margin
    s = r.summary()
    dips = s["removal"]["dips"]
    assert dips and dips[0]["kind"] == "low limestone" and "inside the permit" in dips[0]["cause"], dips
    assert dips[0]["first_date"] <= f"{START + dt.timedelta(days=6):%Y-%m-%d}"
    assert r.plan.removal[:7].mean() < 98.5 < r.plan.removal[8:].mean()
    mv = r.movements
    assert mv[(mv["direction"] == "in") & (mv["lane"].str.contains("truck"))].empty, "trucks at 100 per tonne of freight were booked"
    assert not [b for b in r.breaches if b["store"] in ("limestone", "so2_permit")]
    # independent replay of the permit: emitted = SO2 to the scrubber × (1 − removal)
    plain = balance_frame(scn)
    to_scrubber = plain["so2_formed_t"].to_numpy()  # no sorbent injection here
    emitted = to_scrubber * (1 - r.plan.removal / 100)
    assert r.balance["so2_emitted_t"].to_numpy() == pytest.approx(emitted, rel=1e-9)
    heat = plain["heat_input_gj"].to_numpy()
    rolling = trailing_sum(emitted * 1000, 7) / trailing_sum(heat, 7)
    assert (rolling <= scn.plant.so2_limit_kg_per_gj * (1 + 1e-6)).all()
    # the fixed setpoint with the same outage costs more (trucks, or the silo under safety)
    fixed = make_plan(load_scenario(workbook_bytes(outage_station(removal=None))), firm_days=15, late_days=0)
    assert fixed.evaluation.total_cost > r.evaluation.total_cost


@pytest.mark.parametrize("seed", range(3))
def test_random_ranges_keep_the_permit_and_close_sulfur(seed):
    """Random ranges, setpoints, permits and averaging periods on a 20-day station with
    two coals: wherever the highest removal keeps the permit, the plan's rolling average,
    recomputed here from its chosen removals (emitted = SO2 to the scrubber × (1 − r)),
    stays under the limit; every chosen removal lies in the range; the SO2 still closes
    (formed = removed + emitted) at the chosen removals."""
    rng = np.random.default_rng(seed)
    lo = float(rng.uniform(90, 96))
    hi = float(rng.uniform(lo + 0.5, 99.5))
    days, avg = 20, int(rng.integers(1, 8))
    s = minimal_sheets(days=days)
    s["coal_blend"] = [["date", "source", "share_pct"], [START, "Coal A", 60], [START, "Coal B", 40],
                       [START + dt.timedelta(days=10), "Coal A", 90], [START + dt.timedelta(days=10), "Coal B", 10]]
    set_kv(s, "scrubber", "removal_pct", round(float(rng.uniform(lo, hi)), 2))
    set_kv(s, "scrubber", "removal_min_pct", round(lo, 2))
    set_kv(s, "scrubber", "removal_max_pct", round(hi, 2))
    set_kv(s, "plant", "so2_limit_avg_days", avg)
    scn0 = load_scenario(workbook_bytes(s))
    plain = balance_frame(scn0)
    rate_at_hi = plain["so2_formed_t"].to_numpy() * (1 - hi / 100) * 1000 / plain["heat_input_gj"].to_numpy()
    limit = float(rate_at_hi.max() * rng.uniform(1.05, 2.0))
    set_kv(s, "plant", "so2_limit_kg_per_gj", limit)
    scn = load_scenario(workbook_bytes(s))
    r = make_plan(scn, firm_days=days)
    removal = r.plan.removal
    assert removal is not None and (removal >= round(lo, 2) - 1e-6).all() and (removal <= round(hi, 2) + 1e-6).all()
    emitted = plain["so2_formed_t"].to_numpy() * (1 - removal / 100)
    assert r.balance["so2_emitted_t"].to_numpy() == pytest.approx(emitted, rel=1e-9)
    rolling = trailing_sum(emitted * 1000, avg) / trailing_sum(plain["heat_input_gj"].to_numpy(), avg)
    assert (rolling <= limit * (1 + 1e-6)).all()
    b = r.balance
    assert (b["so2_removed_t"] + b["so2_emitted_t"]).to_numpy() == pytest.approx(b["so2_formed_t"].to_numpy(), rel=1e-9)
