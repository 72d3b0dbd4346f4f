"""Benchmark: what the old pro-rating of a partial last month's contract maximum cost.

Run:  python bench/contract_months.py [--start 2027-01-16] [--days 120]

Plans the demo station (its three quarries have monthly maxima and minima) twice over
a horizon that starts and ends inside a month: with the calendar-month limits of
`reagentplan.schedule.lanes._monthly` (the whole maximum of the last month open to the
plan), and with the old rule (both limits of a partial month pro-rated by the share of
its days in the horizon).  Both plans are priced the same way, with the calendar-month
lanes (the plan made under the old rule keeps those limits too: its maxima are lower).
Prints both costs and the share the old rule adds.
"""

from __future__ import annotations

import argparse
import dataclasses
import datetime as dt
import sys
import tempfile
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from reagentplan.demo.build_demo import build_demo_workbook  # noqa: E402
from reagentplan.balance import balance_frame  # noqa: E402
from reagentplan.scenario import load_scenario  # noqa: E402
from reagentplan.schedule.baseline import baseline_plan  # noqa: E402
from reagentplan.schedule.evaluate import evaluate  # noqa: E402
from reagentplan.schedule.lanes import build_lanes, firm_loads, horizon_months  # noqa: E402
from reagentplan.schedule.model import solve_plan  # noqa: E402
from reagentplan.settings import PLAN  # noqa: E402


def pro_rated(lane, share: np.ndarray) -> object:
    """The lane with the old rule: a partial month's limits x the share of it planned."""
    def old(values: np.ndarray, limit) -> np.ndarray:
        if limit is None:
            return values
        covered = ~np.isnan(values)
        return np.where(covered, limit * share, np.nan)

    src = lane.source
    lo = getattr(src, "min_t_per_month", None)
    hi = getattr(src, "max_t_per_month", None)
    return dataclasses.replace(lane, month_min_t=old(lane.month_min_t, lo), month_max_t=old(lane.month_max_t, hi))


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--start", type=dt.date.fromisoformat, default=dt.date(2027, 1, 16))
    ap.add_argument("--days", type=int, default=120)
    ap.add_argument("--time-limit", type=float, default=PLAN.time_limit)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        wb = build_demo_workbook(Path(tmp) / "demo.xlsx", start_date=args.start, horizon_days=args.days)
        scn = load_scenario(wb)
    bal = balance_frame(scn)
    lanes = build_lanes(scn, bal)
    _, months, share = horizon_months(scn.dates)
    old_lanes = [pro_rated(l, share) for l in lanes]
    costs = {}
    for name, ls in (("calendar months", lanes), ("pro-rated (old)", old_lanes)):
        firm = firm_loads(scn, ls)
        base = baseline_plan(scn, bal, ls, firm)
        out = solve_plan(scn, bal, ls, firm, {}, firm_days=56, time_limit=args.time_limit, hint=base)
        ev = evaluate(scn, bal, lanes, out.plan)  # both priced with the calendar-month contracts
        costs[name] = ev.total_cost
        print(f"{name:18} total cost {ev.total_cost:>14,.0f}  ({out.status}, gap {out.gap:.2%}, "
              f"{out.solve_seconds:.1f} s)")
    first, last = months[0], months[-1]
    print(f"horizon {scn.plant.start_date} .. {scn.plant.end_date}: {first} {share[0]:.0%} planned, "
          f"{last} {share[-1]:.0%} planned")
    extra = costs["pro-rated (old)"] - costs["calendar months"]
    print(f"the old pro-rating costs {extra:,.0f} more, {extra / abs(costs['calendar months']):.1%} "
          "of the calendar-month plan")


if __name__ == "__main__":
    main()
