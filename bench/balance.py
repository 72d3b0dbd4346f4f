"""Benchmark: the vectorised mass balance over 10,000 futures × 365 days of the demo
station, against a plain per-day Python loop over the same inputs.

Run:  python bench/balance.py [--futures N] [--loop-futures M]

The loop is timed on the first M futures and scaled to N (it is linear in the number of
(future, day) cells); both run in this one process, so the ratio is what to compare.
Targets: whole vectorised balance <= 1 s, >= 100x faster than the loop.
"""

from __future__ import annotations

import argparse
import dataclasses
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from reagentplan.demo.build_demo import build_demo_workbook  # noqa: E402
from reagentplan.balance import BalanceParams, Drivers, mass_balance, scenario_drivers  # noqa: E402
from reagentplan.scenario import load_scenario  # noqa: E402


def futures_drivers(base: Drivers, n: int, seed: int = 0) -> Drivers:
    """Perturb the deterministic drivers into n futures (load ±10 %, sulfur ±0.3 %)."""
    rng = np.random.default_rng(seed)
    days = base.generation_mwh.shape[1]
    load = np.clip(1 + 0.1 * rng.standard_normal((n, days)), 0, None)
    sulfur = np.clip(base.sulfur_pct + 0.3 * rng.standard_normal((n, days)), 0.05, None)
    return dataclasses.replace(
        base, generation_mwh=base.generation_mwh * load, heat_input_gj=base.heat_input_gj * load,
        coal_heat_gj=base.coal_heat_gj * load, sulfur_pct=sulfur,
        ash_pct=np.broadcast_to(base.ash_pct, (n, days)).copy(),
        hhv_mj_per_kg=np.broadcast_to(base.hhv_mj_per_kg, (n, days)).copy(),
        chlorine_pct=np.broadcast_to(base.chlorine_pct, (n, days)).copy())


def loop_balance(d: Drivers, p: BalanceParams, futures: int) -> float:
    """A plain Python loop: one balance call per (future, day) on scalars."""
    names = [f.name for f in dataclasses.fields(d)]
    total = 0.0
    for f in range(futures):
        for t in range(d.generation_mwh.shape[1]):
            one = Drivers(*(np.array([[getattr(d, k)[f, t]]]) for k in names))
            total += float(mass_balance(one, p)["limestone_t"][0, 0])
    return total


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--futures", type=int, default=10_000)
    ap.add_argument("--loop-futures", type=int, default=3)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        scn = load_scenario(build_demo_workbook(Path(tmp) / "demo.xlsx"))
    p = BalanceParams.from_scenario(scn)
    d = futures_drivers(scenario_drivers(scn), args.futures)
    days = d.generation_mwh.shape[1]
    cells = args.futures * days

    times = []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        res = mass_balance(d, p)
        times.append(time.perf_counter() - t0)
    vec = min(times)

    t0 = time.perf_counter()
    loop_balance(d, p, args.loop_futures)
    loop_per_cell = (time.perf_counter() - t0) / (args.loop_futures * days)
    loop_est = loop_per_cell * cells

    tracemalloc.start()
    mass_balance(d, p)
    peak_mb = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()
    print(f"balance: {args.futures} futures x {days} days = {cells:,} cells")
    print(f"  vectorised   {vec:8.3f} s   (best of {args.repeat}; target <= 1 s)")
    print(f"  plain loop   {loop_est:8.1f} s   (timed on {args.loop_futures} futures, scaled)")
    print(f"  ratio        {loop_est / vec:8.0f} x  (target >= 100 x)")
    print(f"  peak memory of one call {peak_mb:,.0f} MB (numpy allocations, tracemalloc)")
    print(f"  check: mean limestone {res['limestone_t'].mean():.1f} t/day")


if __name__ == "__main__":
    main()
