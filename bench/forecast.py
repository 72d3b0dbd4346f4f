"""Benchmark: fit the forecast on 3 years of daily history for 4 units, then sample
10,000 futures × 365 days and push them through the mass balance.

Run:  python bench/forecast.py [--futures N] [--units U] [--years Y] [--repeat R]

The station is the demo's (plant, scrubber, coal sources and their year of lab results),
with its units replaced by U invented units whose history is drawn here from a known
process (yearly season, weekends, AR(1) deviations shared in part between the units,
forced outages, a spring overhaul).  No dispatch plan is given, so every unit is
forecast on every day (the heavier path).

Targets: fit <= 5 s, sampling and balance <= 1 s, peak memory <= 2 GB.  Times are the
best (and median) of R runs; the first fit also imports statsmodels and is shown apart.  Memory is
the peak of Python and numpy allocations (tracemalloc) during one sampling call, and
the process's peak resident size.  For scale, `bench/balance.py` times the bare balance
of 10,000 × 365 on the same machine.
"""

from __future__ import annotations

import argparse
import dataclasses
import resource
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from reagentplan.demo.build_demo import build_demo_workbook  # noqa: E402
from reagentplan.balance import BalanceParams, Drivers, mass_balance  # noqa: E402
from reagentplan.forecast import fit_forecast, sample_futures  # noqa: E402
from reagentplan.forecast.futures import CHUNK_FUTURES  # noqa: E402
from reagentplan.scenario import Unit, load_scenario  # noqa: E402


def synthetic_history(units: list[Unit], end: pd.Timestamp, years: int, seed: int = 7
                      ) -> pd.DataFrame:
    """Daily history (date, unit, mwh) ending on ``end``: load factor = season +
    weekend dip + AR(1) (station-wide and per unit, phi 0.8) on line, 0 in outages."""
    rng = np.random.default_rng(seed)
    dates = pd.date_range(end - pd.Timedelta(days=365 * years - 1), end, freq="D")
    n = len(dates)
    doy = dates.day_of_year.to_numpy()
    shape = (0.72 + 0.08 * np.cos(4 * np.pi * (doy - 20) / 365.25)
             + 0.03 * np.cos(2 * np.pi * (doy - 200) / 365.25)
             - 0.05 * (dates.day_of_week.to_numpy() == 5) - 0.08 * (dates.day_of_week.to_numpy() == 6))

    def ar1(sd):
        e = np.empty(n)
        x = rng.normal(0, sd / 0.6)
        for t in range(n):
            x = 0.8 * x + rng.normal(0, sd)
            e[t] = x
        return e

    common = ar1(0.025)
    rows = []
    for k, u in enumerate(units):
        lf = np.clip(shape + common + ar1(0.02), 0.35, 0.97)
        off = np.zeros(n, dtype=bool)
        for year in range(years):  # spring overhaul, a different unit each year
            if year % len(units) == k:
                s = 95 + 365 * year
                off[s:s + 21] = True
        t = int(rng.integers(5, 60))
        while t < n:  # forced outages, 2-5 days, about three a year
            off[t:t + int(rng.integers(2, 6))] = True
            t += int(rng.geometric(1 / 120)) + 5
        lf[off] = 0.0
        rows.append(pd.DataFrame({"date": dates, "unit": u.unit,
                                  "mwh": np.round(lf * u.capacity_mw * 24, 1)}))
    return pd.concat(rows).sort_values(["date", "unit"], kind="stable").reset_index(drop=True)


def bench_scenario(n_units: int, years: int):
    with tempfile.TemporaryDirectory() as tmp:
        scn = load_scenario(build_demo_workbook(Path(tmp) / "demo.xlsx"))
    units = tuple(Unit(f"B-{k + 1}", 600.0 + 20 * k, 10.0 + 0.1 * k, 0.0) for k in range(n_units))
    hist = synthetic_history(list(units), pd.Timestamp(scn.plant.start_date) - pd.Timedelta(days=1),
                             years)
    no_plan = scn.generation.iloc[0:0]
    return dataclasses.replace(scn, units=units, generation=no_plan, generation_history=hist)


def timed(fn, repeat: int) -> tuple[float, float, object]:
    """(best, median) seconds of ``repeat`` runs, and the last result."""
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), float(np.median(times)), out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--futures", type=int, default=10_000)
    ap.add_argument("--units", type=int, default=4)
    ap.add_argument("--years", type=int, default=3)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    scn = bench_scenario(args.units, args.years)
    days = scn.plant.horizon_days
    hist_days = scn.generation_history["date"].nunique()
    labs = len(scn.coal_quality_history)

    t0 = time.perf_counter()
    fit_forecast(scn, cache=False)
    first_fit = time.perf_counter() - t0
    fit, fit_med, model = timed(lambda: fit_forecast(scn, cache=False), args.repeat)
    t1, t1_med, fut = timed(lambda: sample_futures(scn, args.futures, seed=1, model=model,
                                                   workers=1), args.repeat)
    tn, tn_med, _ = timed(lambda: sample_futures(scn, args.futures, seed=1, model=model,
                                                 workers=None), args.repeat)

    # the balance alone on (futures, days) drivers, in the same chunks
    params = BalanceParams.from_scenario(scn)
    g = fut.flows["generation_mwh"]
    base = Drivers(generation_mwh=g, heat_input_gj=g * np.float32(10), coal_heat_gj=g * np.float32(10),
                   sulfur_pct=fut.flows["sulfur_pct"], ash_pct=np.full_like(g, 9.0),
                   hhv_mj_per_kg=np.full_like(g, 25.0), chlorine_pct=np.full_like(g, 0.1))

    def balance_only():
        for lo in range(0, args.futures, CHUNK_FUTURES):
            mass_balance(Drivers(*(getattr(base, f)[lo:lo + CHUNK_FUTURES]
                                   for f in Drivers.__dataclass_fields__)), params)

    tb, tb_med, _ = timed(balance_only, args.repeat)

    tracemalloc.start()
    sample_futures(scn, args.futures, seed=1, model=model, workers=1)
    peak_sample = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.reset_peak()
    fit_forecast(scn, cache=False)
    peak_fit = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**10  # KiB on Linux

    print(f"forecast: {args.units} units x {hist_days} days of history "
          f"({args.years} years), {len(scn.coal_sources)} coal sources with {labs} lab results")
    print(f"  fit                  {fit:7.2f} s   (best of {args.repeat}, median {fit_med:.2f} s; "
          f"target <= 5 s; first fit with imports {first_fit:.2f} s)")
    print(f"  sample + balance     {t1:7.2f} s   (median {t1_med:.2f} s; {args.futures:,} futures "
          f"x {days} days, 1 thread; target <= 1 s)")
    print(f"  sample + balance     {tn:7.2f} s   (median {tn_med:.2f} s; threads: one per CPU, "
          f"at most 4)")
    print(f"    of which balance   {tb:7.2f} s   (median {tb_med:.2f} s; mass_balance alone, "
          f"{CHUNK_FUTURES} futures a call)")
    print(f"  peak memory sampling {peak_sample:7.0f} MB  (tracemalloc; target <= 2048 MB)")
    print(f"  peak memory fitting  {peak_fit:7.0f} MB  (tracemalloc)")
    print(f"  peak resident size   {rss:7.0f} MB  (whole process)")
    for note in fut.notes[:2]:
        print(f"  model: {note[:150]}")
    lime = fut.flows["limestone_t"]
    print(f"  check: limestone P10/P50/P90 of the daily mean "
          f"{np.percentile(lime.mean(axis=1), [10, 50, 90]).round(1).tolist()} t/day")


if __name__ == "__main__":
    main()
