"""The balance at a chosen removal (`balance_frame(..., removal_pct=)`) and its affine
response to the removal (`removal_response`)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest

from helpers import START, minimal_sheets, set_value, workbook_bytes
from reagentplan import chemistry as chem
from reagentplan.balance import BALANCE_COLUMNS, RESPONSE_COLUMNS, balance_frame, removal_response
from reagentplan.scenario import load_scenario


def scenario(boiler="pc", chlorine=0.1, periods=True):
    s = minimal_sheets(days=10)
    # some chlorine (limestone for HCl does not move with removal), slip fly ash into the
    # cake, and a period setting so the setpoint differs by day
    s["coal_sources"][1][5] = chlorine
    s["coal_sources"][2][5] = chlorine
    s["coal_blend"].append([START + dt.timedelta(days=5), "Coal B", 100])
    set_value(s, "scrubber", "esp_efficiency_pct", None, 99.5)
    set_value(s, "scrubber", "oxidation_pct", None, 98)
    if boiler == "cfb":
        set_value(s, "plant", "boiler", None, "cfb")
        set_value(s, "scrubber", "removal_pct", None, 90)
        set_value(s, "scrubber", "ca_s_ratio", None, 2.5)
        s["storage"] = [r for r in s["storage"] if r[0] != "gypsum"]
        s["buyers"] = [r for r in s["buyers"] if r[1] != "gypsum"]
        s["disposal"] = [r for r in s["disposal"] if r[1] != "gypsum"]
    if periods:
        s["period_settings"] = [["first_date", "last_date", "key", "value"],
                                [START + dt.timedelta(days=2), START + dt.timedelta(days=3),
                                 "removal_pct", 95]]
    return load_scenario(workbook_bytes(s))


def test_removal_column_is_appended_without_renaming():
    assert "removal_pct" in BALANCE_COLUMNS[12:]
    assert BALANCE_COLUMNS[:12] == ("date", "coal_t", "heat_input_gj", "so2_formed_t",
                                    "so2_removed_t", "so2_emitted_t", "so2_kg_per_gj",
                                    "limestone_t", "gypsum_wet_t", "gypsum_purity_pct",
                                    "fly_ash_t", "bottom_ash_t")


def test_default_removal_column_is_the_setpoint_with_period_settings():
    frame = balance_frame(scenario())
    assert list(frame.columns) == list(BALANCE_COLUMNS)
    assert list(frame["removal_pct"]) == [97, 97, 95, 95, 97, 97, 97, 97, 97, 97]


@pytest.mark.parametrize("boiler", ["pc", "cfb"])
def test_removal_equal_to_the_setpoint_gives_todays_balance(boiler):
    scn = scenario(boiler)
    today = balance_frame(scn)
    given = balance_frame(scn, removal_pct=scn.daily_setting("removal_pct"))
    pd.testing.assert_frame_equal(given, today, check_exact=True)
    # and without the new column, the frame is today's (existing columns unchanged)
    assert list(today.columns[:-1]) == list(BALANCE_COLUMNS[:-1])


def test_a_chosen_removal_moves_the_day_it_is_chosen_for():
    scn = scenario()
    chosen = scn.daily_setting("removal_pct").copy()
    chosen[7] = 99.0
    a, b = balance_frame(scn), balance_frame(scn, removal_pct=chosen)
    assert b["removal_pct"].iloc[7] == 99.0
    changed = ~np.isclose(a["so2_removed_t"], b["so2_removed_t"])
    assert list(np.flatnonzero(changed)) == [7]
    # SO2 removed is the SO2 formed times the removal (no sorbent injection here)
    assert b["so2_removed_t"].iloc[7] == pytest.approx(b["so2_formed_t"].iloc[7] * 0.99, rel=1e-12)


def test_removal_of_the_wrong_length_is_refused():
    with pytest.raises(ValueError, match="one value per horizon day"):
        balance_frame(scenario(), removal_pct=[97.0] * 3)


@pytest.mark.parametrize("boiler", ["pc", "cfb"])
def test_response_is_exact_a_third_point_lies_on_the_line(boiler):
    scn = scenario(boiler)
    resp = removal_response(scn)
    assert list(resp["date"]) == list(scn.dates)
    assert list(resp["removal_pct"]) == list(scn.daily_setting("removal_pct"))
    for third in (60.0, 91.3, 99.9):
        r = np.full(scn.plant.horizon_days, third)
        at = balance_frame(scn, removal_pct=r)
        for q in RESPONSE_COLUMNS:
            line = resp[q] + resp[f"{q}_per_pct"] * (r - resp["removal_pct"])
            assert np.allclose(line, at[q], rtol=1e-10, atol=1e-9), (q, third)


def test_response_value_is_the_balance_at_the_setpoint():
    scn = scenario()
    resp, base = removal_response(scn), balance_frame(scn)
    for q in RESPONSE_COLUMNS:
        assert np.array_equal(resp[q].to_numpy(), base[q].to_numpy()), q


def test_response_slopes_limestone_rises_and_emissions_fall():
    resp = removal_response(scenario())
    for q in ("limestone_t", "caco3_need_t", "gypsum_wet_t", "gypsum_dry_t", "so2_removed_t"):
        assert (resp[f"{q}_per_pct"] > 0).all(), q
    assert (resp["so2_emitted_t_per_pct"] < 0).all()
    # pc: the ash does not move with the scrubber's removal
    assert (resp["fly_ash_t_per_pct"] == 0).all() and (resp["bottom_ash_t_per_pct"] == 0).all()


def test_response_slope_by_hand():
    """Per percentage point: SO2 removed moves by SO2 formed / 100, and the limestone by
    that × Ca/S × M(CaCO3)/M(SO2) / CaCO3 purity (molar masses: IUPAC, through the
    project's chemistry module)."""
    scn = scenario(chlorine=0.0, periods=False)
    resp, base = removal_response(scn), balance_frame(scn)
    per = base["so2_formed_t"] / 100
    assert np.allclose(resp["so2_removed_t_per_pct"], per, rtol=1e-10)
    assert np.allclose(resp["so2_emitted_t_per_pct"], -per, rtol=1e-10)
    stone = per * 1.03 * chem.CACO3 / chem.SO2 / 0.94
    assert np.allclose(resp["limestone_t_per_pct"], stone, rtol=1e-10)


def test_cfb_ash_moves_with_the_bed_capture():
    resp = removal_response(scenario("cfb"))
    assert (resp["fly_ash_t_per_pct"] > 0).all() and (resp["bottom_ash_t_per_pct"] > 0).all()
    assert (resp["gypsum_wet_t"] == 0).all() and (resp["gypsum_wet_t_per_pct"] == 0).all()
