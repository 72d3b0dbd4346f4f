"""Benchmark: the scheduler on the demo station for several horizons and solvers.

Run:  python bench/schedule.py [--solvers highs,scip,cp-sat] [--horizons 30,90,120,180,365]
      [--time-limit S] [--futures 50] [--plain] [--lever]

The demo station is quality-coupled: two quarries of different CaCO3 in a well-mixed
silo, a board plant with a purity limit and a season, freight tiers, a shared train set.
For each horizon and solver, twice: every day planned (firm days = horizon) and the
default firm window (56 days) with weekly outlook.  Prints solve time (all successive
silo solves and the final byproduct solve), the gap proven on the final solve, the plan's
cost, the reorder-point baseline's cost (both replayed through the exact silo and priced
the same way), the saving and its split by cause (stone = purchase less the stone left at
the end; freight; byproduct sales; landfill; penalties incl. take-or-pay), and the limits
each breaks.  ``--plain`` also runs each case with every quarry's stone set to the silo's
(no chemistry in the plan), for comparison.  ``--lever`` also runs each case with the
scrubber's removal fixed at its setpoint (case ``fixed-r``: the range taken away), so the
time the removal decision costs reads off the two rows (target: at most 1.5 x).

Targets on 2 cores: 120 days every day, guarded by 50 futures (``--futures 50``), <= 10 s
with a gap <= 0.1 % for the whole plan (against the silo relaxation's bound); 365 days with
the firm/outlook split <= 30 s; never dearer than the baseline and never more limits
broken.  The solves are bounded by work (nodes), not the clock: ``clock`` says whether the
wall-clock safety net (``--time-limit``) cut one short; ``settled`` whether the successive
silo solves settled.
"""

from __future__ import annotations

import argparse
import dataclasses
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from reagentplan.demo.build_demo import build_demo_workbook  # noqa: E402
from reagentplan.balance import balance_frame  # noqa: E402
from reagentplan.scenario import load_scenario  # noqa: E402
from reagentplan.schedule import make_plan  # noqa: E402
from reagentplan.settings import PLAN  # noqa: E402

CAUSES = ("stone", "freight", "byproduct_sales", "landfill", "allowances", "penalties")


def plain(scn):
    """The same scenario with every quarry's stone equal to the silo's: no chemistry."""
    return dataclasses.replace(scn, suppliers=tuple(dataclasses.replace(s, caco3_pct=None)
                                                    for s in scn.suppliers))


def fixed_removal(scn):
    """The same scenario with the removal fixed at the setpoint (no range): the lever off."""
    return dataclasses.replace(scn, scrubber=dataclasses.replace(scn.scrubber, removal_min_pct=None,
                                                                 removal_max_pct=None))


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--solvers", default="highs,scip")
    ap.add_argument("--horizons", default="30,90,120,180,365")
    ap.add_argument("--time-limit", type=float, default=PLAN.time_limit)
    ap.add_argument("--gap", type=float, default=5e-4)
    ap.add_argument("--plain", action="store_true")
    ap.add_argument("--futures", type=int, default=0,
                    help="guard each plan with this many sampled futures (as `plan` does); 0: none")
    ap.add_argument("--lever", action="store_true",
                    help="also run each case with the removal fixed (no range), and print the time ratio")
    args = ap.parse_args()
    head = (f"{'days':>4} {'mode':>6} {'case':>7} {'solver':>6} {'time s':>7} {'gap %':>7} {'plan cost':>12} "
            f"{'baseline':>12} {'saving':>10} " + " ".join(f"{c[:9]:>9}" for c in CAUSES)
            + f" {'breaks':>6} {'base br':>7} {'iters':>5} {'settled':>7} {'clock':>5}")
    print(head)
    with tempfile.TemporaryDirectory() as tmp:
        for h in [int(x) for x in args.horizons.split(",")]:
            scn0 = load_scenario(build_demo_workbook(Path(tmp) / f"demo{h}.xlsx", horizon_days=h))
            cases = ([("quality", scn0)] + ([("plain", plain(scn0))] if args.plain else [])
                     + ([("fixed-r", fixed_removal(scn0))] if args.lever else []))
            for case, scn in cases:
                bal = balance_frame(scn)
                flows = None
                if args.futures:
                    from reagentplan.forecast import sample_futures
                    from reagentplan.pipeline import FUTURE_FLOWS, STORE_FLOWS

                    fut = sample_futures(scn, args.futures, seed=0, keep=FUTURE_FLOWS)
                    flows = {st: fut.flows[q] for st, q in STORE_FLOWS.items() if st in scn.storage and q in fut.flows}
                for mode, firm in (("daily", h), ("firm56", 56)):
                    if mode == "firm56" and h <= 56:
                        continue
                    for solver in args.solvers.split(","):
                        t0 = time.perf_counter()
                        try:
                            r = make_plan(scn, bal, flows=flows, firm_days=firm, solver=solver,
                                          time_limit=args.time_limit, gap=args.gap)
                        except Exception as exc:  # a solver that cannot take the model
                            print(f"{h:>4} {mode:>6} {case:>7} {solver:>6} failed: {exc}", flush=True)
                            continue
                        wall = time.perf_counter() - t0
                        s = r.summary()
                        gap = 100 * (s["gap"] if s["gap"] is not None else float("nan"))
                        saving = s["baseline_total_cost"] - s["total_cost"]
                        split = " ".join(f"{s['saving_by_cause'][c]:>9,.0f}" for c in CAUSES)
                        iters = len([i for i in s["silo_iterations"] if isinstance(i["iteration"], int)])
                        print(f"{h:>4} {mode:>6} {case:>7} {solver:>6} {s['solve_seconds']:>7.2f} {gap:>7.3f} "
                              f"{s['total_cost']:>12,.0f} {s['baseline_total_cost']:>12,.0f} {saving:>10,.0f} "
                              f"{split} {len(s['breaches']):>6} {s['baseline_breaches']:>7} {iters:>5}"
                              f" {str(s.get('silo', {}).get('settled', '-')):>7} {str(s['clock_cut']):>5}"
                              f"   (wall {wall:.1f} s)", flush=True)


if __name__ == "__main__":
    main()
