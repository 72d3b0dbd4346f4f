"""The files of a planned fleet (``../shared/FLEET.md``): a folder per station with the
files `plan` writes (`run.write_run`), ``fleet_summary.json`` and ``fleet.xlsx``."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from openpyxl import Workbook
from openpyxl.utils import get_column_letter

from .files import save_workbook, write_json
from .run import write_run


def write_fleet_workbook(summary: dict, frames: dict[str, pd.DataFrame], path: Path) -> Path:
    """``fleet.xlsx``: a summary sheet, then one sheet per frame (pooled contracts month by
    month with each station's share, the shared train sets' arrivals by day, the stores
    at a glance, where the pooled room went)."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Fleet"
    ws.append(["key", "value"])
    for key in ("fleet", "currency", "total_cost", "baseline_total_cost", "pooled_shortfall_cost", "solver",
                "status", "gap", "solve_seconds", "baseline"):
        ws.append([key, summary.get(key)])
    ws.append([])
    ws.append(["saving by cause", "money"])
    for k, v in summary.get("saving_by_cause", {}).items():
        ws.append([k, v])
    ws.append([])
    ws.append(["station", "total_cost", "baseline_total_cost", "breaches"])
    for name, st in summary.get("stations", {}).items():
        ws.append([name, st["total_cost"], st["baseline_total_cost"], len(st["breaches"])])
    ws.column_dimensions["A"].width = 28
    ws.column_dimensions["B"].width = 22
    for title, frame in frames.items():
        sh = wb.create_sheet(title[:31])
        sh.append(list(frame.columns))
        for row in frame.itertuples(index=False):
            sh.append([v.date() if isinstance(v, pd.Timestamp) else (None if pd.isna(v) else v)
                       if not isinstance(v, (list, dict)) else str(v) for v in row])
        for j, col in enumerate(frame.columns, start=1):
            sh.column_dimensions[get_column_letter(j)].width = max(12, len(str(col)) + 2)
        sh.freeze_panes = "A2"
    return save_workbook(wb, path)


def write_fleet(runs: dict, summary: dict, frames: dict[str, pd.DataFrame], folder: Path) -> list[Path]:
    """Every output of a planned fleet into ``folder``: ``<station>/`` (as `write_run`),
    ``fleet_summary.json``, ``fleet.xlsx``."""
    folder = Path(folder)
    paths = []
    for name, run in runs.items():
        sub = folder / name
        sub.mkdir(parents=True, exist_ok=True)
        write_run(run, sub)
        paths.append(sub)
    paths.append(write_json(summary, folder / "fleet_summary.json"))
    paths.append(write_fleet_workbook(summary, frames, folder / "fleet.xlsx"))
    return paths


def write_fleet_study(frame: pd.DataFrame, winner: int | None, folder: Path) -> list[Path]:
    """A fleet study's ``study.csv`` (one row per case) and ``study.xlsx`` (the same table
    and the winner)."""
    from .files import write_csv

    folder = Path(folder)
    paths = [write_csv(frame, folder / "study.csv")]
    wb = Workbook()
    ws = wb.active
    ws.title = "Study"
    ws.append(list(frame.columns))
    for row in frame.itertuples(index=False):
        ws.append([None if (isinstance(v, float) and pd.isna(v)) else v for v in row])
    ws.freeze_panes = "A2"
    info = wb.create_sheet("Winner")
    info.append(["winner case", winner])
    paths.append(save_workbook(wb, folder / "study.xlsx"))
    return paths
