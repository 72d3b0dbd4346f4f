"""Benchmark of the weekly loop's rehearsal on the demo station (not a timed test).

Target (issue 14): 16 weeks x 20 futures; the plan's median realised cost at least 10 %
of the controllable cost below the reorder-point baseline's under the same disturbances;
no stockout and no overflow in at least 95 % of futures; nervousness reported; the whole
rehearsal in a few minutes.  Prints the figures, the cost by cause and where the time
went.  Usage: python bench/rehearse.py [WEEKS] [FUTURES] [OUT_DIR|-] [GUARD_FUTURES] [WORKERS] [RISK_PCT]
(defaults 16, 20, -, the command's default guard futures, 2 workers, its default risk level)
"""

from __future__ import annotations

import dataclasses
import sys
import tempfile
import time
from pathlib import Path

from reagentplan.demo.build_demo import build_demo_workbook
from reagentplan.output import staged_output
from reagentplan.output.rehearse import write_rehearsal
from reagentplan.rehearse import rehearse
from reagentplan.rehearse.metrics import COST_CAUSES
from reagentplan.settings import WEEKLY_PLAN


def main(weeks: int = 16, futures: int = 20, out: str | None = None, plan_futures: int = WEEKLY_PLAN.futures,
         workers: int = 2, risk_level: float = WEEKLY_PLAN.risk_level) -> None:
    lookahead = 120
    with tempfile.TemporaryDirectory() as tmp:
        wb = build_demo_workbook(Path(tmp) / "demo.xlsx", horizon_days=7 * weeks + lookahead + 7)
        t0 = time.perf_counter()
        settings = dataclasses.replace(WEEKLY_PLAN, futures=plan_futures, risk_level=risk_level)
        res = rehearse(wb, weeks=weeks, futures=futures, seed=14, lookahead_days=lookahead,
                       settings=settings, progress=True, workers=workers)
        wall = time.perf_counter() - t0
    s = res.summary()
    print(f"rehearsal: demo station, {weeks} weeks x {futures} futures, lookahead {lookahead} d, firm 14 d, "
          f"{plan_futures} guard futures per weekly plan at risk level {risk_level:.1%}, {workers} workers")
    print(f"wall {wall:.1f} s; " + ", ".join(f"{k} {v:.1f} s" for k, v in res.seconds.items()))
    n_solves = weeks * futures
    plan_s = res.table.loc[res.table["policy"] == "plan", "plan_seconds"].sum()
    base_s = res.table.loc[res.table["policy"] == "baseline", "plan_seconds"].sum()
    print(f"planning (summed over workers): optimised {plan_s:.1f} s over {n_solves} weekly plans "
          f"({plan_s / n_solves:.2f} s each), "
          f"baseline {base_s:.1f} s ({base_s / n_solves:.2f} s each)")
    print(f"{'cause':<20}{'plan P50':>14}{'baseline P50':>14}{'plan - base':>14}")
    for k in COST_CAUSES:
        a, b = s["plan"]["costs_p50"][k], s["baseline"]["costs_p50"][k]
        print(f"{k:<20}{a:>14,.0f}{b:>14,.0f}{a - b:>14,.0f}")
    for p in ("plan", "baseline"):
        q = s[p]
        print(f"{p:<9} realised P50 {q['realised_cost_p50']:,.0f}  P90 {q['realised_cost_p90']:,.0f}  "
              f"clean futures {q['share_clean']:.0%}  stockout futures {q['stockout_futures']}  "
              f"overflow futures {q['overflow_futures']}  days under safety P50 {q['days_under_safety_p50']:.0f}  "
              f"nervousness P50 {q['nervousness_p50']:.0f}  months over max {q['months_over_max']}")
    g = res.table.groupby("policy")[[c for c in res.table.columns if c.startswith(("sold_", "landfilled_"))]
                                    + ["stone_received_t", "stone_used_t", "refused_t", "trains"]].median()
    print(g.T.to_string())
    over = res.table[res.table["overflow_days"] > 0]
    if len(over):
        print("futures with an overflow:")
        print(over[["policy", "future", "overflow_days"] + [c for c in over.columns if c.startswith("overflow_")
                                                            and c.endswith("_t")]].to_string(index=False))
    share = s["saving_share_of_controllable"]
    print(f"saving P50 {s['saving_p50']:,.0f} = {share:.1%} of the baseline's controllable cost "
          f"(target >= 10 %: {'met' if share >= 0.10 else 'NOT met'}); "
          f"clean futures {s['plan']['share_clean']:.0%} (target >= 95 %: "
          f"{'met' if s['plan']['share_clean'] >= 0.95 else 'NOT met'})")
    if out:
        with staged_output(out) as folder:
            write_rehearsal(res, folder)
        print(f"files in {out}")


if __name__ == "__main__":
    a = sys.argv[1:]
    main(int(a[0]) if a else 16, int(a[1]) if len(a) > 1 else 20, a[2] if len(a) > 2 and a[2] != '-' else None,
         int(a[3]) if len(a) > 3 else WEEKLY_PLAN.futures, int(a[4]) if len(a) > 4 else 2,
         float(a[5]) / 100 if len(a) > 5 else WEEKLY_PLAN.risk_level)
