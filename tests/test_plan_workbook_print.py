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
