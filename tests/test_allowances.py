"""The optional ``allowances`` sheet (SO2 emission allowances): loading, the daily terms,
the opening holding, the US customary variant and every bad case."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from openpyxl import load_workbook

from helpers import START, workbook_bytes, write_workbook
from reagentplan.cli import main
from reagentplan.errors import ScenarioError
from reagentplan.scenario import load_scenario

HEADER = ["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
          "max_trade_t_per_month"]
DAY = dt.timedelta(days=1)


def allowance_rows():
    """Held 1,000 t a month before the start, 50 t allocated before the start, 200 t on
    day 3 with new prices and a 100 t/month trade limit, a third row on day 6 lifting it."""
    return [list(HEADER),
            [START - 30 * DAY, 1000, 50, 400, 380, None],
            [START + 3 * DAY, None, 200, 450, 420, 100],
            [START + 6 * DAY, None, None, 500, 480, None]]


def load(sheets):
    return load_scenario(workbook_bytes(sheets))


def problems(sheets) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        load(sheets)
    return [str(p) for p in info.value.problems]


def test_no_sheet_no_allowances(sheets):
    scn = load(sheets)
    assert scn.allowances is None
    assert scn.allowance_days() is None and scn.allowance_opening_t is None


def test_sheet_with_no_rows_is_no_market(sheets):
    sheets["allowances"] = [HEADER]
    assert load(sheets).allowances is None


def test_frame_is_canonical_and_sorted(sheets):
    rows = allowance_rows()
    sheets["allowances"] = [rows[0], rows[3], rows[1], rows[2]]  # written out of order
    a = load(sheets).allowances
    assert list(a.columns) == HEADER
    assert list(a["date"].dt.date) == [START - 30 * DAY, START + 3 * DAY, START + 6 * DAY]
    assert a["holding_t"].iloc[0] == 1000 and a["holding_t"].iloc[1:].isna().all()
    assert list(a["allocated_t"]) == [50.0, 200.0, 0.0]
    assert np.isnan(a["max_trade_t_per_month"].iloc[0]) and a["max_trade_t_per_month"].iloc[1] == 100


def test_daily_terms_hold_from_their_date_to_the_next_row(sheets):
    sheets["allowances"] = allowance_rows()
    scn = load(sheets)
    days = scn.allowance_days()
    assert list(days.index) == list(scn.dates) and days.index.name == "date"
    assert list(days.columns) == ["allocated_t", "buy_price_per_t", "sell_price_per_t",
                                  "max_trade_t_per_month"]
    # the allocation before the start is in the opening holding, not in the days
    assert list(days["allocated_t"]) == [0, 0, 0, 200, 0, 0, 0, 0, 0, 0]
    assert list(days["buy_price_per_t"]) == [400] * 3 + [450] * 3 + [500] * 4
    assert list(days["sell_price_per_t"]) == [380] * 3 + [420] * 3 + [480] * 4
    limit = days["max_trade_t_per_month"].to_numpy()
    assert np.isnan(limit[:3]).all() and (limit[3:6] == 100).all() and np.isnan(limit[6:]).all()
    assert scn.allowance_opening_t == 1050.0


def test_an_allocation_on_the_start_date_is_a_day_not_the_opening(sheets):
    sheets["allowances"] = [HEADER, [START, 700, 300, 400, 380, None]]
    scn = load(sheets)
    assert scn.allowance_opening_t == 700.0
    assert scn.allowance_days()["allocated_t"].iloc[0] == 300.0


def test_first_row_after_the_start_is_an_error(sheets):
    sheets["allowances"] = [HEADER, [START + DAY, 1000, None, 400, 380, None]]
    (m,) = problems(sheets)
    assert "sheet 'allowances', row 2, column 'date'" in m
    assert f"after the start date {START:%Y-%m-%d}" in m and "on or before the start date" in m


def test_first_row_without_a_holding_is_an_error(sheets):
    sheets["allowances"] = [HEADER, [START, None, None, 400, 380, None]]
    (m,) = problems(sheets)
    assert "sheet 'allowances', row 2, column 'holding_t'" in m and "the cell is empty" in m


def test_a_holding_on_a_later_row_is_an_error(sheets):
    rows = allowance_rows()
    rows[2][1] = 20
    sheets["allowances"] = rows
    (m,) = problems(sheets)
    assert "sheet 'allowances', row 3, column 'holding_t'" in m
    assert "the holding on the first row only" in m


def test_sell_above_buy_is_an_error(sheets):
    rows = allowance_rows()
    rows[3][4] = 510
    sheets["allowances"] = rows
    (m,) = problems(sheets)
    assert "sheet 'allowances', row 4, column 'sell_price_per_t'" in m
    assert "sell price of 510 above the buy price 500" in m


@pytest.mark.parametrize("col, value, expected", [
    ("buy_price_per_t", None, "the cell is empty"),
    ("buy_price_per_t", -5, "at least 0"),
    ("max_trade_t_per_month", "lots", "found 'lots'"),
    ("date", "soon", "found 'soon'"),
])
def test_bad_cells_name_row_and_column(sheets, col, value, expected):
    rows = allowance_rows()
    rows[2][HEADER.index(col)] = value
    sheets["allowances"] = rows
    found = problems(sheets)
    hits = [m for m in found if f"sheet 'allowances', row 3, column '{col}'" in m]
    assert hits and expected in hits[0], found


def test_duplicate_date_is_an_error(sheets):
    rows = allowance_rows()
    rows[3][0] = rows[2][0]
    sheets["allowances"] = rows
    (m,) = problems(sheets)
    assert "sheet 'allowances', row 4" in m and "duplicate of row 3" in m


def test_us_short_ton_columns_convert_through_pint(sheets):
    """NIST SP 811 Appendix B: 1 short ton = 2000 lb = 907.184 74 kg (typed here on purpose;
    the loader converts through pint)."""
    st = 0.90718474  # t per short ton
    sheets["allowances"] = [
        ["date", "holding_st", "allocated_st", "buy_price_per_st", "sell_price_per_st",
         "max_trade_st_per_month"],
        [START - DAY, 1000, 100, 400, 380, 2000],
    ]
    scn = load(sheets)
    a = scn.allowances.iloc[0]
    assert a["holding_t"] == pytest.approx(1000 * st, rel=1e-12)
    assert a["allocated_t"] == pytest.approx(100 * st, rel=1e-12)
    assert a["max_trade_t_per_month"] == pytest.approx(2000 * st, rel=1e-12)
    assert a["buy_price_per_t"] == pytest.approx(400 / st, rel=1e-12)
    assert a["sell_price_per_t"] == pytest.approx(380 / st, rel=1e-12)
    assert scn.allowance_opening_t == pytest.approx(1100 * st, rel=1e-12)


def test_both_unit_variants_of_a_column_is_an_error(sheets):
    rows = allowance_rows()
    for i, r in enumerate(rows):
        r.append("holding_st" if i == 0 else None)
    sheets["allowances"] = rows
    found = problems(sheets)
    assert any("sheet 'allowances'" in m and "both unit variants" in m for m in found), found


def test_check_command_exits_2_on_a_bad_allowances_sheet(sheets, tmp_path, capsys):
    rows = allowance_rows()
    rows[1][4] = 999
    sheets["allowances"] = rows
    assert main(["check", str(write_workbook(sheets, tmp_path / "bad.xlsx"))]) == 2
    text = "".join(capsys.readouterr())
    assert "sheet 'allowances', row 2, column 'sell_price_per_t'" in text


def test_template_has_the_allowances_sheet_with_notes(tmp_path):
    path = tmp_path / "t.xlsx"
    assert main(["template", str(path)]) == 0
    wb = load_workbook(path)
    ws = wb["allowances"]
    assert [c.value for c in ws[1]] == HEADER
    assert ws["A2"].value.startswith("#")
    assert "holding_st" in ws["B1"].comment.text
    notes = {(r[0].value, r[1].value): r[2].value for r in wb["notes"].iter_rows(min_row=2)
             if r[0].value}
    assert ("allowances", "sell_price_per_t") in notes
    assert "at most the buy price" in notes[("allowances", "sell_price_per_t")]
    keys = [r[0].value for r in wb["scrubber"].iter_rows(min_row=2)]
    assert "removal_min_pct" in keys and "removal_max_pct" in keys
