"""Plain-words causes of a plan's breaches, for the coordinator.

For each breach the lanes that could have prevented it are examined in the days before
it, and the first binding rule is named: lead time, loads per day, weekday calendar or
closure, contract maximum, quality limits shutting out buyers, landfill limit.

Each breach also says its ``window``: ``firm`` when it starts inside the firm window
(the days planned one by one and carried out as planned: the coordinator acts on it and
it makes ``reagentplan plan`` exit 1), ``outlook`` when it starts beyond it (the weekly
outlook is re-planned every week before it comes: listed, not acted on, no exit 1).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..scenario import Scenario
from .evaluate import DailyPlan, Evaluation
from .lanes import LANDFILL, SALE, SUPPLY, Lane, horizon_months
from .rejects import NOT_HAULED


def explain(scenario: Scenario, lanes: list[Lane], plan: DailyPlan, ev: Evaluation) -> list[dict]:
    """The breaches of an evaluation with their ``cause`` filled in (and private keys dropped)."""
    dates = scenario.dates
    month_index, _, _ = horizon_months(dates)
    out = []
    for b in ev.breaches:
        a, z = b["_first"], b["_last"]
        if b["kind"] == NOT_HAULED:
            pass  # the haul of the mill rejects says why (`rejects.rejects_breaches`)
        elif b["kind"] == "shipped outside the buyer's limits":
            b["cause"] = ("the day's product missed the buyer's quality limit (gypsum purity follows "
                          "the stone in the silo); firm orders or a linearised silo put it there")
        elif b["kind"] == "more trains than the set has":
            b["cause"] = "firm orders book more trains than the set has in its window"
        elif b["kind"] == "contract minimum not reached":
            lane = next(l for l in lanes if b["store"].startswith(l.name))
            b["cause"] = _contract_min_cause(lane, a, z, month_index)
        elif b["store"] == "limestone" and b["kind"] == "above capacity":
            b["cause"] = ("stock held against the futures of higher use, or firm orders: fewer or "
                          "later loads would leave the worse futures below safety stock")
        elif b["store"] != "limestone" and b["kind"] == "below safety stock":
            b["cause"] = ("room kept for the futures of higher production: the plan ships below "
                          "safety stock rather than risk overflowing in the worse futures")
        elif b["store"] == "so2_allowances":
            b["cause"] = ("the SO2 emitted uses more allowances than the station holds, is allocated and may "
                          "buy within the allowances sheet's monthly limit: raise the removal, buy earlier "
                          "or in a month with room, or ask the permit's engineer")
        elif b["store"] == "limestone":
            b["cause"] = _limestone_cause(scenario, lanes, plan, a, month_index)
        else:
            b["cause"] = _byproduct_cause(scenario, lanes, plan, b["store"], a, z, month_index)
        out.append({k: v for k, v in b.items() if not k.startswith("_")})
    return out


def _limestone_cause(scenario, lanes, plan, day, month_index) -> str:
    supply = [l for l in lanes if l.kind == SUPPLY]
    earliest = min(l.lead_days for l in supply)
    if day < earliest:
        when = (f"before {scenario.dates[earliest]:%Y-%m-%d}" if earliest < len(scenario.dates)
                else "within the horizon")
        return (f"lead time: no new order can arrive {when} (shortest lead {earliest} days); "
                "only firm orders and the initial stock count")
    window = range(max(earliest, day - 14), day + 1)
    reasons = []
    for lane in supply:
        open_days = [d for d in window if lane.open[d]]
        if not open_days:
            why = {lane.why_closed[d] for d in window if lane.why_closed[d]}
            reasons.append(f"{lane.name} shut ({', '.join(sorted(why))})")
            continue
        k = month_index[day]
        total = plan.quantity[lane.name][month_index == k].sum() * lane.load_t
        if not np.isnan(lane.month_max_t[k]) and total + lane.load_t > lane.month_max_t[k] + 1e-6:
            reasons.append(f"{lane.name} at its contract maximum for {scenario.dates[day]:%b %Y}")
            continue
        if all(plan.quantity[lane.name][d] >= lane.max_per_day for d in open_days):
            reasons.append(f"{lane.name} at its loads per day")
            continue
    if reasons:
        return "; ".join(reasons)
    return "cost: the plan found the breach cheaper than the deliveries that would prevent it"


def _byproduct_cause(scenario, lanes, plan, store, a, z, month_index) -> str:
    outs = [l for l in lanes if l.material == store and l.kind != SUPPLY]
    if not outs:
        return f"no buyer or disposal site takes {store}"
    window = range(max(0, a - 7), z + 1)
    breach_days = range(a, z + 1)
    reasons = []
    for lane in outs:
        why = [lane.why_closed[d] for d in window if lane.why_closed[d]]
        shut = [lane.why_closed[d] for d in breach_days if lane.why_closed[d]]
        if lane.kind == SALE and shut and len(shut) >= len(breach_days) / 2:
            kinds = sorted(set(shut))
            quality = [w for w in kinds if "limit" in w]
            if quality:
                reasons.append(f"quality limits shutting out {lane.party} ({quality[0]})")
            else:
                reasons.append(f"{lane.party} not taking material ({', '.join(kinds)})")
            continue
        if lane.kind == SALE:
            k = month_index[a]
            total = plan.quantity[lane.name][month_index == k].sum() * lane.load_t
            if not np.isnan(lane.month_max_t[k]) and total + lane.load_t > lane.month_max_t[k] + 1e-6:
                reasons.append(f"{lane.party}'s contract maximum reached")
                continue
        open_days = [d for d in window if lane.open[d]]
        if lane.kind == LANDFILL:
            if open_days and all(plan.quantity[lane.name][d] >= lane.max_per_day - 1e-6 for d in open_days):
                reasons.append(f"landfill limit at {lane.party}")
                continue
            if plan.quantity[lane.name].sum() >= lane.airspace_t - 1e-6:
                reasons.append(f"landfill airspace used up at {lane.party}")
                continue
        elif open_days and all(plan.quantity[lane.name][d] >= lane.max_per_day for d in open_days):
            reasons.append(f"{lane.party} at its loads per day")
            continue
        if not open_days and why:
            reasons.append(f"{lane.name} shut ({', '.join(sorted(set(why)))})")
    if reasons:
        return "; ".join(reasons)
    return "cost: the plan found the breach cheaper than the haul-outs that would prevent it"


def _contract_min_cause(lane: Lane, a: int, z: int, month_index) -> str:
    days = range(a, z + 1)
    shut = [lane.why_closed[d] for d in days if lane.why_closed[d]]
    if len(shut) == len(days):
        return f"{lane.name} shut all month ({', '.join(sorted(set(shut)))})"
    if any("limit" in w for w in shut):
        return f"quality limits shutting out {lane.party} on {sum('limit' in w for w in shut)} day(s)"
    return "not enough material, or the minimum cost more than its penalty"


#: A breach's ``window``: starting inside the firm window, or in the outlook beyond it.
FIRM_WINDOW, OUTLOOK_WINDOW = "firm", "outlook"


def mark_windows(breaches: list[dict], dates, firm_days: int) -> list[dict]:
    """The breaches with ``window`` set: ``firm`` where the breach starts within the first
    ``firm_days`` days of ``dates`` (its ``first_date``), else ``outlook``.  A breach with
    no first date counts as firm."""
    dates = pd.DatetimeIndex(dates)
    end = dates[0] + pd.Timedelta(days=int(firm_days)) if len(dates) else None
    for b in breaches:
        first = b.get("first_date")
        outlook = end is not None and first is not None and pd.Timestamp(first) >= end
        b["window"] = OUTLOOK_WINDOW if outlook else FIRM_WINDOW
    return breaches


def firm_breaches(breaches: list[dict]) -> list[dict]:
    """The breaches of the firm window (those without a ``window`` count as firm): what
    the coordinator acts on and what makes ``reagentplan plan`` exit 1."""
    return [b for b in breaches if b.get("window", FIRM_WINDOW) != OUTLOOK_WINDOW]
