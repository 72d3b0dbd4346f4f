"""Invented record files for the tests (a tiny station from helpers.minimal_sheets)."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from helpers import START, minimal_sheets, write_workbook

D = START - dt.timedelta(days=7)  # a week before the workbook's first planned day


def day(i: int) -> dt.date:
    return D + dt.timedelta(days=i)


def record_sheets() -> dict[str, list[list]]:
    """One week of facts for the minimal station (Quarry Q rail, 1,000 t loads; Board Co
    gypsum trucks of 25 t; Cell 1 landfill)."""
    return {
        "stock_surveys": [["date", "store", "level_t", "method", "note"],
                          [day(0), "limestone", 2500, "survey", "drone"],
                          [day(0), "gypsum", 900, "estimate", None]],
        "arrivals": [["date", "supplier", "loads", "tonnes", "ticket", "caco3_pct"],
                     [day(2), "Quarry Q", 1, 985.5, "T-1001", 93.0],
                     [day(5), "Quarry Q", 1, 1010.0, "T-1002", 95.0]],
        "shipments": [["date", "party", "material", "loads", "tonnes", "ticket"],
                      [day(3), "Board Co", "gypsum", 4, 98.0, "S-1"],
                      [day(4), "Cell 1", "gypsum", None, 120.0, "L-7"]],
        "orders": [["order_id", "date", "supplier", "loads", "tonnes", "status"],
                   ["PO-1", START + dt.timedelta(days=3), "Quarry Q", 1, 1000, "booked"],
                   ["PO-2", START + dt.timedelta(days=5), "Quarry Q", 1, 1000, "cancelled"]],
        "generation_history": [["date", "unit", "mwh"]] + [[day(i), "U1", 2400.0 + i] for i in range(7)],
        "coal_quality_history": [["date", "source", "sulfur_pct", "ash_pct", "hhv_mj_per_kg"],
                                 [day(1), "Coal A", 2.1, 10.2, 24.8],
                                 [day(4), "Coal A", 1.9, 9.8, 25.2]],
    }


def write_record(sheets: dict[str, list[list]], path: Path) -> Path:
    return write_workbook(sheets, path)


def scenario_path(tmp_path: Path, days: int = 10) -> Path:
    return write_workbook(minimal_sheets(days), tmp_path / "station.xlsx")
