"""Benchmark: replay of a 365-day demo plan against 10,000 sampled futures.

Run:  python bench/risk.py [--futures N]

Prints the replay time, its peak memory (tracemalloc) and the ratio to the
memory-speed bound of the arrays it touches (bytes read and written once / a measured
copy bandwidth of this machine).  Targets: <= 1 s and <= 2 GB.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from reagentplan.demo.build_demo import build_demo_workbook  # noqa: E402
from reagentplan.forecast import FLOWS, sample_futures  # noqa: E402
from reagentplan.pipeline import SO2_FLOWS, STORE_FLOWS  # noqa: E402
from reagentplan.risk import replay  # noqa: E402
from reagentplan.scenario import load_scenario  # noqa: E402
from reagentplan.schedule import make_plan  # noqa: E402


def copy_bandwidth(nbytes: int = 400 * 2**20) -> float:
    """Measured memory copy speed of this machine [bytes/s] (read + write counted)."""
    a = np.ones(nbytes // 8)
    b = np.empty_like(a)
    best = np.inf
    for _ in range(3):
        t0 = time.perf_counter()
        np.copyto(b, a)
        best = min(best, time.perf_counter() - t0)
    return 2 * a.nbytes / best


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--futures", type=int, default=10_000)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        scn = load_scenario(build_demo_workbook(Path(tmp) / "demo.xlsx"))
    plan = make_plan(scn, time_limit=30)
    fut = sample_futures(scn, args.futures, seed=1, keep=tuple(dict.fromkeys(FLOWS + SO2_FLOWS)))
    flows = {s: fut.flows[q] for s, q in STORE_FLOWS.items()}
    so2 = {k: fut.flows[k] for k in SO2_FLOWS}

    times = []
    for _ in range(2):
        t0 = time.perf_counter()
        res = replay(plan, flows, so2=so2, suggest=False)
        times.append(time.perf_counter() - t0)
    tracemalloc.start()
    replay(plan, flows, so2=so2, suggest=False)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    t0 = time.perf_counter()
    replay(plan, flows, so2=so2, suggest=True)
    with_top = time.perf_counter() - t0

    # arrays touched: 4 store flows + 4 level arrays + (limestone) unmet, plus 4 SO2 inputs
    cells = args.futures * len(scn.dates)
    touched = cells * 8 * (4 + 4 + 1 + 4)
    bound = touched / copy_bandwidth()
    t = min(times)
    print(f"risk replay: {args.futures} futures x {len(scn.dates)} days")
    print(f"  replay            {t:7.3f} s  (best of 2; target <= 1 s)")
    print(f"  with top risks    {with_top:7.3f} s  (re-replays each remedy)")
    print(f"  peak memory       {peak / 2**20:7.0f} MB (tracemalloc; target <= 2048 MB)")
    print(f"  memory-speed bound {bound:6.3f} s  -> ratio {t / bound:5.1f}x the bound")
    lime = res.frame[res.frame["store"] == "limestone"]
    print(f"  check: max p_below_safety limestone {lime['p_below_safety'].max():.3f}")


if __name__ == "__main__":
    main()
