"""The scrubber's removal range (``removal_min_pct``, ``removal_max_pct``): loading,
its setpoint, and every bad case named by sheet, row and column."""

from __future__ import annotations

import datetime as dt

import pytest

from helpers import START, workbook_bytes, write_workbook
from reagentplan.cli import main
from reagentplan.errors import ScenarioError
from reagentplan.scenario import load_scenario


def with_range(sheets, lo=None, hi=None, removal="keep"):
    """The test scrubber sheet with a range; ``removal=None`` drops the removal_pct row,
    a number writes it."""
    rows = sheets["scrubber"]
    if removal != "keep":
        rows[:] = [r for r in rows if r[0] != "removal_pct"]
        if removal is not None:
            rows.append(["removal_pct", removal])
    if lo is not None:
        rows.append(["removal_min_pct", lo])
    if hi is not None:
        rows.append(["removal_max_pct", hi])
    return sheets


def row_of(sheets, key: str) -> int:
    """The Excel row of a key in the scrubber sheet (header = row 1)."""
    return 1 + next(i for i, r in enumerate(sheets["scrubber"]) if r[0] == key)


def problems(sheets) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        load_scenario(workbook_bytes(sheets))
    return [str(p) for p in info.value.problems]


def test_no_range_keeps_the_fixed_removal(sheets):
    scn = load_scenario(workbook_bytes(sheets))
    assert scn.scrubber.removal_range is None
    assert scn.scrubber.removal_min_pct is None and scn.scrubber.removal_max_pct is None
    assert scn.scrubber.removal_pct == 97.0


def test_range_with_a_written_setpoint_inside(sheets):
    scn = load_scenario(workbook_bytes(with_range(sheets, 95, 99, removal=96.5)))
    assert scn.scrubber.removal_range == (95.0, 99.0)
    assert scn.scrubber.removal_pct == 96.5


@pytest.mark.parametrize("lo, hi, setpoint", [(90, 96, 96.0), (98, 99.5, 98.0), (95, 99, 97.0)])
def test_unwritten_setpoint_is_the_default_clipped_into_the_range(sheets, lo, hi, setpoint):
    scn = load_scenario(workbook_bytes(with_range(sheets, lo, hi, removal=None)))
    assert scn.scrubber.removal_range == (lo, hi)
    assert scn.scrubber.removal_pct == setpoint


def test_empty_removal_cell_counts_as_not_written(sheets):
    with_range(sheets, 98, 99, removal=None)
    sheets["scrubber"].append(["removal_pct", None])
    assert load_scenario(workbook_bytes(sheets)).scrubber.removal_pct == 98.0


def test_a_range_of_one_value_is_allowed(sheets):
    scn = load_scenario(workbook_bytes(with_range(sheets, 96, 96, removal=None)))
    assert scn.scrubber.removal_range == (96.0, 96.0)
    assert scn.scrubber.removal_pct == 96.0


@pytest.mark.parametrize("given, missing", [("removal_min_pct", "removal_max_pct"),
                                            ("removal_max_pct", "removal_min_pct")])
def test_only_one_bound_is_an_error(sheets, given, missing):
    if given == "removal_min_pct":
        with_range(sheets, lo=95)
    else:
        with_range(sheets, hi=99)
    found = problems(sheets)
    assert len(found) == 1
    m = found[0]
    assert f"sheet 'scrubber', row {row_of(sheets, given)}, column 'value ({given})'" in m
    assert f"without {missing}" in m and "or neither" in m


def test_min_above_max_is_an_error(sheets):
    with_range(sheets, 99, 95)
    (m,) = problems(sheets)
    assert f"row {row_of(sheets, 'removal_min_pct')}" in m
    assert "column 'value (removal_min_pct)'" in m
    assert "removal_min_pct = 99 is above removal_max_pct = 95" in m


@pytest.mark.parametrize("key, value", [("removal_min_pct", -1), ("removal_max_pct", 100.5)])
def test_a_bound_outside_the_hard_range_of_removal_is_an_error(sheets, key, value):
    with_range(sheets, 90, 99)
    sheets["scrubber"][row_of(sheets, key) - 1][1] = value
    found = [m for m in problems(sheets) if f"value ({key})" in m]
    assert found, problems(sheets)
    assert f"sheet 'scrubber', row {row_of(sheets, key)}" in found[0]
    assert f"found {value}" in found[0] and "from 0 to 100" in found[0]


def test_written_setpoint_outside_the_range_is_an_error_that_says_so(sheets):
    with_range(sheets, 90, 95, removal=97)
    (m,) = problems(sheets)
    assert f"sheet 'scrubber', row {row_of(sheets, 'removal_pct')}, column 'value (removal_pct)'" in m
    assert "removal_pct = 97 is outside the removal range 90 to 95 %" in m
    assert "left empty to use 95" in m


def test_unusual_bounds_warn_like_removal(sheets):
    scn = load_scenario(workbook_bytes(with_range(sheets, 80, 99, removal=None)))
    w = [x for x in scn.warnings if x.column == "value (removal_min_pct)"]
    assert len(w) == 1
    assert w[0].sheet == "scrubber" and w[0].row == row_of(sheets, "removal_min_pct")
    assert w[0].found == "80 %" and "90 to 99.5 %" in w[0].usual
    assert not [x for x in scn.warnings if x.column == "value (removal_max_pct)"]


def test_period_setting_outside_the_range_warns_and_still_sets_the_day(sheets):
    with_range(sheets, 95, 99, removal=None)
    sheets["period_settings"] = [["first_date", "last_date", "key", "value"],
                                 [START + dt.timedelta(days=2), START + dt.timedelta(days=4),
                                  "removal_pct", 80]]
    scn = load_scenario(workbook_bytes(sheets))
    w = [x for x in scn.warnings if x.sheet == "period_settings" and "range" in x.usual]
    assert len(w) == 1 and w[0].row == 2 and "95 to 99 %" in w[0].usual
    removal = scn.daily_setting("removal_pct")
    assert list(removal[:2]) == [97.0, 97.0] and list(removal[2:5]) == [80.0] * 3


def test_check_command_exits_2_and_names_the_cell(sheets, tmp_path, capsys):
    path = write_workbook(with_range(sheets, 99, 95), tmp_path / "bad.xlsx")
    assert main(["check", str(path)]) == 2
    text = capsys.readouterr()
    assert "sheet 'scrubber'" in text.out + text.err
    assert "value (removal_min_pct)" in text.out + text.err
