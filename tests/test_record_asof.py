"""Planning from the record (plan --db --as-of): opening stock rolled from the survey,
month-to-date contract tonnes, booked orders firm, history extended, the plan stored as
a version; diff and review.  The same tests on SQLite and on a real PostgreSQL server."""

from __future__ import annotations

import datetime as dt
import json

import pandas as pd
import pytest
from molmass import Formula

from reagentplan.cli import main
from reagentplan.record.asof import apply_asof, asof_state, load_record
from reagentplan.record.db import connect
from reagentplan.scenario import load_scenario

from helpers import START
from record_data import day, record_sheets, scenario_path, write_record

AS_OF = START - dt.timedelta(days=1)  # 2030-03-03, day(6)

# IUPAC standard atomic weights through molmass (independent of the package's periodictable)
M_S, M_SO2 = Formula("S").mass, Formula("SO2").mass
M_CACO3, M_GYP = Formula("CaCO3").mass, Formula("CaSO4H4O2").mass


def limestone_by_hand(mwh: float) -> float:
    """The minimal station's limestone use [t/d]: coal = MWh x 10 GJ/MWh / 25 GJ/t; 2 % S,
    95 % to SO2 (AP-42 1.1), 97 % removed, Ca/S 1.03, 94 % CaCO3."""
    coal = mwh * 10 / 25
    removed_kmol = coal * 0.02 * 0.95 * 0.97 / M_S
    return removed_kmol * 1.03 * M_CACO3 / 0.94


def gypsum_wet_by_hand(mwh: float) -> float:
    """Wet cake [t/d]: gypsum (100 % oxidised) + excess CaCO3 + limestone inerts (6 %),
    no fly ash slip (precipitator 100 %), 10 % free moisture."""
    coal = mwh * 10 / 25
    removed_kmol = coal * 0.02 * 0.95 * 0.97 / M_S
    limestone = limestone_by_hand(mwh)
    dry = removed_kmol * M_GYP + removed_kmol * 0.03 * M_CACO3 + limestone * 0.06
    return dry / 0.9


@pytest.fixture
def recorded(db_url, tmp_path):
    assert main(["db", "upgrade", "--db", db_url]) == 0
    wb = scenario_path(tmp_path)
    path = write_record(record_sheets(), tmp_path / "week.xlsx")
    assert main(["record", str(path), "--db", db_url, "--scenario", str(wb), "--as-of",
                 f"{AS_OF}"]) == 0
    return db_url, wb


def test_opening_stock_rolled_forward_by_hand(recorded):
    url, wb = recorded
    scn = load_scenario(wb)
    engine = connect(url)
    state = asof_state(scn, load_record(engine), AS_OF)
    engine.dispose()
    mwh = [2400.0 + i for i in range(1, 7)]  # the recorded days after the survey
    lime = 2500 + 985.5 + 1010 - sum(limestone_by_hand(m) for m in mwh)
    gyp = 900 + sum(gypsum_wet_by_hand(m) for m in mwh) - 98 - 120
    # tolerance: the two libraries' sulfur differs by 1.6e-4 (32.065 vs IUPAC's abridged 32.06),
    # on about 360 t used and 1,000 t made
    assert state.opening["limestone"].level_t == pytest.approx(lime, abs=0.2)
    assert state.opening["gypsum"].level_t == pytest.approx(gyp, abs=0.5)
    assert state.opening["limestone"].survey_date == day(0)
    assert state.opening["limestone"].days_rolled == 6
    # never surveyed: the workbook's initial level, rolled from the day before its start
    assert state.opening["fly_ash"].survey_date is None
    assert state.opening["fly_ash"].level_t == pytest.approx(500, abs=1e-9)
    # CaCO3 of a well-mixed store, tonnage-weighted: by hand, day by day
    level, q = 2500.0, 94.0
    arrivals = {2: (985.5, 93.0), 5: (1010.0, 95.0)}
    for i, m in enumerate(mwh, start=1):
        kept = level - limestone_by_hand(m)
        t, qa = arrivals.get(i, (0.0, 0.0))
        q = (kept * q + t * qa) / (kept + t)
        level = kept + t
    assert state.opening_caco3_pct == pytest.approx(q, abs=2e-3)
    # month-to-date: only the arrival of March 2 lies in the first planned month
    assert state.month_to_date["Quarry Q rail"] == pytest.approx(1010.0)
    # booked orders after the day are firm; the cancelled one is not
    assert [(o.date, o.loads, o.tonnes) for o in state.firm_orders] == [(START + dt.timedelta(days=3), 1, 1000.0)]
    # history: the recorded generation and lab results extend the workbook's
    planned = apply_asof(scn, state)
    assert planned.plant.start_date == START
    hist = planned.generation_history.set_index("date")["mwh"]
    assert hist[pd.Timestamp(day(3))] == 2403.0
    labs = planned.coal_quality_history
    assert set(labs["date"]) == {pd.Timestamp(day(1)), pd.Timestamp(day(4))}
    assert planned.storage["limestone"].initial_t == state.opening["limestone"].level_t
    assert planned.scrubber.limestone_caco3_pct == state.opening_caco3_pct
    # shipments and arrivals were recorded after the surveys: nothing assumed about them
    assert not any("none assumed" in a for a in state.assumptions)


def test_a_roll_with_no_movements_recorded_says_so(db_url, tmp_path):
    """Only a survey: the book rolls production forward with no haul-outs, and says so."""
    assert main(["db", "upgrade", "--db", db_url]) == 0
    wb = scenario_path(tmp_path)
    full = record_sheets()
    sheets = {k: full[k] for k in ("stock_surveys", "generation_history")}
    assert main(["record", str(write_record(sheets, tmp_path / "s.xlsx")), "--db", db_url,
                 "--as-of", f"{AS_OF}"]) == 0
    engine = connect(db_url)
    state = asof_state(load_scenario(wb), load_record(engine), AS_OF)
    engine.dispose()
    said = [a for a in state.assumptions if "none assumed" in a]
    assert any(a.startswith("gypsum: no shipments recorded") for a in said)
    assert any(a.startswith("limestone: no arrivals recorded") for a in said)


def test_plan_from_the_record_diff_and_review(recorded, tmp_path, capsys):
    url, wb = recorded
    out1 = tmp_path / "plan1"
    code = main(["plan", str(wb), "--db", url, "--as-of", f"{AS_OF}", "--out", str(out1),
                 "--futures", "0"])
    assert code in (0, 1)
    summary = json.loads((out1 / "summary.json").read_text())
    assert summary["as_of"] == f"{AS_OF}" and summary["plan_id"] == 1
    assert set(summary["opening_stock"]["limestone"]) >= {"level_t", "survey_date", "days_rolled", "caco3_pct"}
    assert summary["opening_stock"]["limestone"]["survey_date"] == f"{day(0)}"
    mv = pd.read_csv(out1 / "movements.csv", parse_dates=["date"])
    booked = mv[mv["booked"] & (mv["lane"] == "Quarry Q rail")]
    assert list(booked["date"]) == [pd.Timestamp(START + dt.timedelta(days=3))]
    inv = pd.read_csv(out1 / "inventory.csv", parse_dates=["date"])
    assert inv["date"].min() == pd.Timestamp(START)
    # a late train and a new survey, then the weekly re-plan
    as_of2 = START + dt.timedelta(days=2)
    new = {"stock_surveys": [["date", "store", "level_t"], [as_of2, "limestone", 3000]],
           "orders": [["order_id", "date", "supplier", "loads", "tonnes", "status"],
                      ["PO-1", START + dt.timedelta(days=6), "Quarry Q", 1, 1000, "booked"]],
           "generation_history": [["date", "unit", "mwh"]] + [
               [START + dt.timedelta(days=i), "U1", 2500.0] for i in range(3)]}
    path = write_record(new, tmp_path / "week2.xlsx")
    assert main(["record", str(path), "--db", url, "--scenario", str(wb), "--as-of", f"{as_of2}"]) == 2
    assert "PO-1" in capsys.readouterr().err  # the moved order is a conflict ...
    assert main(["record", str(path), "--db", url, "--scenario", str(wb), "--as-of", f"{as_of2}",
                 "--replace"]) == 0  # ... accepted with --replace
    out2 = tmp_path / "plan2"
    assert main(["plan", str(wb), "--db", url, "--as-of", f"{as_of2}", "--out", str(out2),
                 "--futures", "0"]) in (0, 1)
    s2 = json.loads((out2 / "summary.json").read_text())
    assert s2["plan_id"] == 2 and s2["opening_stock"]["limestone"]["level_t"] == 3000
    capsys.readouterr()
    assert main(["diff", "--db", url, "--out", str(tmp_path / "diff")]) == 0
    printed = capsys.readouterr().out
    diff = pd.read_csv(tmp_path / "diff" / "orders_changed.csv", parse_dates=["date", "date_before"])
    assert list(diff.columns[:6]) == ["lane", "date", "loads_before", "loads_after", "order_by", "change"]
    q = diff[diff["lane"] == "Quarry Q rail"]
    moved = q[q["change"] == "moved"]
    assert len(moved) == 1
    assert moved["date"].iloc[0] == pd.Timestamp(START + dt.timedelta(days=6))
    assert moved["date_before"].iloc[0] == pd.Timestamp(START + dt.timedelta(days=3))
    # the move came from the record (PO-1 re-booked for a later day): nothing to act on
    assert "came from orders booked, moved or cancelled in the record" in printed
    act = printed.split("Act on these first", 1)[1] if "Act on these first" in printed else ""
    assert "move   Quarry Q rail" not in act
    assert main(["review", "--db", url, "--out", str(tmp_path / "review")]) == 0
    pva = pd.read_csv(tmp_path / "review" / "plan_vs_actual.csv", parse_dates=["date"])
    assert list(pva.columns[:5]) == ["date", "store", "planned_level_t", "book_level_t", "surveyed_level_t"]
    lime = pva[pva["store"] == "limestone"].set_index("date")
    assert lime.loc[pd.Timestamp(as_of2), "surveyed_level_t"] == 3000
    # the plan in force on START was plan 1 (made as of the day before)
    plan1 = inv[(inv["store"] == "limestone") & (inv["date"] == pd.Timestamp(START))]["level_t"].iloc[0]
    assert lime.loc[pd.Timestamp(START), "planned_level_t"] == pytest.approx(plan1, abs=1e-3)
    drift = pd.read_csv(tmp_path / "review" / "survey_drift.csv")
    row = drift[drift["store"] == "limestone"].iloc[0]
    # the book rolled from Feb 25 to START + 2 against the survey of 3,000 t
    use = sum(limestone_by_hand(m) for m in [2400.0 + i for i in range(1, 7)] + [2500.0] * 3)
    assert row["book_level_t"] == pytest.approx(2500 + 985.5 + 1010 - use, abs=0.3)
    assert row["drift_t"] == pytest.approx(row["book_level_t"] - 3000, abs=1e-6)


def test_diff_needs_two_plans(recorded, tmp_path, capsys):
    url, _ = recorded
    assert main(["diff", "--db", url, "--out", str(tmp_path / "d")]) == 2
    assert "0 plan version(s)" in capsys.readouterr().err
