"""Benchmark: a fleet of invented stations planned together (../shared/FLEET.md).

Run:  python bench/fleet.py [--cases 3x120,3x365,10x365] [--futures 0] [--firm-days 56]
      [--time-limit S] [--decompose-check]

Each station is the small test station (`tests/helpers.minimal_sheets`: one 200 MW unit,
one quarry by rail, a board plant, a ready-mix buyer, a landfill) with its own landfill
cost and output; the first station's unit is out for two weeks in the second month.  All
stations share the quarry's contract (pooled maximum 2,500 t a month per station, pooled
minimum 1,500 at 6 a tonne short), the board plant's monthly room (1,200 t per station) and one car set
(0.6 trains a week per station, rounded up; each station burns about
0.45 trains of stone a week).  For each case: the time of the whole fleet plan
(loading excluded), the joint solve's gap, the fleet's cost against the hand split's, the
saving by cause, and the limits broken.

Targets (issue 23): 3 x 120 days <= 30 s; 3 x 365 <= 120 s; 10 x 365 within 10 minutes,
with the gap stated.  Solves are bounded by work (nodes), not the clock.
"""

from __future__ import annotations

import argparse
import math
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from fleet_helpers import fleet_rows, station_sheets  # noqa: E402
from helpers import write_workbook  # noqa: E402

from reagentplan.fleet import fleet_summary, load_fleet, plan_fleet  # noqa: E402


def build(folder: Path, stations: int, days: int) -> Path:
    names = [f"s{i + 1}" for i in range(stations)]
    for i, name in enumerate(names):
        landfill = [48.0, 9.0, 20.0, 30.0, 14.0][i % 5]
        mwh = 1800.0 + 100.0 * (i % 7)
        sheets = station_sheets(name, days, landfill, mwh, train_set="Q set", max_trains=1, window_days=7)
        if i == 0:
            for r in sheets["generation"][1 + 35:1 + 49]:
                r[2] = 0.0  # the unit out for two weeks
        write_workbook(sheets, folder / f"{name}.xlsx")
    rows = fleet_rows({n: f"{n}.xlsx" for n in names},
                      [["Quarry pool", "Quarry Q", "limestone", 1500 * stations, 2500 * stations, 6],
                       ["Board pool", "Board Co", "gypsum", None, 1200 * stations, None]],
                      [["Q set", max(1, math.ceil(0.6 * stations)), 7]], name=f"{stations} stations")
    return write_workbook(rows, folder / "fleet.xlsx")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", default="3x120,3x365,10x365")
    ap.add_argument("--futures", type=int, default=0)
    ap.add_argument("--firm-days", type=int, default=56)
    ap.add_argument("--time-limit", type=float, default=600.0)
    args = ap.parse_args()
    print(f"{'case':>7} {'seconds':>8} {'gap':>9} {'cost':>12} {'hand split':>12} {'saving':>10}  breaches  by cause")
    for case in args.cases.split(","):
        n, days = (int(x) for x in case.split("x"))
        with tempfile.TemporaryDirectory() as tmp:
            fleet = load_fleet(build(Path(tmp), n, days))
            t0 = time.perf_counter()
            result = plan_fleet(fleet, futures=args.futures, firm_days=args.firm_days, time_limit=args.time_limit)
            seconds = time.perf_counter() - t0
            s = fleet_summary(result)
        gap = "-" if s["gap"] is None else f"{100 * s['gap']:.3f}%"
        causes = ", ".join(f"{k} {v:,.0f}" for k, v in s["saving_by_cause"].items() if abs(v) > 0.5)
        print(f"{case:>7} {seconds:8.1f} {gap:>9} {s['total_cost']:12,.0f} {s['baseline_total_cost']:12,.0f} "
              f"{s['baseline_total_cost'] - s['total_cost']:10,.0f}  {len(s['breaches']):>8}  {causes}", flush=True)
        if s["objective"] is not None and s["bound"] is not None:
            print(f"{'':>7} objective {s['objective']:,.0f}, bound {s['bound']:,.0f} "
                  f"(absolute gap {s['objective'] - s['bound']:,.0f})", flush=True)
        print(f"{'':>7} status: {s['status']}", flush=True)


if __name__ == "__main__":
    main()
