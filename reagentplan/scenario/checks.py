"""The typed scenario, and the one place where input is validated.

`load_scenario` reads a workbook, checks every cell against `reagentplan.schema`,
converts US customary columns to metric (`reagentplan.units`), checks what the sheets
say about each other, and returns a `Scenario`.  Every problem found is collected and
raised together as one `ScenarioError` naming sheet, Excel row and column.  Past this
boundary the rest of the library trusts the types.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import difflib
import math
import os
from dataclasses import dataclass, fields
from typing import Any, BinaryIO

import numpy as np
import pandas as pd

from .. import schema
from ..chemistry import PYRITE_S_SHARE
from ..errors import InputWarning, Problem, ScenarioError
from ..schema import Field, Sheet
from ..units import BY_US_NAME, VARIANTS
from ..workbook import RawSheet, Uncalculated, read_raw

DAY_NAMES = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
MONTH_NAMES = ("jan", "feb", "mar", "apr", "may", "jun", "jul", "aug", "sep", "oct", "nov", "dec")
SHARE_TOLERANCE_PCT = 0.01
#: Fewest days of ``generation_history`` a unit needs when the ``generation`` sheet
#: leaves some of its planned days to the forecast [d].
MIN_HISTORY_DAYS = 14


# --------------------------------------------------------------------------- types


@dataclass(frozen=True)
class Plant:
    name: str
    start_date: dt.date
    horizon_days: int
    currency: str
    boiler: str
    fly_ash_share_pct: float
    so2_conversion_pct: float
    fly_ash_loi_pct: float
    so2_limit_kg_per_gj: float | None
    so2_limit_avg_days: int
    shortage_penalty_per_t: float
    overflow_penalty_per_t: float

    @property
    def dates(self) -> pd.DatetimeIndex:
        """The planned days, start to end inclusive."""
        return pd.date_range(self.start_date, periods=self.horizon_days, freq="D")

    @property
    def end_date(self) -> dt.date:
        return self.start_date + dt.timedelta(days=self.horizon_days - 1)


@dataclass(frozen=True)
class Scrubber:
    removal_pct: float
    ca_s_ratio: float
    limestone_caco3_pct: float
    oxidation_pct: float
    gypsum_moisture_pct: float
    esp_efficiency_pct: float
    injection_removal_pct: float
    injection_ca_s_ratio: float
    prescrubber_hcl_removal_pct: float
    gypsum_chloride_ppm: float
    #: The range within which the plan may choose the removal day by day [%]; both
    #: ``None`` = ``removal_pct`` fixed.  With a range, ``removal_pct`` is the setpoint the
    #: reorder-point baseline and ``reagentplan balance`` use: as written, or, when not
    #: written, the default 97 % clipped into the range.
    removal_min_pct: float | None = None
    removal_max_pct: float | None = None

    @property
    def removal_range(self) -> tuple[float, float] | None:
        """``(removal_min_pct, removal_max_pct)`` [%], or ``None`` when the removal is fixed."""
        if self.removal_min_pct is None or self.removal_max_pct is None:
            return None
        return (float(self.removal_min_pct), float(self.removal_max_pct))


@dataclass(frozen=True)
class Unit:
    unit: str
    capacity_mw: float
    heat_rate_gj_per_mwh: float
    gas_heat_share_pct: float


@dataclass(frozen=True)
class CoalSource:
    source: str
    sulfur_pct: float
    ash_pct: float
    moisture_pct: float | None
    hhv_mj_per_kg: float
    chlorine_pct: float
    sulfur_sd_pct: float
    #: Share of the coal fed to the mills that they reject (rock, coarse pyrite) [%].
    mill_rejects_pct: float = 0.0
    #: Share of the coal's sulfur that leaves in those rejects, never burned [%].
    rejects_sulfur_share_pct: float = 0.0


@dataclass(frozen=True)
class Store:
    store: str
    capacity_t: float
    safety_t: float
    initial_t: float


@dataclass(frozen=True)
class SupplierLane:
    supplier: str
    mode: str
    load_t: float
    max_loads_per_day: int
    lead_days: int
    weekdays: frozenset[int]
    price_per_t: float
    freight_per_load: float
    min_t_per_month: float | None
    max_t_per_month: float | None
    caco3_pct: float | None
    months: frozenset[int] = frozenset(range(12))
    mgco3_pct: float | None = None
    tier_loads_per_month: int | None = None
    tier_freight_per_load: float | None = None
    shortfall_per_t: float | None = None
    train_set: str | None = None

    @property
    def lane(self) -> str:
        if len(self.months) == 12:
            return f"{self.supplier} {self.mode}"
        return f"{self.supplier} {self.mode} ({names_label(self.months, MONTH_NAMES)})"

    @property
    def delivered_cost_per_t(self) -> float:
        """Price plus freight spread over a full load [money/t]."""
        return self.price_per_t + self.freight_per_load / self.load_t


@dataclass(frozen=True)
class BuyerLane:
    buyer: str
    material: str
    mode: str
    load_t: float
    max_loads_per_day: int
    weekdays: frozenset[int]
    price_per_t: float
    min_t_per_month: float | None
    max_t_per_month: float | None
    min_purity_pct: float | None
    max_moisture_pct: float | None
    max_chloride_ppm: float | None
    max_loi_pct: float | None
    max_so3_pct: float | None
    months: frozenset[int]
    shortfall_per_t: float | None = None

    @property
    def lane(self) -> str:
        return f"{self.buyer} {self.material} {self.mode}"


@dataclass(frozen=True)
class TrainSet:
    """Rail cars shared by lanes: at most ``max_trains`` arrivals in any ``window_days``."""

    train_set: str
    max_trains: int
    window_days: int


@dataclass(frozen=True)
class DisposalSite:
    site: str
    material: str
    cost_per_t: float
    max_t_per_day: float | None
    airspace_t: float | None


@dataclass(frozen=True)
class LaneClosure:
    party: str
    mode: str | None
    first_date: dt.date
    last_date: dt.date


@dataclass(frozen=True)
class FirmOrder:
    date: dt.date
    material: str
    party: str
    mode: str | None
    loads: int
    tonnes: float


@dataclass(frozen=True)
class Scenario:
    """Everything the planning stages need, in metric units (t, MWh, GJ, MJ/kg, %).

    Table data that is indexed by date is held as DataFrames:
    ``generation`` (date, unit, mwh), ``coal_blend`` (date, source, share_pct),
    ``generation_history`` and ``coal_quality_history`` (or ``None``).
    """

    plant: Plant
    scrubber: Scrubber
    units: tuple[Unit, ...]
    generation: pd.DataFrame
    coal_sources: tuple[CoalSource, ...]
    coal_blend: pd.DataFrame
    storage: dict[str, Store]
    suppliers: tuple[SupplierLane, ...]
    buyers: tuple[BuyerLane, ...]
    disposal: tuple[DisposalSite, ...]
    firm_orders: tuple[FirmOrder, ...] = ()
    generation_history: pd.DataFrame | None = None
    coal_quality_history: pd.DataFrame | None = None
    source_name: str = ""
    lane_closures: tuple[LaneClosure, ...] = ()
    period_settings: pd.DataFrame | None = None  # first_date, last_date, key, value
    #: Values that are possible but unusual (`reagentplan.schema.PLAUSIBLE`), located.
    warnings: tuple[InputWarning, ...] = ()
    #: Tonnes already moved in the first planned month before its first planned day, by
    #: lane name (``SupplierLane.lane`` / ``BuyerLane.lane``) [t], from the operations
    #: record; a lane not named moved none.  ``None`` = no record: the days before the
    #: start are assumed to have used each contract at its even pace.
    month_to_date: dict[str, float] | None = None
    train_sets: tuple[TrainSet, ...] = ()
    #: SO2 emission allowances (optional ``allowances`` sheet), one row per dated change,
    #: sorted by date: ``date``, ``holding_t`` (first row only, NaN after), ``allocated_t``
    #: (0 where none), ``buy_price_per_t``, ``sell_price_per_t``, ``max_trade_t_per_month``
    #: (NaN = no limit) [t SO2, money/t SO2].  ``None`` = no allowance market.
    allowances: pd.DataFrame | None = None

    def stone_caco3_pct(self, lane: SupplierLane) -> float:
        """CaCO3 of a supplier row's stone [%]: its own value, else the scrubber sheet's."""
        return self.scrubber.limestone_caco3_pct if lane.caco3_pct is None else lane.caco3_pct

    @property
    def quality_coupled(self) -> bool:
        """True when some supplier row gives its stone's CaCO3: the silo then mixes
        deliveries of different stone and the plan prices the chemistry."""
        return any(s.caco3_pct is not None for s in self.suppliers)

    @property
    def dates(self) -> pd.DatetimeIndex:
        return self.plant.dates

    def source(self, name: str) -> CoalSource:
        return next(s for s in self.coal_sources if s.source == name)

    def daily_setting(self, key: str) -> np.ndarray:
        """A plant or scrubber value per horizon day [its unit], with `period_settings`."""
        base = getattr(self.scrubber, key) if hasattr(self.scrubber, key) else getattr(self.plant, key)
        values = np.full(self.plant.horizon_days, float(base))
        if self.period_settings is not None:
            for r in self.period_settings.itertuples():
                if r.key == key:
                    mask = (self.dates >= r.first_date) & (self.dates <= r.last_date)
                    values[mask] = r.value
        return values

    @property
    def allowance_opening_t(self) -> float | None:
        """Allowances held at the start of the first planned day [t SO2]: the first row's
        holding plus every ``allocated_t`` dated before the start; ``None`` without an
        ``allowances`` sheet."""
        if self.allowances is None:
            return None
        a = self.allowances
        before = a["date"] < pd.Timestamp(self.plant.start_date)
        return float(a["holding_t"].iloc[0]) + float(a.loc[before, "allocated_t"].sum())

    def allowance_days(self) -> pd.DataFrame | None:
        """The allowance terms per horizon day, or ``None`` without an ``allowances`` sheet.

        Index: the horizon's dates (``date``).  Columns: ``allocated_t`` [t SO2] added on
        that day (0 on days without an allocation; the opening holding,
        `allowance_opening_t`, is not in it), ``buy_price_per_t`` and ``sell_price_per_t``
        [money/t SO2] and ``max_trade_t_per_month`` [t SO2/month, NaN = no limit] of the
        row in force that day (each row's terms hold from its date until the next row).
        """
        if self.allowances is None:
            return None
        a = self.allowances
        dates = self.dates
        row = np.searchsorted(a["date"].to_numpy(dtype="datetime64[ns]"),
                              dates.to_numpy(dtype="datetime64[ns]"), side="right") - 1
        # the loader makes the first row's date at most the start date, so row >= 0
        terms = a[["buy_price_per_t", "sell_price_per_t", "max_trade_t_per_month"]].to_numpy(float)[row]
        allocated = a.groupby("date")["allocated_t"].sum().reindex(dates, fill_value=0.0)
        out = pd.DataFrame({"allocated_t": allocated.to_numpy(float),
                            "buy_price_per_t": terms[:, 0], "sell_price_per_t": terms[:, 1],
                            "max_trade_t_per_month": terms[:, 2]}, index=dates)
        out.index.name = "date"
        return out

    def lane_open(self, lane: "SupplierLane | BuyerLane | DisposalSite") -> np.ndarray:
        """Days [bool per horizon day] on which a lane can move material: its weekdays
        and months, less its `lane_closures`."""
        dates = self.dates
        weekdays = getattr(lane, "weekdays", frozenset(range(7)))
        months = getattr(lane, "months", frozenset(range(12)))
        is_open = np.isin(dates.day_of_week, sorted(weekdays)) & np.isin(dates.month - 1, sorted(months))
        party = getattr(lane, "supplier", None) or getattr(lane, "buyer", None) or lane.site
        mode = getattr(lane, "mode", None)
        for c in self.lane_closures:
            if c.party == party and (c.mode is None or c.mode == mode):
                is_open &= ~((dates >= pd.Timestamp(c.first_date)) & (dates <= pd.Timestamp(c.last_date)))
        return is_open

    def generation_matrix(self) -> pd.DataFrame:
        """Generation [MWh] as a (date × unit) table over the horizon; NaN where not given."""
        table = self.generation.pivot(index="date", columns="unit", values="mwh")
        return table.reindex(index=self.dates, columns=[u.unit for u in self.units])

    def blend_matrix(self) -> pd.DataFrame:
        """Blend share [fraction] per (date × source) over the horizon, held forward."""
        table = self.coal_blend.pivot(index="date", columns="source", values="share_pct")
        table = table.fillna(0.0) / 100.0
        names = [s.source for s in self.coal_sources]
        table = table.reindex(columns=names, fill_value=0.0)
        full = table.reindex(table.index.union(self.dates)).ffill()
        return full.reindex(self.dates)


# --------------------------------------------------------------------------- cells


class _CellError(Exception):
    def __init__(self, found: str, expected: str | None = None):
        self.found, self.expected = found, expected


def _describe(value: Any) -> str:
    if isinstance(value, str):
        return f"'{value}'"
    if isinstance(value, (dt.datetime, dt.date)):
        return f"the date {value:%Y-%m-%d}"
    return f"{value!r}"


def _refuse_uncalculated(value: Any) -> None:
    if isinstance(value, Uncalculated):
        raise _CellError(f"found the formula '{value}' with no calculated value",
                         "a value: the file was saved without calculating its formulas (open it "
                         "in Excel or LibreOffice and save it again, or type the value)")


def _parse_number(value: Any) -> float:
    _refuse_uncalculated(value)
    if isinstance(value, bool):
        raise _CellError(f"found {value}")
    if isinstance(value, (int, float)):
        x = float(value)
    elif isinstance(value, str):
        text = value.strip().replace(",", "")
        try:
            x = float(text)
        except ValueError:
            raise _CellError(f"found {_describe(value)}") from None
    elif isinstance(value, (dt.date, dt.datetime)):
        raise _CellError(f"found {_describe(value)}")
    else:
        raise _CellError(f"found {_describe(value)}")
    if not math.isfinite(x):
        raise _CellError(f"found {_describe(value)}")
    return x


def _parse_date(value: Any) -> dt.date:
    if isinstance(value, dt.datetime):
        if value.time() != dt.time(0):
            raise _CellError(f"found {value:%Y-%m-%d %H:%M} (a time of day)", "a whole day, no time")
        return value.date()
    if isinstance(value, dt.date):
        return value
    if isinstance(value, str):
        try:
            return dt.date.fromisoformat(value.strip())
        except ValueError:
            raise _CellError(f"found {_describe(value)}") from None
    raise _CellError(f"found {_describe(value)}")


def _parse_names(value: Any, names: tuple[str, ...], what: str) -> frozenset[int]:
    """Parse ``Mon-Fri``, ``Mon,Wed,Fri``, ``Nov-Mar`` (wrapping) into indices."""
    if value is None or (isinstance(value, str) and not value.strip()):
        return frozenset(range(len(names)))
    if not isinstance(value, str):
        raise _CellError(f"found {_describe(value)}")
    chosen: set[int] = set()
    n = len(names)
    for part in value.replace(";", ",").split(","):
        part = part.strip().lower()
        if not part:
            continue
        ends = [p.strip()[:3] for p in part.split("-")]
        if len(ends) > 2 or any(e not in names for e in ends):
            raise _CellError(f"found {_describe(value)} ('{part}' is not a {what} or range)")
        a = names.index(ends[0])
        b = names.index(ends[-1])
        k = a
        while True:
            chosen.add(k)
            if k == b:
                break
            k = (k + 1) % n
    if not chosen:
        raise _CellError(f"found {_describe(value)}")
    return frozenset(chosen)


def names_label(chosen: frozenset[int], names: tuple[str, ...]) -> str:
    """``Mar-Nov`` style label of a set of weekday or month indices."""
    idx = sorted(chosen)
    runs, start = [], None
    for k in idx + [None]:
        if start is None:
            start = prev = k
        elif k is not None and k == prev + 1:
            prev = k
        else:
            runs.append((start, prev))
            start = prev = k
    parts = [names[a].title() if a == b else f"{names[a].title()}-{names[b].title()}" for a, b in runs
             if a is not None]
    return ",".join(parts)


def _parse_cell(f: Field, value: Any) -> Any:
    """Parse one non-empty cell; raise `_CellError` with what was found."""
    _refuse_uncalculated(value)
    if f.kind == "text":
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        if isinstance(value, (dt.date, dt.datetime, bool)):
            raise _CellError(f"found {_describe(value)}")
        return str(value).strip()
    if f.kind == "code":
        text = str(value).strip().lower().replace(" ", "_")
        if text not in f.choices:
            raise _CellError(f"found {_describe(value)}{_did_you_mean(text, list(f.choices))}")
        return text
    if f.kind == "date":
        return _parse_date(value)
    if f.kind == "weekdays":
        return _parse_names(value, DAY_NAMES, "weekday")
    if f.kind == "months":
        return _parse_names(value, MONTH_NAMES, "month")
    x = _parse_number(value)
    if f.kind == "integer":
        if not float(x).is_integer():
            raise _CellError(f"found {_describe(value)}")
        x = int(x)
    lo, hi = f.bounds()
    if (lo is not None and x < lo) or (hi is not None and x > hi):
        raise _CellError(f"found {_describe(value)}")
    return x


BOILER_WORDS = {"pc": "a pulverised-coal boiler with a wet scrubber", "cfb": "a fluidised bed"}


def plausibility_warning(f: Field, value: Any, *, sheet: str | None, row: int | None,
                         column: str | None, boiler: str | None = None) -> InputWarning | None:
    """The warning for a parsed value outside its field's usual range, or ``None``.

    The one check every table of `Field` goes through (the scenario's sheets here, the
    operations record's sheets too): the range is the field's row of
    `reagentplan.schema.PLAUSIBLE` (by name, or by its ``range_key``); ``boiler`` picks
    the boiler's usual range where it has one (``None``: the table's default).  A
    percentage of at most 1 where the usual range starts above 1 looks like a
    fraction, and the warning asks whether 100 times it was meant.
    """
    rng = f.plausible
    if rng is None or value is None or isinstance(value, bool):
        return None
    x = float(value)
    lo, hi = rng.usual_for(boiler)
    if lo <= x <= hi:
        return None
    unit = f" {f.unit}" if f.unit else ""
    what = rng.what or f.name
    if rng.by_boiler and boiler:
        what += f" for {BOILER_WORDS.get(boiler, boiler)}"
    found = f"{x:g}{unit}"
    usual = f"{lo:g} to {hi:g}{unit} ({what})"
    hint = ""
    if f.unit == "%" and 0 < x <= 1 and lo > 1:
        hint = (f"did you mean {x * 100:g} %? (percentages are written as percent: {x * 100:g}, "
                f"not {x:g})")
    return InputWarning(sheet, row, column, found, usual, rng.source, hint)


def _empty(value: Any) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())


# --------------------------------------------------------------------------- sheets


class _Collector:
    """Gathers problems; `fail` raises them all at once."""

    def __init__(self) -> None:
        self.problems: list[Problem] = []
        self.warnings: list[InputWarning] = []

    def check_usual(self, f: Field, value: Any, sheet: str | None, row: int | None,
                    column: str | None, boiler: str | None = None) -> None:
        w = plausibility_warning(f, value, sheet=sheet, row=row, column=column, boiler=boiler)
        if w is not None:
            self.warnings.append(w)

    def add(self, sheet: str | None, row: int | None, column: str | None, found: str,
            expected: str) -> None:
        self.problems.append(Problem(sheet, row, column, found, expected))

    def fail(self) -> None:
        if self.problems:
            raise ScenarioError(self.problems)


def _did_you_mean(name: str, options: list[str]) -> str:
    close = difflib.get_close_matches(name, options, n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def _resolve_columns(raw: RawSheet, sheet: Sheet, out: _Collector) -> dict[str, tuple[int, float]]:
    """Map each canonical field to (column index, factor to metric); check the header."""
    known = {f.name for f in sheet.fields}
    accepted = sorted(known | {VARIANTS[n].us for n in known if n in VARIANTS})
    found: dict[str, tuple[int, float]] = {}
    written_as: dict[str, str] = {}
    for j, name in enumerate(raw.header):
        if name is None:
            if any(r[1][j] is not None for r in raw.rows if j < len(r[1])):
                out.add(sheet.name, 1, f"column {j + 1}", "a column with values but no header",
                        "a header naming the column, one of " + ", ".join(accepted))
            continue
        if name in schema.NOTE_COLUMNS:
            continue
        if name in known:
            canonical, factor = name, 1.0
        elif name in BY_US_NAME and BY_US_NAME[name].metric in known:
            canonical, factor = BY_US_NAME[name].metric, BY_US_NAME[name].factor
        else:
            out.add(sheet.name, 1, str(raw.header_as_written[j]),
                    f"unknown column{_did_you_mean(name, accepted)}",
                    "one of " + ", ".join(accepted) + " (or a 'note' column)")
            continue
        if canonical in found:
            other = written_as[canonical]
            what = ("both unit variants" if other != name else "the same column twice")
            out.add(sheet.name, 1, name, f"{what} of one column ('{other}' and '{name}')",
                    "only one of them")
            continue
        found[canonical] = (j, factor)
        written_as[canonical] = name
    for f in sheet.fields:
        if f.required and f.name not in found:
            alt = f" or '{VARIANTS[f.name].us}'" if f.name in VARIANTS else ""
            out.add(sheet.name, 1, f.name, "the column is missing",
                    f"a column '{f.name}'{alt}: {f.note}")
    return found


def _read_table(raw: RawSheet, sheet: Sheet, out: _Collector,
                boiler: str | None = None) -> list[dict[str, Any]]:
    """Parse a table sheet into records (with ``_row``, the Excel row): every cell
    checked against its field (hard range: a problem) and its usual range (a warning)."""
    cols = _resolve_columns(raw, sheet, out)
    records: list[dict[str, Any]] = []
    seen: dict[tuple, int] = {}
    for excel_row, values in raw.rows:
        rec: dict[str, Any] = {"_row": excel_row}
        ok = True
        for f in sheet.fields:
            if f.name not in cols:
                rec[f.name] = f.default if f.kind not in ("weekdays", "months") else _parse_cell(f, None)
                continue
            j, factor = cols[f.name]
            value = values[j] if j < len(values) else None
            header = raw.header[j] or f.name
            if _empty(value):
                if f.required:
                    out.add(sheet.name, excel_row, header, "the cell is empty", f.expected())
                    ok = False
                rec[f.name] = (f.default if f.kind not in ("weekdays", "months")
                               else _parse_cell(f, None))
                continue
            try:
                if factor != 1.0:
                    x = _parse_number(value) * factor
                    rec[f.name] = _parse_cell(f, x)
                else:
                    rec[f.name] = _parse_cell(f, value)
                out.check_usual(f, rec[f.name], sheet.name, excel_row, header, boiler)
            except _CellError as e:
                found = e.found
                expected = e.expected or f.expected()
                if factor != 1.0 and f.kind == "number":
                    expected += " (after conversion to metric)"
                out.add(sheet.name, excel_row, header, found, expected)
                ok = False
        if not ok:
            continue
        if sheet.key:
            key = tuple(rec.get(k) for k in sheet.key)
            if key in seen:
                out.add(sheet.name, excel_row, ", ".join(sheet.key),
                        f"a duplicate of row {seen[key]} ({', '.join(map(_show, key))})",
                        "one row per " + " and ".join(sheet.key))
                continue
            seen[key] = excel_row
        records.append(rec)
    if sheet.sort_by:
        # order-free: rows pasted unit by unit or source by source are sorted (stable, so
        # rows of one key keep the order they were written in)
        records.sort(key=lambda r: tuple(r[k] for k in sheet.sort_by))
    return records


def read_table(raw: RawSheet, sheet: Sheet, boiler: str | None = None
               ) -> tuple[list[dict[str, Any]], list[Problem], list[InputWarning]]:
    """Parse any table sheet of `Field`s (the scenario's, the operations record's) with
    the loader's own checks: ``(records, problems, warnings)``.

    Each record maps field names to parsed values (metric) plus ``_row``, the Excel row;
    rows come sorted by ``sheet.sort_by``; duplicates of ``sheet.key`` are problems naming
    both rows; hard ranges (`Field.bounds`) give problems, usual ranges
    (`reagentplan.schema.PLAUSIBLE`) warnings.
    """
    out = _Collector()
    records = _read_table(raw, sheet, out, boiler)
    return records, out.problems, out.warnings


def _show(v: Any) -> str:
    if isinstance(v, dt.date):
        return f"{v:%Y-%m-%d}"
    return "(empty)" if v is None else str(v)


def _read_keyvalue(raw: RawSheet, sheet: Sheet, out: _Collector,
                   boiler: str | None = None,
                   written_rows: dict[str, int] | None = None) -> dict[str, Any]:
    """Parse a key/value sheet.  Usual ranges are checked once every key is read, with
    the sheet's own ``boiler`` if it has one (``plant``), else the one given.

    ``written_rows``, when given, is filled with the Excel row of each key whose value
    was written (and parsed), by canonical name: a default is not written."""
    header = raw.header
    if "key" not in header or "value" not in header:
        out.add(sheet.name, 1, "key" if "key" not in header else "value", "the column is missing",
                "columns 'key' and 'value' (and optionally 'note')")
        return {}
    for j, h in enumerate(header):
        if h is not None and h not in ("key", "value") and h not in schema.NOTE_COLUMNS:
            out.add(sheet.name, 1, str(raw.header_as_written[j]), "unknown column",
                    "only key, value and note")
    jk, jv = header.index("key"), header.index("value")
    known = [f.name for f in sheet.fields]
    accepted = sorted(set(known) | {VARIANTS[n].us for n in known if n in VARIANTS})
    values: dict[str, Any] = {}
    rows: dict[str, int] = {}
    bad: set[str] = set()
    written: dict[str, str] = {}
    parsed: list[tuple[Field, int, str]] = []
    for excel_row, row in raw.rows:
        key = _normalise_key(row[jk] if jk < len(row) else None)
        value = row[jv] if jv < len(row) else None
        if key is None:
            out.add(sheet.name, excel_row, "key", "a value with no key", "a key, one of " + ", ".join(known))
            continue
        factor = 1.0
        if key in BY_US_NAME and BY_US_NAME[key].metric in known:
            canonical, factor = BY_US_NAME[key].metric, BY_US_NAME[key].factor
        elif key in known:
            canonical = key
        else:
            out.add(sheet.name, excel_row, "key", f"unknown key '{key}'{_did_you_mean(key, accepted)}",
                    "one of " + ", ".join(accepted))
            continue
        if canonical in rows:
            first, r0 = written.get(canonical), rows[canonical]
            found = (f"both unit variants of one key ('{first}' in row {r0} and '{key}')"
                     if first != key else f"'{key}' is given again (first in row {r0})")
            out.add(sheet.name, excel_row, "key", found, "each key once, in one unit only")
            continue
        rows[canonical] = excel_row
        written[canonical] = key
        f = sheet.field(canonical)
        if _empty(value):
            continue
        try:
            values[canonical] = _parse_cell(f, _parse_number(value) * factor if factor != 1.0 else value)
            parsed.append((f, excel_row, key))
            if written_rows is not None:
                written_rows[canonical] = excel_row
        except _CellError as e:
            bad.add(canonical)
            out.add(sheet.name, excel_row, f"value ({key})", e.found, e.expected or f.expected())
    for f in sheet.fields:
        if f.name not in values:
            if f.required and f.name not in bad:
                where = rows.get(f.name)
                out.add(sheet.name, where, f"value ({f.name})",
                        "no value" if where else f"the key '{f.name}' is missing",
                        f.expected() + f": {f.note}")
            values.setdefault(f.name, f.default)
    boiler = values.get("boiler") or boiler
    for f, excel_row, key in parsed:
        out.check_usual(f, values[f.name], sheet.name, excel_row, f"value ({key})", boiler)
    return values


def _normalise_key(value: Any) -> str | None:
    if _empty(value):
        return None
    return str(value).strip().lower()


# --------------------------------------------------------------------------- load


def load_scenario(source: str | os.PathLike | BinaryIO | bytes) -> Scenario:
    """Read and validate a scenario workbook.

    Parameters
    ----------
    source : path, binary file or bytes of an .xlsx workbook.

    Returns
    -------
    Scenario
        All quantities metric: tonnes [t], energy [MWh, GJ], heating value [MJ/kg],
        shares and contents in percent [%].

    Raises
    ------
    ScenarioError
        Listing every problem with its sheet, Excel row and column.
    """
    raw = read_raw(source)
    name = os.fspath(source) if isinstance(source, (str, os.PathLike)) else "upload"
    return _build(raw, os.path.basename(name))


def scenario_from_raw(raw: dict[str, RawSheet], source_name: str = "") -> Scenario:
    """Validate sheets already read by `reagentplan.workbook.read_raw` (or changed from
    them, as a study's variants are) into a `Scenario`, exactly as `load_scenario` does.

    Raises
    ------
    ScenarioError
        As `load_scenario`.
    """
    return _build(raw, source_name)


def _build(raw: dict[str, RawSheet], source_name: str) -> Scenario:
    out = _Collector()
    by_name = {k.strip().lower(): v for k, v in raw.items()}
    names = [s.name for s in schema.SHEETS]
    for title in raw:
        key = title.strip().lower()
        if (key in schema.SHEETS_BY_NAME or key in schema.NOTE_SHEETS or key in schema.TOOL_SHEETS
                or key.startswith("notes")):
            continue
        out.add(title, None, None, f"unknown sheet{_did_you_mean(key, names)}",
                "one of " + ", ".join(names) + " (or a 'notes' sheet for free notes)")
    for s in schema.SHEETS:
        if s.required and s.name not in by_name:
            out.add(s.name, None, None, "the sheet is missing", f"a sheet '{s.name}' ({s.note or 'see the template'})")
    out.fail()

    plant_kv = _read_keyvalue(by_name["plant"], schema.PLANT, out)
    boiler = plant_kv.get("boiler") or schema.PLANT.field("boiler").default

    def table(sheet: Sheet) -> list[dict[str, Any]]:
        if sheet.name not in by_name:
            return []
        return _read_table(by_name[sheet.name], sheet, out, boiler)

    scrub_rows: dict[str, int] = {}
    scrub_kv = _read_keyvalue(by_name["scrubber"], schema.SCRUBBER, out, boiler, scrub_rows)
    recs = {s.name: table(s) for s in schema.SHEETS if not s.keyvalue}
    has_gen_history = "generation_history" in by_name
    has_quality_history = "coal_quality_history" in by_name
    out.fail()
    _check_removal_range(scrub_kv, scrub_rows, out)

    plant = _make(Plant, plant_kv)
    if plant.fly_ash_share_pct is None:
        plant = dataclasses.replace(plant, fly_ash_share_pct=80.0 if plant.boiler == "pc" else 60.0)
    scrubber = _make(Scrubber, scrub_kv)
    units = tuple(_make(Unit, r) for r in recs["units"])
    sources = tuple(_make(CoalSource, r) for r in recs["coal_sources"])
    stores = {r["store"]: _make(Store, r) for r in recs["storage"]}
    suppliers = tuple(_make(SupplierLane, r) for r in recs["suppliers"])
    buyers = tuple(_make(BuyerLane, r) for r in recs["buyers"])
    disposal = tuple(_make(DisposalSite, r) for r in recs["disposal"])

    _check_plant(plant, scrubber, out)
    for sheet_name, what in (("units", units), ("coal_sources", sources), ("suppliers", suppliers)):
        if not what:
            out.add(sheet_name, None, None, "the sheet has no rows", "at least one row")
    _check_storage(plant, recs["storage"], out)
    _check_monthly(recs["suppliers"], "suppliers", out)
    _check_monthly(recs["buyers"], "buyers", out)
    _check_quality_limits(recs["buyers"], out)

    unit_names = {u.unit: u for u in units}
    generation = _check_dated(recs["generation"], "generation", "unit", unit_names, plant, out,
                              inside_horizon=True)
    for r in recs["generation"]:
        u = unit_names.get(r["unit"])
        if u is not None and r["mwh"] > u.capacity_mw * 24 * 1.0001:
            out.add("generation", r["_row"], "mwh",
                    f"found {r['mwh']:g} MWh for {u.unit}",
                    f"at most {u.capacity_mw * 24:g} MWh (capacity {u.capacity_mw:g} MW x 24 h)")
    history = None
    if has_gen_history:
        history = _check_dated(recs["generation_history"], "generation_history", "unit", unit_names,
                               plant, out, inside_horizon=False)
        _check_history_days(recs["generation_history"], unit_names, out)
    if not has_gen_history and not out.problems:
        _check_generation_coverage(generation, units, plant, out)
    if has_gen_history and not out.problems:
        _check_history_covers_forecast(generation, history, units, plant, out)

    source_names = {s.source: s for s in sources}
    blend = _check_blend(recs["coal_blend"], source_names, plant, out)
    quality = None
    if has_quality_history:
        quality = _check_dated(recs["coal_quality_history"], "coal_quality_history", "source",
                               source_names, plant, out, inside_horizon=False)
    firm = _check_firm(recs["firm_orders"], plant, suppliers, buyers, disposal, out)
    closures = _check_closures(recs["lane_closures"], suppliers, buyers, disposal, out)
    periods = _check_periods(recs["period_settings"], plant, out)
    _check_period_removal(recs["period_settings"], scrubber, out)
    _check_rejects(plant, recs["coal_sources"], recs["disposal"], out)
    train_sets = _check_train_sets(recs["train_sets"], recs["suppliers"], out)
    _warn_stone_settings_unused(recs["period_settings"], suppliers, out)
    allowances = _check_allowances(recs["allowances"], plant, out)
    out.fail()
    return Scenario(plant, scrubber, units, generation, sources, blend, stores, suppliers, buyers,
                    disposal, firm, history, quality, source_name, closures, periods,
                    warnings=tuple(out.warnings), train_sets=train_sets, allowances=allowances)


def _check_removal_range(kv: dict[str, Any], rows: dict[str, int], out: _Collector) -> None:
    """``removal_min_pct`` and ``removal_max_pct`` together, min <= max, and a written
    ``removal_pct`` inside them.  With a range and no written ``removal_pct``, the
    setpoint becomes the default clipped into the range (``kv`` is changed in place).
    Each bound's hard range (that of ``removal_pct``) is checked with its cell."""
    lo, hi = kv.get("removal_min_pct"), kv.get("removal_max_pct")
    if lo is None and hi is None:
        return
    if lo is None or hi is None:
        given, missing = ("removal_min_pct", "removal_max_pct") if hi is None else (
            "removal_max_pct", "removal_min_pct")
        out.add("scrubber", rows.get(given), f"value ({given})",
                f"{given} = {kv[given]:g} without {missing}",
                f"both removal_min_pct and removal_max_pct (the range the plan may choose "
                f"the removal in), or neither (removal_pct fixed)")
        return
    if lo > hi:
        out.add("scrubber", rows.get("removal_min_pct"), "value (removal_min_pct)",
                f"removal_min_pct = {lo:g} is above removal_max_pct = {hi:g}",
                "a lowest removal no higher than the highest (equal plans a fixed removal)")
        return
    if "removal_pct" in rows:
        x = kv["removal_pct"]
        if not lo <= x <= hi:
            out.add("scrubber", rows["removal_pct"], "value (removal_pct)",
                    f"removal_pct = {x:g} is outside the removal range {lo:g} to {hi:g} %",
                    f"a removal_pct from {lo:g} to {hi:g} (the setpoint of the hand baseline "
                    f"and of 'reagentplan balance'), or the cell left empty to use "
                    f"{min(max(schema.SCRUBBER.field('removal_pct').default, lo), hi):g}")
    else:
        default = schema.SCRUBBER.field("removal_pct").default
        kv["removal_pct"] = float(min(max(default, lo), hi))


def _check_period_removal(records, scrubber: Scrubber, out: _Collector) -> None:
    """A ``period_settings`` row for ``removal_pct`` outside the scrubber's removal range:
    a warning (it fixes the setpoint on its days; the range still bounds the plan)."""
    rng = scrubber.removal_range
    if rng is None:
        return
    lo, hi = rng
    for r in records:
        if r["key"] != "removal_pct":
            continue
        try:
            x = _parse_number(r["value"])
        except _CellError:
            continue  # reported by _check_periods
        if not lo <= x <= hi:
            out.warnings.append(InputWarning(
                "period_settings", r["_row"], "value", f"{x:g} % for removal_pct",
                f"{lo:g} to {hi:g} % (the scrubber sheet's removal range)",
                "the scrubber sheet: the setpoint of these days is outside the range the "
                "plan chooses the removal in, which still applies on them",
                "narrow or widen removal_min_pct / removal_max_pct, or change this value"))


def _check_allowances(records, plant: Plant, out: _Collector) -> pd.DataFrame | None:
    """The ``allowances`` sheet: the first row on or before the start date with the
    holding, later rows without one, and a sell price at most the buy price.  A sheet
    with no rows (the template's, left as it came) is no allowance market: ``None``."""
    cols = ["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
            "max_trade_t_per_month"]
    if not records:
        return None  # the template's sheet left as it came: no allowance market
    first = records[0]
    if first["date"] > plant.start_date:
        out.add("allowances", first["_row"], "date",
                f"the first row is dated {first['date']:%Y-%m-%d}, after the start date "
                f"{plant.start_date:%Y-%m-%d}",
                "a first row dated on or before the start date (the holding and prices in "
                "force on the first planned day)")
    if first["holding_t"] is None:
        out.add("allowances", first["_row"], "holding_t", "the cell is empty",
                "the allowances held on the first row's date [t SO2] (0 if none) on the "
                "first row")
    for r in records[1:]:
        if r["holding_t"] is not None:
            out.add("allowances", r["_row"], "holding_t",
                    f"a holding of {r['holding_t']:g} t on a later row (the first row is "
                    f"row {first['_row']})",
                    "the holding on the first row only; later additions go in allocated_t")
    for r in records:
        if r["sell_price_per_t"] > r["buy_price_per_t"]:
            out.add("allowances", r["_row"], "sell_price_per_t",
                    f"a sell price of {r['sell_price_per_t']:g} above the buy price "
                    f"{r['buy_price_per_t']:g}",
                    "a sell price at most the buy price (per tonne of SO2)")
    frame = pd.DataFrame([{c: r[c] for c in cols} for r in records], columns=cols)
    frame["date"] = pd.to_datetime(frame["date"])
    frame["allocated_t"] = frame["allocated_t"].fillna(0.0)
    for c in cols[1:]:
        frame[c] = frame[c].astype(float)
    return frame.sort_values("date", kind="stable").reset_index(drop=True)


def _check_train_sets(records, suppliers, out: _Collector) -> tuple[TrainSet, ...]:
    """Train sets, each named by at least one rail supplier row and every supplier's
    ``train_set`` known; a stone's CaCO3 + MgCO3 at most 100 %."""
    sets = tuple(_make(TrainSet, r) for r in records)
    names = [t.train_set for t in sets]
    for r in suppliers:
        if r.get("train_set") is not None:
            if r["train_set"] not in names:
                out.add("suppliers", r["_row"], "train_set", f"found '{r['train_set']}'",
                        "a train_set named on the train_sets sheet" + _did_you_mean(r["train_set"], names))
            elif r["mode"] != "rail":
                out.add("suppliers", r["_row"], "train_set", f"found a train set on a {r['mode']} lane",
                        "a train set only on rail lanes")
        if (r.get("caco3_pct") or 0) + (r.get("mgco3_pct") or 0) > 100:
            out.add("suppliers", r["_row"], "mgco3_pct",
                    f"found CaCO3 {r.get('caco3_pct')} + MgCO3 {r.get('mgco3_pct')} > 100 %",
                    "CaCO3 + MgCO3 of at most 100 %")
        if (r.get("tier_loads_per_month") is None) != (r.get("tier_freight_per_load") is None):
            out.add("suppliers", r["_row"], "tier_freight_per_load", "found only one of the two tier columns",
                    "tier_loads_per_month and tier_freight_per_load together")
    return sets


def _check_rejects(plant: Plant, sources: list[dict[str, Any]], disposal: list[dict[str, Any]],
                   out: _Collector) -> None:
    """Mill rejects that the coal can carry and that a site takes away.

    Per coal source: no rejects for a fluidised bed (it has crushers, not pulverisers);
    the rejects' sulfur at most what pyrite FeS2 carries (53.4 % S, IUPAC weights via
    `reagentplan.chemistry`); the rejects' mineral part (less their sulfur) at most the
    coal's ash, since it is taken out of the ash reaching the boiler
    (`reagentplan.balance.boiler_ash_t`).  Coal with rejects needs a ``disposal`` row
    for ``mill_rejects``.
    """
    rejecting = []
    for r in sources:
        rej = r.get("mill_rejects_pct") or 0.0
        share = r.get("rejects_sulfur_share_pct") or 0.0
        s_rej = r["sulfur_pct"] * share / 100  # [% of the coal fed]
        if rej > 0:
            rejecting.append(r)
        if rej > 0 and plant.boiler == "cfb":
            out.add("coal_sources", r["_row"], "mill_rejects_pct",
                    f"found {rej:g} % with boiler = cfb",
                    "0 or empty for a fluidised bed (it crushes its coal; it has no pulverisers "
                    "and no mill rejects)")
        if s_rej > rej * PYRITE_S_SHARE + 1e-9:
            out.add("coal_sources", r["_row"], "rejects_sulfur_share_pct",
                    f"found {share:g} % of {r['sulfur_pct']:g} % S, i.e. {s_rej:.3g} % of the coal "
                    f"fed, in rejects of {rej:g} %",
                    f"rejects carrying at most {100 * PYRITE_S_SHARE:.1f} % sulfur (pure pyrite "
                    f"FeS2): a share of at most {_share_cap(rej, r['sulfur_pct']):.3g} % here, or "
                    "more mill_rejects_pct")
        elif rej - s_rej > r["ash_pct"] + 1e-9:
            out.add("coal_sources", r["_row"], "mill_rejects_pct",
                    f"found rejects of {rej:g} % with {rej - s_rej:.3g} % of mineral matter besides "
                    f"their sulfur, above the coal's ash of {r['ash_pct']:g} %",
                    "rejects whose mineral matter (rejects less their sulfur) is at most the "
                    "coal's ash_pct")
    if rejecting and not any(d["material"] == schema.MILL_REJECTS for d in disposal):
        rows = ", ".join(str(r["_row"]) for r in rejecting)
        out.add("disposal", None, "material",
                f"no row for '{schema.MILL_REJECTS}', while coal_sources row(s) {rows} give "
                "mill_rejects_pct above 0",
                f"a row with material '{schema.MILL_REJECTS}' (site, cost_per_t, and optionally "
                "max_t_per_day and airspace_t) for the sites that take the mill rejects, or "
                "mill_rejects_pct empty")


def _share_cap(rejects_pct: float, sulfur_pct: float) -> float:
    """Largest share of the coal's sulfur [%] that rejects of ``rejects_pct`` [% of the
    coal fed] can carry as pyrite."""
    return min(100.0, 100 * rejects_pct * PYRITE_S_SHARE / sulfur_pct) if sulfur_pct > 0 else 100.0


def _make(cls, record: dict[str, Any]):
    return cls(**{f.name: record.get(f.name) for f in fields(cls)})


def _check_plant(plant: Plant, scrubber: Scrubber, out: _Collector) -> None:
    if plant.boiler == "cfb" and scrubber.injection_removal_pct > 0:
        out.add("scrubber", None, "value (injection_removal_pct)",
                f"found {scrubber.injection_removal_pct:g} with boiler = cfb",
                "0 for a fluidised bed (its sorbent goes into the bed: use removal_pct)")


def _check_storage(plant: Plant, records: list[dict[str, Any]], out: _Collector) -> None:
    have = {r["store"] for r in records}
    needed = [s for s in schema.STORES if not (s == "gypsum" and plant.boiler == "cfb")]
    for s in needed:
        if s not in have:
            out.add("storage", None, "store", f"no row for the store '{s}'",
                    "one row for each of " + ", ".join(needed))
    for r in records:
        if r["safety_t"] > r["capacity_t"]:
            out.add("storage", r["_row"], "safety_t",
                    f"safety stock {r['safety_t']:g} t is above capacity {r['capacity_t']:g} t",
                    "a safety stock no larger than the capacity")
        if r["initial_t"] > r["capacity_t"]:
            out.add("storage", r["_row"], "initial_t",
                    f"initial level {r['initial_t']:g} t is above capacity {r['capacity_t']:g} t",
                    "an initial level no larger than the capacity")


def _check_monthly(records: list[dict[str, Any]], sheet: str, out: _Collector) -> None:
    for r in records:
        lo, hi = r.get("min_t_per_month"), r.get("max_t_per_month")
        if lo is not None and hi is not None and lo > hi:
            out.add(sheet, r["_row"], "min_t_per_month",
                    f"the monthly minimum {lo:g} t is above the maximum {hi:g} t",
                    "a minimum no larger than the maximum")


def _check_quality_limits(records: list[dict[str, Any]], out: _Collector) -> None:
    gypsum_only = ("min_purity_pct", "max_moisture_pct", "max_chloride_ppm")
    ash_only = ("max_loi_pct", "max_so3_pct")
    for r in records:
        wrong = ash_only if r["material"] == "gypsum" else gypsum_only if r["material"] == "fly_ash" else ()
        for col in wrong:
            if r.get(col) is not None:
                out.add("buyers", r["_row"], col, f"a limit for {r['material']}",
                        f"this column empty for {r['material']} (it applies to "
                        f"{'fly ash' if col in ash_only else 'gypsum'})")


def _check_dated(records: list[dict[str, Any]], sheet: str, ref_col: str, known: dict,
                 plant: Plant, out: _Collector, inside_horizon: bool) -> pd.DataFrame:
    """Check a dated table's references and dates.  Its rows come sorted by the sheet's
    ``sort_by`` (`_read_table`), so the order they were typed or pasted in is free."""
    ref_sheet = "units" if ref_col == "unit" else "coal_sources"
    for r in records:
        d = r["date"]
        if r[ref_col] not in known:
            out.add(sheet, r["_row"], ref_col, f"unknown {ref_col} '{r[ref_col]}'"
                    f"{_did_you_mean(r[ref_col], list(known))}",
                    f"a {ref_col} listed in the '{ref_sheet}' sheet: " + ", ".join(known))
        if inside_horizon and not plant.start_date <= d <= plant.end_date:
            out.add(sheet, r["_row"], "date", f"the date {d:%Y-%m-%d} is outside the horizon",
                    f"a date from {plant.start_date:%Y-%m-%d} to {plant.end_date:%Y-%m-%d}"
                    " (plant start_date and horizon_days)")
        if not inside_horizon and d >= plant.start_date:
            out.add(sheet, r["_row"], "date", f"the date {d:%Y-%m-%d} is not in the past",
                    f"history before the start date {plant.start_date:%Y-%m-%d}")
    cols = [f.name for f in schema.SHEETS_BY_NAME[sheet].fields]
    frame = pd.DataFrame([{c: r[c] for c in cols} for r in records], columns=cols)
    frame["date"] = pd.to_datetime(frame["date"])
    for c in cols:
        if c not in ("date", ref_col):
            frame[c] = frame[c].astype(float)
    return frame


def _check_generation_coverage(generation: pd.DataFrame, units: tuple[Unit, ...], plant: Plant,
                               out: _Collector) -> None:
    dates = plant.dates
    for u in units:
        have = pd.DatetimeIndex(generation.loc[generation["unit"] == u.unit, "date"])
        missing = dates.difference(have)
        if len(missing):
            out.add("generation", None, "date",
                    f"{u.unit} has no generation on {len(missing)} of {len(dates)} planned days "
                    f"(first {missing[0]:%Y-%m-%d})",
                    "a row for every unit and day of the horizon, or a 'generation_history' "
                    "sheet to forecast the days not given")


def _check_history_days(records: list[dict[str, Any]], units: dict, out: _Collector) -> None:
    """Each unit's history: one row per day from its first to its last (no gaps), and no
    day above capacity x 24 h."""
    last: dict[str, dt.date] = {}
    for r in records:
        u = units.get(r["unit"])
        if u is None:
            continue
        if r["mwh"] > u.capacity_mw * 24 * 1.0001:
            out.add("generation_history", r["_row"], "mwh", f"found {r['mwh']:g} MWh for {u.unit}",
                    f"at most {u.capacity_mw * 24:g} MWh (capacity {u.capacity_mw:g} MW x 24 h)")
        before = last.get(u.unit)
        if before is not None and (r["date"] - before).days > 1:
            first_missing = before + dt.timedelta(days=1)
            n = (r["date"] - before).days - 1
            out.add("generation_history", r["_row"], "date",
                    f"{u.unit} has no rows for the {n} day(s) from {first_missing:%Y-%m-%d} to "
                    f"{r['date'] - dt.timedelta(days=1):%Y-%m-%d}, before this row",
                    "one row per unit and day with no gaps (0 MWh for days the unit was off)")
        if before is None or r["date"] > before:
            last[u.unit] = r["date"]


def _check_history_covers_forecast(generation: pd.DataFrame, history: pd.DataFrame,
                                   units: tuple[Unit, ...], plant: Plant, out: _Collector) -> None:
    """A unit whose planned days the ``generation`` sheet leaves open needs history."""
    dates = plant.dates
    for u in units:
        have = pd.DatetimeIndex(generation.loc[generation["unit"] == u.unit, "date"])
        missing = dates.difference(have)
        if not len(missing):
            continue
        n = int((history["unit"] == u.unit).sum())
        if n < MIN_HISTORY_DAYS:
            out.add("generation_history", None, "unit",
                    f"{u.unit} has {n} day(s) of history and no generation on {len(missing)} of "
                    f"{len(dates)} planned days (first {missing[0]:%Y-%m-%d})",
                    f"at least {MIN_HISTORY_DAYS} days of history for {u.unit} to forecast "
                    "from, or rows in the 'generation' sheet for every planned day")


def _check_blend(records: list[dict[str, Any]], sources: dict, plant: Plant,
                 out: _Collector) -> pd.DataFrame:
    totals: dict[dt.date, list] = {}
    for r in records:
        if r["source"] not in sources:
            out.add("coal_blend", r["_row"], "source", f"unknown source '{r['source']}'"
                    f"{_did_you_mean(r['source'], list(sources))}",
                    "a source listed in the 'coal_sources' sheet: " + ", ".join(sources))
        if r["date"] > plant.end_date:
            out.add("coal_blend", r["_row"], "date",
                    f"the date {r['date']:%Y-%m-%d} is after the horizon's last day "
                    f"{plant.end_date:%Y-%m-%d}", "a date inside the horizon")
        totals.setdefault(r["date"], []).append(r)
    if not records:
        out.add("coal_blend", None, None, "the sheet has no rows",
                "at least one date with shares summing to 100")
    elif min(totals) > plant.start_date:
        out.add("coal_blend", records[0]["_row"], "date",
                f"the first blend starts {min(totals):%Y-%m-%d}, after the start date "
                f"{plant.start_date:%Y-%m-%d}", "a blend in force on the first planned day")
    for d, rows in totals.items():
        total = sum(r["share_pct"] for r in rows)
        if abs(total - 100.0) > SHARE_TOLERANCE_PCT:
            out.add("coal_blend", rows[0]["_row"], "share_pct",
                    f"the shares of {d:%Y-%m-%d} sum to {total:g} % (rows "
                    f"{', '.join(str(r['_row']) for r in rows)})", "shares of one date summing to 100")
    frame = pd.DataFrame([{k: r[k] for k in ("date", "source", "share_pct")} for r in records],
                         columns=["date", "source", "share_pct"])
    frame["date"] = pd.to_datetime(frame["date"])
    frame["share_pct"] = frame["share_pct"].astype(float)
    # keep only the blend in force at the start and later ones
    if len(frame):
        first = frame.loc[frame["date"] <= pd.Timestamp(plant.start_date), "date"].max()
        if pd.notna(first):
            frame = frame[frame["date"] >= first].reset_index(drop=True)
    return frame


def _check_firm(records: list[dict[str, Any]], plant: Plant, suppliers, buyers, disposal,
                out: _Collector) -> tuple[FirmOrder, ...]:
    orders = []
    for r in records:
        if not plant.start_date <= r["date"] <= plant.end_date:
            out.add("firm_orders", r["_row"], "date", f"the date {r['date']:%Y-%m-%d} is outside the horizon",
                    f"a date from {plant.start_date:%Y-%m-%d} to {plant.end_date:%Y-%m-%d}")
            continue
        if r["material"] == "limestone":
            lanes = [s for s in suppliers if s.supplier == r["party"]]
            sheet, names = "suppliers", sorted({s.supplier for s in suppliers})
        else:
            lanes = [b for b in buyers if b.buyer == r["party"] and b.material == r["material"]]
            lanes += [d for d in disposal if d.site == r["party"] and d.material == r["material"]]
            sheet = "buyers' or 'disposal"
            names = sorted({b.buyer for b in buyers if b.material == r["material"]}
                           | {d.site for d in disposal if d.material == r["material"]})
        if r["mode"] is not None:
            lanes = [x for x in lanes if getattr(x, "mode", r["mode"]) == r["mode"]]
        lanes = [x for x in lanes if r["date"].month - 1 in getattr(x, "months", range(12))]
        if not lanes:
            out.add("firm_orders", r["_row"], "party",
                    f"no {r['material']} lane for '{r['party']}'"
                    + (f" by {r['mode']}" if r["mode"] else "") + _did_you_mean(r["party"], names),
                    f"a party of the '{sheet}' sheet for {r['material']}: " + ", ".join(names))
            continue
        if len(lanes) > 1:
            out.add("firm_orders", r["_row"], "mode", f"'{r['party']}' has several lanes",
                    "the mode of the lane (" + ", ".join(sorted({getattr(x, 'mode', '') for x in lanes})) + ")")
            continue
        lane = lanes[0]
        load = getattr(lane, "load_t", None)
        tonnes = r["tonnes"] if r["tonnes"] is not None else (r["loads"] * load if load else None)
        if tonnes is None:
            out.add("firm_orders", r["_row"], "tonnes", "the cell is empty", "the tonnes booked")
            continue
        orders.append(FirmOrder(r["date"], r["material"], r["party"], getattr(lane, "mode", None),
                                r["loads"], float(tonnes)))
    return tuple(orders)


def _check_closures(records, suppliers, buyers, disposal, out: _Collector) -> tuple[LaneClosure, ...]:
    parties: dict[str, set] = {}
    for x in suppliers:
        parties.setdefault(x.supplier, set()).add(x.mode)
    for x in buyers:
        parties.setdefault(x.buyer, set()).add(x.mode)
    for x in disposal:
        parties.setdefault(x.site, set()).add(None)
    closures = []
    for r in records:
        if r["party"] not in parties:
            out.add("lane_closures", r["_row"], "party", f"unknown party '{r['party']}'"
                    f"{_did_you_mean(r['party'], list(parties))}",
                    "a supplier, buyer or disposal site: " + ", ".join(parties))
            continue
        if r["mode"] is not None and r["mode"] not in parties[r["party"]]:
            out.add("lane_closures", r["_row"], "mode", f"'{r['party']}' has no {r['mode']} lane",
                    "one of its modes: " + ", ".join(sorted(m for m in parties[r["party"]] if m)))
            continue
        if r["last_date"] < r["first_date"]:
            out.add("lane_closures", r["_row"], "last_date",
                    f"the last day {r['last_date']:%Y-%m-%d} is before the first {r['first_date']:%Y-%m-%d}",
                    "a last day on or after the first day")
            continue
        closures.append(LaneClosure(r["party"], r["mode"], r["first_date"], r["last_date"]))
    return tuple(closures)


def _warn_stone_settings_unused(records, suppliers, out: _Collector) -> None:
    """A `period_settings` row for ``limestone_caco3_pct`` does nothing once quarries give
    their own CaCO3 (the silo's mix of their stone is what the scrubber is fed): say so."""
    if not any(s.caco3_pct is not None for s in suppliers):
        return
    for r in records or []:
        if r["key"] == "limestone_caco3_pct":
            out.warnings.append(InputWarning(
                "period_settings", r["_row"], "key", "limestone_caco3_pct for a span of days",
                "of settings the plan uses (quarries give their own CaCO3 on the suppliers sheet, so "
                "the scrubber is fed the silo's mix of the stone delivered)",
                "DEVELOPERS.md, stone quality in the plan",
                "this row is not used: set the stone's CaCO3 on the suppliers sheet, or leave "
                "caco3_pct empty there to plan with this setting"))


def _check_periods(records, plant: Plant, out: _Collector) -> pd.DataFrame | None:
    if not records:
        return None
    spans: dict[str, list] = {}
    for r in records:
        f = (schema.SCRUBBER.field(r["key"]) if r["key"] in {x.name for x in schema.SCRUBBER.fields}
             else schema.PLANT.field(r["key"]))
        try:
            x = _parse_cell(f, r["value"])
            w = plausibility_warning(f, x, sheet="period_settings", row=r["_row"], column="value",
                                     boiler=plant.boiler)
            if w is not None:
                out.warnings.append(dataclasses.replace(w, found=f"{w.found} for {r['key']}"))
        except _CellError as e:
            out.add("period_settings", r["_row"], "value", f"{e.found} for {r['key']}", f.expected())
        if r["last_date"] < r["first_date"]:
            out.add("period_settings", r["_row"], "last_date",
                    f"the last day {r['last_date']:%Y-%m-%d} is before the first {r['first_date']:%Y-%m-%d}",
                    "a last day on or after the first day")
        if r["last_date"] < plant.start_date or r["first_date"] > plant.end_date:
            out.add("period_settings", r["_row"], "first_date", "the span is outside the horizon",
                    f"days from {plant.start_date:%Y-%m-%d} to {plant.end_date:%Y-%m-%d}")
        for other in spans.get(r["key"], []):
            if r["first_date"] <= other["last_date"] and other["first_date"] <= r["last_date"]:
                out.add("period_settings", r["_row"], "first_date",
                        f"the span overlaps row {other['_row']} for {r['key']}",
                        "spans of one key that do not overlap")
        spans.setdefault(r["key"], []).append(r)
    frame = pd.DataFrame([{k: r[k] for k in ("first_date", "last_date", "key", "value")} for r in records])
    frame["first_date"] = pd.to_datetime(frame["first_date"])
    frame["last_date"] = pd.to_datetime(frame["last_date"])
    return frame
