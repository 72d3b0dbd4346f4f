"""The dashboard with the record: the record tab (plan in force, surveys as points,
recorded movements against the plan, changes since the last plan) and uploads of
actuals through the record's own path (same validation, same conflicts)."""

from __future__ import annotations

import base64
import datetime as dt

import pytest
import sqlalchemy as sa

from reagentplan.dashboard.app import create_app
from reagentplan.dashboard.record_callbacks import record_upload
from reagentplan.dashboard.views import record as R
from reagentplan.cli import main
from reagentplan.record.db import connect

from helpers import START
from record_data import day, record_sheets, scenario_path, write_record

AS_OF = START - dt.timedelta(days=1)


def _upload(text: str, name: str) -> dict:
    return {"filename": name,
            "contents": "data:text/csv;base64," + base64.b64encode(text.encode()).decode()}


def _count(url: str, table: str) -> int:
    engine = connect(url)
    with engine.connect() as conn:
        n = conn.execute(sa.text(f"SELECT COUNT(*) FROM {table}")).scalar()
    engine.dispose()
    return n


def _find(component, prop_id: str):
    if getattr(component, "id", None) == prop_id:
        return component
    children = getattr(component, "children", None)
    if children is None:
        return None
    for child in children if isinstance(children, (list, tuple)) else [children]:
        if hasattr(child, "to_plotly_json"):
            hit = _find(child, prop_id)
            if hit is not None:
                return hit
    return None


def test_record_tab_and_uploads(tmp_path):
    url = f"sqlite:///{tmp_path / 'r.db'}"
    wb = scenario_path(tmp_path)
    assert main(["db", "upgrade", "--db", url]) == 0
    assert main(["record", str(write_record(record_sheets(), tmp_path / "w.xlsx")), "--db", url,
                 "--scenario", str(wb), "--as-of", f"{AS_OF}"]) == 0
    for as_of in (AS_OF - dt.timedelta(days=3), AS_OF):
        assert main(["plan", str(wb), "--db", url, "--as-of", f"{as_of}", "--out",
                     str(tmp_path / f"p{as_of}"), "--futures", "0"]) in (0, 1)
    app = create_app(str(wb), db=url, futures=0, time_limit=20, work_dir=tmp_path / "app")
    layout = app.layout
    head = _find(layout, "record-plan-in-force")
    assert head is not None and "Plan version 2 in force" in str(head.children)
    fig = _find(layout, "record-store-limestone").figure
    surveyed = [t for t in fig.data if t.name == "surveyed"][0]
    assert list(surveyed.y) == [2500.0]  # the recorded survey, as a point
    assert [t.name for t in fig.data][:2] == ["plan in force", "book (rolled from surveys)"]
    assert _find(layout, "record-change-summary") is not None
    # one survey per store: no calibration, and the tab says why
    assert "No calibration" in str(_find(layout, "record-calibration-table").children)
    weekly = _find(layout, R.WEEKLY).figure
    assert any(t.name == "limestone in: recorded" for t in weekly.data)
    source = app.reagentplan.record
    # without --as-of the dashboard plans from the newest recorded fact (an arrival on day 5)
    assert f"from the record as of {day(5)}" in str(layout)
    # a good upload lands, through the record's own path
    msg, ok = record_upload(source, _upload(f"date,store,level_t\n{AS_OF},gypsum,1300\n",
                                            "stock_surveys.csv"), False)
    assert ok and "1 added" in msg
    assert _count(url, "stock_surveys") == 3
    # the same again: nothing new
    msg, ok = record_upload(source, _upload(f"date,store,level_t\n{AS_OF},gypsum,1300\n",
                                            "stock_surveys.csv"), False)
    assert ok and "Nothing new" in msg
    # a conflict is refused whole and named, then accepted with replace
    conflict = _upload(f"date,store,level_t\n{AS_OF},gypsum,1250\n", "stock_surveys.csv")
    msg, ok = record_upload(source, conflict, False)
    assert not ok and "row 2" in msg and "1300" in msg and "1250" in msg and "Nothing was recorded" in msg
    msg, ok = record_upload(source, conflict, True)
    assert ok and "1 replaced" in msg
    assert _count(url, "replaced_values") == 1
    # bad input: named like the command line, nothing written
    msg, ok = record_upload(source, _upload(f"date,supplier,loads,tonnes,ticket\n{day(3)},Quarry W,1,990,X1\n",
                                            "arrivals.csv"), False)
    assert not ok and "sheet 'arrivals.csv', row 2, column 'supplier'" in msg and "did you mean 'Quarry Q'" in msg
    assert _count(url, "arrivals") == 2


def test_weekly_chart_legend_sits_below_the_plot_not_over_its_title():
    """Four materials in and out, recorded and planned: eight legend entries, two rows.
    The legend is anchored to the foot of the figure (below the dates), and the bottom
    margin holds its rows, so it cannot grow up over the title as it did above the plot."""
    import pandas as pd

    from reagentplan.dashboard.figures import LEGEND_ROW_PX, legend_rows
    from reagentplan.dashboard.record_figures import weekly_figure

    weeks = pd.date_range("2027-01-04", periods=6, freq="W-MON")
    rows = [{"week": w, "direction": d, "material": m, "planned_t": 100.0, "recorded_t": 90.0}
            for w in weeks for d, m in (("in", "limestone"), ("out", "gypsum"), ("out", "fly_ash"),
                                         ("out", "bottom_ash"))]
    fig = weekly_figure(pd.DataFrame(rows))
    legend, margin = fig.layout.legend, fig.layout.margin
    assert sum(t.showlegend is not False for t in fig.data) == 8 and legend_rows(fig) == 2
    assert legend.orientation == "h" and legend.yref == "container"
    assert legend.yanchor == "bottom" and legend.y < 0.05
    assert margin.b >= 2 * LEGEND_ROW_PX + 50  # the dates' two lines and the legend's two rows
    assert fig.layout.height - margin.b - margin.t >= 150  # still room to plot


def test_a_record_of_one_week_draws_its_bars_a_week_wide_with_the_plan_over_each():
    """One recorded week gave Plotly no spacing to take a bar's width from: the bars were
    a millisecond wide on an axis of milliseconds.  Each bar now has its width and place
    in the week [ms], and its planned tonnes are drawn over its own bar."""
    import pandas as pd

    from reagentplan.dashboard.record_figures import BARS_FILL, WEEK_MS, weekly_figure

    week = pd.Timestamp("2030-02-25")
    rows = [{"week": week, "direction": d, "material": m, "planned_t": 500.0, "recorded_t": 400.0}
            for d, m in (("in", "limestone"), ("out", "gypsum"), ("out", "fly_ash"))]
    fig = weekly_figure(pd.DataFrame(rows))
    bars = [t for t in fig.data if t.type == "bar"]
    planned = [t for t in fig.data if t.type == "scatter"]
    assert len(bars) == 3 and all(b.width >= 86_400_000 for b in bars)  # at least a day wide
    assert sum(b.width for b in bars) == pytest.approx(WEEK_MS * BARS_FILL)
    lefts = sorted(b.offset for b in bars)
    assert lefts[1] - lefts[0] == pytest.approx(bars[0].width)  # side by side, not on top of each other
    for b, p in zip(bars, planned):
        centre = week + pd.Timedelta(milliseconds=b.offset + b.width / 2)
        assert pd.Timestamp(p.x[0]) == centre
    assert fig.layout.xaxis.dtick == WEEK_MS  # a tick a week, not one a millisecond


def test_a_stores_legend_sits_at_the_foot_not_over_its_title():
    """Three entries in a card a third of the page wide wrapped over the title; at the
    foot of the figure with room for two rows they cannot."""
    import pandas as pd

    from reagentplan.dashboard.figures import LEGEND_ROW_PX
    from reagentplan.dashboard.record_figures import record_store_figure

    days = pd.date_range("2030-02-25", periods=5)
    pva = pd.DataFrame({"date": days, "store": "limestone", "planned_level_t": 3000.0,
                        "book_level_t": 2900.0, "surveyed_level_t": [2500.0, None, None, None, None]})
    fig = record_store_figure(pva, "limestone")
    assert fig.layout.legend.yref == "container" and fig.layout.legend.yanchor == "bottom"
    assert fig.layout.margin.b >= 2 * LEGEND_ROW_PX + 60
