"""Lanes: every way material enters or leaves a store, with its daily calendar.

A lane is a supplier row (limestone in), a buyer row (byproduct out) or a disposal
site for one material (byproduct out).  `build_lanes` turns the scenario and the daily
balance into arrays over the horizon that both the optimiser and the reorder-point
baseline read, so the two obey exactly the same rules.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..scenario import BuyerLane, Scenario, SupplierLane
from ..schema import MILL_REJECTS

SUPPLY, SALE, LANDFILL = "supply", "sale", "landfill"


@dataclass(frozen=True)
class Lane:
    """One lane over the horizon (arrays have one entry per day).

    Attributes
    ----------
    kind : ``supply``, ``sale`` or ``landfill``
    material : store it fills or empties
    party, mode, name : who, how, and the lane's display name
    load_t : tonnes per load [t]; ``None`` for landfill (tonnes are continuous)
    max_per_day : loads per day (supply, sale) or tonnes per day (landfill) [loads/d or t/d]
    open : days the lane can move material (calendar, closures, lead time, quality) [bool]
    cost_per_t : money per tonne moved, positive = the plant pays [money/t]
    cost_per_load : freight per load [money/load]
    lead_days : days from order to arrival (supply) [d]
    month_min_t, month_max_t : each horizon month's contract limits for its planned days [t],
        NaN = none (see `_monthly`)
    airspace_t : remaining airspace (landfill) [t], inf = unlimited
    why_closed : per day, the first reason the lane is shut ('' if open)
    """

    kind: str
    material: str
    party: str
    mode: str | None
    name: str
    load_t: float | None
    max_per_day: float
    open: np.ndarray
    cost_per_t: float
    cost_per_load: float
    lead_days: int
    month_min_t: np.ndarray
    month_max_t: np.ndarray
    airspace_t: float
    why_closed: tuple[str, ...]
    source: object

    def capacity_t(self) -> np.ndarray:
        """Most tonnes the lane can move each day [t]."""
        per = self.max_per_day * (self.load_t if self.load_t else 1.0)
        return np.where(self.open, per, 0.0)


def horizon_months(dates: pd.DatetimeIndex) -> tuple[np.ndarray, list[pd.Period], np.ndarray]:
    """Month index of each day, the months, and the share of each month in the horizon [-]."""
    periods = dates.to_period("M")
    months = list(pd.unique(periods))
    index = np.array([months.index(p) for p in periods])
    share = np.array([(index == k).sum() / p.days_in_month for k, p in enumerate(months)])
    return index, months, share


def month_span(dates: pd.DatetimeIndex) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Per horizon month: days planned, days of the month before the first planned day,
    days after the last planned day, and days in the month [d]."""
    _, months, _ = horizon_months(dates)
    inside = np.array([(dates.to_period("M") == p).sum() for p in months], dtype=float)
    dim = np.array([p.days_in_month for p in months], dtype=float)
    before = np.zeros(len(months))
    after = np.zeros(len(months))
    before[0] = dates[0].day - 1
    after[-1] = months[-1].days_in_month - dates[-1].day
    return inside, before, after, dim


def _monthly(limit: float | None, share: np.ndarray, months: list[pd.Period],
             lane_months: frozenset[int] = frozenset(range(12)), *, bound: str = "max",
             span: tuple[np.ndarray, ...] | None = None, used_t: float | None = None) -> np.ndarray:
    """A calendar month's contract limit [t/month] as it applies to the planned days of
    each horizon month; none in months the lane's row does not cover.

    The limit belongs to the calendar month.  In the first month, the tonnes already
    moved before the first planned day count against the maximum and toward the minimum:
    ``used_t`` when recorded [t], else assumed at the contract's even pace (limit × days
    before / days in month).  What remains is the maximum of the month's rest; the
    minimum of what remains is pro-rated over the days planned and the days after the
    horizon (the month's rest lies partly beyond the plan), while the maximum is not
    shrunk for days beyond the horizon: the plan may use all of it.  Without ``span``
    both limits are pro-rated by ``share`` (the share of the month planned).
    """
    if limit is None:
        return np.full(share.shape, np.nan)
    covered = np.array([p.month - 1 in lane_months for p in months])
    if span is None:
        return np.where(covered, limit * share, np.nan)
    inside, before, after, dim = span
    used = limit * before / dim
    if used_t is not None:
        used[0] = used_t
    rest = np.clip(limit - used, 0.0, None)
    value = rest if bound == "max" else rest * inside / np.maximum(inside + after, 1.0)
    return np.where(covered, value, np.nan)


def contract_month_note(scenario: Scenario) -> str:
    """How the first and last planned months' contract limits were set, in words."""
    start = pd.Timestamp(scenario.plant.start_date)
    end = pd.Timestamp(scenario.plant.end_date)
    parts = []
    if start.day > 1:
        if scenario.month_to_date is None:
            parts.append(f"{start:%B %Y} started before the plan: with no record of the tonnes already "
                         f"moved in it, the {start.day - 1} day(s) before {start:%Y-%m-%d} are assumed to "
                         "have used each contract at its even pace (limit x days / days in month)")
        else:
            parts.append(f"{start:%B %Y}: tonnes recorded from the 1st to {start - pd.Timedelta(days=1):%Y-%m-%d} "
                         "count against each monthly maximum and toward each minimum")
    if end.day < end.days_in_month:
        parts.append(f"{end:%B %Y} ends after the plan: its monthly maximum is kept whole and its "
                     "minimum pro-rated to the days planned")
    return "; ".join(parts) if parts else "the plan covers whole calendar months"


def quality_ok(lane: BuyerLane, balance: pd.DataFrame, *, purity: bool = True) -> tuple[np.ndarray, list[str]]:
    """Days on which the day's product meets the buyer's limits, and the failing limit.

    ``purity`` false leaves the gypsum purity out: with stone of several qualities the
    purity follows the plan's own silo, and the model (`quality.py`) decides it."""
    n = len(balance)
    ok = np.ones(n, dtype=bool)
    why = [""] * n
    checks = []
    if lane.material == "gypsum":
        checks = [("min_purity_pct", "gypsum_purity_pct", "purity", -1),
                  ("max_moisture_pct", "gypsum_moisture_pct", "moisture", 1),
                  ("max_chloride_ppm", "gypsum_chloride_ppm", "chloride", 1)]
    elif lane.material == "fly_ash":
        checks = [("max_loi_pct", "fly_ash_loi_pct", "LOI", 1),
                  ("max_so3_pct", "fly_ash_so3_pct", "SO3", 1)]
    for attr, column, label, sign in checks:
        limit = getattr(lane, attr)
        if limit is None or (attr == "min_purity_pct" and not purity):
            continue
        value = balance[column].to_numpy(dtype=float)
        # a day with no product (NaN) has nothing of its own to fail: stock from earlier days
        bad = (value > limit) if sign > 0 else (value < limit)
        for i in np.flatnonzero(bad & ok):
            why[i] = f"{label} outside {lane.buyer}'s limit"
        ok &= ~bad
    return ok, why


def _calendar_why(scenario: Scenario, lane) -> tuple[np.ndarray, list[str]]:
    dates = scenario.dates
    open_ = scenario.lane_open(lane)
    weekdays = getattr(lane, "weekdays", frozenset(range(7)))
    months = getattr(lane, "months", frozenset(range(12)))
    why = []
    for d, ok in zip(dates, open_):
        if ok:
            why.append("")
        elif d.day_of_week not in weekdays:
            why.append("weekday calendar")
        elif d.month - 1 not in months:
            why.append("season (months)")
        else:
            why.append("lane closure")
    return open_, why


def build_lanes(scenario: Scenario, balance: pd.DataFrame, exact_quality: bool = False) -> list[Lane]:
    """All lanes of the scenario with their daily calendars and pro-rated limits.

    The ``mill_rejects`` disposal rows make no lane: the rejects have no store and their
    haul is no decision of the plan (`reagentplan.schedule.rejects`).

    With stone of several qualities the gypsum purity is left out of the buyers' open
    days (the plan decides it), unless ``exact_quality``: ``balance`` is then the balance
    of a plan's own silo and its purity closes the days it fails."""
    dates = scenario.dates
    _, months, share = horizon_months(dates)
    span = month_span(dates)
    mtd = scenario.month_to_date

    def limit(row, attr, bound):
        used = None if mtd is None else float(mtd.get(row.lane, 0.0))
        return _monthly(getattr(row, attr), share, months, row.months, bound=bound, span=span,
                        used_t=used)

    lanes: list[Lane] = []
    for s in scenario.suppliers:
        open_, why = _calendar_why(scenario, s)
        lead = np.arange(len(dates)) < s.lead_days
        why = ["lead time" if (lead[i] and open_[i]) else w for i, w in enumerate(why)]
        lanes.append(Lane(SUPPLY, "limestone", s.supplier, s.mode, s.lane, s.load_t,
                          s.max_loads_per_day, open_ & ~lead, s.price_per_t, s.freight_per_load,
                          s.lead_days, limit(s, "min_t_per_month", "min"),
                          limit(s, "max_t_per_month", "max"), np.inf, tuple(why), s))
    for b in scenario.buyers:
        open_, why = _calendar_why(scenario, b)
        q_ok, q_why = quality_ok(b, balance, purity=exact_quality or not scenario.quality_coupled)
        why = [w or (q if not q_ok[i] else "") for i, (w, q) in enumerate(zip(why, q_why))]
        lanes.append(Lane(SALE, b.material, b.buyer, b.mode, b.lane, b.load_t, b.max_loads_per_day,
                          open_ & q_ok, -b.price_per_t, 0.0, 0,
                          limit(b, "min_t_per_month", "min"),
                          limit(b, "max_t_per_month", "max"), np.inf, tuple(why), b))
    for d in scenario.disposal:
        if d.material == MILL_REJECTS:
            continue  # hauled daily from the mills, not planned (`reagentplan.schedule.rejects`)
        open_, why = _calendar_why(scenario, d)
        cap = np.inf if d.max_t_per_day is None else d.max_t_per_day
        lanes.append(Lane(LANDFILL, d.material, d.site, None, f"{d.site} {d.material}", None, cap,
                          open_, d.cost_per_t, 0.0, 0, np.full(share.shape, np.nan),
                          np.full(share.shape, np.nan),
                          np.inf if d.airspace_t is None else d.airspace_t, tuple(why), d))
    return lanes


def firm_loads(scenario: Scenario, lanes: list[Lane]) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Firm orders per lane name: (loads per day, tonnes per day)."""
    n = scenario.plant.horizon_days
    out: dict[str, tuple[np.ndarray, np.ndarray]] = {}
    start = pd.Timestamp(scenario.plant.start_date)
    for o in scenario.firm_orders:
        day = (pd.Timestamp(o.date) - start).days
        for lane in lanes:
            src = lane.source
            match = (lane.party == o.party and lane.material == o.material
                     and (o.mode is None or lane.mode in (None, o.mode)))
            if isinstance(src, (SupplierLane, BuyerLane)):
                match &= (pd.Timestamp(o.date).month - 1) in src.months
            if match:
                loads, tonnes = out.setdefault(lane.name, (np.zeros(n, int), np.zeros(n)))
                loads[day] += o.loads
                tonnes[day] += o.tonnes
                break
    return out


def cheapest_delivered_cost(scenario: Scenario) -> float:
    """Lowest price + freight per tonne over the limestone lanes [money/t]."""
    return min(s.delivered_cost_per_t for s in scenario.suppliers)


def cheapest_disposal_cost(scenario: Scenario, material: str) -> float:
    """Lowest landfill cost of a material [money/t] (0 when it has no site)."""
    costs = [d.cost_per_t for d in scenario.disposal if d.material == material]
    return min(costs) if costs else 0.0



def train_set_room(scenario: Scenario, lanes: list[Lane], quantity: dict[str, np.ndarray],
                   lane: Lane, day: int) -> bool:
    """True when one more train of ``lane`` arriving on ``day`` keeps its train set
    (if any) within ``max_trains`` in every ``window_days`` window that holds the day."""
    name = getattr(lane.source, "train_set", None)
    if name is None:
        return True
    ts = next(t for t in scenario.train_sets if t.train_set == name)
    members = [l for l in lanes if l.kind == SUPPLY and getattr(l.source, "train_set", None) == name]
    n = len(scenario.dates)
    lo, hi = max(0, day - ts.window_days + 1), min(n, day + ts.window_days)
    trains = sum((np.asarray(quantity[l.name][lo:hi], float) for l in members), np.zeros(hi - lo))
    trains[day - lo] += 1
    c = np.r_[0.0, np.cumsum(trains)]
    w = ts.window_days
    for a in range(0, max(1, len(trains) - w + 1)):
        if c[min(a + w, len(trains))] - c[a] > ts.max_trains + 1e-9:
            return False
    return True
