"""The stages chained: scenario -> futures -> plan (and later risk and workbook).

The command line and the dashboard call these functions; they hold no computation of
their own.
"""

from __future__ import annotations

from dataclasses import dataclass

from .balance import balance_frame
from .scenario import Scenario
from .risk import RiskResult, replay
from .schedule import PlanResult, make_plan

#: Which sampled flow guards which store.
STORE_FLOWS = {"limestone": "limestone_t", "gypsum": "gypsum_wet_t", "fly_ash": "fly_ash_t",
               "bottom_ash": "bottom_ash_t"}


#: Extra balance outputs kept per future for the permit consequence of a shortfall.
SO2_FLOWS = ("so2_emitted_t", "so2_removed_t", "heat_input_gj", "generation_mwh")


@dataclass
class PlanRun:
    """A planned scenario: the plan, the futures it was guarded against, and its risk."""

    plan: PlanResult
    futures: object | None  # reagentplan.forecast.Futures, or None without futures
    risk: RiskResult | None = None


def run_plan(scenario: Scenario, *, futures: int = 500, seed: int = 0, solver: str = "highs",
             time_limit: float = 60.0, firm_days: int = 56, risk_level: float = 0.05,
             progress: bool = False) -> PlanRun:
    """Sample ``futures`` futures (none when 0), plan against them, replay the plan
    against them (the risk)."""
    balance = balance_frame(scenario)
    fut = None
    flows = None
    if futures > 0:
        from .forecast import sample_futures

        from .forecast.futures import FLOWS

        keep = tuple(dict.fromkeys(FLOWS + SO2_FLOWS))
        fut = sample_futures(scenario, futures, seed=seed, progress=progress, keep=keep)
        flows = {store: fut.flows[q] for store, q in STORE_FLOWS.items()
                 if store in scenario.storage and q in fut.flows}
    plan = make_plan(scenario, balance, flows=flows, risk_level=risk_level, firm_days=firm_days,
                     solver=solver, time_limit=time_limit, progress=progress)
    risk = None
    if fut is not None:
        from .schedule.plan import flows_at_plan_stone

        so2 = {k: fut.flows[k] for k in SO2_FLOWS if k in fut.flows}
        risk = replay(plan, flows_at_plan_stone(plan, flows, balance),
                      so2=so2 if len(so2) == len(SO2_FLOWS) else None)
    return PlanRun(plan, fut, risk)
