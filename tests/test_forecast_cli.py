"""`reagentplan forecast` as a user meets it, and the loader's checks of the history."""

from __future__ import annotations

import datetime as dt

import pandas as pd
import pytest

from helpers import (START, history_only, history_rows, minimal_sheets, synthetic_history,
                     workbook_bytes, write_workbook)
from reagentplan.cli import main
from reagentplan.errors import ScenarioError
from reagentplan.scenario import load_scenario

CONTRACT = ["date", "quantity", "p10", "p50", "p90", "mean"]
QUANTITIES = {"generation_mwh", "sulfur_pct", "limestone_t", "gypsum_wet_t", "fly_ash_t",
              "bottom_ash_t"}


def problems(sheets) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        load_scenario(workbook_bytes(sheets))
    return [str(p) for p in info.value.problems]


def with_history(days_history: int, days: int = 20, seed: int = 1):
    s = history_only(minimal_sheets(days=days))
    s["generation_history"] = history_rows(synthetic_history({"U1": 200.0}, days_history, seed=seed))
    return s


# --------------------------------------------------------------------------- command


def test_forecast_writes_the_contract_columns(tmp_path, capsys):
    path = write_workbook(with_history(800), tmp_path / "station.xlsx")
    out = tmp_path / "out"
    assert main(["forecast", str(path), "--out", str(out), "--futures", "300", "--seed", "4"]) == 0
    f = pd.read_csv(out / "forecast.csv", parse_dates=["date"])
    assert list(f.columns[:6]) == CONTRACT
    assert set(f["quantity"]) == QUANTITIES and len(f) == 20 * 6
    assert f["date"].iloc[0].date() == START
    assert (f["p10"] <= f["p50"]).all() and (f["p50"] <= f["p90"]).all()
    notes = (out / "forecast_notes.txt").read_text()
    assert "yearly season" in notes and "seed: 4" in notes
    text = capsys.readouterr().out
    assert "limestone used" in text and "Caution" in text
    # the same seed writes the same file
    again = tmp_path / "again"
    assert main(["forecast", str(path), "--out", str(again), "--futures", "300", "--seed", "4"]) == 0
    assert (again / "forecast.csv").read_bytes() == (out / "forecast.csv").read_bytes()


def test_forecast_names_the_fallback_of_a_short_history(tmp_path, capsys):
    path = write_workbook(with_history(30), tmp_path / "short.xlsx")
    out = tmp_path / "out"
    assert main(["forecast", str(path), "--out", str(out), "--futures", "50"]) == 0
    notes = (out / "forecast_notes.txt").read_text()
    assert "fallback: less than eight weeks of history" in notes
    assert "fallback: less than eight weeks of history" in capsys.readouterr().out


def test_backtest_option_writes_and_prints_its_figures(tmp_path, capsys):
    path = write_workbook(with_history(500), tmp_path / "station.xlsx")
    out = tmp_path / "out"
    assert main(["forecast", str(path), "--out", str(out), "--futures", "200",
                 "--backtest", "30"]) == 0
    b = pd.read_csv(out / "backtest.csv")
    assert list(b.columns) == ["series", "quantity", "days", "coverage_p10_p90", "mae_median",
                               "mae_seasonal_naive", "mae_trailing_mean", "model"]
    assert b["series"].tolist() == ["U1"] and b["days"].iloc[0] == 30
    assert 0 <= b["coverage_p10_p90"].iloc[0] <= 1
    daily = pd.read_csv(out / "backtest_daily.csv")
    assert len(daily) == 30 and {"actual", "p10", "p50", "p90"} <= set(daily.columns)
    text = capsys.readouterr().out
    assert "Backtest: the last 30 day(s)" in text and "P10-P90" in text
    assert "Backtest" in (out / "forecast_notes.txt").read_text()


def test_backtest_too_long_is_bad_input_and_nothing_is_written(tmp_path, capsys):
    path = write_workbook(with_history(60), tmp_path / "station.xlsx")
    out = tmp_path / "out"
    assert main(["forecast", str(path), "--out", str(out), "--backtest", "55"]) == 2
    err = capsys.readouterr().err
    assert "sheet 'generation_history'" in err and "Traceback" not in err
    assert not out.exists()


def test_forecast_without_history_or_a_bad_count(tmp_path, capsys):
    path = write_workbook(minimal_sheets(days=5), tmp_path / "plain.xlsx")
    out = tmp_path / "out"
    assert main(["forecast", str(path), "--out", str(out), "--backtest", "3"]) == 2
    assert "no generation history" in capsys.readouterr().err
    assert main(["forecast", str(path), "--out", str(out), "--futures", "0"]) == 2
    assert "futures" in capsys.readouterr().err
    assert main(["forecast", str(path), "--out", str(out), "--futures", "20"]) == 0
    f = pd.read_csv(out / "forecast.csv")
    assert (f["basis"] == "plan").all()


def test_balance_of_a_history_only_workbook(tmp_path):
    path = write_workbook(with_history(100), tmp_path / "station.xlsx")
    assert main(["balance", str(path), "--out", str(tmp_path / "out")]) == 0
    b = pd.read_csv(tmp_path / "out" / "balance.csv")
    assert len(b) == 20 and b["generation_mwh"].between(0, 4800).all()
    assert b["generation_mwh"].nunique() > 2  # the weekday profile, not one number


# --------------------------------------------------------------------------- loader


def test_history_gap_names_the_row_and_the_days(sheets):
    s = with_history(60)
    del s["generation_history"][30:33]  # Excel rows 31-33: three days
    m = [p for p in problems(s) if "generation_history" in p and "no rows for" in p]
    assert m, problems(s)
    assert "row 31, column 'date'" in m[0] and "U1 has no rows for the 3 day(s)" in m[0]
    assert "0 MWh for days the unit was off" in m[0]


def test_history_duplicate_and_negative(sheets):
    s = with_history(30)
    rows = s["generation_history"]
    rows.insert(3, list(rows[2]))           # a duplicate day
    rows[5][2] = -10                        # negative MWh
    found = problems(s)
    assert any("row 4" in p and "duplicate of row 3" in p for p in found), found
    assert any("row 6, column 'mwh'" in p and "-10" in p for p in found), found


def test_history_unknown_unit_and_above_capacity(sheets):
    s = with_history(30)
    rows = s["generation_history"]
    rows[7][1] = "U9"                       # not in units
    rows[9][2] = 5000                       # above 200 MW x 24 h
    found = problems(s)
    assert any("row 8, column 'unit'" in p and "unknown unit 'U9'" in p for p in found), found
    assert any("row 10, column 'mwh'" in p and "at most 4800 MWh" in p for p in found), found


def test_a_unit_left_to_the_forecast_needs_history(sheets):
    s = history_only(minimal_sheets(days=10))
    s["generation_history"] = history_rows(synthetic_history({"U1": 200.0}, 5, seed=1))
    m = [p for p in problems(s) if "generation_history" in p]
    assert m and "U1 has 5 day(s) of history" in m[0] and "at least 14 days" in m[0]


def test_history_after_the_start_is_rejected(sheets):
    s = with_history(30)
    s["generation_history"].append([START + dt.timedelta(days=2), "U1", 100.0])
    assert any("not in the past" in p for p in problems(s))
