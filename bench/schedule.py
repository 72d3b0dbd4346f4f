"""Benchmark: the scheduler on the demo station for several horizons and solvers.

Run:  python bench/schedule.py [--solvers highs,scip,cp-sat] [--horizons 30,90,120,180,365]

For each horizon and solver, twice: every day planned (firm days = horizon) and the
default firm window (56 days) with weekly outlook.  Prints solve time, proven gap, the
plan's cost, the reorder-point baseline's cost (both priced the same way, with the same
end-of-horizon stock value), the reduction of the part of the cost planning can change
(total minus the limestone burned priced at its cheapest delivered cost), and the limits
each breaks.  Targets on 2 cores: 120 days every day <= 30 s with gap <= 0.5 %;
365 days <= 60 s with gap <= 1 %; t(365)/t(90) <= 5; never dearer than the baseline and
never more limits broken; >= 15 % off the controllable cost.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from demo.build_demo import build_demo_workbook  # noqa: E402
from reagentplan.balance import balance_frame  # noqa: E402
from reagentplan.scenario import load_scenario  # noqa: E402
from reagentplan.schedule import make_plan  # noqa: E402
from reagentplan.schedule.lanes import cheapest_delivered_cost  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--solvers", default="highs,scip,cp-sat")
    ap.add_argument("--horizons", default="30,90,120,180,365")
    ap.add_argument("--time-limit", type=float, default=60.0)
    args = ap.parse_args()
    print(f"{'days':>4} {'mode':>6} {'solver':>6} {'time s':>7} {'gap %':>7} {'plan cost':>12} "
          f"{'baseline':>12} {'ratio':>6} {'ctrl cut %':>10} {'breaks':>6} {'base br':>7}")
    times = {}
    with tempfile.TemporaryDirectory() as tmp:
        for h in [int(x) for x in args.horizons.split(",")]:
            scn = load_scenario(build_demo_workbook(Path(tmp) / f"demo{h}.xlsx", horizon_days=h))
            bal = balance_frame(scn)
            fixed = bal["limestone_t"].sum() * cheapest_delivered_cost(scn)
            for mode, firm in (("daily", h), ("firm56", 56)):
                if mode == "firm56" and h <= 56:
                    continue
                for solver in args.solvers.split(","):
                    t0 = time.perf_counter()
                    r = make_plan(scn, bal, firm_days=firm, solver=solver, time_limit=args.time_limit,
                                  gap=1e-7)
                    wall = time.perf_counter() - t0
                    s = r.summary()
                    ctrl_base = s["baseline_total_cost"] - fixed
                    ctrl_plan = s["total_cost"] - fixed
                    cut = 100 * (ctrl_base - ctrl_plan) / abs(ctrl_base) if ctrl_base else float("nan")
                    gap = 100 * (s["gap"] or 0.0)
                    times[(h, mode, solver)] = s["solve_seconds"]
                    print(f"{h:>4} {mode:>6} {solver:>6} {s['solve_seconds']:>7.2f} {gap:>7.3f} "
                          f"{s['total_cost']:>12,.0f} {s['baseline_total_cost']:>12,.0f} "
                          f"{s['total_cost'] / s['baseline_total_cost']:>6.3f} {cut:>10.1f} "
                          f"{len(s['breaches']):>6} {s['baseline_breaches']:>7}   (wall {wall:.1f} s)",
                          flush=True)
    for solver in args.solvers.split(","):
        for mode in ("daily", "firm56"):
            a, b = times.get((365, mode, solver)), times.get((90, mode, solver))
            if a and b:
                print(f"t(365)/t(90) {solver} {mode}: {a / b:.2f} (target <= 5)")


if __name__ == "__main__":
    main()
