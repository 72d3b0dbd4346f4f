"""What-if changes to a scenario (`reagentplan.whatif`)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from helpers import START, minimal_sheets, write_workbook
from reagentplan.balance import balance_frame
from reagentplan.scenario import load_scenario
from reagentplan.whatif import apply_whatif, describe_whatif


@pytest.fixture
def scenario(tmp_path):
    sheets = minimal_sheets(days=14)
    # a truck supplier beside the rail one, and a second rail quarry
    sheets["suppliers"].append(["Pit T", "truck", 25, 20, 1, "Mon-Sat", 20, 150, None, None])
    sheets["suppliers"].append(["Quarry R", "rail", 800, 1, 5, "Tue,Thu", 14, 1800, None, None])
    return load_scenario(write_workbook(sheets, tmp_path / "w.xlsx"))


def test_no_change_gives_the_same_scenario(scenario):
    assert apply_whatif(scenario) is scenario


def test_load_factor_scales_generation_and_leaves_the_original(scenario):
    before = scenario.generation["mwh"].copy()
    changed = apply_whatif(scenario, load_factor=1.2)
    assert np.allclose(changed.generation["mwh"], before * 1.2)
    assert np.allclose(scenario.generation["mwh"], before)  # untouched
    # limestone is proportional to coal, hence to generation, with no chlorine and one
    # coal (the mass balance is linear in generation)
    a, b = balance_frame(scenario), balance_frame(changed)
    assert np.allclose(b["limestone_t"], 1.2 * a["limestone_t"])
    assert np.allclose(b["gypsum_wet_t"], 1.2 * a["gypsum_wet_t"])


def test_load_factor_is_clipped_at_capacity_times_24_hours(scenario):
    # 2,500 MWh/d x 2 = 5,000 > 200 MW x 24 h = 4,800 MWh
    changed = apply_whatif(scenario, load_factor=2.0)
    assert changed.generation["mwh"].max() == pytest.approx(4800.0)


def test_sulfur_scale_scales_each_source_and_the_reagent(scenario):
    changed = apply_whatif(scenario, sulfur_scale=1.5)
    for old, new in zip(scenario.coal_sources, changed.coal_sources):
        assert new.sulfur_pct == pytest.approx(1.5 * old.sulfur_pct)
        assert new.sulfur_sd_pct == pytest.approx(1.5 * old.sulfur_sd_pct)
    a, b = balance_frame(scenario), balance_frame(changed)
    # no chlorine in the test coal: limestone is all for SO2, proportional to sulfur
    assert np.allclose(b["limestone_t"], 1.5 * a["limestone_t"])
    assert np.allclose(b["so2_formed_t"], 1.5 * a["so2_formed_t"])


def test_removal_sets_the_scrubber(scenario):
    changed = apply_whatif(scenario, removal_pct=90.0)
    assert changed.scrubber.removal_pct == 90.0
    assert scenario.scrubber.removal_pct == 97.0
    a, b = balance_frame(scenario), balance_frame(changed)
    assert np.allclose(b["so2_removed_t"], a["so2_removed_t"] * 90 / 97)


def test_rail_outage_closes_every_rail_supplier_and_no_truck(scenario):
    first, last = START + dt.timedelta(days=3), START + dt.timedelta(days=8)
    changed = apply_whatif(scenario, rail_outage=(first, last))
    added = changed.lane_closures[len(scenario.lane_closures):]
    assert {(c.party, c.mode) for c in added} == {("Quarry Q", "rail"), ("Quarry R", "rail")}
    window = (changed.dates >= str(first)) & (changed.dates <= str(last))
    for lane in changed.suppliers:
        is_open = changed.lane_open(lane)
        if lane.mode == "rail":
            assert not is_open[window].any()
            assert (is_open[~window] == scenario.lane_open(lane)[~window]).all()
        else:
            assert (is_open == scenario.lane_open(lane)).all()


def test_rail_outage_accepts_iso_strings(scenario):
    changed = apply_whatif(scenario, rail_outage=("2030-03-05", "2030-03-06"))
    assert changed.lane_closures[-1].first_date == dt.date(2030, 3, 5)


@pytest.mark.parametrize("kwargs, words", [
    ({"load_factor": -0.1}, "load_factor"),
    ({"sulfur_scale": float("nan")}, "sulfur_scale"),
    ({"removal_pct": 101}, "removal_pct"),
    ({"rail_outage": ("2030-03-09", "2030-03-05")}, "before the first"),
    ({"rail_outage": ("soon", "2030-03-05")}, "not a date"),
])
def test_bad_changes_say_what_is_wrong(scenario, kwargs, words):
    with pytest.raises(ValueError, match=words):
        apply_whatif(scenario, **kwargs)


def test_describe_names_the_changes():
    assert describe_whatif() == "as the workbook says"
    text = describe_whatif(1.1, 0.9, 96.5, (dt.date(2030, 3, 5), "2030-03-09"))
    assert text == ("generation x1.10, coal sulfur x0.90, SO2 removal 96.5 %, "
                    "rail closed 2030-03-05 to 2030-03-09")


# --------------------------------------------------------------------------- removal range


def test_removal_range_sets_the_range_and_clips_the_setpoint(scenario):
    changed = apply_whatif(scenario, removal_range=(90.0, 95.0))
    assert changed.scrubber.removal_range == (90.0, 95.0)
    assert changed.scrubber.removal_pct == 95.0  # 97 clipped into the range
    assert scenario.scrubber.removal_range is None  # untouched
    # the plain balance runs at the setpoint
    assert (balance_frame(changed)["removal_pct"] == 95.0).all()


def test_removal_range_with_a_removal_inside_keeps_that_setpoint(scenario):
    changed = apply_whatif(scenario, removal_pct=96.0, removal_range=(95.0, 99.0))
    assert changed.scrubber.removal_pct == 96.0
    assert changed.scrubber.removal_range == (95.0, 99.0)


def test_a_range_of_one_value_is_that_fixed_removal(scenario):
    changed = apply_whatif(scenario, removal_range=(96.0, 96.0))
    fixed = apply_whatif(scenario, removal_pct=96.0)
    assert changed.scrubber.removal_pct == 96.0
    a, b = balance_frame(changed), balance_frame(fixed)
    assert a.equals(b)


@pytest.mark.parametrize("kwargs, words", [
    ({"removal_range": (99.0, 95.0)}, "the lowest first"),
    ({"removal_range": (-1.0, 95.0)}, "from 0 to 100"),
    ({"removal_range": (95.0,)}, "two numbers"),
    ({"removal_range": (95.0, 98.0), "removal_pct": 99.0}, "outside the removal range 95 to 98"),
    ({"allowance_price": -1.0}, "at least 0"),
])
def test_bad_levers_are_refused(scenario, kwargs, words):
    with pytest.raises(ValueError, match=words):
        apply_whatif(scenario, **kwargs)


def test_a_removal_outside_the_workbooks_range_is_refused(scenario):
    ranged = apply_whatif(scenario, removal_range=(95.0, 98.0))
    with pytest.raises(ValueError, match="outside the workbook's removal range 95 to 98"):
        apply_whatif(ranged, removal_pct=90.0)
    assert apply_whatif(ranged, removal_pct=96.0).scrubber.removal_range == (95.0, 98.0)


# --------------------------------------------------------------------------- allowance price


def test_allowance_price_without_a_sheet_makes_a_one_row_table(scenario):
    assert scenario.allowances is None
    changed = apply_whatif(scenario, allowance_price=350.0)
    a = changed.allowances
    assert len(a) == 1 and a["date"].iloc[0].date() == START
    assert a["holding_t"].iloc[0] == 0 and a["allocated_t"].iloc[0] == 0
    assert changed.allowance_opening_t == 0.0
    days = changed.allowance_days()
    assert (days["buy_price_per_t"] == 350).all() and (days["sell_price_per_t"] == 350).all()
    assert (days["allocated_t"] == 0).all() and days["max_trade_t_per_month"].isna().all()
    assert scenario.allowances is None  # untouched


def test_allowance_price_overrides_the_sheets_prices_only(tmp_path):
    from helpers import minimal_sheets

    sheets = minimal_sheets(days=14)
    sheets["allowances"] = [
        ["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
         "max_trade_t_per_month"],
        [START, 800, None, 400, 380, 50],
        [START + dt.timedelta(days=7), None, 120, 450, 420, None]]
    scn = load_scenario(write_workbook(sheets, tmp_path / "a.xlsx"))
    changed = apply_whatif(scn, allowance_price=300.0)
    days, before = changed.allowance_days(), scn.allowance_days()
    assert (days["buy_price_per_t"] == 300).all() and (days["sell_price_per_t"] == 300).all()
    assert days["allocated_t"].equals(before["allocated_t"])
    assert days["max_trade_t_per_month"].equals(before["max_trade_t_per_month"])
    assert changed.allowance_opening_t == scn.allowance_opening_t == 800.0
    assert list(scn.allowances["buy_price_per_t"]) == [400, 450]  # untouched


def test_describe_names_the_new_levers():
    text = describe_whatif(removal_range=(95, 99), allowance_price=420)
    assert text == "SO2 removal chosen from 95 to 99 %, SO2 allowances at 420 per t"
