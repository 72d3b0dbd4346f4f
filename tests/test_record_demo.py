"""The demo's weekly loop on a short horizon: every week is recorded and re-planned,
the scripted events happen, and the record holds what was recorded."""

from __future__ import annotations

import sqlalchemy as sa

from reagentplan.demo.build_demo import build_demo_workbook
from reagentplan.demo.record_demo import describe_weeks, weekly_loop
from reagentplan.cli import main
from reagentplan.record.db import connect


def test_weekly_loop_short(tmp_path):
    weeks, horizon = 4, 21
    wb = build_demo_workbook(tmp_path / "w.xlsx", horizon_days=horizon + 7 * weeks)
    reports = weekly_loop(wb, tmp_path / "weekly", weeks=weeks, horizon_days=horizon, time_limit=20)
    assert [r.week for r in reports] == [1, 2, 3, 4]
    assert [r.plan_id for r in reports] == [2, 3, 4, 5]
    text = describe_weeks(reports)
    assert "lab results" in text and "week 4" in text
    for r in reports:
        surveyed, book = r.surveys["limestone"]
        # the survey is the book less the real plant's extra use, with 0.7 % noise
        assert abs(surveyed - book) < 0.1 * book
    url = f"sqlite:///{tmp_path / 'weekly' / 'record.db'}"
    engine = connect(url)
    with engine.connect() as conn:
        n_surveys = conn.execute(sa.text("SELECT COUNT(*) FROM stock_surveys")).scalar()
        n_plans = conn.execute(sa.text("SELECT COUNT(*) FROM plan_versions")).scalar()
        n_gen = conn.execute(sa.text("SELECT COUNT(*) FROM generation_history")).scalar()
    engine.dispose()
    assert n_surveys == 4 + 2 * weeks   # the opening survey of every store, then two a week
    assert n_plans == weeks + 1
    assert n_gen == 2 * 7 * weeks       # two units, every day
    assert main(["review", "--db", url, "--out", str(tmp_path / "review")]) == 0
    assert (tmp_path / "review" / "plan_vs_actual.csv").exists()
    # the plant's real Ca/S (0.05 above the workbook's) shows through the record
    assert main(["calibrate", "--db", url, "--scenario", str(wb), "--out", str(tmp_path / "cal")]) == 0
    import pandas as pd

    from reagentplan.demo.record_demo import TRUE_CA_S_STEP
    from reagentplan.scenario import load_scenario

    cal = pd.read_csv(tmp_path / "cal" / "calibration.csv").set_index("key")
    wb_ca_s = load_scenario(wb).scrubber.ca_s_ratio
    assert cal.at["ca_s_ratio", "low"] > wb_ca_s  # the workbook's value is refuted
    assert abs(cal.at["ca_s_ratio", "fitted_value"] - (wb_ca_s + TRUE_CA_S_STEP)) < 0.03
