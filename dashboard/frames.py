"""Tables the views draw, cut from what the library returned.

Each function is pure and only selects, joins, groups and labels the library's own
frames (`PlanResult.movements`, `.inventory`, `.balance`, `.lanes`,
`.evaluation.month_totals`, `RiskResult.frame` and `.top`); nothing here plans,
forecasts or balances anything.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from reagentplan.schedule.lanes import LANDFILL, SALE, SUPPLY, horizon_months

from .style import MATERIAL_LABELS, STORE_LABELS

#: Days from the start counted as "this week" for orders and haul-outs [d].
WEEK_DAYS = 7
DAYS_PER_YEAR = 365.25

#: Buyer quality limits: (label, balance column, unit, buyer attribute, sense), where
#: sense "min" means the product must stay at or above the limit.
QUALITY_CHECKS = {
    "gypsum": [("purity", "gypsum_purity_pct", "%", "min_purity_pct", "min"),
               ("moisture", "gypsum_moisture_pct", "%", "max_moisture_pct", "max"),
               ("chloride", "gypsum_chloride_ppm", "ppm", "max_chloride_ppm", "max")],
    "fly_ash": [("LOI", "fly_ash_loi_pct", "%", "max_loi_pct", "max"),
                ("SO3", "fly_ash_so3_pct", "%", "max_so3_pct", "max")],
}


def month_label(period: pd.Period, share: float = 1.0) -> str:
    text = period.strftime("%b %Y")
    return text if share >= 0.999 else f"{text} (part)"


def lane_modes(lanes) -> dict[str, str | None]:
    return {lane.name: lane.mode for lane in lanes}


# --------------------------------------------------------------------------- coordinator


def inbound_calendar(movements: pd.DataFrame, lanes) -> pd.DataFrame:
    """Limestone arrivals, one row per lane and day, with ``mode`` and ``status``:
    ``booked`` (a firm order already placed), ``firm`` (daily plan, to order) or
    ``outlook`` (weekly bucket after the firm window)."""
    frame = movements[movements["direction"] == "in"].copy()
    frame["mode"] = frame["lane"].map(lane_modes(lanes))
    status = np.where(frame["booked"], "booked", np.where(frame["firm"], "firm", "outlook"))
    frame["status"] = status
    frame["lead_days"] = (frame["date"] - frame["order_by"]).dt.days
    return frame.reset_index(drop=True)


def orders_this_week(movements: pd.DataFrame, start, days: int = WEEK_DAYS) -> pd.DataFrame:
    """Inbound loads still to order whose order-by date falls within ``days`` of the
    start (or before it), earliest order-by first."""
    start = pd.Timestamp(start)
    inbound = movements[(movements["direction"] == "in") & ~movements["booked"].astype(bool)]
    due = inbound[inbound["order_by"] < start + pd.Timedelta(days=days)]
    cols = ["order_by", "date", "lane", "party", "loads", "tonnes", "cost", "firm"]
    return due.sort_values(["order_by", "date", "lane"])[cols].reset_index(drop=True)


def next_orders(movements: pd.DataFrame, start, days: int = WEEK_DAYS, n: int = 3) -> pd.DataFrame:
    """The next ``n`` inbound loads to order after this week, by order-by date."""
    start = pd.Timestamp(start)
    inbound = movements[(movements["direction"] == "in") & ~movements["booked"].astype(bool)]
    later = inbound[inbound["order_by"] >= start + pd.Timedelta(days=days)]
    cols = ["order_by", "date", "lane", "party", "loads", "tonnes", "cost", "firm"]
    return later.sort_values(["order_by", "date", "lane"])[cols].head(n).reset_index(drop=True)


def haulouts_this_week(movements: pd.DataFrame, start, days: int = WEEK_DAYS) -> pd.DataFrame:
    """Outbound loads (sales and landfill) of the first ``days`` days, one row per party
    and material: the days they move (weekday names), loads and tonnes."""
    start = pd.Timestamp(start)
    out = movements[(movements["direction"] == "out")
                    & (movements["date"] < start + pd.Timedelta(days=days))]
    cols = ["party", "material", "kind", "days", "first_date", "loads", "tonnes"]
    if out.empty:
        return pd.DataFrame(columns=cols)
    rows = []
    for (party, material, kind), g in out.groupby(["party", "material", "kind"], sort=False):
        dates = sorted(pd.unique(g["date"]))
        names = ("every day" if len(dates) >= days
                 else " ".join(f"{pd.Timestamp(d):%a}" for d in dates))
        rows.append({"party": party, "material": material, "kind": kind, "days": names,
                     "first_date": dates[0], "loads": g["loads"].sum(min_count=1),
                     "tonnes": float(g["tonnes"].sum())})
    frame = pd.DataFrame(rows, columns=cols)
    order = {"gypsum": 0, "fly_ash": 1, "bottom_ash": 2}
    frame["_o"] = frame["material"].map(order).fillna(9)
    return frame.sort_values(["_o", "kind", "party"]).drop(columns="_o").reset_index(drop=True)


def contract_progress(scenario, lanes, month_totals: dict, kinds=(SUPPLY,)) -> pd.DataFrame:
    """Planned tonnes per lane and horizon month against the lane's monthly contract
    minimum and maximum (pro-rated for part months, as the planner uses them).

    Columns: lane, party, kind, material, month (first day), month_label, in_season,
    planned_t, min_t, max_t, status.
    """
    _, months, share = horizon_months(scenario.dates)
    rows = []
    for lane in lanes:
        if lane.kind not in kinds:
            continue
        totals = month_totals.get(lane.name, np.zeros(len(months)))
        season = getattr(lane.source, "months", frozenset(range(12)))
        for k, period in enumerate(months):
            planned = float(totals[k])
            in_season = (period.month - 1) in season
            if not in_season and planned <= 0:
                continue
            lo, hi = float(lane.month_min_t[k]), float(lane.month_max_t[k])
            if np.isnan(lo) and np.isnan(hi):
                status = "no contract limit"
            elif not np.isnan(lo) and planned < lo - 1e-6:
                status = "below minimum"
            elif not np.isnan(hi) and planned > hi + 1e-6:
                status = "above maximum"
            else:
                status = "within contract"
            rows.append({"lane": lane.name, "party": lane.party, "kind": lane.kind,
                         "material": lane.material, "month": period.to_timestamp(),
                         "month_label": month_label(period, share[k]), "in_season": in_season,
                         "planned_t": planned, "min_t": lo, "max_t": hi, "status": status})
    cols = ["lane", "party", "kind", "material", "month", "month_label", "in_season",
            "planned_t", "min_t", "max_t", "status"]
    return pd.DataFrame(rows, columns=cols)


def lane_use(lanes, month_totals: dict, movements: pd.DataFrame) -> pd.DataFrame:
    """Per lane: tonnes planned, what its calendar allows, the share used, loads, cost."""
    loads = movements.groupby("lane")["loads"].sum(min_count=1)
    cost = movements.groupby("lane")["cost"].sum()
    rows = []
    for lane in lanes:
        planned = float(np.sum(month_totals.get(lane.name, 0.0)))
        cap = float(lane.capacity_t().sum())
        use = 100.0 * planned / cap if np.isfinite(cap) and cap > 0 else np.nan
        n_loads = loads.get(lane.name, np.nan)
        rows.append({"lane": lane.name, "kind": lane.kind, "material": lane.material,
                     "party": lane.party, "mode": lane.mode, "planned_t": planned,
                     "capacity_t": cap if np.isfinite(cap) else np.nan, "use_pct": use,
                     "open_days": int(np.sum(lane.open)),
                     "loads": float(n_loads) if pd.notna(n_loads) else np.nan,
                     "cost": float(cost.get(lane.name, 0.0))})
    return pd.DataFrame(rows)


# --------------------------------------------------------------------------- plant


def store_bands(inventory: pd.DataFrame, risk_frame: pd.DataFrame | None) -> pd.DataFrame:
    """The planned level per store and day with the risk replay's P10/P50/P90 beside it
    (NaN without a replay)."""
    cols = ["level_p10_t", "level_p50_t", "level_p90_t", "p_below_safety", "p_empty",
            "p_over_capacity"]
    if risk_frame is None:
        out = inventory.copy()
        for c in cols:
            out[c] = np.nan
        return out
    cols += ["window"] if "window" in risk_frame else []
    return inventory.merge(risk_frame[["date", "store", *cols]], on=["date", "store"], how="left")


def store_headlines(scenario, risk, breaches: list[dict]) -> list[dict]:
    """One headline per store: the first date at risk from the risk replay's ranked list
    (`RiskResult.top`, the firm window's), else the plan's own first breach in the firm
    window, else clear.  The outlook beyond the firm window (its risks and breaches) is
    re-planned before it comes and makes no headline."""
    top = {r["store"]: r for r in (risk.top if risk is not None else [])}
    out = []
    for store in scenario.storage:
        own = [b for b in breaches if b.get("store") == store and b.get("window") != "outlook"]
        item = {"store": store, "label": STORE_LABELS.get(store, store), "status": "clear",
                "first_date": None, "chance": None, "what": None, "remedy": None,
                "chance_after": None, "breach": own[0] if own else None,
                "replayed": risk is not None}
        if store in top:
            r = top[store]
            item.update(status="at risk", first_date=r["first_date"], chance=r["chance"],
                        what=r["what"], remedy=r.get("remedy"), chance_after=r.get("chance_after"))
        elif own:
            item.update(status="plan breach", first_date=own[0]["first_date"], what=own[0]["kind"])
        out.append(item)
    return out


# --------------------------------------------------------------------------- sales


def quality_margins(balance: pd.DataFrame, buyers) -> pd.DataFrame:
    """Each day's gypsum and fly-ash quality against each buyer's limits.

    Columns: date, buyer, material, property, unit, value, limit, sense, margin (how far
    inside the limit, in the property's unit; negative = off specification).
    """
    parts = []
    for b in buyers:
        for label, column, unit, attr, sense in QUALITY_CHECKS.get(b.material, []):
            limit = getattr(b, attr)
            if limit is None or column not in balance:
                continue
            value = balance[column].astype(float)
            margin = value - limit if sense == "min" else limit - value
            parts.append(pd.DataFrame({
                "date": balance["date"], "buyer": b.buyer, "material": b.material,
                "property": label, "unit": unit, "value": value, "limit": float(limit),
                "sense": sense, "margin": margin}))
    cols = ["date", "buyer", "material", "property", "unit", "value", "limit", "sense", "margin"]
    return pd.concat(parts, ignore_index=True) if parts else pd.DataFrame(columns=cols)


def quality_summary(margins: pd.DataFrame) -> pd.DataFrame:
    """Per buyer and property: the tightest margin and the days off specification."""
    if margins.empty:
        return pd.DataFrame(columns=["buyer", "material", "property", "unit", "limit", "sense",
                                     "min_margin", "days_off_spec", "first_off_spec"])
    g = margins.dropna(subset=["margin"]).groupby(["buyer", "material", "property", "unit",
                                                   "limit", "sense"], sort=False)
    rows = []
    for key, part in g:
        off = part[part["margin"] < 0]
        rows.append(dict(zip(["buyer", "material", "property", "unit", "limit", "sense"], key),
                         min_margin=float(part["margin"].min()), days_off_spec=int(len(off)),
                         first_off_spec=off["date"].min() if len(off) else pd.NaT))
    return pd.DataFrame(rows)


def buyer_season(scenario, lanes, month_totals: dict, material: str = "fly_ash") -> pd.DataFrame:
    """Per buyer lane of ``material`` and horizon month: in season or not, and the
    tonnes planned; plus the landfill rows of the same material (party = site)."""
    _, months, share = horizon_months(scenario.dates)
    rows = []
    for lane in lanes:
        if lane.material != material or lane.kind not in (SALE, LANDFILL):
            continue
        season = getattr(lane.source, "months", frozenset(range(12)))
        totals = month_totals.get(lane.name, np.zeros(len(months)))
        for k, period in enumerate(months):
            rows.append({"lane": lane.name, "party": lane.party, "kind": lane.kind,
                         "month": period.to_timestamp(), "month_label": month_label(period, share[k]),
                         "in_season": (period.month - 1) in season, "planned_t": float(totals[k])})
    return pd.DataFrame(rows, columns=["lane", "party", "kind", "month", "month_label",
                                       "in_season", "planned_t"])


def landfill_monthly(movements: pd.DataFrame) -> pd.DataFrame:
    """Tonnes landfilled per month and material."""
    fill = movements[movements["kind"] == LANDFILL]
    if fill.empty:
        return pd.DataFrame(columns=["month", "material", "tonnes"])
    month = fill["date"].dt.to_period("M").dt.to_timestamp()
    return (fill.assign(month=month).groupby(["month", "material"], as_index=False)["tonnes"].sum())


def airspace(scenario, movements: pd.DataFrame) -> pd.DataFrame:
    """Per disposal site and material: airspace given [t], landfilled over the horizon,
    airspace left at its end, the yearly rate and the years that leaves at that rate."""
    fill = movements[movements["kind"] == LANDFILL]
    days = scenario.plant.horizon_days
    rows = []
    for d in scenario.disposal:
        used = float(fill.loc[(fill["party"] == d.site) & (fill["material"] == d.material),
                              "tonnes"].sum())
        per_year = used / days * DAYS_PER_YEAR
        given = np.nan if d.airspace_t is None else float(d.airspace_t)
        left = given - used
        years = left / per_year if per_year > 0 and np.isfinite(left) else np.inf
        rows.append({"site": d.site, "material": d.material,
                     "material_label": MATERIAL_LABELS.get(d.material, d.material),
                     "airspace_t": given, "landfilled_t": used, "left_t": left,
                     "t_per_year": per_year, "years_left": years})
    return pd.DataFrame(rows, columns=["site", "material", "material_label", "airspace_t",
                                       "landfilled_t", "left_t", "t_per_year", "years_left"])


def silo_quality(plan) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The plan's stone by day and its limestone deliveries with their stone (library
    frames, `reagentplan.schedule.quality`); with one stone the silo's line is flat."""
    from reagentplan.schedule.quality import deliveries_quality_frame, stone_frame

    return (stone_frame(plan.scenario, plan.balance),
            deliveries_quality_frame(plan.scenario, plan.lanes, plan.movements))
