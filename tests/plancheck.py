"""An independent checker of a plan's files: it re-reads movements.csv, balance.csv and
inventory.csv and checks every scheduling rule against the scenario, without using the
scheduler's own lane code."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from reagentplan.scenario import Scenario

PRODUCT = {"gypsum": "gypsum_wet_t", "fly_ash": "fly_ash_t", "bottom_ash": "bottom_ash_t"}


def _closed(scn: Scenario, party: str, mode, day: dt.date) -> bool:
    return any(c.party == party and (c.mode is None or c.mode == mode)
               and c.first_date <= day <= c.last_date for c in scn.lane_closures)


def _max_share(scn: Scenario, month: pd.Period) -> float:
    """Share of a calendar month's maximum open to the plan: the month's days from the
    first planned day on (the days before it are assumed used at the even pace, or the
    recorded month-to-date tonnes are taken off, below); a month ending after the horizon
    keeps its whole maximum."""
    first = pd.Timestamp(scn.plant.start_date)
    if month == first.to_period("M"):
        return (month.days_in_month - first.day + 1) / month.days_in_month
    return 1.0


def check_plan(scn: Scenario, movements: pd.DataFrame, balance: pd.DataFrame,
               inventory: pd.DataFrame, breaches: list[dict]) -> list[str]:
    """Every rule broken by the plan, in words (empty = the plan keeps every rule)."""
    errors: list[str] = []
    start = scn.plant.start_date
    bal = balance.set_index(pd.to_datetime(balance["date"]))
    mv = movements.copy()
    mv["date"] = pd.to_datetime(mv["date"])
    firm_remaining = {}
    for o in scn.firm_orders:
        key = (pd.Timestamp(o.date), o.party)
        firm_remaining[key] = firm_remaining.get(key, 0) + o.loads
    for r in mv.itertuples():
        day = r.date.date()
        if r.kind in ("supply", "sale"):
            if float(r.loads) != int(r.loads):
                errors.append(f"{r.lane} {day}: loads {r.loads} not whole")
        if r.kind == "supply":
            lanes = [s for s in scn.suppliers if s.supplier == r.party and r.date.month - 1 in s.months
                     and r.lane.startswith(f"{s.supplier} {s.mode}")]
            if len(lanes) != 1:
                errors.append(f"{r.lane} {day}: no single supplier row")
                continue
            s = lanes[0]
            booked = bool(r.booked)
            if abs(r.tonnes - r.loads * s.load_t) > 1e-6 and not booked:
                errors.append(f"{r.lane} {day}: tonnes {r.tonnes} != loads × {s.load_t}")
            if r.loads > s.max_loads_per_day and not booked:
                errors.append(f"{r.lane} {day}: {r.loads} loads > {s.max_loads_per_day} per day")
            if not booked:
                if r.date.day_of_week not in s.weekdays:
                    errors.append(f"{r.lane} {day}: not a lane weekday")
                if _closed(scn, s.supplier, s.mode, day):
                    errors.append(f"{r.lane} {day}: lane closed")
                if (day - start).days < s.lead_days:
                    errors.append(f"{r.lane} {day}: earlier than the lead time allows")
            order_by = pd.Timestamp(r.order_by).date()
            if (day - order_by).days != s.lead_days:
                errors.append(f"{r.lane} {day}: order_by {order_by} is not {s.lead_days} days ahead")
            if booked:
                firm_remaining[(r.date, r.party)] = firm_remaining.get((r.date, r.party), 0) - r.loads
        elif r.kind == "sale":
            lanes = [b for b in scn.buyers if b.lane == r.lane]
            if len(lanes) != 1:
                errors.append(f"{r.lane} {day}: unknown buyer lane")
                continue
            b = lanes[0]
            if r.loads > b.max_loads_per_day:
                errors.append(f"{r.lane} {day}: {r.loads} loads > {b.max_loads_per_day} per day")
            if r.date.day_of_week not in b.weekdays or r.date.month - 1 not in b.months:
                errors.append(f"{r.lane} {day}: outside the buyer's weekdays or months")
            if _closed(scn, b.buyer, b.mode, day):
                errors.append(f"{r.lane} {day}: lane closed")
            q = bal.loc[r.date]
            limits = [("min_purity_pct", "gypsum_purity_pct", -1), ("max_moisture_pct", "gypsum_moisture_pct", 1),
                      ("max_chloride_ppm", "gypsum_chloride_ppm", 1), ("max_loi_pct", "fly_ash_loi_pct", 1),
                      ("max_so3_pct", "fly_ash_so3_pct", 1)]
            for attr, col, sign in limits:
                lim = getattr(b, attr)
                if lim is None or pd.isna(q[col]):
                    continue
                if (sign > 0 and q[col] > lim + 1e-9) or (sign < 0 and q[col] < lim - 1e-9):
                    errors.append(f"{r.lane} {day}: {col} {q[col]:.3f} breaks the limit {lim}")
        else:
            sites = [d for d in scn.disposal if d.site == r.party and d.material == r.material]
            if len(sites) != 1:
                errors.append(f"{r.lane} {day}: unknown disposal site")
            elif sites[0].max_t_per_day is not None and r.tonnes > sites[0].max_t_per_day + 1e-6:
                errors.append(f"{r.lane} {day}: {r.tonnes} t > daily limit {sites[0].max_t_per_day}")
    for key, left in firm_remaining.items():
        if left > 0:
            errors.append(f"firm order {key} missing {left} load(s)")
    # monthly maxima (of the calendar month, less what went before the start) and airspace
    mv["month"] = mv["date"].dt.to_period("M")
    for (lane, month), g in mv.groupby(["lane", "month"]):
        rows = ([s for s in scn.suppliers if s.lane == lane] + [b for b in scn.buyers if b.lane == lane])
        for row in rows:
            hi = row.max_t_per_month
            if hi is not None:
                booked = g.loc[g["booked"], "tonnes"].sum()
                allowed = hi * _max_share(scn, month)
                if scn.month_to_date is not None and month == pd.Timestamp(scn.plant.start_date).to_period("M"):
                    allowed = max(hi - scn.month_to_date.get(lane, 0.0), 0.0)
                if g["tonnes"].sum() > max(allowed, booked) + 1e-6:
                    errors.append(f"{lane} {month}: {g['tonnes'].sum():.0f} t above the monthly maximum")
    for d in scn.disposal:
        used = mv.loc[(mv["party"] == d.site) & (mv["material"] == d.material), "tonnes"].sum()
        if d.airspace_t is not None and used > d.airspace_t + 1e-6:
            errors.append(f"{d.site} {d.material}: {used:.0f} t above the airspace")
    # inventory: replay and compare
    inv = inventory.copy()
    inv["date"] = pd.to_datetime(inv["date"])
    for store, st in scn.storage.items():
        flows = mv[mv["material"] == store].groupby(["date", "direction"])["tonnes"].sum().unstack(fill_value=0.0)
        flows = flows.reindex(bal.index, fill_value=0.0)
        ins = flows["in"] if "in" in flows else 0.0
        outs = flows["out"] if "out" in flows else 0.0
        if store == "limestone":
            level, x = [], st.initial_t
            for use, arrive in zip(bal["limestone_t"], np.broadcast_to(np.asarray(ins, float), len(bal))):
                x = max(x + arrive - use, 0.0)
                level.append(x)
            level = np.array(level)
        else:
            level = st.initial_t + np.cumsum(bal[PRODUCT[store]].to_numpy() - np.asarray(outs, float))
        shown = inv.loc[inv["store"] == store, "level_t"].to_numpy()
        if not np.allclose(level, shown, atol=0.01):
            errors.append(f"{store}: inventory.csv differs from the replay (max {np.abs(level - shown).max():.2f} t)")
        if (level < -0.01).any():
            errors.append(f"{store}: ships more than it holds on {int((level < -0.01).sum())} day(s)")
        named = [b for b in breaches if b["store"] == store]
        for kind, bad in (("below safety stock", level < st.safety_t - 0.01),
                          ("above capacity", level > st.capacity_t + 0.01)):
            for i in np.flatnonzero(bad):
                day = f"{bal.index[i]:%Y-%m-%d}"
                if not any(b["kind"] in (kind, "empty") and b["first_date"] <= day <= b["last_date"] for b in named):
                    errors.append(f"{store} {day}: {kind} but not listed as a breach")
    return errors
