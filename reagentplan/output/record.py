"""Files of the operations record's commands: ``orders_changed.csv`` (diff) and
``plan_vs_actual.csv`` with ``survey_drift.csv`` (review)."""

from __future__ import annotations

from pathlib import Path

from .files import write_csv


def write_diff(diff, folder: Path) -> list[Path]:
    return [write_csv(diff, Path(folder) / "orders_changed.csv")]


def write_review(review, folder: Path) -> list[Path]:
    folder = Path(folder)
    return [write_csv(review.plan_vs_actual, folder / "plan_vs_actual.csv", float_format="%.3f"),
            write_csv(review.drift, folder / "survey_drift.csv", float_format="%.3f")]


def write_record_workbook(frames: dict, path: Path) -> Path:
    """A record file (.xlsx): one sheet per frame (the record's sheet names), dates as
    Excel dates, through a temporary name."""
    import pandas as pd
    from openpyxl import Workbook

    from .files import save_workbook

    wb = Workbook()
    wb.remove(wb.active)
    for name, frame in frames.items():
        ws = wb.create_sheet(name)
        ws.append(list(frame.columns))
        for row in frame.itertuples(index=False, name=None):
            ws.append([v.date() if isinstance(v, pd.Timestamp) else (None if v is None or v != v else v)
                       for v in row])
        for cell in ws["A"][1:]:
            cell.number_format = "yyyy-mm-dd"
    return save_workbook(wb, path)
