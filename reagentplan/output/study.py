"""The files of a study: ``study.csv``, ``study.xlsx`` (the table, a chart of expected
cost against risk per case, and notes), ``study.json``, and the winner's plan folder
``winner/`` as `reagentplan plan` writes it (DESIGN §7)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from openpyxl import Workbook
from openpyxl.chart import Reference, ScatterChart, Series
from openpyxl.chart.marker import Marker

from .. import CAUTION
from .files import save_workbook, write_csv, write_json
from .plan_workbook import NOTE_FONT, TITLE_FONT, _frame_to_sheet
from .run import write_run

#: A chart series per case up to this many cases (each named in the legend); one
#: series for all of them beyond.
MAX_NAMED_SERIES = 30
#: Marker colours: the winner in ochre, the others in slate.
CASE_COLOUR, WINNER_COLOUR = "2F4858", "C98B2B"

COLUMN_NOTES = (
    ("case", "case number (the grid's combinations in order)"),
    ("(one column per --vary)", "the value of that workbook cell in this case"),
    ("status", "optimal / feasible (solver stopped at its time limit, with a plan) / failed / "
               "timeout / not run (interrupted)"),
    ("total_cost", "the plan's cost as `reagentplan plan` prices it (deterministic balance, "
                   "with the end-stock value)"),
    ("cost_p10, cost_p50, cost_p90", "the plan's cost in each sampled future (movements held "
                                     "fixed, penalties of that future), quantiles over futures"),
    ("p_limestone_below_safety", "highest over the days of the share of futures with limestone "
                                 "below safety stock that day"),
    ("p_any_over_capacity", "highest over the days of the share of futures with any byproduct "
                            "store over capacity that day"),
    ("trains, trucks", "limestone loads booked by rail and by truck"),
    ("sold_t, landfilled_t", "byproduct tonnes sold and landfilled"),
    ("solve_seconds", "solver time of the plan"),
    ("expected_cost", "mean cost over the futures: the winner is the case lowest in it "
                      "within the risk level"),
    ("futures", "shared: the shared futures through this case's balance; resampled: a driver "
                "input varied, futures sampled again with the same seed"),
)


def _chart_sheet(wb: Workbook, frame: pd.DataFrame, winner: int | None, currency: str) -> None:
    ws = wb.create_sheet("chart")
    ws.cell(1, 1, "Expected cost against risk, per case").font = TITLE_FONT
    ws.cell(2, 1, "risk = the higher of p_limestone_below_safety and p_any_over_capacity; "
                  "cases without a plan are left out").font = NOTE_FONT
    planned = frame[frame["status"].isin(("optimal", "feasible"))]
    data = pd.DataFrame({
        "case": planned["case"].astype(int),
        "risk [%]": 100 * planned[["p_limestone_below_safety", "p_any_over_capacity"]]
        .astype(float).max(axis=1),
        f"expected cost [{currency}]": planned["expected_cost"].astype(float),
        f"P90 cost [{currency}]": planned["cost_p90"].astype(float),
    })
    _frame_to_sheet(ws, data, start_row=4, formats={"risk [%]": "0.0",
                                                    f"expected cost [{currency}]": "#,##0",
                                                    f"P90 cost [{currency}]": "#,##0"})
    n = len(data)
    if n == 0:
        return
    chart = ScatterChart()
    chart.title = "Expected cost against risk"
    chart.style = 13
    chart.x_axis.title = "risk: highest daily chance of breaking a store limit [%]"
    chart.y_axis.title = f"expected cost [{currency}]"
    chart.x_axis.delete = False
    chart.y_axis.delete = False
    chart.height, chart.width = 11, 20
    first = 5
    rows = [(first + i, int(c)) for i, c in enumerate(data["case"])]
    groups = ([(r, r, f"case {c}", c == winner) for r, c in rows] if n <= MAX_NAMED_SERIES
              else [(first, first + n - 1, "cases", False)])
    for a, b, name, is_winner in groups:
        xs = Reference(ws, min_col=2, min_row=a, max_row=b)
        ys = Reference(ws, min_col=3, min_row=a, max_row=b)
        s = Series(ys, xs, title=name + (" (winner)" if is_winner else ""))
        s.marker = Marker(symbol="diamond" if is_winner else "circle", size=9 if is_winner else 7)
        colour = WINNER_COLOUR if is_winner else CASE_COLOUR
        s.marker.graphicalProperties.solidFill = colour
        s.marker.graphicalProperties.line.solidFill = colour
        s.graphicalProperties.line.noFill = True
        chart.series.append(s)
    ws.add_chart(chart, "F4")


def write_study_workbook(frame: pd.DataFrame, path: Path, *, winner: int | None, reason: str,
                         currency: str, meta: dict) -> Path:
    """``study.xlsx``: the table (sheet ``study``), the chart, and notes."""
    wb = Workbook()
    ws = wb.active
    ws.title = "study"
    _frame_to_sheet(ws, frame, formats={c: "#,##0" for c in frame.columns
                                        if c.endswith("cost") or c.startswith("cost_")})
    _chart_sheet(wb, frame, winner, currency)
    notes = wb.create_sheet("notes")
    notes.cell(1, 1, "The study").font = TITLE_FONT
    lines = [("winner", f"case {winner}" if winner is not None else "none"), ("why", reason)]
    lines += [(k, str(v)) for k, v in meta.items()]
    lines += [("", ""), ("column", "meaning")] + list(COLUMN_NOTES) + [("", ""), ("caution", CAUTION)]
    for i, (k, v) in enumerate(lines, start=3):
        notes.cell(i, 1, k)
        notes.cell(i, 2, v)
    notes.column_dimensions["A"].width = 30
    notes.column_dimensions["B"].width = 120
    return save_workbook(wb, path)


def study_meta(result) -> dict:
    """Settings and provenance of a study, for ``study.json`` and the notes sheet."""
    s = result.settings
    shared = int((result.frame["futures"] == "shared").sum())
    return {
        "workbook": result.grid.base.source_name, "station": result.grid.base.plant.name,
        "vary": [spec.text for spec in result.grid.specs], "cases": len(result.frame),
        "futures": result.shared.n_futures, "seed": result.shared.seed,
        "risk_level": s.risk_level, "solver": s.solver, "time_limit": s.time_limit,
        "firm_days": s.firm_days, "case_timeout": result.case_timeout,
        "cluster": result.run.where, "workers": result.run.workers,
        "seconds": round(result.run.seconds, 2), "interrupted": result.run.interrupted,
        "cases_on_shared_futures": shared,
        "cases_resampled": len(result.frame) - shared,
        "currency": result.grid.base.plant.currency,
    }


def write_study(result, folder: Path) -> list[Path]:
    """Every file of a study (`reagentplan.study.study.StudyResult`) into ``folder``:
    study.csv, study.xlsx, study.json and, when there is a winner's plan, ``winner/``
    with the files of `write_run`."""
    folder = Path(folder)
    meta = study_meta(result)
    cur = meta["currency"]
    paths = [write_csv(result.frame, folder / "study.csv")]
    paths.append(write_study_workbook(result.frame, folder / "study.xlsx",
                                      winner=result.winner.case, reason=result.winner.reason,
                                      currency=cur, meta=meta))
    summary = {**meta, "winner": result.winner.case, "winner_reason": result.winner.reason,
               "winner_note": result.winner_note, "caution": CAUTION}
    if result.winner_run is not None:
        win = folder / "winner"
        win.mkdir()
        write_run(result.winner_run, win)
        summary["winner_folder"] = "winner"
        paths.append(win)
    paths.append(write_json(summary, folder / "study.json"))
    return paths


__all__ = ["write_study", "write_study_workbook", "study_meta"]
