"""The permit kept with a margin, guarded against the futures, and the setpoint left only
for a saving worth naming (the removal lever's rules; `schedule/model._permit`,
`_setpoint_move`, `schedule/plan.permit_guard`)."""

from __future__ import annotations

import numpy as np
import pytest

from reagentplan.balance import balance_frame, trailing_sum
from reagentplan.scenario import load_scenario
from reagentplan.schedule import make_plan
from reagentplan.schedule.plan import permit_guard

from helpers import workbook_bytes
from test_removal_lever import M, one_day_station, outage_station, set_kv


def _rolling_kg_per_gj(scn, removal) -> np.ndarray:
    """The permit's rolling average [kg/GJ] recomputed here from the chosen removals:
    emitted = SO2 to the scrubber × (1 − r) (no sorbent injection on these stations)."""
    plain = balance_frame(scn)
    emitted = plain["so2_formed_t"].to_numpy() * (1 - np.asarray(removal) / 100)
    d = scn.plant.so2_limit_avg_days
    return trailing_sum(emitted * 1000, d) / trailing_sum(plain["heat_input_gj"].to_numpy(), d)


@pytest.mark.parametrize("margin", [0.0, 5.0, 10.0])
def test_rolling_average_kept_under_the_margin_line(margin):
    """The outage station (the first train on day 7, allowances dearer than stone): the
    plan still dips to ride out the outage, but its rolling average stays under
    limit × (1 − margin) on every day."""
    s = outage_station()
    set_kv(s, "plant", "so2_limit_margin_pct", margin)
    scn = load_scenario(workbook_bytes(s))
    r = make_plan(scn, firm_days=15, late_days=0)
    assert r.plan.removal[:7].min() < 98.5  # the dip is still there
    rolling = _rolling_kg_per_gj(scn, r.plan.removal)
    assert (rolling <= scn.plant.so2_limit_kg_per_gj * (1 - margin / 100) * (1 + 1e-6)).all()


def test_nearly_equal_prices_keep_the_setpoint():
    """Allowances priced within a few percent of the stone a point of removal costs
    (51.36 per point, IUPAC molar masses via molmass: see the worked example in
    test_removal_lever): moving either way saves less than the setpoint's cost of moving
    (a quarter of that stone, common practice, no source), so the plan stays at 98 %."""
    per_point = 1.03 * M("CaCO3") / M("SO2") / 0.94 * 30.0
    for price in (per_point - 3.0, per_point + 3.0):
        s = one_day_station(allowance=price, allowed_t=5.0)
        r = make_plan(load_scenario(workbook_bytes(s)), firm_days=7)
        assert r.plan.removal == pytest.approx(np.full(7, 98.0), abs=1e-6), price
        assert r.summary()["removal"]["days_below_setpoint"] == 0


def test_clearly_dearer_allowances_move_the_removal_and_say_what_it_saves():
    """Allowances at 80 (a point up saves 80 − 51.36 per tonne of SO2 a point takes out):
    the plan runs at 99 %, and the summary says what running above the setpoint saves,
    checked here by pricing the same plan at the setpoint."""
    scn = load_scenario(workbook_bytes(one_day_station(allowance=80.0)))
    r = make_plan(scn, firm_days=7)
    assert r.plan.removal == pytest.approx(np.full(7, 99.0), abs=1e-3)
    saves = r.summary()["removal"]["above_setpoint_saves"]
    assert saves["saves"] == pytest.approx(7 * (80.0 - 51.36), rel=0.01)
    assert saves["setpoint_penalty_weights"] == 0


def test_dips_carry_what_they_save():
    """Each dip below the setpoint in summary.json names what it saves against running the
    same plan at the setpoint on its days (positive: the dip is worth it)."""
    scn = load_scenario(workbook_bytes(outage_station()))
    r = make_plan(scn, firm_days=15, late_days=0)
    dips = r.summary()["removal"]["dips"]
    assert dips and all(d["saves"] + d["setpoint_penalty_weights"] > 0 for d in dips)


def test_permit_guard_is_the_futures_quantile_over_the_plan():
    """The guard ratio by hand: 20 futures whose emissions are the plan's × 0.9 ... × 1.28
    (a spread of 2 %-points per future), a 2-day average: the 95 % quantile of the rolling
    sums over the plan's is numpy's linear interpolation of those factors."""
    scn = load_scenario(workbook_bytes(one_day_station(days=5)))
    bal = balance_frame(scn)
    e = bal["so2_emitted_t"].to_numpy()
    factors = 0.9 + 0.02 * np.arange(20)
    g = permit_guard(bal, factors[:, None] * e[None, :], 0.05, 2)
    assert g == pytest.approx(np.full(5, np.quantile(factors, 0.95)), rel=1e-9)
    low = permit_guard(bal, 0.5 * e[None, :].repeat(3, axis=0), 0.05, 2)
    assert (low == 1.0).all()  # never below the plan's own


def test_guarded_permit_raises_the_removal():
    """With futures whose emissions run 3 % above the plan's at the plan's risk level, the
    plan holds 1.03 × its rolling emissions under the margin line, so it runs higher than
    without them: at 30 per allowance, a point down saves 21.36 and the plan sits on the
    permit's line, 97 % unguarded; guarded, 100 − 3 / 1.03 = 97.087 %."""
    s = one_day_station(allowance=30.0)
    scn = load_scenario(workbook_bytes(s))
    bal = balance_frame(scn)
    plain = make_plan(scn, firm_days=7)
    assert plain.plan.removal == pytest.approx(np.full(7, 97.0), abs=1e-3)
    e = bal["so2_emitted_t"].to_numpy()
    guarded = make_plan(scn, firm_days=7, permit_flows=np.repeat(1.03 * e[None, :], 10, axis=0))
    assert guarded.plan.removal == pytest.approx(np.full(7, 100 - 3 / 1.03), abs=2e-3)


def test_same_inputs_choose_the_same_removal():
    """Two plans of the same station choose the same removal, day by day."""
    scn = load_scenario(workbook_bytes(outage_station()))
    a = make_plan(scn, firm_days=15, late_days=0).plan.removal
    b = make_plan(scn, firm_days=15, late_days=0).plan.removal
    assert np.array_equal(a, b)


def test_plant_manager_figures_draw_the_margin_line():
    """The removal panel and the SO2 panel draw the limit less the compliance margin, at
    limit × (1 − margin), beside the limit."""
    from reagentplan.dashboard import figures
    from reagentplan.schedule.lever import lever_days

    s = outage_station()
    set_kv(s, "plant", "so2_limit_margin_pct", 10)
    scn = load_scenario(workbook_bytes(s))
    r = make_plan(scn, firm_days=15, late_days=0)
    days = lever_days(r)
    assert days["so2_margin_line_kg_per_gj"].to_numpy() == pytest.approx(0.9 * days["so2_limit_kg_per_gj"].to_numpy())
    names = [t.name for t in figures.removal_figure(days, []).data]
    assert "limit less the compliance margin" in names
    fig = figures.so2_figure(r.balance, None, scn.plant.so2_limit_avg_days, scn.plant.so2_limit_margin_pct)
    line = [t for t in fig.data if t.name == "limit less the compliance margin"]
    assert line and np.allclose(line[0].y, 0.9 * r.balance["so2_limit_kg_per_gj"].to_numpy())


@pytest.mark.parametrize("price,margin", [(30.0, 5.0), (80.0, 0.0), (40.0, 10.0)])
def test_lever_terms_at_a_fixed_removal_match_the_model(price, margin):
    """`model.lever_cost_at` is what the removal's families add to the objective: the
    lever's model's optimum equals the same plan solved at its chosen removal without the
    lever, plus `lever_cost_at` of that removal (so the silo's whole-plan gap compares the
    two with one bound)."""
    from reagentplan.schedule.lanes import build_lanes, firm_loads
    from reagentplan.schedule.lever import RemovalLever
    from reagentplan.schedule.model import build_periods, lever_cost_at, solve_plan
    from reagentplan.schedule.terms import AllowanceTerms

    s = one_day_station(allowance=price)
    set_kv(s, "plant", "so2_limit_margin_pct", margin)
    scn = load_scenario(workbook_bytes(s))
    bal = balance_frame(scn)
    lanes = build_lanes(scn, bal)
    firm = firm_loads(scn, lanes)
    lever = RemovalLever.from_scenario(scn)
    allow = AllowanceTerms.from_scenario(scn)
    with_lever = solve_plan(scn, bal, lanes, firm, {}, firm_days=7, lever=lever, allow=allow, gap=1e-9)
    r = with_lever.plan.removal
    at_r = balance_frame(scn, removal_pct=r)
    fixed = solve_plan(scn, at_r, build_lanes(scn, at_r), firm, {}, firm_days=7, allow=allow, gap=1e-9)
    periods = build_periods(scn.dates, 7)
    extra = lever_cost_at(scn, lever, periods, np.array([r[a] for a, _ in periods]))
    assert with_lever.objective == pytest.approx(fixed.objective + extra, rel=1e-6, abs=1e-3)
