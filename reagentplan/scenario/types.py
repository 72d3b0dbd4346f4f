"""The typed scenario: what a validated workbook says, in metric units.

Frozen dataclasses, one per sheet row (`Plant`, `Scrubber`, `Unit`, `SupplierLane`, ...)
and `Scenario`, which holds them all.  They are made only by the loader
(`reagentplan.scenario.loader`), after every check has passed, so the rest of the library
trusts them.  A new column of a table sheet is a field here (with its `Field` in
`reagentplan.schema`); the loader fills fields by name.
"""

from __future__ import annotations

import datetime as dt
import functools
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import InputWarning
from .tables import MONTH_NAMES, names_label


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
    #: share of the permit limit the plan keeps the rolling average under [%]
    so2_limit_margin_pct: float = 5.0

    @functools.cached_property
    def dates(self) -> pd.DatetimeIndex:
        """The planned days, start to end inclusive (made once per plant: the model reads
        it for every row it builds)."""
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
