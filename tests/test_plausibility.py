"""Plausibility at the boundary: every percentage, ratio and rate of the workbook has a
hard range (outside: refused) and a usual range (outside: the run goes on and warns on
the console, in summary.json and in plan.xlsx), kept in one table of the schema with
its source."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from openpyxl import load_workbook

from helpers import minimal_sheets, set_value, workbook_bytes, write_workbook
from reagentplan import schema
from reagentplan.balance import balance_frame
from reagentplan.errors import ScenarioError
from reagentplan.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[1]


def warnings_of(sheets) -> list[str]:
    return [str(w) for w in load_scenario(workbook_bytes(sheets)).warnings]


def test_the_tests_station_has_no_warnings(sheets):
    assert warnings_of(sheets) == []


def test_a_fraction_typed_for_a_percentage_warns_and_asks(sheets):
    """0.97 where 97 was meant: the balance then buys almost no limestone."""
    set_value(sheets, "scrubber", "removal_pct", None, 0.97)
    scn = load_scenario(workbook_bytes(sheets))
    [w] = scn.warnings
    text = str(w)
    assert text.startswith("sheet 'scrubber', row 2, column 'value (removal_pct)': 0.97 %")
    assert "usual range 90 to 99.5 %" in text and "did you mean 97 %?" in text
    assert "common practice" in text
    # what the warning is for: 1 % of the scrubber's limestone
    right = balance_frame(load_scenario(workbook_bytes(minimal_sheets())))["limestone_t"].sum()
    assert balance_frame(scn)["limestone_t"].sum() < 0.02 * right


@pytest.mark.parametrize("sheet, key, column, value, place, expect", [
    ("scrubber", "limestone_caco3_pct", None, 0.94 * 100 - 30, "value (limestone_caco3_pct)", "85 to 99 %"),
    ("scrubber", "gypsum_moisture_pct", None, 0.1, "value (gypsum_moisture_pct)", "did you mean 10 %?"),
    ("plant", "so2_conversion_pct", None, 0.95, "value (so2_conversion_pct)", "did you mean 95 %?"),
    ("coal_sources", 0, "sulfur_pct", 7.5, "column 'sulfur_pct'", "0.2 to 6 %"),
    ("coal_sources", 0, "ash_pct", 55, "column 'ash_pct'", "3 to 40 %"),
    ("coal_sources", 0, "hhv_mj_per_kg", 36, "column 'hhv_mj_per_kg'", "8 to 33 MJ/kg"),
    ("units", 0, "heat_rate_gj_per_mwh", 15, "column 'heat_rate_gj_per_mwh'", "8.5 to 13 GJ/MWh"),
    ("buyers", 0, "min_purity_pct", 0.94, "column 'min_purity_pct'", "did you mean 94 %?"),
    ("buyers", 1, "max_loi_pct", 0.06, "column 'max_loi_pct'", "did you mean 6 %?"),
])
def test_unusual_values_name_the_place_and_the_usual_range(sheets, sheet, key, column, value, place,
                                                            expect):
    set_value(sheets, sheet, key, column, value)
    found = warnings_of(sheets)
    hits = [w for w in found if f"sheet '{sheet}'" in w and place in w]
    assert len(hits) == 1, found
    assert expect in hits[0]


def test_no_fraction_hint_where_small_percentages_are_usual(sheets):
    """Sulfur's usual range starts at 0.2 %: 0.05 % is unusual but not a fraction."""
    set_value(sheets, "coal_sources", 0, "sulfur_pct", 0.05)
    [w] = warnings_of(sheets)
    assert "0.2 to 6 %" in w and "did you mean" not in w


def test_hard_ranges_still_refuse(sheets):
    set_value(sheets, "scrubber", "removal_pct", None, 101)
    set_value(sheets, "coal_sources", 0, "hhv_mj_per_kg", 45)
    with pytest.raises(ScenarioError) as info:
        load_scenario(workbook_bytes(sheets))
    text = info.value.report()
    assert "value (removal_pct)': found 101; expected a number from 0 to 100" in text
    assert "column 'hhv_mj_per_kg': found 45; expected a number from 5 to 40" in text


def test_the_boiler_sets_the_usual_ca_s_ratio(sheets):
    """Cross-field: wet scrubber 1.0-1.1, fluidised bed 1.5-3.5 (common practice, no source)."""
    set_value(sheets, "scrubber", "ca_s_ratio", None, 2.5)
    [w] = warnings_of(sheets)
    assert "1 to 1.1 mol/mol (Ca/S ratio for a pulverised-coal boiler" in w
    cfb = minimal_sheets()
    set_value(cfb, "plant", "boiler", None, "cfb")
    cfb["storage"] = [r for r in cfb["storage"] if r[0] != "gypsum"]
    cfb["buyers"] = [r for r in cfb["buyers"] if r[1] != "gypsum"]
    cfb["disposal"] = [r for r in cfb["disposal"] if r[1] != "gypsum"]
    set_value(cfb, "scrubber", "ca_s_ratio", None, 2.5)
    set_value(cfb, "scrubber", "removal_pct", None, 92)
    assert warnings_of(cfb) == []
    set_value(cfb, "scrubber", "ca_s_ratio", None, 1.03)
    [w] = warnings_of(cfb)
    assert "1.5 to 3.5 mol/mol (Ca/S ratio for a fluidised bed)" in w


def test_period_settings_and_history_get_the_same_checks(sheets):
    import datetime as dt

    from helpers import START

    sheets["period_settings"] = [["first_date", "last_date", "key", "value"],
                                 [START, START + dt.timedelta(days=2), "oxidation_pct", 0.9]]
    sheets["coal_quality_history"] = [["date", "source", "sulfur_pct", "ash_pct", "hhv_mj_per_kg"],
                                      [START - dt.timedelta(days=3), "Coal A", 2.1, 10, 25],
                                      [START - dt.timedelta(days=2), "Coal A", 2.0, 60, 25]]
    found = warnings_of(sheets)
    assert any(w.startswith("sheet 'period_settings', row 2, column 'value': 0.9 % for oxidation_pct")
               and "did you mean 90 %?" in w for w in found), found
    assert any(w.startswith("sheet 'coal_quality_history', row 3, column 'ash_pct': 60 %")
               for w in found), found


def test_us_customary_values_are_checked_after_conversion(sheets):
    """16,000 Btu/lb is 37.2 MJ/kg (NIST SP 811 factors through pint): above anthracite."""
    for i, row in enumerate(sheets["coal_sources"]):
        row[4] = "hhv_btu_per_lb" if i == 0 else (16000 if i == 1 else row[4] / 0.002326)
    [w] = warnings_of(sheets)
    assert "column 'hhv_btu_per_lb': 37.216 MJ/kg" in w


# --------------------------------------------------------------------------- the table


def _number_fields():
    for sheet in schema.SHEETS:
        for f in sheet.fields:
            if f.kind in ("number", "integer"):
                yield sheet, f


def test_every_percentage_and_ratio_has_a_range_with_a_source():
    kinds = ("AP-42", "ASTM", "CFR", "common practice", "from memory")
    for sheet, f in _number_fields():
        if f.unit in ("%", "mol/mol", "ppm", "% S") or f.name.endswith(("_pct", "_ratio", "_ppm")):
            rng = f.plausible
            assert rng is not None, f"{sheet.name}.{f.name} has no plausibility range"
    for key, rng in schema.PLAUSIBLE.items():
        assert any(k in rng.source for k in kinds), key
        lo, hi = rng.hard
        for a, b in (rng.usual,) + tuple(r for _, r in rng.by_boiler):
            assert (lo is None or lo <= a) and a <= b and (hi is None or b <= hi), key


def test_the_table_and_the_fields_agree_on_hard_limits():
    """A field's own lo/hi, where it states them, is the table's hard range."""
    for sheet, f in _number_fields():
        if f.plausible is not None and (f.lo is not None or f.hi is not None):
            assert (f.lo, f.hi) == tuple(f.plausible.hard), f"{sheet.name}.{f.name}"


def test_every_row_of_the_table_is_used():
    used = {f.range_key or f.name for _, f in _number_fields()}
    assert set(schema.PLAUSIBLE) <= used


# --------------------------------------------------------------------------- where warnings go


def test_warnings_reach_the_console_summary_and_workbook(tmp_path):
    s = minimal_sheets()
    set_value(s, "scrubber", "removal_pct", None, 0.97)
    path = write_workbook(s, tmp_path / "fraction.xlsx")
    r = subprocess.run([sys.executable, "-m", "reagentplan", "check", str(path)],
                       capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert r.returncode == 0 and "1 unusual value" in r.stdout and "did you mean 97 %?" in r.stdout
    out = tmp_path / "out"
    r = subprocess.run([sys.executable, "-m", "reagentplan", "plan", str(path), "--out", str(out),
                        "--futures", "0", "--time-limit", "20"],
                       capture_output=True, text=True, timeout=300, cwd=ROOT)
    assert r.returncode in (0, 1), r.stderr
    assert "did you mean 97 %?" in r.stderr
    summary = json.loads((out / "summary.json").read_text())
    [w] = summary["warnings"]
    assert w["sheet"] == "scrubber" and w["row"] == 2 and w["column"] == "value (removal_pct)"
    assert w["hint"].startswith("did you mean 97 %?") and w["usual"].startswith("90 to 99.5 %")
    ws = load_workbook(out / "plan.xlsx", read_only=True)["Assumptions"]
    cells = [str(c) for row in ws.iter_rows(values_only=True) for c in row if c is not None]
    assert "Warnings: unusual inputs" in cells
    assert any("did you mean 97 %?" in c for c in cells)


def test_a_sound_plan_has_an_empty_warning_list(tmp_path, minimal_path):
    from reagentplan.cli import main

    out = tmp_path / "out"
    assert main(["plan", str(minimal_path), "--out", str(out), "--futures", "0",
                 "--time-limit", "20"]) in (0, 1)
    assert json.loads((out / "summary.json").read_text())["warnings"] == []


def test_the_dashboard_upload_names_the_unusual_values():
    import base64

    from reagentplan.dashboard.callbacks import parse_upload

    s = minimal_sheets()
    set_value(s, "scrubber", "removal_pct", None, 0.97)
    url = "data:application/octet-stream;base64," + base64.b64encode(workbook_bytes(s)).decode()
    scenario, message, ok = parse_upload({"filename": "fraction.xlsx", "contents": url})
    assert ok and scenario.warnings
    assert "1 value is unusual" in message and "did you mean 97 %?" in message
