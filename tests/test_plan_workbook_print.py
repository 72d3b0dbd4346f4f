"""plan.xlsx as printed and as charted: readable chart titles and a page setup that
prints each sheet legibly (landscape, one page wide, header rows repeated)."""

from __future__ import annotations

import pytest
from openpyxl import load_workbook

from helpers import minimal_sheets, workbook_bytes
from reagentplan.output import write_plan_workbook
from reagentplan.pipeline import run_plan
from reagentplan.scenario import load_scenario


@pytest.fixture(scope="module")
def plan_xlsx(tmp_path_factory):
    s = minimal_sheets(days=40)
    s["suppliers"].append(["Pit T", "truck", 25, 20, 1, "Mon-Sat", 22, 150, None, 4000])
    run = run_plan(load_scenario(workbook_bytes(s)), futures=10, time_limit=20)
    path = write_plan_workbook(run, tmp_path_factory.mktemp("out") / "plan.xlsx")
    return load_workbook(path)


def _title_text(title) -> str:
    if title is None or title.tx is None or title.tx.rich is None:
        return ""
    return "".join(r.t for p in title.tx.rich.p for r in (p.r or []))


def test_charts_carry_the_unit_in_their_title_not_a_one_letter_axis_title(plan_xlsx):
    charts = plan_xlsx["Store charts"]._charts + plan_xlsx["Contracts"]._charts
    assert charts
    for chart in charts:
        assert _title_text(chart.y_axis.title) != "t"
        assert "[t]" in _title_text(chart.title)


@pytest.fixture(scope="module")
def long_xlsx(tmp_path_factory):
    """A 90-day plan: longer than its 56-day firm window."""
    s = minimal_sheets(days=90)
    run = run_plan(load_scenario(workbook_bytes(s)), futures=0, time_limit=20)
    path = write_plan_workbook(run, tmp_path_factory.mktemp("long") / "plan.xlsx")
    return load_workbook(path), run


def test_every_sheet_prints_across_its_pages_with_headers_and_page_numbers(long_xlsx):
    wb, _ = long_xlsx
    for ws in wb.worksheets:
        ps = ws.page_setup
        assert ws.sheet_properties.pageSetUpPr.fitToPage, ws.title
        assert ps.orientation == ("portrait" if ws.title == "Assumptions" else "landscape"), ws.title
        assert int(ps.fitToHeight) in (0, 1), ws.title
        assert "&P" in ws.oddFooter.right.text and "&A" in ws.oddHeader.center.text, ws.title
        assert ws.page_margins.left <= 0.5, ws.title
    pm = wb["Plant manager"]
    assert int(pm.page_setup.fitToWidth) == 1
    assert pm.print_title_rows == "$1:$1" and pm.print_title_cols == "$A:$A"
    # many columns one page wide: narrow columns with wrapped headers, not 20-character ones
    widths = [pm.column_dimensions[c].width for c in "BCDEFGHIJKLM"]
    assert widths and max(widths) <= 16
    # the daily balance's many columns go on two pages across, the date repeated
    bal = wb["Daily balance"]
    assert int(bal.page_setup.fitToWidth) == -(-bal.max_column // 20) >= 2
    assert bal.print_title_cols == "$A:$A"


def test_daily_sheets_print_the_firm_window_and_say_so(long_xlsx):
    wb, run = long_xlsx
    firm = run.plan.firm_days
    pm = wb["Plant manager"]
    assert pm.max_row == 1 + 90  # the sheet keeps every day
    from openpyxl.utils import get_column_letter

    assert pm.print_area == f"'Plant manager'!$A$1:${get_column_letter(pm.max_column)}${1 + firm}"
    assert int(pm.page_setup.fitToHeight) == 1
    assert "firm window" in pm.oddFooter.left.text
    for name in ("Daily balance", "Sales"):
        assert wb[name].print_area, name
    assert not wb["Coordinator"].print_area  # every order to book is printed
