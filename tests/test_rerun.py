"""A plan is a function of its inputs: the same workbook gives the same movements and
costs, on a quiet machine or one whose cores are busy (the solves are bounded by work, one
thread, a fixed seed; the clock is only a safety net).  And the silo's stone plan comes
with a bound: the relaxation that keeps each stone as a lot of its own."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from reagentplan.scenario import load_scenario
from reagentplan.schedule import make_plan

from helpers import workbook_bytes, write_workbook
from test_schedule import two_quarries


def _plan_cli(workbook: Path, out: Path) -> tuple[bytes, dict]:
    r = subprocess.run([sys.executable, "-m", "reagentplan", "plan", str(workbook), "--out", str(out),
                        "--futures", "20", "--seed", "3"], capture_output=True, text=True, timeout=600)
    assert r.returncode in (0, 1), r.stderr[-2000:]
    summary = json.loads((out / "summary.json").read_text())
    return (out / "movements.csv").read_bytes(), summary


@pytest.mark.slow
def test_same_plan_on_a_quiet_and_a_busy_machine(tmp_path):
    """Plan a two-quarry station twice, the second time with two processes spinning on the
    machine's cores: movements.csv byte for byte and the costs to the cent are the same."""
    wb = write_workbook(two_quarries(days=45, seed=3, cheap=89.0), tmp_path / "station.xlsx")
    quiet_mv, quiet = _plan_cli(wb, tmp_path / "quiet")
    spin = [subprocess.Popen([sys.executable, "-c", "while True: pass"]) for _ in range(2)]
    try:
        busy_mv, busy = _plan_cli(wb, tmp_path / "busy")
    finally:
        for p in spin:
            p.kill()
            p.wait()
    assert quiet["clock_cut"] is False and busy["clock_cut"] is False
    assert busy_mv == quiet_mv
    for key in ("total_cost", "baseline_total_cost", "objective", "bound", "gap"):
        assert busy[key] == quiet[key], key
    assert busy["costs"] == quiet["costs"]


def test_silo_plan_has_a_bound_and_says_whether_it_settled():
    """With quarries of different CaCO3 the summary carries the relaxation's bound, the
    plan's objective at or above it, the gap between them (covering the whole plan) and
    whether the successive solves settled."""
    scn = load_scenario(workbook_bytes(two_quarries(days=30, seed=0, cheap=89.0)))
    r = make_plan(scn, firm_days=30, time_limit=120)
    s = r.summary()
    silo = s["silo"]
    assert silo["bound"] is not None and silo["objective"] >= silo["bound"] - 1e-6 * abs(silo["bound"])
    assert s["bound"] == silo["bound"] and s["gap"] == silo["gap"]
    assert s["gap"] == pytest.approx((silo["objective"] - silo["bound"]) / max(abs(silo["objective"]), 1.0), abs=2e-6)
    assert isinstance(silo["settled"], bool) and silo["why"]
    assert s["gap_scope"].startswith("the whole plan")
    assert s["clock_cut"] is False


def test_relaxation_bound_is_below_every_stone_plan_priced_exactly():
    """The bound is a bound: the relaxation's optimum is at most the exact price (the silo
    replayed well mixed, the byproducts planned at the gypsum it makes) of the baseline's
    stone, of the relaxation's own stone, and of the stone plans that the linearised silo
    model gives at several points."""
    from reagentplan.balance import balance_frame
    from reagentplan.schedule.baseline import baseline_plan
    from reagentplan.schedule.lanes import SUPPLY, build_lanes, firm_loads
    from reagentplan.schedule.model import WorkLimits, end_caco3_value, solve_plan
    from reagentplan.schedule.quality import SiloChemistry

    scn = load_scenario(workbook_bytes(two_quarries(days=21, seed=2, cheap=87.0)))
    bal = balance_frame(scn)
    lanes = build_lanes(scn, bal)
    firm = firm_loads(scn, lanes)
    chem = SiloChemistry.from_balance(scn, bal, lanes)
    work = WorkLimits(nodes=20000)
    relax = solve_plan(scn, bal, lanes, firm, {}, firm_days=21, chem=chem, silo_lots=True, to_days=False,
                       gap=1e-6, time_limit=300, work=work)
    base = baseline_plan(scn, bal, lanes, firm, chem=chem)
    plans = [base, relax.plan]
    for around in (base, relax.plan):
        plans.append(solve_plan(scn, bal, lanes, firm, {}, firm_days=21, chem=chem, around=around, hint=around,
                                to_days=False, time_limit=300, work=work).plan)
    prices = []
    for p in plans:
        pb = chem.plan_balance(scn, lanes, p)
        lx = build_lanes(scn, pb, exact_quality=True)
        end_c = float(pb["limestone_caco3_pct"].iloc[-1]) / 100
        exact = solve_plan(scn, pb, lx, firm, {}, firm_days=21, to_days=False, gap=1e-6, time_limit=300,
                           fixed={l.name: p.quantity[l.name] for l in lanes if l.kind == SUPPLY},
                           limestone_end_per_t=end_caco3_value(scn, chem) * end_c, work=work)
        prices.append(exact.objective)
    assert relax.bound <= min(prices) + 1e-6 * max(abs(min(prices)), 1.0)
    assert len(set(np.round(prices, 2))) > 1  # the plans differ: the check is not of one point


def test_silo_bound_holds_with_the_removal_chosen():
    """Quarries of different CaCO3 and a removal range under a permit with a compliance
    margin: the relaxation (with the removal free) still bounds the plan's objective (the
    byproducts at the chosen stone and removal, with the removal's setpoint and permit
    terms added back)."""
    from test_removal_lever import set_kv

    s = two_quarries(days=21, seed=1, cheap=88.0)
    set_kv(s, "scrubber", "removal_pct", 97.5)
    set_kv(s, "scrubber", "removal_min_pct", 95)
    set_kv(s, "scrubber", "removal_max_pct", 99)
    scn0 = load_scenario(workbook_bytes(s))
    from reagentplan.balance import balance_frame

    b = balance_frame(scn0)
    limit = float((b["so2_formed_t"] * 0.03 * 1000 / b["heat_input_gj"]).mean())  # binds near 97 %
    set_kv(s, "plant", "so2_limit_kg_per_gj", limit)
    scn = load_scenario(workbook_bytes(s))
    r = make_plan(scn, firm_days=21, time_limit=300)
    silo = r.summary()["silo"]
    assert r.plan.removal is not None
    assert silo["objective"] >= silo["bound"] - 1e-6 * abs(silo["bound"])
