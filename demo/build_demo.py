"""Build the scenario workbook of the invented demo station, Velmora Bend.

Velmora Bend Generating Station is a fictional two-unit pulverised-coal station
with a wet limestone forced-oxidation scrubber. Every name in this file (the
station, its units, coal sources, quarries, buyers and landfill) is made up, and
every number is chosen to be physically plausible, not taken from any real plant.

The workbook follows the scenario workbook contract (``WORKBOOK.md``): one sheet
per table, header in row 1, data from row 2, metric column names, percentages as
percent, dates as real Excel dates. Random variation (generation noise, forced
outages, coal lab results) comes from a fixed-seed numpy generator, so the same
arguments always give the same workbook.

Usage::

    python -m reagentplan.demo.build_demo [OUT.xlsx] [--start 2027-01-01] [--horizon 365]

or, from Python, :func:`build_demo_workbook`.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import math
import os
import pathlib
import secrets
from dataclasses import dataclass
from datetime import date, timedelta
from typing import Any, Iterable, Sequence

import numpy as np
from openpyxl import Workbook
from openpyxl.styles import Font
from openpyxl.utils import get_column_letter

__all__ = ["build_demo_workbook", "STATION_NAME", "DEMO_SEED"]

STATION_NAME = "Velmora Bend Generating Station"
DEMO_SEED = 20270101
DATE_FORMAT = "yyyy-mm-dd"

_WEEKDAY_NAMES = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")


# --------------------------------------------------------------------------
# The invented station: fixed data
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class _Unit:
    name: str
    capacity_mw: float
    heat_rate_gj_per_mwh: float
    gas_heat_share_pct: float
    # mean daily load factor offset against the station shape (the newer,
    # more efficient unit is dispatched a little harder)
    dispatch_offset: float


UNITS: tuple[_Unit, ...] = (
    _Unit("VB-1", 640.0, 10.05, 0.0, +0.02),
    _Unit("VB-2", 615.0, 10.30, 3.0, -0.02),
)


@dataclass(frozen=True)
class _CoalSource:
    source: str
    sulfur_pct: float
    ash_pct: float
    moisture_pct: float
    hhv_mj_per_kg: float
    chlorine_pct: float
    sulfur_sd_pct: float
    # lab sampling pattern and lot-to-lot behaviour for the quality history
    lab_weekdays: tuple[int, ...]
    ash_sd_pct: float
    hhv_noise_mj_per_kg: float
    samples_per_shipment: tuple[int, int]


COAL_SOURCES: tuple[_CoalSource, ...] = (
    _CoalSource(
        "Dunmarrow No.6 bituminous", 3.05, 10.2, 8.0, 26.6, 0.11, 0.25,
        lab_weekdays=(0, 2, 4), ash_sd_pct=0.6, hhv_noise_mj_per_kg=0.15,
        samples_per_shipment=(3, 6),
    ),
    _CoalSource(
        "Corrinvale mid-sulfur bituminous", 1.60, 8.5, 10.5, 24.3, 0.05, 0.15,
        lab_weekdays=(1, 4), ash_sd_pct=0.5, hhv_noise_mj_per_kg=0.18,
        samples_per_shipment=(2, 4),
    ),
    _CoalSource(
        "Sallowmere subbituminous", 0.40, 5.9, 27.0, 19.6, 0.02, 0.05,
        lab_weekdays=(1, 3, 5), ash_sd_pct=0.4, hhv_noise_mj_per_kg=0.25,
        samples_per_shipment=(3, 6),
    ),
)

# Blend seasons: (month, day) the blend takes effect, shares of as-received
# tonnes in the order of COAL_SOURCES. More low-sulfur coal in summer, when the
# units run hard and the permit's rolling average matters most.
_BLEND_SEASONS: tuple[tuple[tuple[int, int], tuple[int, int, int]], ...] = (
    ((1, 1), (65, 15, 20)),   # winter
    ((4, 1), (60, 15, 25)),   # spring shoulder
    ((6, 1), (50, 15, 35)),   # summer: low-sulfur heavy
    ((10, 1), (65, 15, 20)),  # back to the winter blend
)

PLANT_ROWS: tuple[tuple[str, Any, str], ...] = (
    # (key, value, note); name/start_date/horizon_days are filled at build time
    ("currency", "USD", "label for all money columns"),
    ("boiler", "pc", "pulverised coal, wet limestone forced-oxidation scrubber"),
    ("fly_ash_share_pct", 80, "share of coal ash leaving as fly ash (dry-bottom PC)"),
    ("so2_conversion_pct", 95, "fuel sulfur leaving the boiler as SO2"),
    ("fly_ash_loi_pct", 3.5, "unburned carbon in the fly ash, loss on ignition"),
    ("so2_limit_kg_per_gj", 0.065, "permit limit on heat input, both units"),
    ("so2_limit_avg_days", 30, "rolling averaging period of the permit limit"),
    ("shortage_penalty_per_t", 1000, "cost of each tonne below safety stock"),
    ("overflow_penalty_per_t", 1000, "cost of each tonne above store capacity"),
)

SCRUBBER_ROWS: tuple[tuple[str, Any, str], ...] = (
    ("removal_pct", 97.5, "SO2 removal across the absorbers, design"),
    ("ca_s_ratio", 1.03, "mol CaCO3 fed per mol SO2 removed"),
    ("limestone_caco3_pct", 96.0, "CaCO3 in the contract limestone, dry basis"),
    ("oxidation_pct", 99.0, "forced oxidation, sulfite to sulfate"),
    ("gypsum_moisture_pct", 10.0, "free moisture of the vacuum-belt filter cake"),
    ("esp_efficiency_pct", 99.6, "fly ash captured by the precipitators"),
    ("injection_removal_pct", 0.0, "no sorbent injection installed"),
    ("injection_ca_s_ratio", 2.5, "would apply if sorbent injection were used"),
    ("prescrubber_hcl_removal_pct", 0.0, "no prescrubber"),
    ("gypsum_chloride_ppm", 60, "washed cake, monthly lab average"),
    ("removal_min_pct", 96.0, "lowest removal the operators will run for a few days (the plan may choose)"),
    ("removal_max_pct", 99.0, "highest removal the absorbers hold with all recycle pumps in service"),
)

# SO2 allowances (invented market): (day offset, holding_t, allocated_t, buy, sell, most
# traded per month); the station's allocation for the year is on hand at the start
ALLOWANCES: tuple[tuple[Any, ...], ...] = (
    (0, 2600.0, None, 95.0, 85.0, 600.0),
    (181, None, None, 110.0, 100.0, 600.0),  # the summer market is tighter
)

# store: (capacity_t, safety_t, initial_t)
STORAGE: dict[str, tuple[float, float, float]] = {
    "limestone": (45000.0, 9000.0, 24000.0),
    "gypsum": (18000.0, 1000.0, 9000.0),
    "fly_ash": (7000.0, 0.0, 2500.0),
    "bottom_ash": (3000.0, 0.0, 900.0),
}

SUPPLIER_COLUMNS = (
    "supplier", "mode", "load_t", "max_loads_per_day", "lead_days", "weekdays",
    "price_per_t", "freight_per_load", "min_t_per_month", "max_t_per_month",
    "caco3_pct", "months", "mgco3_pct", "tier_loads_per_month", "tier_freight_per_load",
    "shortfall_per_t", "train_set",
)
TRAIN_SET = "Velmora car set"
SUPPLIERS: tuple[tuple[Any, ...], ...] = (
    # main contract quarry, high-calcium stone: unit trains of ~96 cars x 100 t; the
    # railway's winter freight tariff (Dec-Feb) is dearer than the rest of the year, and
    # above two trains a month the summer tariff drops to a volume rate; take-or-pay on
    # one train a month at 9 USD per tonne short
    ("Greyfell Quarry", "rail", 9600, 1, 12, "Mon-Thu", 14.50, 38400.0,
     9600, 28800, 96.0, "Mar-Nov", 0.8, 2, 30000.0, 9.0, TRAIN_SET),
    ("Greyfell Quarry", "rail", 9600, 1, 12, "Mon-Thu", 14.50, 67200.0,
     9600, 28800, 96.0, "Dec-Feb", 0.8, None, None, 9.0, TRAIN_SET),
    # local quarry, pneumatic/end-dump trucks, quick but dear
    ("Oxlip Hill Stone", "truck", 25, 40, 2, "Mon-Fri", 21.00, 210.0,
     None, 12000, 97.0, "", 0.5, None, None, None, None),
    # distant spot quarry: cheap, lower-grade, slightly dolomitic stone on a long haul;
    # its trains use the same leased car set as Greyfell's
    ("Brindlecombe Quarry", "rail", 9000, 1, 14, "Tue,Thu", 9.25, 52000.0,
     None, 27000, 89.5, "", 3.5, None, None, None, TRAIN_SET),
)
#: the leased car set: at most 3 trains in any 10 days (its cycle over both quarries)
TRAIN_SETS: tuple[tuple[Any, ...], ...] = ((TRAIN_SET, 3, 10),)

# (party, mode, first day offset from the start, days closed): the main line's summer
# track renewal, and the wallboard plant's own maintenance shutdown
LANE_CLOSURES: tuple[tuple[str, str | None, int, int], ...] = (
    ("Greyfell Quarry", "rail", 192, 14),
    ("Brindlecombe Quarry", "rail", 192, 14),  # the same main line
    ("Larkspan Wallboard", "truck", 213, 7),
)

# (key, first day offset, days, value): an oxidation-air blower overhaul lowers
# oxidation (gypsum purity dips below the wallboard limit) and burner tuning after
# the spring outage raises fly-ash LOI above the ready-mix limit
PERIOD_SETTINGS: tuple[tuple[str, int, int, float], ...] = (
    ("oxidation_pct", 62, 6, 93.0),
    ("fly_ash_loi_pct", 124, 10, 6.8),
)
RAIL_SUPPLIER = SUPPLIERS[0][0]
RAIL_TRAIN_T = SUPPLIERS[0][2]

BUYER_COLUMNS = (
    "buyer", "material", "mode", "load_t", "max_loads_per_day", "weekdays",
    "price_per_t", "min_t_per_month", "max_t_per_month", "min_purity_pct",
    "max_moisture_pct", "max_chloride_ppm", "max_loi_pct", "max_so3_pct", "months",
    "shortfall_per_t",
)
BUYERS: tuple[tuple[Any, ...], ...] = (
    # the board plant: wallboard purity limit, a building season (Mar-Nov), and a monthly
    # minimum above what the station can always make, short tonnes paid at 3 USD/t
    ("Larkspan Wallboard", "gypsum", "truck", 30, 45, "Mon-Fri", 6.00,
     24000, 28000, 94.0, 11.0, 100, None, None, "Mar-Nov", 3.0),
    ("Fieldmend Agri-Gypsum", "gypsum", "truck", 25, 12, "Mon-Sat", 1.50,
     None, 6000, 85.0, 15.0, None, None, None, "Feb-Jun", None),
    # a cement works takes gypsum as set retarder at a lower purity, all year
    ("Harrowgate Cement", "gypsum", "truck", 28, 10, "Mon-Fri", 0.50,
     None, 6000, 90.0, 12.0, None, None, None, "", None),
    # ASTM C618 class F limits: LOI <= 6 %, SO3 <= 5 %
    ("Cobbleway Ready-Mix", "fly_ash", "truck", 28, 20, "Mon-Fri", 26.00,
     4000, 12000, None, None, None, 6.0, 5.0, "Mar-Nov", None),
    ("Tessany Block Co.", "bottom_ash", "truck", 20, 8, "Mon-Fri", -2.00,
     None, 3000, None, None, None, None, None, "", None),
)

LANDFILL = "Velmora Bend on-site landfill"
# material: (cost_per_t, max_t_per_day, airspace_t)
DISPOSAL: dict[str, tuple[float, float, float]] = {
    "gypsum": (14.00, 1100.0, 1_800_000.0),
    "fly_ash": (16.50, 2000.0, 1_200_000.0),
    "bottom_ash": (12.00, 600.0, 400_000.0),
}


# --------------------------------------------------------------------------
# Generation
# --------------------------------------------------------------------------

_LF_BASE = 0.735          # mean station load factor before weekday/outage effects
_LF_WINTER_SUMMER = 0.085  # two peaks a year (winter heating, summer cooling)
_LF_SUMMER_EXTRA = 0.03   # summer peak a little higher than winter
_WEEKEND_DIP = {5: 0.06, 6: 0.09}  # Sat, Sun
_LF_MIN, _LF_MAX = 0.38, 0.97     # daily energy as share of capacity x 24 h when on line
_AR_PHI = 0.8
_AR_COMMON_SD = 0.030     # innovation sd of the station-wide AR(1) component
_AR_UNIT_SD = 0.020       # innovation sd of each unit's own AR(1) component
_RAMP_FACTOR = 0.55       # load on the day a unit comes back from an outage


def _seasonal_shape(days: Sequence[date]) -> np.ndarray:
    """Expected station load factor per day [-]: seasonal peaks, weekend and holiday dips."""
    doy = np.array([d.timetuple().tm_yday for d in days], dtype=float)
    wd = np.array([d.weekday() for d in days])
    shape = (
        _LF_BASE
        + _LF_WINTER_SUMMER * np.cos(4.0 * math.pi * (doy - 18.0) / 365.25)
        + _LF_SUMMER_EXTRA * np.cos(2.0 * math.pi * (doy - 205.0) / 365.25)
    )
    for k, dip in _WEEKEND_DIP.items():
        shape = shape - dip * (wd == k)
    holiday = np.array(
        [(d.month, d.day) in {(12, 24), (12, 25), (12, 26), (1, 1)} for d in days]
    )
    return shape - 0.07 * holiday


def _ar1(rng: np.random.Generator, n: int, phi: float, innovation_sd: float,
         x0: float | None = None) -> np.ndarray:
    """Stationary AR(1) series of length n, zero mean [same unit as innovation_sd].

    ``x0`` is the value on the day before the first one; without it the series
    starts from a draw of the stationary distribution.
    """
    out = np.empty(n)
    x = rng.normal(0.0, innovation_sd / math.sqrt(1.0 - phi * phi)) if x0 is None else x0
    for i in range(n):
        x = phi * x + rng.normal(0.0, innovation_sd)
        out[i] = x
    return out


def _spring_outages(first: date, last: date, length_days: int) -> list[tuple[int, date, int]]:
    """Annual spring planned outages touching [first, last]: (unit index, start, days).

    Each year one unit is overhauled, alternating by calendar year, starting on
    the first Monday on or after 6 April.
    """
    out = []
    for year in range(first.year - 1, last.year + 1):
        start = date(year, 4, 6)
        start += timedelta(days=(7 - start.weekday()) % 7)
        end = start + timedelta(days=length_days - 1)
        if end >= first and start <= last:
            out.append((year % 2, start, length_days))
    return out


def _forced_outages(
    rng: np.random.Generator,
    days: Sequence[date],
    n_outages: int,
    blocked: np.ndarray,
) -> list[tuple[int, int, int]]:
    """Random forced outages: (unit index, first day index, days), 2-4 days each.

    ``blocked`` is a boolean (units, days) array of days already out or too close
    to another outage; forced outages avoid them and never overlap each other,
    so only one unit is ever down at a time.
    """
    n_units, n_days = blocked.shape
    found: list[tuple[int, int, int]] = []
    first_unit = int(rng.integers(n_units))
    tries = 0
    while len(found) < n_outages and tries < 1000:
        tries += 1
        u = (first_unit + len(found)) % n_units  # the units take turns
        length = int(rng.integers(2, 5))
        if n_days - length - 2 <= 3:
            break
        s = int(rng.integers(3, n_days - length - 2))
        lo, hi = max(0, s - 10), min(n_days, s + length + 10)
        if blocked[u, lo:hi].any():
            continue
        found.append((u, s, length))
        blocked[:, lo:hi] = True  # one unit down at a time
    return found


def _generation_rows(
    days: Sequence[date],
    rng: np.random.Generator,
    planned_days: Iterable[tuple[int, date, int]],
    n_forced: int,
    ar_state: Sequence[float] | None = None,
) -> tuple[list[tuple[date, str, float]], list[float]]:
    """Daily (date, unit, mwh) rows in date order, then unit order.

    ``ar_state`` carries the AR(1) noise (station-wide, then one per unit) over
    from the day before ``days[0]``, so the horizon continues its history. The
    state at the last day is returned with the rows.
    """
    n = len(days)
    index = {d: i for i, d in enumerate(days)}
    shape = _seasonal_shape(days)
    state = list(ar_state) if ar_state is not None else [None] * (1 + len(UNITS))
    common = _ar1(rng, n, _AR_PHI, _AR_COMMON_SD, state[0])
    end_state = [float(common[-1])]

    lf = np.empty((len(UNITS), n))
    for u, unit in enumerate(UNITS):
        own = _ar1(rng, n, _AR_PHI, _AR_UNIT_SD, state[1 + u])
        end_state.append(float(own[-1]))
        lf[u] = np.clip(shape + unit.dispatch_offset + common + own, _LF_MIN, _LF_MAX)

    off = np.zeros((len(UNITS), n), dtype=bool)
    for u, start, length in planned_days:
        for k in range(length):
            i = index.get(start + timedelta(days=k))
            if i is not None:
                off[u, i] = True
    # keep forced outages clear of planned ones, on either unit, so that the
    # station never goes fully dark
    blocked = np.zeros_like(off)
    for i in np.flatnonzero(off.any(axis=0)):
        blocked[:, max(0, i - 14): i + 15] = True
    for u, s, length in _forced_outages(rng, days, n_forced, blocked):
        off[u, s: s + length] = True

    # the first day back on line after an outage is a part-load start-up day
    back = np.zeros_like(off)
    back[:, 1:] = off[:, :-1] & ~off[:, 1:]
    lf = np.where(back, lf * _RAMP_FACTOR, lf)
    lf = np.where(off, 0.0, lf)

    rows = []
    for i, d in enumerate(days):
        for u, unit in enumerate(UNITS):
            mwh = round(float(lf[u, i]) * unit.capacity_mw * 24.0, 1)
            mwh = min(mwh, unit.capacity_mw * 24.0)
            rows.append((d, unit.name, mwh))
    return rows, end_state


# --------------------------------------------------------------------------
# Coal blend and coal quality history
# --------------------------------------------------------------------------


def _blend_on(day: date) -> tuple[int, int, int]:
    shares = _BLEND_SEASONS[-1][1]
    for (m, dd), s in _BLEND_SEASONS:
        if (day.month, day.day) >= (m, dd):
            shares = s
    return shares


def _blend_rows(start: date, end: date) -> list[tuple[date, str, int]]:
    """Blend rows: one set on the start date, then one at each season change."""
    change_dates = [start]
    for year in range(start.year, end.year + 1):
        for (m, dd), _ in _BLEND_SEASONS:
            c = date(year, m, dd)
            if start < c <= end and _blend_on(c) != _blend_on(c - timedelta(days=1)):
                change_dates.append(c)
    rows = []
    for c in change_dates:
        shares = _blend_on(c)
        assert sum(shares) == 100
        for src, share in zip(COAL_SOURCES, shares):
            rows.append((c, src.source, share))
    return rows


def _coal_quality_rows(
    first: date, last: date, rng: np.random.Generator
) -> list[tuple[date, str, float, float, float]]:
    """Lab results (date, source, sulfur_pct, ash_pct, hhv_mj_per_kg), date order.

    Sulfur: a lot-to-lot offset for each shipment plus an AR(1) drift from
    sample to sample, together with about the source's sulfur_sd_pct spread.
    HHV falls with ash (dilution) and carries its own moisture-driven noise.
    """
    per_source: list[list[tuple[date, str, float, float, float]]] = []
    phi = 0.75
    for src in COAL_SOURCES:
        sd_ship = 0.6 * src.sulfur_sd_pct
        sd_ar = 0.8 * src.sulfur_sd_pct  # stationary sd of the drift
        innov = sd_ar * math.sqrt(1.0 - phi * phi)
        drift = rng.normal(0.0, sd_ar)
        left_in_ship = 0
        offset = 0.0
        rows = []
        d = first
        while d <= last:
            if d.weekday() in src.lab_weekdays and rng.random() > 0.05:
                if left_in_ship <= 0:
                    lo, hi = src.samples_per_shipment
                    left_in_ship = int(rng.integers(lo, hi + 1))
                    offset = rng.normal(0.0, sd_ship)
                left_in_ship -= 1
                drift = phi * drift + rng.normal(0.0, innov)
                sulfur = max(0.05, src.sulfur_pct + offset + drift)
                d_ash = rng.normal(0.0, src.ash_sd_pct)
                ash = max(1.0, src.ash_pct + d_ash)
                hhv = (src.hhv_mj_per_kg - 0.30 * d_ash
                       + rng.normal(0.0, src.hhv_noise_mj_per_kg))
                rows.append((d, src.source, round(sulfur, 2), round(ash, 2), round(hhv, 2)))
            d += timedelta(days=1)
        per_source.append(rows)
    order = {s.source: k for k, s in enumerate(COAL_SOURCES)}
    merged = [r for rows in per_source for r in rows]
    merged.sort(key=lambda r: (r[0], order[r[1]]))
    return merged


# --------------------------------------------------------------------------
# Firm orders
# --------------------------------------------------------------------------


def _weekday_set(spec: str) -> set[int]:
    """'Mon-Thu' / 'Tue,Thu' / '' -> set of weekday numbers (Mon = 0)."""
    if not spec:
        return set(range(7))
    out: set[int] = set()
    for part in spec.split(","):
        part = part.strip()
        if "-" in part:
            a, b = (_WEEKDAY_NAMES.index(x.strip()) for x in part.split("-"))
            k = a
            while True:
                out.add(k)
                if k == b:
                    break
                k = (k + 1) % 7
        else:
            out.add(_WEEKDAY_NAMES.index(part))
    return out


def _firm_order_rows(start: date, horizon_days: int) -> list[tuple[Any, ...]]:
    """Limestone unit trains already booked for the first two weeks."""
    allowed = _weekday_set(SUPPLIERS[0][5])
    end = start + timedelta(days=horizon_days - 1)
    rows = []
    for offset in (4, 11):
        d = start + timedelta(days=offset)
        while d.weekday() not in allowed:
            d += timedelta(days=1)
        if d <= end:
            rows.append((d, "limestone", RAIL_SUPPLIER, "rail", 1, float(RAIL_TRAIN_T)))
    return rows


# --------------------------------------------------------------------------
# Workbook writing
# --------------------------------------------------------------------------


def _write_table(wb: Workbook, title: str, header: Sequence[str],
                 rows: Iterable[Sequence[Any]]) -> None:
    ws = wb.create_sheet(title)
    ws.append(list(header))
    for cell in ws[1]:
        cell.font = Font(bold=True)
    widths = [len(h) for h in header]
    for row in rows:
        values = ["" if v is None else v for v in row]
        # empty limits and weekday/month lists are left as truly empty cells
        ws.append([None if v == "" else v for v in values])
        r = ws.max_row
        for c, v in enumerate(values, start=1):
            if isinstance(v, date):
                ws.cell(row=r, column=c).number_format = DATE_FORMAT
                widths[c - 1] = max(widths[c - 1], 10)
            else:
                widths[c - 1] = max(widths[c - 1], min(len(str(v)), 60))
    for c, w in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(c)].width = w + 2
    ws.freeze_panes = "A2"


def _shift_years(d: date, years: int) -> date:
    try:
        return d.replace(year=d.year + years)
    except ValueError:  # 29 February
        return d.replace(year=d.year + years, day=28)


def _as_date(value: date) -> date:
    if isinstance(value, _dt.datetime):
        return value.date()
    if isinstance(value, date):
        return value
    raise TypeError(f"start_date must be a datetime.date, got {type(value).__name__}")


def build_demo_workbook(
    path: str | os.PathLike,
    *,
    start_date: date = date(2027, 1, 1),
    horizon_days: int = 365,
) -> pathlib.Path:
    """Write the demo station's scenario workbook to ``path`` and return the path.

    Parameters
    ----------
    path:
        Output ``.xlsx`` file; its folder is created if missing. The workbook is
        written to a temporary file in the same folder and moved into place, so
        a reader never sees a half-written file.
    start_date:
        First planned day [date].
    horizon_days:
        Number of planned days [d]; ``generation`` covers every one of them.
        The histories cover the three years (generation) and one year (coal
        quality) before ``start_date``.
    """
    start = _as_date(start_date)
    if isinstance(horizon_days, bool) or int(horizon_days) != horizon_days or horizon_days < 1:
        raise ValueError(f"horizon_days must be a positive whole number, got {horizon_days!r}")
    horizon_days = int(horizon_days)
    out = pathlib.Path(path)
    end = start + timedelta(days=horizon_days - 1)

    seeds = np.random.SeedSequence(DEMO_SEED).spawn(3)
    rng_gen, rng_hist, rng_coal = (np.random.default_rng(s) for s in seeds)

    wb = Workbook()
    wb.remove(wb.active)

    # plant and scrubber (key/value/note)
    plant = [
        ("name", STATION_NAME, "invented demo station, two 600 MW-class PC units"),
        ("start_date", start, "first planned day"),
        ("horizon_days", horizon_days, "days planned"),
        *PLANT_ROWS,
    ]
    _write_table(wb, "plant", ("key", "value", "note"), plant)
    _write_table(wb, "scrubber", ("key", "value", "note"), SCRUBBER_ROWS)

    _write_table(
        wb, "units",
        ("unit", "capacity_mw", "heat_rate_gj_per_mwh", "gas_heat_share_pct"),
        [(u.name, u.capacity_mw, u.heat_rate_gj_per_mwh, u.gas_heat_share_pct)
         for u in UNITS],
    )

    # three full years (so a backtest still fits a yearly season) of generation history before the start date, then the
    # horizon, whose day-to-day noise carries on from the last history day
    hist_first = _shift_years(start, -3)
    hist_days = [hist_first + timedelta(days=i) for i in range((start - hist_first).days)]
    hist_planned = _spring_outages(hist_first, start - timedelta(days=1), 24)
    hist_rows, ar_state = _generation_rows(hist_days, rng_hist, hist_planned, 5)

    # the dispatch plan holds the planned overhaul only: forced outages are not known in
    # advance (the forecast samples them from the history's)
    days = [start + timedelta(days=i) for i in range(horizon_days)]
    n_forced = 0
    planned = _spring_outages(start, end, 21)
    gen_rows, _ = _generation_rows(days, rng_gen, planned, n_forced, ar_state)
    _write_table(wb, "generation", ("date", "unit", "mwh"), gen_rows)

    _write_table(
        wb, "coal_sources",
        ("source", "sulfur_pct", "ash_pct", "moisture_pct", "hhv_mj_per_kg",
         "chlorine_pct", "sulfur_sd_pct"),
        [(c.source, c.sulfur_pct, c.ash_pct, c.moisture_pct, c.hhv_mj_per_kg,
          c.chlorine_pct, c.sulfur_sd_pct) for c in COAL_SOURCES],
    )
    _write_table(wb, "coal_blend", ("date", "source", "share_pct"), _blend_rows(start, end))

    _write_table(
        wb, "storage", ("store", "capacity_t", "safety_t", "initial_t"),
        [(k, *v) for k, v in STORAGE.items()],
    )
    _write_table(wb, "suppliers", SUPPLIER_COLUMNS, SUPPLIERS)
    _write_table(wb, "train_sets", ("train_set", "max_trains", "window_days"), TRAIN_SETS)
    _write_table(
        wb, "allowances",
        ("date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t", "max_trade_t_per_month"),
        [(start + timedelta(days=a), *rest) for a, *rest in ALLOWANCES if a < horizon_days],
    )
    _write_table(wb, "buyers", BUYER_COLUMNS, BUYERS)
    _write_table(
        wb, "disposal",
        ("site", "material", "cost_per_t", "max_t_per_day", "airspace_t"),
        [(LANDFILL, m, *v) for m, v in DISPOSAL.items()],
    )
    _write_table(
        wb, "firm_orders",
        ("date", "material", "party", "mode", "loads", "tonnes"),
        _firm_order_rows(start, horizon_days),
    )

    _write_table(
        wb, "lane_closures", ("party", "mode", "first_date", "last_date"),
        [(party, mode, start + timedelta(days=a), min(end, start + timedelta(days=a + n - 1)))
         for party, mode, a, n in LANE_CLOSURES if a < horizon_days],
    )
    _write_table(
        wb, "period_settings", ("first_date", "last_date", "key", "value"),
        [(start + timedelta(days=a), min(end, start + timedelta(days=a + n - 1)), key, value)
         for key, a, n, value in PERIOD_SETTINGS if a < horizon_days],
    )

    _write_table(wb, "generation_history", ("date", "unit", "mwh"), hist_rows)

    # one year of coal lab results before the start date
    _write_table(
        wb, "coal_quality_history",
        ("date", "source", "sulfur_pct", "ash_pct", "hhv_mj_per_kg"),
        _coal_quality_rows(_shift_years(start, -1), start - timedelta(days=1), rng_coal),
    )

    out.parent.mkdir(parents=True, exist_ok=True)
    # a unique name beside the target (same file system, so os.replace is atomic);
    # created by openpyxl itself so it gets the usual permissions
    tmp_name = out.parent / f".{out.name}.{os.getpid()}.{secrets.token_hex(4)}.tmp"
    try:
        wb.save(tmp_name)
        os.replace(tmp_name, out)
    except BaseException:
        try:
            os.unlink(tmp_name)
        except FileNotFoundError:
            pass
        raise
    return out


def _main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m reagentplan.demo.build_demo",
        description=f"Write the scenario workbook of the invented {STATION_NAME}.",
    )
    parser.add_argument("out", nargs="?", default="velmora_bend.xlsx",
                        help="output .xlsx path (default: %(default)s)")
    parser.add_argument("--start", type=date.fromisoformat, default=date(2027, 1, 1),
                        help="first planned day, YYYY-MM-DD (default: %(default)s)")
    parser.add_argument("--horizon", type=int, default=365,
                        help="days planned (default: %(default)s)")
    args = parser.parse_args(argv)
    path = build_demo_workbook(args.out, start_date=args.start, horizon_days=args.horizon)
    print(path)
    return 0


if __name__ == "__main__":
    raise SystemExit(_main())
