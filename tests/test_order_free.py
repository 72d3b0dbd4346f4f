"""Order-free dated tables: rows pasted unit by unit or source by source, or in any
order, load as if written in date order; duplicates of a key are still refused, with
both rows named."""

from __future__ import annotations

import datetime as dt
import random

import pandas as pd
import pytest

from helpers import (START, history_rows, lab_sheet, minimal_sheets, synthetic_history,
                     synthetic_labs, workbook_bytes)
from reagentplan.errors import ScenarioError
from reagentplan.scenario import load_scenario


def two_unit_sheets() -> dict:
    s = minimal_sheets(days=10)
    s["units"].append(["U2", 300, 9.8, 0])
    s["generation"] += [[START + dt.timedelta(days=i), "U2", 4000.0] for i in range(10)]
    hist = synthetic_history({"U1": 200, "U2": 300}, days=60, seed=3)
    s["generation_history"] = history_rows(hist)
    s["coal_quality_history"] = lab_sheet(synthetic_labs("Coal A", 60, 2.0, 0.15, 0.6, seed=1),
                                          synthetic_labs("Coal B", 60, 0.5, 0.05, 0.6, seed=2))
    return s


def by_unit(rows: list[list], col: int = 1) -> list[list]:
    """The rows as pasted one unit (or source) after another."""
    return [rows[0]] + sorted(rows[1:], key=lambda r: (r[col], r[0]))


def frames_equal(a: pd.DataFrame, b: pd.DataFrame) -> None:
    pd.testing.assert_frame_equal(a.reset_index(drop=True), b.reset_index(drop=True))


def test_history_pasted_unit_by_unit_loads_as_in_date_order():
    ordered = two_unit_sheets()
    pasted = two_unit_sheets()
    for name in ("generation", "generation_history", "coal_quality_history"):
        pasted[name] = by_unit(pasted[name])
    assert pasted["generation_history"][1][1] == "U1" and pasted["generation_history"][-1][1] == "U2"
    a = load_scenario(workbook_bytes(ordered))
    b = load_scenario(workbook_bytes(pasted))
    for attr in ("generation", "generation_history", "coal_quality_history", "coal_blend"):
        frames_equal(getattr(a, attr), getattr(b, attr))
        assert getattr(b, attr)["date"].is_monotonic_increasing


def test_rows_in_any_order_give_the_same_scenario():
    ordered = two_unit_sheets()
    shuffled = two_unit_sheets()
    rng = random.Random(7)
    for name in ("generation", "generation_history", "coal_quality_history"):
        body = shuffled[name][1:]
        rng.shuffle(body)
        shuffled[name] = [shuffled[name][0]] + body
    ordered["coal_blend"] += [[START + dt.timedelta(days=4), "Coal A", 50],
                              [START + dt.timedelta(days=4), "Coal B", 50]]
    shuffled["coal_blend"] = [shuffled["coal_blend"][0], [START + dt.timedelta(days=4), "Coal B", 50],
                              shuffled["coal_blend"][1], [START + dt.timedelta(days=4), "Coal A", 50]]
    a = load_scenario(workbook_bytes(ordered))
    b = load_scenario(workbook_bytes(shuffled))
    frames_equal(a.generation_history, b.generation_history)
    frames_equal(a.generation, b.generation)
    frames_equal(a.blend_matrix(), b.blend_matrix())
    assert b.blend_matrix().iloc[5].tolist() == [0.5, 0.5]


def test_duplicates_are_refused_with_both_rows_named_whatever_the_order():
    s = two_unit_sheets()
    s["generation_history"] = by_unit(s["generation_history"])
    # U1's tenth day again, pasted at the end (after all of U2's rows)
    dup = list(s["generation_history"][10])
    s["generation_history"].append(dup)
    last_row = len(s["generation_history"])  # Excel row of the appended copy
    with pytest.raises(ScenarioError) as info:
        load_scenario(workbook_bytes(s))
    msgs = [str(p) for p in info.value.problems]
    hit = [m for m in msgs if f"row {last_row}," in m and "duplicate of row 11" in m]
    assert hit, msgs
    assert "sheet 'generation_history'" in hit[0] and "one row per date and unit" in hit[0]


def test_gaps_are_still_found_after_sorting():
    s = two_unit_sheets()
    s["generation_history"] = by_unit(s["generation_history"])
    gone = s["generation_history"].pop(20)  # one of U1's days
    with pytest.raises(ScenarioError) as info:
        load_scenario(workbook_bytes(s))
    text = info.value.report()
    assert f"U1 has no rows for the 1 day(s) from {gone[0]:%Y-%m-%d}" in text


def test_any_table_of_fields_gets_the_loaders_checks_through_read_table():
    """The operations record's sheets use the same function: sorting, duplicates and
    usual ranges by column name."""
    import io

    from openpyxl import Workbook

    from reagentplan import schema
    from reagentplan.scenario import read_table
    from reagentplan.workbook import read_raw

    sheet = schema.Sheet("lab_results", key=("date", "source"), sort_by=("date", "source"),
                         fields=(schema.Field("date", "date"), schema.Field("source", "text"),
                                 schema.Field("sulfur_pct", unit="%")))
    wb = Workbook()
    ws = wb.active
    ws.title = "lab_results"
    for row in (["date", "source", "sulfur_pct"], [START, "B", 0.5], [START - dt.timedelta(days=1), "A", 9.0],
                [START, "B", 0.6]):
        ws.append(row)
    buf = io.BytesIO()
    wb.save(buf)
    records, problems, warnings = read_table(read_raw(buf.getvalue())["lab_results"], sheet)
    assert [r["_row"] for r in records] == [3, 2]
    assert len(problems) == 1 and "a duplicate of row 2" in str(problems[0])
    assert str(problems[0]).startswith("sheet 'lab_results', row 4")
    [w] = warnings
    assert str(w).startswith("sheet 'lab_results', row 3, column 'sulfur_pct': 9 %")
