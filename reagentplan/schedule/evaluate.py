"""Replaying a daily plan against the daily balance: store levels, costs and breaches.

Both the optimiser's plan and the reorder-point baseline are priced here, in the same
way, so their costs compare like for like.  Costs are in the scenario's currency;
positive is money the plant spends.  The mill rejects' daily haul
(`reagentplan.schedule.rejects`) is priced here too, as its own line: it follows from the
coal burned, not from the plan, so plan and baseline pay the same for it.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..scenario import Scenario
from ..schema import BYPRODUCTS, STORE_FLOW_COLUMN
from .lanes import SALE, SUPPLY, Lane, cheapest_delivered_cost, cheapest_disposal_cost, horizon_months
from .penalties import (ALLOWANCE_SHORT_PENALTY_FACTOR, CONTRACT_PENALTY_PER_T, EMPTY_PENALTY_FACTOR,
                        PERMIT_PENALTY_FACTOR)
from .rejects import RejectsHaul, haul_rejects, rejects_breaches, waiting_end_cost
from .terms import AllowanceTerms, allowance_costs, allowance_holding_t, end_caco3_value, permit_excess_t

PRODUCTION = {s: STORE_FLOW_COLUMN[s] for s in BYPRODUCTS}


def shortfall_rate(lane: Lane) -> float:
    """Money per tonne short of a lane's monthly minimum: the contract's own
    ``shortfall_per_t`` (take-or-pay), else `CONTRACT_PENALTY_PER_T` [money/t]."""
    rate = getattr(lane.source, "shortfall_per_t", None)
    return CONTRACT_PENALTY_PER_T if rate is None else float(rate)


def freight_by_day(lane: Lane, loads: np.ndarray, month_index: np.ndarray) -> np.ndarray:
    """Freight per day [money] of a supply lane's loads: the full rate for the first
    ``tier_loads_per_month`` loads of each month, the tier rate for the rest (in date order)."""
    loads = np.asarray(loads, dtype=float)
    src = lane.source
    n_tier = getattr(src, "tier_loads_per_month", None)
    if lane.kind != SUPPLY or n_tier is None:
        return loads * lane.cost_per_load
    tier = float(src.tier_freight_per_load)
    out = np.zeros(len(loads))
    for k in np.unique(month_index):
        days = np.flatnonzero(month_index == k)
        cum = np.cumsum(loads[days])
        before = cum - loads[days]
        full = np.clip(np.minimum(cum, n_tier) - before, 0, None)
        out[days] = full * lane.cost_per_load + (loads[days] - full) * tier
    return out


def train_set_excess(scenario: Scenario, lanes: list[Lane], quantity: dict[str, np.ndarray]) -> list[tuple[str, int, int]]:
    """Windows where a train set runs more trains than it has: (set, first day, trains)."""
    out = []
    for ts in scenario.train_sets:
        trains = sum((np.asarray(quantity[l.name], float) for l in lanes
                      if l.kind == SUPPLY and getattr(l.source, "train_set", None) == ts.train_set),
                     np.zeros(len(scenario.dates)))
        c = np.r_[0.0, np.cumsum(trains)]
        n = len(trains)
        for d in range(n):
            w = c[min(d + ts.window_days, n)] - c[d]
            if w > ts.max_trains + 1e-9:
                out.append((ts.train_set, d, int(w)))
    return out


@dataclass
class DailyPlan:
    """Quantities per lane and day: loads (supply, sale) or tonnes (landfill).

    ``booked`` marks, per lane, the loads that were firm orders already placed.
    """

    quantity: dict[str, np.ndarray]
    booked: dict[str, np.ndarray] = field(default_factory=dict)
    #: the scrubber's SO2 removal chosen per day [%] (None: the setpoint)
    removal: np.ndarray | None = None
    #: SO2 allowances bought and sold per day [t SO2] (None: no allowance sheet)
    bought_t: np.ndarray | None = None
    sold_t: np.ndarray | None = None

    def tonnes(self, lane: Lane) -> np.ndarray:
        q = self.quantity[lane.name]
        return q * lane.load_t if lane.load_t else q.astype(float)


@dataclass
class Evaluation:
    levels: dict[str, np.ndarray]          # end-of-day level per store [t]
    unmet: np.ndarray                      # limestone demand not met (store empty) [t]
    costs: dict[str, float]
    total_cost: float
    breaches: list[dict]
    month_totals: dict[str, np.ndarray]    # lane -> tonnes per horizon month
    shortfalls: list[dict] = field(default_factory=list)  # take-or-pay shortfalls paid at the contract's rate
    end_parts: dict = field(default_factory=dict)  # end_stock_value split: limestone credit, byproduct charge
    rejects: RejectsHaul | None = None     # the mill rejects' daily haul (the same for every plan)


def store_levels(scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane],
                 plan: DailyPlan) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """End-of-day level per store [t]: yesterday + arrivals − use (limestone), or
    + production − departures (byproducts).  Limestone stops at zero and the demand it
    cannot meet is returned as ``unmet`` [t]."""
    n = len(balance)
    inflow = {s: np.zeros(n) for s in scenario.storage}
    outflow = {s: np.zeros(n) for s in scenario.storage}
    for lane in lanes:
        if lane.material not in scenario.storage:
            continue
        t = plan.tonnes(lane)
        (inflow if lane.kind == SUPPLY else outflow)[lane.material] += t
    levels, unmet = {}, np.zeros(n)
    for store, st in scenario.storage.items():
        if store == "limestone":
            use = balance["limestone_t"].to_numpy(float)
            level = np.empty(n)
            x = st.initial_t
            for d in range(n):
                x = x + inflow[store][d] - use[d]
                if x < 0:
                    unmet[d] = -x
                    x = 0.0
                level[d] = x
        else:
            prod = balance[PRODUCTION[store]].to_numpy(float)
            level = st.initial_t + np.cumsum(prod - outflow[store])
        levels[store] = level
    return levels, unmet


def evaluate(scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane], plan: DailyPlan) -> Evaluation:
    """Levels, costs (with the end-of-horizon stock value) and breaches of a daily plan.

    ``mill_rejects_disposal`` is the haul of the balance's ``mill_rejects_t`` [t/d] to the
    mill-reject sites (`haul_rejects`); rejects no site takes wait in the reject bins
    for the next open day, and what overflows the bins is a breach, charged at the
    overflow penalty per tonne [money/t], as a tonne with nowhere to go; rejects still in
    the bins at the end join the byproducts' end-stock charge (cheapest site's cost).
    """
    p = scenario.plant
    levels, unmet = store_levels(scenario, balance, lanes, plan)
    month_index, months, _ = horizon_months(scenario.dates)
    costs = dict.fromkeys(["limestone_purchase", "freight", "byproduct_sales", "landfill",
                           "shortage_penalty", "overflow_penalty", "empty_penalty",
                           "contract_penalty", "quality_penalty", "end_stock_value",
                           "mill_rejects_disposal"], 0.0)
    month_totals: dict[str, np.ndarray] = {}
    breaches: list[dict] = []
    shortfalls: list[dict] = []
    for lane in lanes:
        t = plan.tonnes(lane)
        q = plan.quantity[lane.name]
        if lane.kind == SUPPLY:
            costs["limestone_purchase"] += float(lane.cost_per_t * t.sum())
            costs["freight"] += float(freight_by_day(lane, q, month_index).sum())
        elif lane.kind == SALE:
            costs["byproduct_sales"] += float(lane.cost_per_t * t.sum())
            bad = off_spec_days(lane, balance) & (t > 0)
            if bad.any():
                costs["quality_penalty"] += float(p.overflow_penalty_per_t * t[bad].sum())
                for a, b in _runs(bad):
                    breaches.append(_breach(f"{lane.name} (quality)", scenario.dates, a, b,
                                            t[a:b + 1].sum(), "shipped outside the buyer's limits"))
        else:
            costs["landfill"] += float(lane.cost_per_t * t.sum())
        totals = np.bincount(month_index, weights=t, minlength=len(months))
        month_totals[lane.name] = totals
        short = np.nan_to_num(lane.month_min_t - totals, nan=0.0).clip(min=0)
        costs["contract_penalty"] += float(shortfall_rate(lane) * short.sum())
        signed_rate = getattr(lane.source, "shortfall_per_t", None) is not None
        for k in np.flatnonzero(short > 1e-6):
            days = np.flatnonzero(month_index == k)
            if signed_rate:
                # take-or-pay as signed: the shortfall is paid at the contract's rate, a cost
                shortfalls.append({"lane": lane.name, "month": f"{months[k]}", "tonnes": round(float(short[k]), 1),
                                   "cost": round(float(short[k] * shortfall_rate(lane)), 2)})
                continue
            breaches.append(_breach(f"{lane.name} (contract minimum)", scenario.dates, days[0], days[-1],
                                    short[k], "contract minimum not reached"))
    for store, level in levels.items():
        st = scenario.storage[store]
        below = np.clip(st.safety_t - level, 0, None)
        above = np.clip(level - st.capacity_t, 0, None)
        costs["shortage_penalty"] += float(p.shortage_penalty_per_t * below.sum())
        costs["overflow_penalty"] += float(p.overflow_penalty_per_t * above.sum())
        for a, b in _runs(below > 1e-6):
            breaches.append(_breach(store, scenario.dates, a, b, below[a:b + 1].max(), "below safety stock"))
        for a, b in _runs(above > 1e-6):
            breaches.append(_breach(store, scenario.dates, a, b, above[a:b + 1].max(), "above capacity"))
    for name, a, trains in train_set_excess(scenario, lanes, plan.quantity):
        breaches.append(_breach(f"train set {name}", scenario.dates, a, a, trains, "more trains than the set has"))
    _permit_and_allowances(scenario, balance, plan, costs, breaches)
    rejects_t = (balance["mill_rejects_t"].to_numpy(float) if "mill_rejects_t" in balance
                 else np.zeros(len(balance)))
    haul = haul_rejects(scenario, rejects_t)
    costs["mill_rejects_disposal"] = float(haul.cost.sum())
    costs["overflow_penalty"] += float(p.overflow_penalty_per_t * haul.unhauled_t.sum())
    breaches += rejects_breaches(haul, scenario.dates)
    costs["empty_penalty"] = float(EMPTY_PENALTY_FACTOR * p.shortage_penalty_per_t * unmet.sum())
    for a, b in _runs(unmet > 1e-6):
        breaches.append(_breach("limestone", scenario.dates, a, b, unmet[a:b + 1].sum(), "empty"))
    end_value = limestone_end_value(scenario, levels["limestone"][-1],
                                    float(balance["limestone_caco3_pct"].iloc[-1]))
    end_parts = {"limestone": float(end_value), "byproducts": 0.0}
    for store in ("gypsum", "fly_ash", "bottom_ash"):
        if store in levels:
            charge = cheapest_disposal_cost(scenario, store) * max(levels[store][-1], 0.0)
            end_value += charge
            end_parts["byproducts"] += float(charge)
    if haul.waiting_t is not None:
        # mill rejects still in the bins, to be hauled at the cheapest site's cost
        charge = waiting_end_cost(haul)
        end_value += charge
        end_parts["byproducts"] += charge
    if "allowances_end" in costs:
        # allowances left at the end: held at the last sell price (a credit), a shortfall
        # at the last buy price (`terms.allowance_end_value`), with the stock
        end_parts["allowances"] = costs.pop("allowances_end")
        end_value += end_parts["allowances"]
    costs["end_stock_value"] = float(end_value)
    return Evaluation(levels, unmet, costs, float(sum(costs.values())), breaches, month_totals, shortfalls,
                      end_parts, haul)


def _permit_and_allowances(scenario: Scenario, balance: pd.DataFrame, plan: DailyPlan,
                           costs: dict, breaches: list) -> None:
    """Where the plan chooses the removal: tonne-days of SO2 over the permit's rolling
    limit at `PERMIT_PENALTY_FACTOR` × the shortage penalty (``permit_penalty``).  Where
    the station holds allowances: the money bought and sold (``allowances``), the holding
    left at the end (``allowances_end``, moved to the end-stock value) and tonnes emitted
    without an allowance (``allowance_penalty``, and a breach).  Neither line exists in
    a scenario without a removal range or an allowance sheet (`lever.py`)."""
    p = scenario.plant
    emitted = balance["so2_emitted_t"].to_numpy(float)
    rng = scenario.scrubber.removal_range
    if rng is not None and rng[1] > rng[0]:
        excess = permit_excess_t(emitted, balance["heat_input_gj"].to_numpy(float),
                                 p.so2_limit_kg_per_gj, int(p.so2_limit_avg_days))
        costs["permit_penalty"] = float(PERMIT_PENALTY_FACTOR * p.shortage_penalty_per_t * excess.sum())
    terms = AllowanceTerms.from_scenario(scenario)
    if terms is None:
        return
    n = len(emitted)
    bought = np.zeros(n) if plan.bought_t is None else plan.bought_t
    sold = np.zeros(n) if plan.sold_t is None else plan.sold_t
    acc = allowance_costs(terms, emitted, bought, sold)
    costs["allowances"] = acc["trade"]
    costs["allowances_end"] = acc["end_value"]
    holding = allowance_holding_t(terms, emitted, bought, sold)
    short = np.clip(-holding, 0, None)
    costs["allowance_penalty"] = float(ALLOWANCE_SHORT_PENALTY_FACTOR * p.shortage_penalty_per_t * short.sum())
    for a, b in _runs(short > 1e-6):
        breaches.append(_breach("so2_allowances", scenario.dates, a, b, short[a:b + 1].max(),
                                "SO2 emitted without an allowance"))


def limestone_end_value(scenario: Scenario, level_t: float, caco3_pct: float) -> float:
    """The limestone left at the end as a cost line [money] (negative: a credit): at the
    cheapest delivered cost per tonne, or, when the suppliers' stone differs, per tonne
    of the CaCO3 in it (``caco3_pct`` [%], the silo's) at the cheapest delivered cost of
    a tonne of CaCO3 (`terms.end_caco3_value`)."""
    if scenario.quality_coupled:
        return -end_caco3_value(scenario, None) * level_t * caco3_pct / 100
    return -cheapest_delivered_cost(scenario) * level_t


def off_spec_days(lane: Lane, balance: pd.DataFrame) -> np.ndarray:
    """Days on which the day's product breaks one of a buyer's quality limits [bool]."""
    from .lanes import quality_ok

    ok, _why = quality_ok(lane.source, balance)
    return ~ok


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) index of each run of True."""
    idx = np.flatnonzero(mask)
    if not len(idx):
        return []
    splits = np.flatnonzero(np.diff(idx) > 1)
    starts = np.r_[idx[0], idx[splits + 1]]
    ends = np.r_[idx[splits], idx[-1]]
    return list(zip(starts.tolist(), ends.tolist()))


def _breach(store: str, dates: pd.DatetimeIndex, a: int, b: int, tonnes: float, kind: str) -> dict:
    return {"store": store, "kind": kind, "first_date": f"{dates[a]:%Y-%m-%d}",
            "last_date": f"{dates[b]:%Y-%m-%d}", "tonnes": round(float(tonnes), 1), "cause": "",
            "_first": a, "_last": b}
