"""Departures that do not slip: the earlier of two equally cheap days.

A solver stops within its gap, and a tie between shipping on Tuesday or next Monday is
well inside any gap a plan of a million is solved to, so which of the two a plan holds is
the solver's accident.  Remade every week, a load that sits "next week" can slip week
after week until the month's room is gone.  So, after the solve, each whole-load sale is
moved to the earliest day of the same calendar month (the same contract month, the same
price) on which the buyer's lane is open, takes another load that day, the product meets
the buyer's limits, and the store keeps at least its safety stock (or what it had, if
that was less) on every day in between.  Nothing else moves, the month's totals and the
money stay the same, and the caller keeps the result only if `evaluate` prices it no
dearer.

References
----------
Silver, E. A., Pyke, D. F. and Thomas, D. J. (2016), *Inventory and Production
Management in Supply Chains*, 4th ed., CRC Press: rolling-horizon planning and plan
nervousness (the reason to settle ties the same way every week).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..scenario import Scenario
from .evaluate import DailyPlan, off_spec_days, store_levels
from .lanes import SALE, Lane, horizon_months


def earliest_departures(scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane],
                        plan: DailyPlan) -> tuple[DailyPlan, int]:
    """A copy of ``plan`` with whole-load sales moved to the earliest equal day (see the
    module), and how many loads moved [-]."""
    month_index, _, _ = horizon_months(scenario.dates)
    qty = {k: v.copy() for k, v in plan.quantity.items()}
    out = DailyPlan(qty, plan.booked, plan.removal, plan.bought_t, plan.sold_t)
    levels, _ = store_levels(scenario, balance, lanes, out)
    levels = {k: v.copy() for k, v in levels.items()}
    moved = 0
    for lane in sorted((l for l in lanes if l.kind == SALE and l.load_t), key=lambda l: l.cost_per_t):
        store = lane.material
        if store not in levels:
            continue
        floor = scenario.storage[store].safety_t
        booked = plan.booked.get(lane.name, np.zeros(len(month_index), int))
        ok = lane.open & ~off_spec_days(lane, balance)
        q = qty[lane.name]
        level = levels[store]
        for d in np.flatnonzero(q > booked):
            while q[d] > booked[d]:
                same = np.flatnonzero((month_index == month_index[d]) & (np.arange(len(q)) < d)
                                      & ok & (q < lane.max_per_day))
                target = None
                for e in same:
                    # shipping on e instead of d lowers the store by a load on days e..d-1
                    span = level[e:d]
                    if (span - lane.load_t >= np.minimum(floor, span) - 1e-6).all():
                        target = e
                        break
                if target is None:
                    break
                q[d] -= 1
                q[target] += 1
                level[target:d] -= lane.load_t
                moved += 1
    return out, moved


__all__ = ["earliest_departures"]
