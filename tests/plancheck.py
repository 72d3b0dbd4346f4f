"""An independent checker of a plan's files: it re-reads movements.csv, balance.csv and
inventory.csv and checks every scheduling rule against the scenario, without using the
scheduler's own lane code."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
from molmass import Formula

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
    # train sets: trains of the lanes sharing a set, in every rolling window
    for ts in scn.train_sets:
        names = {sp.lane for sp in scn.suppliers if sp.train_set == ts.train_set}
        per_day = (mv[mv["lane"].isin(names)].groupby("date")["loads"].sum()
                   .reindex(bal.index, fill_value=0).to_numpy(float))
        for a in range(len(per_day)):
            if per_day[a:a + ts.window_days].sum() > ts.max_trains:
                errors.append(f"train set {ts.train_set}: {per_day[a:a + ts.window_days].sum():.0f} trains "
                              f"in the {ts.window_days} days from {bal.index[a]:%Y-%m-%d}")
    # stone quality: the well-mixed silo replayed from the deliveries, and every buyer's
    # purity limit on every shipping day at the gypsum that silo makes
    if any(sp.caco3_pct is not None for sp in scn.suppliers):
        errors += check_silo(scn, mv, bal)
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


def _M(formula: str) -> float:
    """Molar mass [g/mol], IUPAC standard atomic weights through `molmass` (not the
    `periodictable` the model uses)."""
    return Formula(formula).mass


def _setting(scn: Scenario, key: str) -> np.ndarray:
    base = getattr(scn.scrubber, key) if hasattr(scn.scrubber, key) else getattr(scn.plant, key)
    out = np.full(len(scn.dates), float(base))
    if scn.period_settings is not None:
        for r in scn.period_settings.itertuples():
            if r.key == key:
                out[(scn.dates >= pd.Timestamp(r.first_date)) & (scn.dates <= pd.Timestamp(r.last_date))] = r.value
    return out


def silo_quality(scn: Scenario, movements: pd.DataFrame, bal: pd.DataFrame) -> pd.DataFrame:
    """An independent replay of the well-mixed silo and of the gypsum it makes.

    CaCO3 need per day from first principles (Ca/S × SO2 removed in the scrubber, CaCO3
    for HCl at 1 per 2 HCl, sorbent injection at its Ca/S), deliveries from movements.csv
    with each quarry row's CaCO3, the silo mixed after the day's deliveries; the cake is
    gypsum + sulfite + excess CaCO3 + stone inerts + fly ash slip (Srivastava and
    Jozewicz 2001), and its purity is the gypsum's share of it.
    """
    n = len(bal)
    so2, caco3, cl = _M("SO2"), _M("CaCO3"), _M("Cl")
    ca_s = _setting(scn, "ca_s_ratio")
    inj = _setting(scn, "injection_removal_pct") / 100 if scn.plant.boiler == "pc" else np.zeros(n)
    inj_removed = bal["so2_formed_t"].to_numpy(float) * inj
    scrub_removed = bal["so2_removed_t"].to_numpy(float) - inj_removed
    shares = scn.blend_matrix().to_numpy(float)
    chlorine = shares @ np.array([c.chlorine_pct for c in scn.coal_sources])
    hcl_caco3 = (bal["coal_t"].to_numpy(float) * chlorine / 100 * caco3 / (2 * cl)
                 * (1 - _setting(scn, "prescrubber_hcl_removal_pct") / 100))
    if scn.plant.boiler == "cfb":
        hcl_caco3 = np.zeros(n)
    need_scrub = scrub_removed / so2 * ca_s * caco3 + hcl_caco3
    need = need_scrub + inj_removed / so2 * scn.scrubber.injection_ca_s_ratio * caco3
    arrivals = np.zeros(n)
    arrivals_caco3 = np.zeros(n)
    day_of = {d: i for i, d in enumerate(bal.index)}
    for r in movements[(movements["material"] == "limestone") & (movements["direction"] == "in")].itertuples():
        row = [sp for sp in scn.suppliers if sp.lane == r.lane]
        c = (row[0].caco3_pct if row and row[0].caco3_pct is not None else scn.scrubber.limestone_caco3_pct) / 100
        i = day_of[pd.Timestamp(r.date)]
        arrivals[i] += r.tonnes
        arrivals_caco3[i] += r.tonnes * c
    lime_caco3 = scn.storage["limestone"].initial_t * scn.scrubber.limestone_caco3_pct / 100
    lime_other = scn.storage["limestone"].initial_t - lime_caco3
    share = np.empty(n)
    last = scn.scrubber.limestone_caco3_pct / 100
    for d in range(n):
        lime_caco3 += arrivals_caco3[d]
        lime_other += arrivals[d] - arrivals_caco3[d]
        if lime_caco3 + lime_other > 1e-9 and lime_caco3 > 1e-12:
            last = lime_caco3 / (lime_caco3 + lime_other)
        share[d] = last
        take = min(need[d], lime_caco3)
        lime_other -= max(take / last - take, 0.0)
        lime_caco3 -= take
        lime_other = max(lime_other, 0.0)
    ox = _setting(scn, "oxidation_pct") / 100
    esp = _setting(scn, "esp_efficiency_pct") / 100
    mol = scrub_removed / so2
    gypsum = mol * ox * _M("CaSO4(H2O)2")
    cake = (gypsum + mol * (1 - ox) * (_M("CaSO3") + _M("H2O") / 2) + mol * (ca_s - 1) * caco3
            + need_scrub * (1 / share - 1) + bal["fly_ash_t"].to_numpy(float) * (1 - esp) / esp)
    with np.errstate(invalid="ignore", divide="ignore"):
        purity = np.where(cake > 0, 100 * gypsum / cake, np.nan)
    return pd.DataFrame({"caco3_pct": 100 * share, "stone_t": need / share, "purity_pct": purity},
                        index=bal.index)


def check_silo(scn: Scenario, mv: pd.DataFrame, bal: pd.DataFrame) -> list[str]:
    """The balance's stone, silo quality and purity against the independent replay, and
    every gypsum buyer's purity limit on every day it is shipped."""
    errors = []
    q = silo_quality(scn, mv, bal)
    shown = bal["limestone_caco3_pct"].to_numpy(float)
    if not np.allclose(shown, q["caco3_pct"], atol=0.01):  # the two libraries' molar masses differ by ~1e-4
        errors.append(f"silo CaCO3 in balance.csv differs from the replay (max "
                      f"{np.abs(shown - q['caco3_pct']).max():.4f} %-points)")
    stone = bal["limestone_t"].to_numpy(float)
    if not np.allclose(stone, q["stone_t"], rtol=5e-4, atol=1e-6):
        errors.append("limestone_t differs from the CaCO3 need at the silo's mix")
    gp = bal["gypsum_purity_pct"].to_numpy(float)
    ok = np.isnan(gp) | (np.abs(gp - q["purity_pct"].to_numpy()) < 0.02)
    if not ok.all():
        errors.append(f"gypsum purity differs from the replay on {int((~ok).sum())} day(s)")
    for r in mv[(mv["material"] == "gypsum") & (mv["direction"] == "out")].itertuples():
        rows = [b for b in scn.buyers if b.lane == r.lane]
        if not rows or rows[0].min_purity_pct is None:
            continue
        p = q.loc[pd.Timestamp(r.date), "purity_pct"]
        if not np.isnan(p) and p < rows[0].min_purity_pct - 0.005:
            errors.append(f"{r.lane} {pd.Timestamp(r.date):%Y-%m-%d}: gypsum purity {p:.3f} % "
                          f"(replayed silo) below the limit {rows[0].min_purity_pct}")
    return errors
