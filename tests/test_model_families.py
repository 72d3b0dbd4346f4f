"""The optimisation model's constraint families, its typed result and its import graph."""

from __future__ import annotations

import ast
import datetime as dt
from pathlib import Path

import numpy as np
import pytest

from helpers import minimal_sheets, workbook_bytes
from reagentplan.scenario import load_scenario
from reagentplan.schedule import make_plan


def _small_airspace(days: int = 40, airspace: float = 300.0) -> dict:
    """No car set, no gypsum buyer: the gypsum goes to landfill, to a cheap cell with
    little airspace left or a dear one with plenty (invented values)."""
    s = minimal_sheets(days=days)
    s["storage"][2] = ["gypsum", 1000, 0, 900]
    s["buyers"] = [s["buyers"][0], s["buyers"][2]]  # the fly-ash buyer only
    s["disposal"] = [s["disposal"][0],
                     ["Cell 1", "gypsum", 12, 2000, airspace],
                     ["Cell 2", "gypsum", 30, 2000, None],
                     ["Cell 1", "fly_ash", 14, 2000, 1e6], ["Cell 1", "bottom_ash", 10, 500, 1e6]]
    return s


@pytest.mark.parametrize("firm_days", [40, 10])
def test_landfill_airspace_holds_without_a_car_set(firm_days):
    """A station with no car set and a cell with 300 t of airspace left: the plan puts at
    most 300 t of gypsum in it over the horizon and sends the rest to the dearer cell
    (the cell's daily limit alone would let it take 300 t every day)."""
    scn = load_scenario(workbook_bytes(_small_airspace()))
    assert not scn.train_sets
    r = make_plan(scn, firm_days=firm_days, time_limit=20)
    for plan in (r.outcome.plan, r.plan):
        assert plan.quantity["Cell 1 gypsum"].sum() <= 300.0 + 1e-6
    assert r.plan.quantity["Cell 1 gypsum"].sum() > 299.0  # the cheap airspace is used up
    assert r.plan.quantity["Cell 2 gypsum"].sum() > 100.0


def test_status_is_an_enum_with_its_text():
    """The solve's state is a `SolveStatus`; the status text (what the summary writes)
    keeps the notes the planning adds, and a text assigned sets the state back."""
    from reagentplan.schedule.model import SolveOutcome, SolveStatus

    o = SolveOutcome(None, "highs", SolveStatus.FEASIBLE, 1.0, 0.5, 0.5, 0.1)
    assert o.status == "feasible" and o.state is SolveStatus.FEASIBLE
    o.status += " (baseline kept: the replayed plan priced dearer)"
    assert o.state is SolveStatus.FEASIBLE and o.status_text.endswith("dearer)")
    o.status = "optimal"
    assert o.state is SolveStatus.OPTIMAL and o.status == "optimal"
    o.status = "no_solution_found (x)"
    assert o.state is SolveStatus.NO_SOLUTION_FOUND
    with pytest.raises(ValueError):
        o.status = "done"


def test_schedule_imports_run_one_way():
    """No import circle inside `reagentplan.schedule` (imports inside functions count)."""
    pkg = Path(__file__).resolve().parents[1] / "reagentplan" / "schedule"
    edges = {}
    for f in pkg.glob("*.py"):
        deps = set()
        for node in ast.walk(ast.parse(f.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom) and node.level == 1 and node.module:
                deps.add(node.module.split(".")[0])
        edges[f.stem] = deps
    state: dict[str, int] = {}

    def visit(u, path):
        state[u] = 1
        for v in sorted(edges.get(u, ())):
            assert state.get(v) != 1, f"import circle: {' -> '.join(path + [v])}"
            if v not in state:
                visit(v, path + [v])
        state[u] = 2

    for u in sorted(edges):
        if u not in state:
            visit(u, [u])
    assert {"terms", "penalties"} <= set(edges) and not edges["terms"] and not edges["penalties"]


def test_penalty_table_holds_every_factor():
    from reagentplan.schedule import evaluate, lever, model, penalties

    names = {p.name for p in penalties.TABLE}
    assert {"EMPTY_PENALTY_FACTOR", "PERMIT_PENALTY_FACTOR", "ALLOWANCE_SHORT_PENALTY_FACTOR", "GUARD_WEIGHT",
            "SILO_SAFETY_MARGIN", "CHANGE_COST_PER_LOAD", "LATE_TRAIN_DAYS", "CONTRACT_PENALTY_PER_T"} <= names
    for p in penalties.TABLE:
        assert getattr(penalties, p.name) == p.value and p.meaning
    # the old names still answer
    assert evaluate.EMPTY_PENALTY_FACTOR == penalties.EMPTY_PENALTY_FACTOR
    assert lever.PERMIT_PENALTY_FACTOR == penalties.PERMIT_PENALTY_FACTOR
    assert model.GUARD_WEIGHT == penalties.GUARD_WEIGHT and np.isfinite(model.LATE_TRAIN_DAYS)


def _short_of_allowances(trade_limit):
    """The one-day station of the removal tests with 5 t of allowances held, at 400 to buy
    and 380 to sell, and a monthly trade limit (0: none can be bought)."""
    from helpers import START
    from test_removal_lever import one_day_station

    s = one_day_station(days=7)
    s["allowances"] = [["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
                        "max_trade_t_per_month"], [START, 5, None, 400, 380, trade_limit]]
    return s


def test_allowance_shortfall_at_the_end_is_bought_at_the_buy_price():
    """Hand check of the end value: 10 t held → −380 × 10; 4 t short → +400 × 4 (the
    allowances the station must still buy to surrender)."""
    from reagentplan.schedule.terms import AllowanceTerms, allowance_costs, allowance_end_value

    t = AllowanceTerms(5.0, np.zeros(3), np.full(3, 400.0), np.full(3, 380.0), np.full(3, np.nan))
    assert allowance_end_value(t, 10.0) == pytest.approx(-3800.0)
    assert allowance_end_value(t, -4.0) == pytest.approx(1600.0)
    acc = allowance_costs(t, [3.0, 3.0, 3.0], np.zeros(3), np.zeros(3))  # 5 − 9 = −4 t at the end
    assert acc["end_value"] == pytest.approx(1600.0) and acc["short_t"] == pytest.approx(4.0)


def test_model_and_evaluation_price_a_short_holding_alike():
    """No allowance can be bought (trade limit 0) and 5 t held against about 1-3 t emitted a
    day for 7 days: the holding ends short.  The plan's evaluation charges the shortfall
    at the buy price, and the model's objective (the same costs, with the end) agrees
    with the evaluation's total."""
    scn = load_scenario(workbook_bytes(_short_of_allowances(0)))
    r = make_plan(scn, firm_days=7, time_limit=20)
    emitted = r.balance["so2_emitted_t"].to_numpy(float)
    end = 5.0 - emitted.sum()
    assert end < -1.0
    assert r.evaluation.end_parts["allowances"] == pytest.approx(400.0 * -end, rel=1e-6)
    assert r.outcome.objective == pytest.approx(r.evaluation.total_cost, rel=1e-6, abs=1.0)


def test_monthly_trade_limit_is_the_one_in_force():
    """The month starts with no trade limit and a limit of 2 t comes into force on its
    fourth day; 5 t held against 2 t emitted a day for 7 days (98 % removal of 100 t):
    the month's purchases so far may not exceed 2 t once the limit holds, so neither
    the plan nor the baseline buys more than 2 t in the month (the limit of the month's
    first day alone would have let them buy the whole 9 t short)."""
    from helpers import START
    from test_removal_lever import one_day_station

    s = one_day_station(days=7, removal=None, setpoint=98)
    s["allowances"] = [["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
                        "max_trade_t_per_month"], [START, 5, None, 400, 380, None],
                       [START + dt.timedelta(days=3), None, None, 400, 380, 2]]
    scn = load_scenario(workbook_bytes(s))
    r = make_plan(scn, firm_days=7, time_limit=20)
    assert r.balance["so2_emitted_t"].sum() > 9.0
    for plan in (r.plan, r.baseline):
        assert plan.bought_t is not None and plan.bought_t.sum() <= 2.0 + 1e-6
    assert r.plan.bought_t.sum() == pytest.approx(2.0, abs=1e-6)  # it buys what it may
