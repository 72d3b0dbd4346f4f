"""Calibration (`reagentplan calibrate`): the factors fitted from invented records with
known factors (tests/calibrate_data.py) come back within tolerance, their 90 %
intervals hold the truth about 90 % of the time, bad input is refused or marked, and a
plan made with ``--calibrated`` uses and records the fitted values.

The tolerances (Ca/S +-0.02, moisture +-1 point, fly ash share +-2 points from ten weeks
of weekly surveys off by 0.7 %) are the issue's targets; common practice, no source."""

from __future__ import annotations

import dataclasses
import datetime as dt
import json

import numpy as np
import pandas as pd
import pytest

from reagentplan.cli import main
from reagentplan.output.record import write_record_workbook
from reagentplan.record.calibrate import (CALIBRATION_COLUMNS, FACTORS, apply_calibration, balance_model,
                                          calibrate, fit_factors, stone_caco3_by_day, survey_intervals)
from reagentplan.record.db import RecordError
from reagentplan.scenario import load_scenario

from calibrate_data import TRUE, record_sheets_of, synthetic_record, true_levels
from helpers import START, minimal_sheets, write_workbook

TOLERANCE = {"ca_s_ratio": 0.02, "gypsum_moisture_pct": 1.0, "fly_ash_share_pct": 2.0}
AS_OF = START - dt.timedelta(days=1)


@pytest.fixture(scope="module")
def scenario_file(tmp_path_factory):
    return write_workbook(minimal_sheets(30), tmp_path_factory.mktemp("cal") / "station.xlsx")


@pytest.fixture(scope="module")
def scenario(scenario_file):
    return load_scenario(scenario_file)


def _fitted(cal) -> dict[str, float]:
    return dict(zip(cal.table["key"], cal.table["fitted_value"]))


@pytest.mark.parametrize("seed", [1, 2, 3, 4, 5])
def test_ten_weeks_find_the_factors(scenario, seed):
    cal = calibrate(scenario, synthetic_record(scenario, weeks=10, survey_sd=0.007, seed=seed))
    assert list(cal.table.columns) == CALIBRATION_COLUMNS
    fitted = _fitted(cal)
    for key, tol in TOLERANCE.items():
        assert abs(fitted[key] - TRUE[key]) <= tol, (key, fitted[key])
    # the workbook's 1.03 / 10 % / 80 % are far outside: every interval misses them
    assert set(cal.misses()["key"]) == set(TOLERANCE)
    assert set(cal.applied) == set(TOLERANCE)
    # the drift the review measures is explained: under a point of the flow after
    for r in cal.drift.itertuples(index=False):
        assert abs(r.drift_before_pct_of_flow) > 4
        assert abs(r.drift_after_pct_of_flow) < 1.0
    assert (cal.table["days_used"] == 70).all()
    ca_s = cal.table.set_index("key").loc["ca_s_ratio", "note"]
    assert "limestone_caco3_pct 94 %" in ca_s and "cannot tell" in ca_s


def test_lab_results_fit_ca_s_at_the_deliveries_stone(scenario):
    """With caco3_pct on the deliveries (92 % against the workbook's 94 %), the truth's
    stone use follows the stone delivered, and the fitted Ca/S is the true one."""
    rec = synthetic_record(scenario, seed=7, caco3=True)
    # the truth's stone: each day's stone fed from the deliveries' lab results
    first = rec.surveys["date"].min()
    days = pd.date_range(first + pd.Timedelta(days=1), rec.surveys["date"].max())
    model = balance_model(scenario, rec, days[0].date(), days[-1].date())
    use = model.flows(np.zeros((1, 3)))["limestone"][0]
    arr = rec.arrivals.groupby("date").agg(t=("tonnes", "sum"))
    arr["qt"] = (rec.arrivals["tonnes"] * rec.arrivals["caco3_pct"]).groupby(rec.arrivals["date"]).sum() / 100
    t = arr["t"].reindex(days, fill_value=0).to_numpy()
    qt = arr["qt"].reindex(days, fill_value=0).to_numpy()
    q = stone_caco3_by_day(2500.0, 94.0, use, t, qt)
    assert q[0] == 94.0 and 91 < q[-1] < 93.5
    cal = calibrate(scenario, rec)
    note = cal.table.set_index("key").loc["ca_s_ratio", "note"]
    assert "lab results" in note
    # the truth of synthetic_record is at the workbook's 94 % stone: with the lower stone
    # delivered the same stone used per SO2 reads as a lower Ca/S, by about the purity ratio
    fitted = _fitted(cal)["ca_s_ratio"]
    assert fitted < TRUE["ca_s_ratio"] - 0.01


def test_stone_mixing_by_hand():
    # 100 t at 90 %; use 50, then 50 t of 100 % arrive: 100 t at 95 %; use 100 -> empty; 10 t at 80 %
    q = stone_caco3_by_day(100, 90, [50, 0, 100], [50, 0, 10], [50, 0, 8])
    assert q.tolist() == pytest.approx([90, 95, 95])


def test_interval_coverage_200_records(scenario):
    """200 records that differ only in their survey errors: how often each 90 % interval
    holds the truth (measured 2026-12-03: see DEVELOPERS.md, "Calibration")."""
    rec = synthetic_record(scenario, seed=11, survey_sd=0.0)
    first = rec.surveys["date"].min()
    truth = true_levels(scenario, rec, first.date(), 70)
    model = balance_model(scenario, rec, (first + pd.Timedelta(days=1)).date(), rec.surveys["date"].max().date())
    rng = np.random.default_rng(2026)
    base = rec.surveys.copy()
    true_level = np.array([truth.at[d, s] for d, s in zip(base["date"], base["store"])])
    hits = np.zeros(len(FACTORS))
    n = 200
    wb = np.array([model.workbook_value(f, scenario) for f in FACTORS])
    want = np.array([TRUE[f.key] for f in FACTORS]) - wb
    for _ in range(n):
        s = base.assign(level_t=true_level * (1 + rng.normal(0, 0.007, len(base))))
        fit = fit_factors(model, survey_intervals(scenario, rec, first, s))
        hits += (fit.low <= want) & (want <= fit.high)
    coverage = hits / n
    print("coverage", dict(zip([f.key for f in FACTORS], coverage)))
    # 200 draws of a 90 % interval: binomial standard error 2.1 points; three of them
    assert np.all(coverage >= 0.83) and np.all(coverage <= 0.97), coverage


def test_a_store_never_surveyed_is_not_estimable(scenario):
    rec = synthetic_record(scenario, seed=3, stores=("limestone", "gypsum"))
    cal = calibrate(scenario, rec)
    row = cal.table.set_index("key").loc["fly_ash_share_pct"]
    assert pd.isna(row["fitted_value"]) and row["note"].startswith("not estimable")
    assert "fly_ash: 0" in row["note"] and "bottom_ash: 0" in row["note"]
    assert "fly_ash_share_pct" not in cal.applied
    assert abs(_fitted(cal)["ca_s_ratio"] - TRUE["ca_s_ratio"]) <= 0.02


def test_too_few_surveys_exit_2(scenario, tmp_path, scenario_file, capsys):
    rec = synthetic_record(scenario, weeks=1, seed=3)  # one interval per store
    one = dataclasses.replace(rec, surveys=rec.surveys[rec.surveys["store"] == "limestone"])
    with pytest.raises(RecordError, match="interval"):
        calibrate(scenario, one)
    with pytest.raises(RecordError, match="at least two surveys"):
        calibrate(scenario, rec, first=AS_OF)
    # through the command: exit 2, the message, nothing written
    url = f"sqlite:///{tmp_path / 'r.db'}"
    assert main(["db", "upgrade", "--db", url]) == 0
    path = write_record_workbook(record_sheets_of(one), tmp_path / "few.xlsx")
    assert main(["record", str(path), "--db", url, "--scenario", str(scenario_file), "--as-of", f"{AS_OF}"]) == 0
    capsys.readouterr()
    assert main(["calibrate", "--db", url, "--scenario", str(scenario_file), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert "survey-to-survey interval" in err and "Nothing was written" in err
    assert not (tmp_path / "out").exists()


def test_an_interval_too_wide_is_marked(scenario):
    """Three weeks of poor surveys (5 %): the moisture's interval spans more than its
    usual range, so the row says so and the value is not applied."""
    rec = synthetic_record(scenario, weeks=3, seed=2, survey_sd=0.05, stores=("limestone", "gypsum"))
    cal = calibrate(scenario, rec)
    row = cal.table.set_index("key").loc["gypsum_moisture_pct"]
    assert row["note"].startswith("not estimable: the 90 % interval") and "gypsum_moisture_pct" not in cal.applied
    assert np.isfinite(row["fitted_value"])  # shown, with the note: never a silent number


def test_calibrate_command_and_calibrated_plan(tmp_path, scenario_file, scenario, capsys):
    url = f"sqlite:///{tmp_path / 'r.db'}"
    assert main(["db", "upgrade", "--db", url]) == 0
    rec = synthetic_record(scenario, seed=2)
    path = write_record_workbook(record_sheets_of(rec), tmp_path / "ten_weeks.xlsx")
    assert main(["record", str(path), "--db", url, "--scenario", str(scenario_file), "--as-of", f"{AS_OF}"]) == 0
    capsys.readouterr()
    out = tmp_path / "cal"
    assert main(["calibrate", "--db", url, "--scenario", str(scenario_file), "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "contradicts the workbook" in text and "scrubber.ca_s_ratio" in text
    assert "limestone" in text and "->" in text
    table = pd.read_csv(out / "calibration.csv")
    assert list(table.columns) == CALIBRATION_COLUMNS
    fitted = dict(zip(table["key"], table["fitted_value"]))
    for key, tol in TOLERANCE.items():
        assert abs(fitted[key] - TRUE[key]) <= tol
    assert (out / "calibration_drift.csv").exists()
    # --from / --to narrow the window
    assert main(["calibrate", "--db", url, "--scenario", str(scenario_file), "--out", str(tmp_path / "cal2"),
                 "--from", f"{AS_OF - dt.timedelta(days=35)}", "--to", f"{AS_OF}"]) == 0
    t2 = pd.read_csv(tmp_path / "cal2" / "calibration.csv")
    assert (t2["days_used"] == 35).all()

    # a plan from the record, then one with the fitted values: both stored, told apart
    assert main(["plan", str(scenario_file), "--db", url, "--as-of", f"{AS_OF}", "--out", str(tmp_path / "p1"),
                 "--futures", "0", "--time-limit", "20"]) in (0, 1)
    assert main(["plan", str(scenario_file), "--db", url, "--as-of", f"{AS_OF}", "--out", str(tmp_path / "p2"),
                 "--futures", "0", "--time-limit", "20", "--calibrated"]) in (0, 1)
    text = capsys.readouterr().out
    assert "calibrated" in text
    s1 = json.loads((tmp_path / "p1" / "summary.json").read_text())
    s2 = json.loads((tmp_path / "p2" / "summary.json").read_text())
    assert "calibration" not in s1
    cal = s2["calibration"]
    assert set(cal["applied"]) == set(TOLERANCE)
    assert abs(cal["applied"]["ca_s_ratio"] - TRUE["ca_s_ratio"]) <= 0.02
    # the calibrated plan uses more stone a day, as the plant does
    b1 = pd.read_csv(tmp_path / "p1" / "balance.csv")
    b2 = pd.read_csv(tmp_path / "p2" / "balance.csv")
    assert b2["limestone_t"].sum() / b1["limestone_t"].sum() == pytest.approx(
        cal["applied"]["ca_s_ratio"] / 1.03, rel=0.01)
    assert main(["diff", "--db", url, "--out", str(tmp_path / "d")]) == 0
    text = capsys.readouterr().out
    assert "plan 2 (calibrated" in text.lower() or "calibrated: ca_s_ratio" in text
    # reviewed into the planned days: the calibrated plan is the one in force, and said so
    assert main(["review", "--db", url, "--scenario", str(scenario_file), "--out", str(tmp_path / "rv"),
                 "--until", f"{START + dt.timedelta(days=5)}"]) == 0
    text = capsys.readouterr().out
    assert "plan 2: calibrated: ca_s_ratio 1.030 ->" in text


def test_apply_calibration_is_pure(scenario):
    cal = calibrate(scenario, synthetic_record(scenario, seed=4))
    applied = apply_calibration(scenario, cal)
    assert applied.scrubber.ca_s_ratio == pytest.approx(cal.applied["ca_s_ratio"])
    assert applied.plant.fly_ash_share_pct == pytest.approx(cal.applied["fly_ash_share_pct"])
    assert scenario.scrubber.ca_s_ratio == 1.03


def test_record_tab_shows_the_fitted_factors(tmp_path, scenario_file, scenario):
    from reagentplan.dashboard.views import record as R
    from reagentplan.record.db import connect
    from reagentplan.record.overview import overview

    url = f"sqlite:///{tmp_path / 'r.db'}"
    assert main(["db", "upgrade", "--db", url]) == 0
    path = write_record_workbook(record_sheets_of(synthetic_record(scenario, seed=2)), tmp_path / "r.xlsx")
    assert main(["record", str(path), "--db", url, "--scenario", str(scenario_file), "--as-of", f"{AS_OF}"]) == 0
    engine = connect(url)
    ov = overview(engine, scenario)
    engine.dispose()
    view = ov.calibration.view()
    assert list(view["status"]) == ["contradicts the workbook"] * 3
    text = str(R.calibration(ov))
    assert "1.030" in text and "contradicts the workbook" in text and "record-calibration-drift" in text


def test_only_the_gypsum_surveyed_holds_ca_s(scenario):
    """Gypsum responds weakly to the Ca/S too, but without limestone surveys the Ca/S is
    not estimated from it: it is held, and the moisture's row says it was fitted so."""
    cal = calibrate(scenario, synthetic_record(scenario, seed=1, stores=("gypsum",)))
    t = cal.table.set_index("key")
    assert pd.isna(t.at["ca_s_ratio", "fitted_value"])
    assert "no store it mainly moves (limestone)" in t.at["ca_s_ratio", "note"]
    assert "taken with ca_s_ratio at the workbook's value" in t.at["gypsum_moisture_pct", "note"]
    assert set(cal.applied) == {"gypsum_moisture_pct"}
