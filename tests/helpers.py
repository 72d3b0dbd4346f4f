"""Small scenario workbooks built in the tests (invented values, not demo data)."""

from __future__ import annotations

import copy
import datetime as dt
import io
from pathlib import Path

import numpy as np
import pandas as pd
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


# --------------------------------------------------------------------------- histories


def ar1(rng: np.random.Generator, n: int, phi: float, sd: float) -> np.ndarray:
    """A stationary AR(1) series of ``n`` days: persistence ``phi``, standard deviation
    ``sd`` [unit of sd]."""
    e = np.empty(n)
    x = rng.normal(0, sd)
    innov = sd * np.sqrt(1 - phi**2)
    for t in range(n):
        x = phi * x + rng.normal(0, innov)
        e[t] = x
    return e


def synthetic_load_factor(dates: pd.DatetimeIndex, rng: np.random.Generator, phi: float = 0.8,
                          sd: float = 0.04, season: float = 0.08, weekend: float = 0.07,
                          outages_per_year: float = 3.0, outage_days: tuple[int, int] = (2, 5),
                          level: float = 0.7, common: np.ndarray | None = None) -> np.ndarray:
    """A known daily load-factor process [-]: level + yearly season (two peaks) +
    weekend dip + AR(1) deviation (``phi`` per day, stationary ``sd``; plus an optional
    shared ``common`` series) on line, and forced outages (0) starting at random
    (``outages_per_year``) with lengths drawn evenly from ``outage_days``."""
    n = len(dates)
    doy = dates.day_of_year.to_numpy()
    wd = dates.day_of_week.to_numpy()
    mean = (level + season * np.cos(4 * np.pi * (doy - 20) / 365.25)
            - weekend * (wd == 5) - 1.3 * weekend * (wd == 6))
    lf = mean + ar1(rng, n, phi, sd) + (0 if common is None else common)
    off = np.zeros(n, dtype=bool)
    p = outages_per_year / 365.0
    t = 0
    while t < n:
        if rng.random() < p:
            k = int(rng.integers(outage_days[0], outage_days[1] + 1))
            off[t:t + k] = True
            t += k
        t += 1
    return np.where(off, 0.0, np.clip(lf, 0.06, 1.0))


def synthetic_history(units: dict[str, float], days: int, seed: int = 0,
                      end: dt.date = START - dt.timedelta(days=1), shared_sd: float = 0.0,
                      **process) -> pd.DataFrame:
    """History (date, unit, mwh) of ``days`` days ending on ``end`` for units
    {name: capacity [MW]}, from `synthetic_load_factor`; ``shared_sd`` adds an AR(1)
    component common to all units (correlated deviations)."""
    rng = np.random.default_rng(seed)
    dates = pd.date_range(end=pd.Timestamp(end), periods=days, freq="D")
    common = ar1(rng, days, process.get("phi", 0.8), shared_sd) if shared_sd else None
    frames = [pd.DataFrame({"date": dates, "unit": name,
                            "mwh": np.round(synthetic_load_factor(dates, rng, common=common,
                                                                  **process) * cap * 24, 1)})
              for name, cap in units.items()]
    return (pd.concat(frames).sort_values(["date", "unit"], kind="stable")
            .reset_index(drop=True))


def history_rows(history: pd.DataFrame) -> list[list]:
    """A history frame as the rows of a ``generation_history`` sheet."""
    return [["date", "unit", "mwh"]] + [[d.date(), u, float(m)] for d, u, m in
                                        history.itertuples(index=False)]


def synthetic_labs(source: str, days: int, sulfur: float, sd: float, phi: float, seed: int = 0,
                   end: dt.date = START - dt.timedelta(days=1),
                   weekdays: tuple[int, ...] = (0, 2, 4)) -> list[list]:
    """Rows of ``coal_quality_history`` for one source: sulfur an AR(1) around ``sulfur``
    (``phi`` per day, stationary ``sd``) sampled on ``weekdays``; ash and HHV constant."""
    rng = np.random.default_rng(seed)
    dates = pd.date_range(end=pd.Timestamp(end), periods=days, freq="D")
    x = rng.normal(0, sd)
    rows = []
    for d in dates:
        x = phi * x + rng.normal(0, sd * np.sqrt(1 - phi**2))
        if d.weekday() in weekdays:
            rows.append([d.date(), source, round(sulfur + x, 4), 10.0, 25.0])
    return rows


def lab_sheet(*row_lists: list[list]) -> list[list]:
    """A ``coal_quality_history`` sheet from per-source rows, in date order."""
    rows = sorted((r for rl in row_lists for r in rl), key=lambda r: r[0])
    return [["date", "source", "sulfur_pct", "ash_pct", "hhv_mj_per_kg"]] + rows


def history_only(sheets: dict[str, list[list]]) -> dict[str, list[list]]:
    """Drop every row of the ``generation`` sheet (the forecast covers the horizon)."""
    sheets["generation"] = sheets["generation"][:1]
    return sheets
