"""What a rehearsed policy really cost, by cause, and how steady its plans were.

Prices and penalties are the scenario's, as the plan's evaluation uses them
(`reagentplan.schedule.evaluate`), applied to what really moved and to the true store
levels, so the two policies are priced like for like.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..scenario import Scenario
from ..schedule.evaluate import CONTRACT_PENALTY_PER_T, EMPTY_PENALTY_FACTOR, limestone_end_value
from ..schedule.lanes import LANDFILL, SALE, SUPPLY, cheapest_disposal_cost

#: Realised cost causes, in the order they are reported [money].
COST_CAUSES = ("stone", "freight", "sales", "landfill", "stone_missing", "under_safety", "overflow",
               "contract_shortfall", "closing_stock")
#: The causes a coordinator controls by what is ordered and shipped (no penalties).
CONTROLLABLE = ("stone", "freight", "sales", "landfill", "closing_stock")


def realised_costs(scenario: Scenario, run) -> dict[str, float]:
    """Realised cost per cause [money] (positive = the plant pays).

    stone, freight : price per tonne and freight per load of the stone that arrived;
    sales : buyers' net price per tonne shipped (negative = revenue); landfill : site cost
    per tonne; stone_missing : limestone use the empty store could not meet, at
    `EMPTY_PENALTY_FACTOR` × the shortage penalty per tonne; under_safety : tonne-days
    below safety stock at the shortage penalty; overflow : tonnes dumped above capacity
    at the overflow penalty; contract_shortfall : tonnes short of a monthly minimum, for
    calendar months wholly inside the rehearsal, at `CONTRACT_PENALTY_PER_T`;
    closing_stock : the stores at the end valued as the plan's end-of-horizon value
    (limestone credited at the cheapest delivered cost, per tonne of CaCO3 in it when
    the suppliers' stone differs; byproducts charged at the cheapest landfill cost), so
    a policy cannot look cheap by running its stocks down.
    """
    p = scenario.plant
    c = dict.fromkeys(COST_CAUSES, 0.0)
    for r in run.moved.itertuples(index=False):
        lane = run.lanes[r.lane]
        t = float(r.tonnes)
        if lane.kind == SUPPLY:
            c["stone"] += lane.cost_per_t * t
            c["freight"] += lane.cost_per_load * float(r.loads)
        elif lane.kind == SALE:
            c["sales"] += lane.cost_per_t * t
        else:
            c["landfill"] += lane.cost_per_t * t
    d = run.daily
    below = (d["safety_t"] - d["level_t"]).clip(lower=0)
    c["under_safety"] = float(p.shortage_penalty_per_t * below.sum())
    c["stone_missing"] = float(EMPTY_PENALTY_FACTOR * p.shortage_penalty_per_t * d["unmet_t"].sum())
    c["overflow"] = float(p.overflow_penalty_per_t * d["overflow_t"].sum())
    for lane, months in month_totals(run).items():
        lo = getattr(run.lanes[lane].source, "min_t_per_month", None)
        if lo:
            for month, t in months.items():
                if _whole_month(month, d["date"]):
                    c["contract_shortfall"] += CONTRACT_PENALTY_PER_T * max(lo - t, 0.0)
    final = d[d["date"] == d["date"].max()].set_index("store")
    last = final["level_t"]
    # as the plan values it: a silo of poorer stone is worth less when qualities differ
    caco3 = float(final.loc["limestone", "caco3_pct"]) if "limestone" in final.index else 100.0
    value = limestone_end_value(scenario, float(last.get("limestone", 0.0)), caco3)
    for store in ("gypsum", "fly_ash", "bottom_ash"):
        if store in last.index:
            value += cheapest_disposal_cost(scenario, store) * float(last[store])
    c["closing_stock"] = value
    return {k: round(float(v), 2) for k, v in c.items()}


def _whole_month(month: pd.Period, dates: pd.Series) -> bool:
    return dates.min() <= month.start_time and dates.max() >= month.end_time.normalize()


def month_totals(run) -> dict[str, dict[pd.Period, float]]:
    """Realised tonnes per lane and calendar month [t]."""
    if run.moved.empty:
        return {}
    m = run.moved.assign(month=pd.to_datetime(run.moved["date"]).dt.to_period("M"))
    out: dict[str, dict] = {}
    for (lane, month), t in m.groupby(["lane", "month"])["tonnes"].sum().items():
        out.setdefault(lane, {})[month] = float(t)
    return out


def months_over_max(run, tol_t: float = 1e-6) -> list[tuple[str, str, float, float]]:
    """(lane, month, realised tonnes, monthly maximum) of each contract month realised
    above its maximum [t]."""
    out = []
    for lane, months in month_totals(run).items():
        hi = getattr(run.lanes[lane].source, "max_t_per_month", None)
        if hi is None or not np.isfinite(hi):
            continue
        for month, t in months.items():
            if t > hi + tol_t:
                out.append((lane, str(month), t, float(hi)))
    return out


def nervousness(run) -> dict[str, int]:
    """Loads added, moved, cancelled or changed inside the firm window between each pair
    of consecutive plans the policy followed (landfill, in tonnes, left out) [lines]."""
    out = {"added": 0, "moved": 0, "cancelled": 0, "changed": 0}
    for d in run.changes:
        for change, n in d["change"].value_counts().items():
            out[change] = out.get(change, 0) + int(n)
    return out


def policy_figures(scenario: Scenario, run) -> dict:
    """Every figure of one policy in one world (one row of ``rehearsal.csv``)."""
    costs = realised_costs(scenario, run)
    d = run.daily
    lime = d[d["store"] == "limestone"]
    by = d[d["store"] != "limestone"]
    nerv = nervousness(run)
    kinds = run.moved.groupby(["kind", "material"])["tonnes"].sum() if not run.moved.empty else pd.Series(dtype=float)
    row = {"policy": run.policy, "future": run.world, "weeks": len(run.plans),
           "realised_cost": round(sum(costs.values()), 2),
           "controllable_cost": round(sum(costs[k] for k in CONTROLLABLE), 2)}
    row |= {f"cost_{k}": v for k, v in costs.items()}
    row |= {
        "days_under_safety": int((lime["level_t"] < lime["safety_t"] - 1e-6).sum()),
        "byproduct_days_under_safety": int(by.loc[by["level_t"] < by["safety_t"] - 1e-6, "date"].nunique()),
        "stockout_days": int((lime["unmet_t"] > 1e-6).sum()),
        "stone_missing_t": round(float(lime["unmet_t"].sum()), 1),
        "overflow_days": int(by.loc[by["overflow_t"] > 1e-6, "date"].nunique()),
        "overflow_t": round(float(by["overflow_t"].sum()), 1),
        "refused_t": round(float(d["refused_t"].sum()), 1) if "refused_t" in d else 0.0,
        "stone_used_t": round(float(lime["used_t"].sum()), 1) if "used_t" in lime else 0.0,
        "stone_received_t": round(float(kinds.get((SUPPLY, "limestone"), 0.0)), 1),
        "trains": int(run.moved.loc[run.moved["kind"] == SUPPLY].merge(
            pd.DataFrame([(n, ln.mode) for n, ln in run.lanes.items()], columns=["lane", "mode"]),
            on="lane").query("mode == 'rail'")["loads"].sum()) if not run.moved.empty else 0,
    }
    for material in ("gypsum", "fly_ash", "bottom_ash"):
        row[f"overflow_{material}_t"] = round(float(by.loc[by["store"] == material, "overflow_t"].sum()), 1)
    for material in ("gypsum", "fly_ash", "bottom_ash"):
        row[f"sold_{material}_t"] = round(float(kinds.get((SALE, material), 0.0)), 1)
        row[f"landfilled_{material}_t"] = round(float(kinds.get((LANDFILL, material), 0.0)), 1)
    row |= {f"nervous_{k}": v for k, v in nerv.items()}
    row["nervousness"] = sum(nerv.values())
    row["months_over_max"] = len(months_over_max(run))
    row["plan_seconds"] = round(run.plan_seconds, 2)
    return row


__all__ = ["COST_CAUSES", "CONTROLLABLE", "realised_costs", "month_totals", "months_over_max",
           "nervousness", "policy_figures"]
