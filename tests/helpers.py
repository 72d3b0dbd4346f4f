"""Small scenario workbooks built in the tests (invented values, not demo data)."""

from __future__ import annotations

import copy
import datetime as dt
import io
from pathlib import Path

from openpyxl import Workbook

START = dt.date(2030, 3, 4)  # a Monday


def minimal_sheets(days: int = 10, mwh: float = 2500.0) -> dict[str, list[list]]:
    """One 200 MW unit burning 1,000 t/day of 2 % S coal (25 MJ/kg at 10 GJ/MWh)."""
    gen = [["date", "unit", "mwh"]] + [
        [START + dt.timedelta(days=i), "U1", mwh] for i in range(days)]
    return {
        "plant": [["key", "value", "note"], ["name", "Test Station", None],
                  ["start_date", START, None], ["horizon_days", days, None],
                  ["boiler", "pc", None], ["so2_conversion_pct", 95, None],
                  ["fly_ash_share_pct", 80, None], ["fly_ash_loi_pct", 0, None],
                  ["so2_limit_kg_per_gj", 0.1, None], ["so2_limit_avg_days", 3, None]],
        "scrubber": [["key", "value"], ["removal_pct", 97], ["ca_s_ratio", 1.03],
                     ["limestone_caco3_pct", 94], ["oxidation_pct", 100],
                     ["gypsum_moisture_pct", 10], ["esp_efficiency_pct", 100],
                     ["injection_removal_pct", 0], ["prescrubber_hcl_removal_pct", 0],
                     ["gypsum_chloride_ppm", 40]],
        "units": [["unit", "capacity_mw", "heat_rate_gj_per_mwh", "gas_heat_share_pct"],
                  ["U1", 200, 10, 0]],
        "generation": gen,
        "coal_sources": [["source", "sulfur_pct", "ash_pct", "moisture_pct", "hhv_mj_per_kg",
                          "chlorine_pct", "sulfur_sd_pct"],
                         ["Coal A", 2.0, 10.0, 8.0, 25.0, 0.0, 0.2],
                         ["Coal B", 0.5, 6.0, 25.0, 20.0, 0.0, 0.05]],
        "coal_blend": [["date", "source", "share_pct"], [START, "Coal A", 100]],
        "storage": [["store", "capacity_t", "safety_t", "initial_t"],
                    ["limestone", 5000, 500, 2000], ["gypsum", 3000, 0, 1000],
                    ["fly_ash", 2000, 0, 500], ["bottom_ash", 800, 0, 100]],
        "suppliers": [["supplier", "mode", "load_t", "max_loads_per_day", "lead_days", "weekdays",
                       "price_per_t", "freight_per_load", "min_t_per_month", "max_t_per_month"],
                      ["Quarry Q", "rail", 1000, 1, 3, "Mon-Fri", 15, 2000, None, 30000]],
        "buyers": [["buyer", "material", "mode", "load_t", "max_loads_per_day", "weekdays",
                    "price_per_t", "min_t_per_month", "max_t_per_month", "min_purity_pct",
                    "max_moisture_pct", "max_chloride_ppm", "max_loi_pct", "max_so3_pct", "months"],
                   ["Board Co", "gypsum", "truck", 25, 20, "Mon-Fri", 3, None, 3000, 94, 12, 100,
                    None, None, None],
                   ["Mix Co", "fly_ash", "truck", 25, 10, "Mon-Sat", 20, None, None, None, None,
                    None, 6, 5, "Mar-Nov"]],
        "disposal": [["site", "material", "cost_per_t", "max_t_per_day", "airspace_t"],
                     ["Cell 1", "gypsum", 12, 2000, 1e6], ["Cell 1", "fly_ash", 14, 2000, 1e6],
                     ["Cell 1", "bottom_ash", 10, 500, 1e6]],
    }


def clone(sheets: dict[str, list[list]]) -> dict[str, list[list]]:
    return copy.deepcopy(sheets)


def build_workbook(sheets: dict[str, list[list]]) -> Workbook:
    wb = Workbook()
    wb.remove(wb.active)
    for name, rows in sheets.items():
        ws = wb.create_sheet(name)
        for row in rows:
            ws.append(list(row))
    return wb


def write_workbook(sheets: dict[str, list[list]], path: Path) -> Path:
    build_workbook(sheets).save(path)
    return path


def workbook_bytes(sheets: dict[str, list[list]]) -> bytes:
    buf = io.BytesIO()
    build_workbook(sheets).save(buf)
    return buf.getvalue()


def set_value(sheets: dict, sheet: str, key_or_row, column: str, value) -> dict:
    """Set one cell: in a key/value sheet by key, in a table by data-row index (0-based)."""
    rows = sheets[sheet]
    if rows[0][:2] == ["key", "value"]:
        for r in rows[1:]:
            if r[0] == key_or_row:
                r[1] = value
                return sheets
        rows.append([key_or_row, value] + [None] * (len(rows[0]) - 2))
        return sheets
    j = rows[0].index(column)
    rows[1 + key_or_row][j] = value
    return sheets
