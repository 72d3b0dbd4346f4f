"""Benchmark: the same plan on a quiet and on a busy machine.

Run:  python bench/rerun.py [--horizon 365] [--futures 500] [--busy 2]

Plans the demo station as `reagentplan plan` does, once on the machine as it is and once
with ``--busy`` processes spinning on its cores, and prints both runs' wall time, cost,
the saving against the baseline, whether the wall-clock safety net cut a solve short, and
whether ``movements.csv`` and the costs in ``summary.json`` are identical (they must be:
the solves are bounded by work, one thread, a fixed seed).  Also prints the profile of the
quiet run's planning (the ten functions with the most cumulative time).
"""

from __future__ import annotations

import argparse
import cProfile
import hashlib
import io
import pstats
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from demo.build_demo import build_demo_workbook  # noqa: E402
from reagentplan.pipeline import run_plan  # noqa: E402
from reagentplan.scenario import load_scenario  # noqa: E402


def one_run(scn, futures: int, profile: bool = False):
    prof = cProfile.Profile() if profile else None
    t0 = time.perf_counter()
    if prof:
        prof.enable()
    run = run_plan(scn, futures=futures, seed=0)
    if prof:
        prof.disable()
    wall = time.perf_counter() - t0
    s = run.plan.summary()
    mv = run.plan.movements.to_csv(index=False).encode()
    return wall, s, hashlib.sha256(mv).hexdigest(), prof


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--horizon", type=int, default=365)
    ap.add_argument("--futures", type=int, default=500)
    ap.add_argument("--busy", type=int, default=2)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        scn = load_scenario(build_demo_workbook(Path(tmp) / "demo.xlsx", horizon_days=args.horizon))
        quiet = one_run(scn, args.futures, profile=True)
        spin = [subprocess.Popen([sys.executable, "-c", "while True: pass"]) for _ in range(args.busy)]
        try:
            busy = one_run(scn, args.futures)
        finally:
            for p in spin:
                p.kill()
                p.wait()
    print(f"{'run':>6} {'wall s':>8} {'solve s':>8} {'plan cost':>12} {'saving':>10} {'gap %':>7} {'clock':>5} "
          f"{'settled':>7} movements sha256")
    for name, (wall, s, digest, _) in (("quiet", quiet), (f"busy{args.busy}", busy)):
        gap = 100 * s["gap"] if s["gap"] is not None else float("nan")
        print(f"{name:>6} {wall:>8.1f} {s['solve_seconds']:>8.1f} {s['total_cost']:>12,.2f} "
              f"{s['baseline_total_cost'] - s['total_cost']:>10,.2f} {gap:>7.3f} {str(s['clock_cut']):>5} "
              f"{str(s.get('silo', {}).get('settled', '-')):>7} {digest[:16]}")
    same = quiet[2] == busy[2] and all(quiet[1][k] == busy[1][k] for k in ("total_cost", "baseline_total_cost", "costs"))
    print(f"identical movements.csv and costs: {same}   busy/quiet wall ratio {busy[0] / quiet[0]:.2f}")
    out = io.StringIO()
    pstats.Stats(quiet[3], stream=out).sort_stats("cumulative").print_stats(12)
    print("\nprofile of the quiet run (cumulative):")
    print("\n".join(line for line in out.getvalue().splitlines() if line.strip())[:3000])


if __name__ == "__main__":
    main()
