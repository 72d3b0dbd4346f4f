"""Risk replay: a plan's movements held fixed, replayed against every sampled future.

For each future the stores are stepped day by day (vectorised over futures): limestone
falls by that future's use and stops at zero, the demand it cannot meet being the
scrubber's shortfall; byproduct stores rise by that future's production less the
planned haul-outs (a haul-out never takes more than is there).  Per day and store this
gives the chance of being below safety stock, empty and over capacity, the expected
tonnes short or over, the level and days-of-supply quantiles.  A limestone shortfall
means the scrubber cannot remove its full share of SO2: the removal lost in proportion
to the limestone missing is added to the emissions, and the rolling permit average is
recomputed per future; the MWh generated while short are the energy at risk.

The firm window and the outlook: the replay holds every movement fixed, but only the
firm window's (``PlanResult.firm_days``, planned day by day) will be carried out as
planned; the weekly outlook beyond it is re-planned every week before it comes, with
the stock that is really there.  Over a long horizon a replay with movements held fixed
lets every shortfall and surplus accumulate (a buyer's trucks that find less than
planned lose it for good), so its chances beyond the firm window overstate what will
happen.  Each row of the frame says its ``window`` (``firm`` or ``outlook``); the ranked
list of risks with remedies (`RiskResult.top`, the "stores at risk") holds the firm
window only, and the outlook's stores passing the alert level are listed apart
(`RiskResult.outlook`) as an indication.

References
----------
Silver, E. A., Pyke, D. F. and Thomas, D. J. (2016), *Inventory and Production
Management in Supply Chains*, 4th ed., CRC Press, ch. 6: service level as the chance
of a stock-out per period, expected shortage.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .balance import trailing_sum
from .schedule.evaluate import DailyPlan
from .schedule.lanes import SUPPLY, Lane
from .schedule.plan import PlanResult
from .schema import STORE_FLOW_COLUMN

#: Chance above which a store's day counts as at risk in the ranked list [-].
ALERT_LEVEL = 0.05
#: Days ahead averaged for days of supply [d].
SUPPLY_WINDOW_DAYS = 7


def store_flows(plan: DailyPlan, lanes: list[Lane], store: str, n: int) -> np.ndarray:
    """Planned arrivals (limestone) or departures (byproducts) of a store per day [t]."""
    total = np.zeros(n)
    for lane in lanes:
        if lane.material == store and (lane.kind == SUPPLY) == (store == "limestone"):
            total += plan.tonnes(lane)
    return total


def replay_limestone(initial_t: float, arrivals_t: np.ndarray, use_t: np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray]:
    """End-of-day limestone [t] and unmet use [t], (futures × days), stopping at zero.

    ``arrivals_t`` (days,) [t/d]; ``use_t`` (futures, days) [t/d].
    """
    use = np.ascontiguousarray(np.asarray(use_t, dtype=np.float64).T)  # days × futures
    level = np.empty_like(use)
    unmet = np.zeros_like(use)
    x = np.full(use.shape[1], float(initial_t))
    for d in range(use.shape[0]):
        x += arrivals_t[d]
        x -= use[d]
        np.maximum(-x, 0.0, out=unmet[d])
        np.maximum(x, 0.0, out=x)
        level[d] = x
    return level.T, unmet.T


def replay_byproduct(initial_t: float, production_t: np.ndarray, departures_t: np.ndarray
                     ) -> np.ndarray:
    """End-of-day byproduct stock [t], (futures × days); a haul-out never takes more
    than the store holds."""
    prod = np.ascontiguousarray(np.asarray(production_t, dtype=np.float64).T)  # days × futures
    level = np.empty_like(prod)
    x = np.full(prod.shape[1], float(initial_t))
    for d in range(prod.shape[0]):
        x += prod[d]
        x -= departures_t[d]
        np.maximum(x, 0.0, out=x)
        level[d] = x
    return level.T


def _forward_mean(x: np.ndarray, window: int) -> np.ndarray:
    """Mean of the next ``window`` days along the last axis (fewer at the end)."""
    n = x.shape[-1]
    c = np.concatenate([np.zeros(x.shape[:-1] + (1,)), np.cumsum(x, axis=-1)], axis=-1)
    idx = np.arange(n)
    end = np.minimum(idx + window, n)
    return (c[..., end] - c[..., idx]) / (end - idx)


#: The ``window`` of a day in the firm window (planned day by day, carried out as planned).
FIRM = "firm"
#: The ``window`` of a day beyond it (weekly buckets, re-planned before they come).
OUTLOOK = "outlook"


def day_windows(n: int, firm_days: int) -> np.ndarray:
    """``FIRM`` for the first ``firm_days`` of ``n`` days, ``OUTLOOK`` after [-]."""
    return np.where(np.arange(n) < firm_days, FIRM, OUTLOOK)


@dataclass
class RiskResult:
    frame: pd.DataFrame            # risk.csv
    top: list[dict]                # ranked risks of the firm window, with what would remove them
    levels: dict[str, np.ndarray]  # store -> (futures × days) end-of-day levels [t]
    n_futures: int
    #: stores whose chance passes `ALERT_LEVEL` only beyond the firm window: an indication
    #: (first date, chance, what), no remedy; the outlook is re-planned before it comes
    outlook: list[dict] = field(default_factory=list)


def replay(result: PlanResult, flows: dict[str, np.ndarray], *, plan: DailyPlan | None = None,
           so2: dict[str, np.ndarray] | None = None, suggest: bool = True) -> RiskResult:
    """Replay ``plan`` (default: the optimised plan) against sampled ``flows``.

    Parameters
    ----------
    flows : store -> (futures × days) limestone use or byproduct production [t/d].
    so2 : optional (futures × days) arrays ``so2_emitted_t``, ``so2_removed_t`` [t/d],
        ``heat_input_gj`` [GJ/d], ``generation_mwh`` [MWh/d] of the same futures, for the
        permit consequence of a limestone shortfall.
    """
    scn, lanes = result.scenario, result.lanes
    plan = plan or result.plan
    n = len(scn.dates)

    def one_store(store: str):
        st = scn.storage[store]
        f = np.asarray(flows[store], dtype=np.float64)
        moved = store_flows(plan, lanes, store, n)
        rate = _forward_mean(f.mean(axis=0), SUPPLY_WINDOW_DAYS)  # mean use or output ahead [t/d]
        unmet = None
        if store == "limestone":
            level, unmet = replay_limestone(st.initial_t, moved, f)
            p_empty = (unmet.T > 1e-9).mean(axis=1)  # unmet.T is day-major, contiguous
        else:
            level = replay_byproduct(st.initial_t, f, moved)
        lv = np.ascontiguousarray(level.T, dtype=np.float32)  # day-major copy for the statistics
        if store != "limestone":
            p_empty = (lv <= 1e-6).mean(axis=1)
        q = np.quantile(lv, [0.1, 0.5, 0.9], axis=1, method="inverted_cdf")
        with np.errstate(divide="ignore", invalid="ignore"):
            if store == "limestone":  # days the stock lasts at the coming mean use
                dq = np.where(rate > 0, q[:2] / rate, np.inf)
            else:  # days until full at the coming mean output (P10 from the high level)
                dq = np.where(rate > 0, np.maximum(st.capacity_t - q[[2, 1]], 0) / rate, np.inf)
        frame = pd.DataFrame({
            "date": scn.dates, "store": store,
            "p_below_safety": (lv < st.safety_t - 1e-6).mean(axis=1) if st.safety_t > 0
            else np.zeros(n),
            "p_empty": p_empty,
            "p_over_capacity": (lv > st.capacity_t + 1e-6).mean(axis=1),
            "expected_short_t": np.maximum(st.safety_t - lv, 0).mean(axis=1, dtype=np.float64),
            "expected_over_t": np.maximum(lv - st.capacity_t, 0).mean(axis=1, dtype=np.float64),
            "level_p10_t": q[0], "level_p50_t": q[1], "level_p90_t": q[2],
            "days_p10": dq[0], "days_p50": dq[1],
            "window": day_windows(n, result.firm_days),
        })
        if store == "limestone" and so2 is not None:
            at_plan = so2_at_plan_removal(result, so2)
            (frame["p_so2_over_limit"], frame["p_so2_over_margin"],
             frame["mwh_at_risk"]) = _permit_consequence(scn, f, unmet, at_plan)
        return store, level, frame

    stores = [s for s in scn.storage if s in flows]
    # numpy releases the GIL in the sorts and reductions: one thread per store
    with ThreadPoolExecutor(max_workers=min(len(stores), os.cpu_count() or 1)) as pool:
        done = list(pool.map(one_store, stores))
    levels = {store: level for store, level, _ in done}
    rows = [frame for _, _, frame in done]
    frame = pd.concat(rows, ignore_index=True)
    top = top_risks(result, frame, flows, plan) if suggest else []
    outlook = outlook_risks(result, frame) if suggest else []
    first = next(iter(flows.values()))
    return RiskResult(frame, top, levels, int(np.shape(first)[0]), outlook)


def so2_at_plan_removal(result: PlanResult, so2: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """The futures' SO2 moved to the removal the plan chose.

    The futures are sampled at the fixed removal (the setpoint).  Where the plan chose the
    removal (``result.plan.removal``, per day [%]), each future's SO2 emitted [t/d] is
    scaled by the lever's emitted SO2 at the chosen removal over that at the setpoint
    (`schedule.lever.RemovalLever.at`): the SO2 emitted is the SO2 reaching the scrubber
    × (1 − removal), so the ratio is the same in every future whatever its coal.  The SO2
    removed takes up the difference (what is formed does not move with the removal).
    Heat input and generation stay the futures' own.  Unchanged where the removal is
    fixed.
    """
    removal = result.plan.removal
    if removal is None:
        return so2
    from .schedule.lever import RemovalLever

    lever = RemovalLever.from_scenario(result.scenario)
    if lever is None:
        return so2
    at_plan = lever.at("so2_emitted_t", removal)
    at_set = lever.at("so2_emitted_t", lever.setpoint)
    ratio = np.divide(at_plan, at_set, out=np.ones_like(at_plan), where=at_set > 0)
    emitted = np.asarray(so2["so2_emitted_t"], dtype=np.float64)
    moved = emitted * ratio[None, :]
    out = dict(so2)
    out["so2_emitted_t"] = moved
    out["so2_removed_t"] = np.asarray(so2["so2_removed_t"], dtype=np.float64) + (emitted - moved)
    return out


def compliance_limit(plant) -> float | None:
    """The permit limit less the compliance margin [kg/GJ]: limit × (1 − margin / 100),
    the margin ``so2_limit_margin_pct`` of the plant sheet [%] (0 where the sheet has
    none); ``None`` without a limit."""
    limit = plant.so2_limit_kg_per_gj
    if limit is None:
        return None
    margin = getattr(plant, "so2_limit_margin_pct", None) or 0.0
    return float(limit) * (1 - float(margin) / 100)


def _permit_consequence(scn, use: np.ndarray, unmet: np.ndarray, so2: dict
                        ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Chance per day that the rolling SO2 average breaks the permit limit, chance that
    it passes the limit less the compliance margin (`compliance_limit`), and the
    expected MWh generated while the scrubber is short of limestone [MWh/d].

    ``so2`` holds the futures' SO2 at the plan's removal (`so2_at_plan_removal`)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        lost = np.where(use > 0, np.clip(unmet / use, 0, 1), 0.0)
    emitted = so2["so2_emitted_t"] + so2["so2_removed_t"] * lost
    heat = np.broadcast_to(so2["heat_input_gj"], emitted.shape)
    days = scn.plant.so2_limit_avg_days
    with np.errstate(divide="ignore", invalid="ignore"):
        rolling = 1000 * trailing_sum(emitted, days) / trailing_sum(heat, days)
    limit = scn.plant.so2_limit_kg_per_gj
    margin = compliance_limit(scn.plant)
    n = use.shape[1]
    # the plan's own average may sit on the limit: a rounding hair over it is not a breach
    # (as the balance's ``so2_over_limit``)
    p_over = np.zeros(n) if limit is None else (rolling > limit * (1 + 1e-6)).mean(axis=0)
    p_margin = np.zeros(n) if margin is None else (rolling > margin * (1 + 1e-6)).mean(axis=0)
    mwh = (so2["generation_mwh"] * lost).mean(axis=0)
    return p_over, p_margin, mwh


def _store_chance(store: str, g: pd.DataFrame) -> pd.Series:
    """The chance per day that a store breaks its limit [-]: limestone below safety stock
    (or empty), a byproduct over capacity."""
    return g["p_over_capacity"] if store != "limestone" else np.maximum(g["p_below_safety"], g["p_empty"])


def outlook_risks(result: PlanResult, frame: pd.DataFrame) -> list[dict]:
    """Stores whose chance of breaking a limit passes `ALERT_LEVEL` beyond the firm window
    but not in it, earliest first: ``store``, ``first_date``, ``chance``, ``what``,
    ``window`` = ``outlook``.  An indication only, no remedy: the outlook is re-planned
    week by week before it comes."""
    scn = result.scenario
    firm = min(result.firm_days, len(scn.dates))
    out = []
    for store, g in frame.groupby("store", sort=False):
        p = _store_chance(store, g.reset_index(drop=True)).to_numpy()
        if (p[:firm] > ALERT_LEVEL).any():
            continue  # in the ranked list of the firm window
        hit = np.flatnonzero(p[firm:] > ALERT_LEVEL)
        if not len(hit):
            continue
        day = firm + int(hit[0])
        out.append({"store": store, "first_date": f"{scn.dates[day]:%Y-%m-%d}",
                    "chance": round(float(p[day]), 3), "highest_chance": round(float(p[firm:].max()), 3),
                    "what": "below safety stock" if store == "limestone" else "over capacity",
                    "window": OUTLOOK})
    out.sort(key=lambda r: r["first_date"])
    return out


def top_risks(result: PlanResult, frame: pd.DataFrame, flows: dict[str, np.ndarray],
              plan: DailyPlan, limit: int = 5) -> list[dict]:
    """Stores whose chance of breaking a limit passes `ALERT_LEVEL` in the firm window
    (the days the coordinator acts on; the outlook is `outlook_risks`), earliest first,
    each with what would remove it and the chance once that is done."""
    scn = result.scenario
    firm = min(result.firm_days, len(scn.dates))
    out = []
    for store, g in frame.groupby("store", sort=False):
        g = g.reset_index(drop=True)
        p = _store_chance(store, g)
        hit = np.flatnonzero(p.to_numpy()[:firm] > ALERT_LEVEL)
        if not len(hit):
            continue
        day = int(hit[0])
        item = {"store": store, "first_date": f"{scn.dates[day]:%Y-%m-%d}",
                "chance": round(float(p.iloc[day]), 3),
                "what": "below safety stock" if store == "limestone" else "over capacity",
                "window": FIRM}
        need = 0.0
        if store != "limestone":
            g_day = g.iloc[day]
            need = float(g_day["expected_over_t"] / max(g_day["p_over_capacity"], 1e-9))
        fix = _one_more(result, store, day, plan, need)
        if fix is not None:
            lane, when, qty, new_plan = fix
            after = replay(result, {store: flows[store]}, plan=new_plan, suggest=False).frame
            pa = _store_chance(store, after).to_numpy()
            item["remedy"] = _remedy_text(lane, when, qty, scn)
            item["chance_after"] = round(float(pa[day]), 3)
        else:
            item["remedy"] = "no lane can move material before that day: book outside the plan's lanes"
        out.append(item)
    out.sort(key=lambda r: r["first_date"])
    return out[:limit]


def _one_more(result: PlanResult, store: str, day: int, plan: DailyPlan,
              need_t: float = 0.0):
    """What would remove a risk: limestone, one more load on the cheapest lane that can
    arrive on or before ``day``; a byproduct, ``need_t`` more tonnes out in the three
    days up to it (buyers first, then landfill), as much as their daily limits allow."""
    lanes = [l for l in result.lanes if l.material == store and ((l.kind == SUPPLY) == (store == "limestone"))]
    lanes.sort(key=lambda l: l.cost_per_t + (l.cost_per_load / l.load_t if l.load_t else 0))
    first = 0 if store == "limestone" else max(0, day - 3)
    for lane in lanes:
        q = plan.quantity[lane.name]
        for d in range(day, first - 1, -1):
            room = lane.max_per_day - q[d]
            if not lane.open[d] or room <= 1e-9:
                continue
            if lane.load_t:
                amount = 1 if store == "limestone" else int(min(room, np.ceil(max(need_t, 1) / lane.load_t)))
            else:
                amount = float(min(room, max(need_t, 1.0)))
            new = {k: v.copy() for k, v in plan.quantity.items()}
            new[lane.name][d] += amount
            return lane, d, amount, DailyPlan(new, plan.booked)
    return None


def _remedy_text(lane: Lane, d: int, qty, scn) -> str:
    date = scn.dates[d]
    if lane.kind == SUPPLY:
        order = date - pd.Timedelta(days=lane.lead_days)
        return (f"one more {'train' if lane.mode == 'rail' else 'load'} on {lane.name} arriving "
                f"{date:%Y-%m-%d} (order by {order:%Y-%m-%d})")
    if lane.load_t:
        return f"{qty} more load(s) to {lane.party} on {date:%Y-%m-%d}"
    return f"landfill {qty:,.0f} t more at {lane.party} on {date:%Y-%m-%d}"


def deterministic_flows(balance: pd.DataFrame) -> dict[str, np.ndarray]:
    """The balance itself as a single future, (1 × days) per store."""
    return {s: balance[c].to_numpy(float)[None, :] for s, c in STORE_FLOW_COLUMN.items()}


__all__ = ["replay", "RiskResult", "FIRM", "OUTLOOK", "day_windows", "outlook_risks", "compliance_limit", "deterministic_flows", "replay_limestone", "replay_byproduct"]
