"""Bad input: every problem names sheet, Excel row and column, and what was expected."""

from __future__ import annotations

import datetime as dt

import pytest

from helpers import START, set_value, workbook_bytes, write_workbook
from reagentplan.errors import ScenarioError
from reagentplan.scenario import load_scenario


def problems(sheets) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        load_scenario(workbook_bytes(sheets))
    return [str(p) for p in info.value.problems]


def one(sheets, *parts) -> str:
    found = problems(sheets)
    hits = [m for m in found if all(p in m for p in parts)]
    assert hits, f"no problem mentions {parts}: {found}"
    return hits[0]


def test_good_workbook_loads(sheets):
    scn = load_scenario(workbook_bytes(sheets))
    assert scn.plant.name == "Test Station"
    assert scn.plant.horizon_days == 10
    assert scn.suppliers[0].weekdays == frozenset(range(5))
    assert scn.buyers[1].months == frozenset(range(2, 11))
    assert scn.plant.currency == "USD"  # default
    assert scn.scrubber.injection_ca_s_ratio == 2.5  # default


def test_missing_sheet(sheets):
    del sheets["suppliers"]
    assert "the sheet is missing" in one(sheets, "sheet 'suppliers'")


def test_missing_column(sheets):
    for row in sheets["storage"]:
        del row[1]
    m = one(sheets, "sheet 'storage'", "row 1", "column 'capacity_t'")
    assert "missing" in m and "capacity_st" in m


def test_unknown_column_did_you_mean(sheets):
    sheets["suppliers"][0][6] = "price_per_ton"
    m = one(sheets, "sheet 'suppliers'", "column 'price_per_ton'")
    assert "did you mean 'price_per_t'" in m


def test_unknown_sheet_did_you_mean(sheets):
    sheets["supplier"] = sheets.pop("suppliers")
    m = one(sheets, "sheet 'supplier'", "unknown sheet")
    assert "did you mean 'suppliers'" in m


def test_unknown_key_did_you_mean(sheets):
    sheets["scrubber"].append(["removal_pc", 98])
    m = one(sheets, "sheet 'scrubber'", "row 11", "unknown key 'removal_pc'")
    assert "did you mean 'removal_pct'" in m


def test_both_unit_variants(sheets):
    for i, row in enumerate(sheets["storage"]):
        row.append("capacity_st" if i == 0 else 1000)
    m = one(sheets, "sheet 'storage'", "both unit variants")
    assert "capacity_t" in m and "capacity_st" in m


def test_both_variants_of_a_key(sheets):
    sheets["plant"].append(["so2_limit_lb_per_mmbtu", 0.2, None])
    m = one(sheets, "sheet 'plant'", "row 11", "column 'key'")
    assert "both unit variants" in m and "so2_limit_kg_per_gj" in m


def test_wrong_type(sheets):
    set_value(sheets, "units", 0, "capacity_mw", "two hundred")
    m = one(sheets, "sheet 'units'", "row 2", "column 'capacity_mw'")
    assert "'two hundred'" in m and "a number" in m


def test_bad_date(sheets):
    sheets["generation"][3][0] = "03/07/2030"
    m = one(sheets, "sheet 'generation'", "row 4", "column 'date'")
    assert "YYYY-MM-DD" in m


@pytest.mark.parametrize("sheet, key, column, value, expect", [
    ("scrubber", "removal_pct", None, 101, "from 0 to 100"),
    ("scrubber", "ca_s_ratio", None, 0.9, "from 1 to 5"),
    ("plant", "so2_conversion_pct", None, -5, "from 0 to 100"),
    ("suppliers", 0, "lead_days", -3, "from 0 to 365"),
    ("suppliers", 0, "max_loads_per_day", 1.5, "whole number"),
    ("coal_sources", 0, "sulfur_pct", 140, "from 0 to 100"),
    ("coal_sources", 0, "hhv_mj_per_kg", 11000, "from 5 to 40"),
    ("generation", 2, "mwh", -10, "at least 0"),
    ("storage", 0, "initial_t", -1, "at least 0"),
    ("buyers", 0, "weekdays", "Mon-Fry", "weekdays like"),
    ("buyers", 1, "months", "Spring", "months like"),
    ("suppliers", 0, "mode", "ship", "one of rail, truck"),
])
def test_out_of_range(sheets, sheet, key, column, value, expect):
    set_value(sheets, sheet, key, column, value)
    where = f"column '{column}'" if column else f"value ({key})"
    assert expect in one(sheets, f"sheet '{sheet}'", where)


def test_generation_above_capacity(sheets):
    set_value(sheets, "generation", 1, "mwh", 5000)
    assert "at most 4800" in one(sheets, "sheet 'generation'", "row 3", "column 'mwh'")


def test_blend_shares_must_sum_to_100(sheets):
    sheets["coal_blend"][1][2] = 60
    sheets["coal_blend"].append([START, "Coal B", 30])
    m = one(sheets, "sheet 'coal_blend'", "column 'share_pct'")
    assert "sum to 90" in m and "summing to 100" in m


def test_unknown_source_and_unit(sheets):
    sheets["coal_blend"][1][1] = "Coal AA"
    sheets["generation"][5][1] = "U2"
    assert "did you mean 'Coal A'" in one(sheets, "sheet 'coal_blend'", "row 2", "column 'source'")
    assert "unknown unit 'U2'" in one(sheets, "sheet 'generation'", "row 6", "column 'unit'")


def test_duplicate_rows(sheets):
    sheets["generation"].append(list(sheets["generation"][4]))
    sheets["suppliers"].append(list(sheets["suppliers"][1]))
    assert "duplicate of row 5" in one(sheets, "sheet 'generation'", "row 12")
    assert "duplicate of row 2" in one(sheets, "sheet 'suppliers'", "row 3")


def test_dates_out_of_order_are_sorted(sheets):
    """Row order carries no meaning in dated tables (tests/test_order_free.py)."""
    g = sheets["generation"]
    g[3], g[4] = g[4], g[3]
    scn = load_scenario(workbook_bytes(sheets))
    assert scn.generation["date"].is_monotonic_increasing


def test_dates_outside_horizon(sheets):
    sheets["generation"].append([START + dt.timedelta(days=10), "U1", 100])
    assert "outside the horizon" in one(sheets, "sheet 'generation'", "row 12", "column 'date'")


def test_generation_must_cover_the_horizon_without_history(sheets):
    del sheets["generation"][3]
    m = one(sheets, "sheet 'generation'", "no generation on 1 of 10")
    assert "generation_history" in m


def test_blend_must_start_by_the_first_day(sheets):
    sheets["coal_blend"][1][0] = START + dt.timedelta(days=1)
    assert "in force on the first planned day" in one(sheets, "sheet 'coal_blend'", "row 2")


def test_firm_order_unknown_party(sheets):
    sheets["firm_orders"] = [["date", "material", "party", "loads"], [START, "limestone", "Quary Q", 1]]
    assert "did you mean 'Quarry Q'" in one(sheets, "sheet 'firm_orders'", "row 2", "column 'party'")


def test_firm_order_tonnes_default_to_loads(sheets):
    sheets["firm_orders"] = [["date", "material", "party", "loads"], [START, "limestone", "Quarry Q", 2]]
    scn = load_scenario(workbook_bytes(sheets))
    assert scn.firm_orders[0].tonnes == 2000 and scn.firm_orders[0].mode == "rail"


def test_safety_above_capacity(sheets):
    set_value(sheets, "storage", 0, "safety_t", 6000)
    assert "above capacity" in one(sheets, "sheet 'storage'", "row 2", "column 'safety_t'")


def test_quality_limit_on_wrong_material(sheets):
    set_value(sheets, "buyers", 0, "max_loi_pct", 5)
    assert "fly ash" in one(sheets, "sheet 'buyers'", "row 2", "column 'max_loi_pct'")


def test_comment_rows_and_note_columns_are_ignored(sheets):
    sheets["units"].insert(1, ["# example: Unit 9", 500, 9, 0])
    for i, row in enumerate(sheets["units"]):
        row.append("note" if i == 0 else "free text")
    assert [u.unit for u in load_scenario(workbook_bytes(sheets)).units] == ["U1"]


def test_iso_text_dates_and_numeric_text(sheets):
    sheets["generation"][1][0] = START.isoformat()
    sheets["generation"][1][2] = "2,500"
    scn = load_scenario(workbook_bytes(sheets))
    assert scn.generation["mwh"].iloc[0] == 2500


def test_many_problems_reported_together(sheets):
    set_value(sheets, "units", 0, "capacity_mw", "x")
    set_value(sheets, "suppliers", 0, "lead_days", -1)
    assert len(problems(sheets)) >= 2


def test_not_a_workbook(tmp_path):
    path = tmp_path / "plan.xlsx"
    path.write_text("date,unit,mwh\n2030-01-01,U1,5\n")
    with pytest.raises(ScenarioError, match="not an .xlsx workbook"):
        load_scenario(path)


def test_damaged_zip(tmp_path):
    path = tmp_path / "broken.xlsx"
    path.write_bytes(b"PK\x03\x04" + b"\0" * 200)
    with pytest.raises(ScenarioError, match="could not be opened"):
        load_scenario(path)


def test_empty_file(tmp_path):
    path = tmp_path / "empty.xlsx"
    path.write_bytes(b"")
    with pytest.raises(ScenarioError, match="is empty"):
        load_scenario(path)


def test_huge_file(tmp_path):
    path = tmp_path / "huge.xlsx"
    with open(path, "wb") as fh:
        fh.truncate(30 * 2**20)
    with pytest.raises(ScenarioError, match="at most 25 MB"):
        load_scenario(path)


def test_missing_file(tmp_path):
    with pytest.raises(ScenarioError, match="does not exist"):
        load_scenario(tmp_path / "nope.xlsx")


def test_us_customary_columns_are_converted(sheets, tmp_path):
    for i, row in enumerate(sheets["storage"]):
        row[1] = "capacity_st" if i == 0 else row[1] / 0.90718474
    scn = load_scenario(write_workbook(sheets, tmp_path / "us.xlsx"))
    assert scn.storage["limestone"].capacity_t == pytest.approx(5000)


def test_lane_closures_and_months_shape_the_calendar(sheets):
    sheets["lane_closures"] = [["party", "mode", "first_date", "last_date"],
                               ["Quarry Q", "rail", START + dt.timedelta(days=1), START + dt.timedelta(days=2)]]
    scn = load_scenario(workbook_bytes(sheets))
    open_days = scn.lane_open(scn.suppliers[0])
    # START is a Monday: Mon open, Tue-Wed closed, Thu-Fri open, weekend shut (Mon-Fri lane)
    assert open_days[:7].tolist() == [True, False, False, True, True, False, False]
    assert scn.lane_open(scn.buyers[1])[:6].all()


def test_lane_closure_unknown_party_and_reversed_dates(sheets):
    sheets["lane_closures"] = [["party", "first_date", "last_date"],
                               ["Quary Q", START, START],
                               ["Board Co", START + dt.timedelta(days=3), START]]
    assert "did you mean 'Quarry Q'" in one(sheets, "sheet 'lane_closures'", "row 2", "column 'party'")
    assert "before the first" in one(sheets, "sheet 'lane_closures'", "row 3", "column 'last_date'")


def test_seasonal_supplier_rows(sheets):
    row = sheets["suppliers"][1]
    sheets["suppliers"][0].append("months")
    sheets["suppliers"][1] = row + ["Apr-Sep"]
    sheets["suppliers"].append(list(row[:7]) + [3000, None, 30000, "Oct-Mar"])
    scn = load_scenario(workbook_bytes(sheets))
    assert [s.lane for s in scn.suppliers] == ["Quarry Q rail (Apr-Sep)", "Quarry Q rail (Jan-Mar,Oct-Dec)"]
    assert scn.lane_open(scn.suppliers[1])[0] and not scn.lane_open(scn.suppliers[0])[0]


def test_period_settings_validated(sheets):
    sheets["period_settings"] = [["first_date", "last_date", "key", "value"],
                                 [START, START + dt.timedelta(days=2), "oxidation_pct", 120]]
    assert "from 0 to 100" in one(sheets, "sheet 'period_settings'", "row 2", "column 'value'")
    sheets["period_settings"][1][2] = "oxidation_pc"
    m = one(sheets, "sheet 'period_settings'", "row 2", "column 'key'")
    assert "did you mean 'oxidation_pct'" in m


def test_period_settings_overlap(sheets):
    sheets["period_settings"] = [["first_date", "last_date", "key", "value"],
                                 [START, START + dt.timedelta(days=2), "oxidation_pct", 90],
                                 [START + dt.timedelta(days=2), START + dt.timedelta(days=4), "oxidation_pct", 80]]
    assert "overlaps row 2" in one(sheets, "sheet 'period_settings'", "row 3")


def test_stone_period_setting_unused_when_quarries_give_caco3(sheets):
    """A span of `limestone_caco3_pct` is not used once the quarries give their own stone:
    the loader says so (a warning naming the row), and the scenario still loads."""
    sheets["period_settings"] = [["first_date", "last_date", "key", "value"],
                                 [START, START + dt.timedelta(days=2), "limestone_caco3_pct", 90]]
    plain = load_scenario(workbook_bytes(sheets))
    assert not [w for w in plain.warnings if w.sheet == "period_settings"]
    sheets["suppliers"][0].append("caco3_pct")
    sheets["suppliers"][1].append(96)
    scn = load_scenario(workbook_bytes(sheets))
    hits = [str(w) for w in scn.warnings if w.sheet == "period_settings"]
    assert len(hits) == 1 and "row 2" in hits[0] and "not used" in hits[0] and "suppliers" in hits[0]


# ------------------------------------------------------------------ every problem in one run


def test_blank_template_lists_every_problem_in_one_run(tmp_path):
    """The plant sheet's missing values and the empty tables, together: the user fills
    the template once, not once per run."""
    from reagentplan.template import write_template

    with pytest.raises(ScenarioError) as info:
        load_scenario(write_template(tmp_path / "blank.xlsx"))
    found = [str(p) for p in info.value.problems]
    assert any("sheet 'plant'" in m and "value (name)" in m for m in found), found
    assert any("sheet 'plant'" in m and "value (start_date)" in m for m in found), found
    for sheet in ("units", "coal_sources", "suppliers", "coal_blend"):
        assert any(f"sheet '{sheet}'" in m and "the sheet has no rows" in m for m in found), sheet
    assert sum("sheet 'storage'" in m and "no row for the store" in m for m in found) == 4
    assert found[0].startswith("sheet 'plant'")  # still in the order the sheets are read


def test_a_table_with_a_bad_cell_is_not_called_empty(sheets):
    """Rows with a bad cell are left out of the checks that follow; the sheet they are
    on is not reported as having no rows on top of its cell's problem."""
    set_value(sheets, "units", 0, "capacity_mw", "lots")
    set_value(sheets, "storage", 0, "capacity_t", "full")
    sheets["plant"] = [r for r in sheets["plant"] if r[0] != "name"]  # a problem on another sheet
    found = problems(sheets)
    assert any("sheet 'units'" in m and "'lots'" in m for m in found), found
    assert not any("has no rows" in m or "no row for the store" in m for m in found), found


# ------------------------------------------------------------------ generation left to history


def _history_rows(days: int) -> list[list]:
    return [["date", "unit", "mwh"]] + [[START - dt.timedelta(days=days - i), "U1", 2400.0 + 10 * (i % 7)]
                                        for i in range(days)]


def test_generation_sheet_may_be_left_out_when_history_covers_the_forecast(sheets):
    """WORKBOOK.md: the forecast is made from generation_history for the days that
    `generation` does not cover, so with history the `generation` sheet may be absent
    (it then covers no day), as it may be empty."""
    del sheets["generation"]
    sheets["generation_history"] = _history_rows(60)
    scn = load_scenario(workbook_bytes(sheets))
    assert len(scn.generation) == 0 and len(scn.generation_history) == 60
    assert scn.generation_matrix().isna().all().all()


def test_generation_sheet_left_out_with_too_little_history(sheets):
    del sheets["generation"]
    sheets["generation_history"] = _history_rows(5)
    m = one(sheets, "sheet 'generation_history'", "column 'unit'")
    assert "5 day(s) of history" in m and "no generation on 10 of 10" in m


def test_generation_sheet_still_needed_without_history(sheets):
    del sheets["generation"]
    assert "the sheet is missing" in one(sheets, "sheet 'generation'")
