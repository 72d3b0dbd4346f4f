"""One case of a study: plan the variant and replay it against the shared futures.

`run_case` is a pure function of picklable inputs (a `Case`, the shared
`DriverSamples`, the `reagentplan.settings.PlanSettings`) and returns a plain dict, so it runs the same in
this process, in a `LocalCluster` worker or on a remote cluster; a case's row depends
on nothing but its inputs (not on the worker, nor on the order the cases ran in).

**What is shared and what is recomputed.**  The futures of the *drivers* (generation
per day, heat input, blended coal sulfur, ash, heating value and chlorine) are sampled
once from the workbook as it is and shipped to every worker once.  Each case runs the
mass balance again on them with its own plant and scrubber values
(`futures_from_drivers`), so a variant of ``scrubber.removal_pct`` really changes the
limestone and gypsum futures, and every case sees the same generation and coal in
future k (common random numbers).  A variant of a driver input (units, generation,
coal sources, blend, histories, start date or horizon) samples its futures again in
the worker with the same seed: the same random streams, so still common random
numbers, at the cost of a forecast fit per case.

**Cost per future.**  The plan's movements are held fixed, as in the risk replay, with
two things a coordinator would do as the future unfolds (a plan held rigidly fixed for
a year is otherwise priced by penalties no station would pay):

- a limestone delivery never fills the store above its capacity: what would not fit
  is called off and credited at the plan's mean delivered cost (price and freight per
  tonne), `replay_limestone_capped`;
- a byproduct haul-out takes at most what is above the store's safety stock (nobody
  ships the heel: in a future that made less gypsum the last trucks leave light): the
  tonnes not shipped are credited at the plan's mean money per tonne of that store's
  haul-outs (sales revenue lost, landfill cost saved) and stay in the store,
  `replay_byproduct_heel`.

A future's cost is then the plan's movement costs (limestone price and freight,
byproduct sales, landfill, contract shortfalls), less those credits, plus the shortage
penalty on every tonne-day below safety stock, the empty-store penalty on limestone
use not met, the overflow penalty on every tonne-day a byproduct store is above
capacity, and the end-of-horizon stock value: priced as
`reagentplan.schedule.evaluate.evaluate` prices the plan itself.  Replayed against the
deterministic balance alone, a plan that keeps its own stores within their limits
gives exactly its ``total_cost`` (tested).  The risk columns come from the same
replay: a byproduct store over capacity is the overflow that cannot be called off.

References
----------
Glasserman, P. (2003), *Monte Carlo Methods in Financial Engineering*, Springer,
section 4.2: common random numbers for comparing systems.
Silver, E. A., Pyke, D. F. and Thomas, D. J. (2016), *Inventory and Production
Management in Supply Chains*, 4th ed., CRC Press, ch. 6: shortage and overflow costs
per period.
"""

from __future__ import annotations

import functools
import threading
import time
import traceback
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..balance import balance_frame
from ..forecast.futures import DriverSamples, futures_from_drivers, sample_futures
from ..pipeline import FUTURE_FLOWS, STORE_FLOWS, PlanRun, plan_with_futures
from ..risk import store_flows
from ..schedule.evaluate import EMPTY_PENALTY_FACTOR
from ..schedule.lanes import LANDFILL, SALE, SUPPLY, cheapest_delivered_cost, cheapest_disposal_cost
from ..schedule.plan import flows_at_plan_stone
from ..settings import PlanSettings
from .grid import Case

#: Result fields of a case, after ``case`` and the varied values (DESIGN §7), then the
#: additions.
RESULT_COLUMNS = ("status", "total_cost", "cost_p10", "cost_p50", "cost_p90",
                  "p_limestone_below_safety", "p_any_over_capacity", "trains", "trucks",
                  "sold_t", "landfilled_t", "solve_seconds")
EXTRA_COLUMNS = ("expected_cost", "baseline_total_cost", "gap", "breaches", "futures",
                 "case_seconds", "message")
#: Statuses of a case that has a plan.
PLANNED = ("optimal", "feasible")
#: Movement costs of a plan: the same in every future, the movements being fixed (the mill
#: rejects' haul at the deterministic balance's rejects; the SO2 allowances traded, with
#: the holding left at the end valued at the deterministic balance's emissions).
FIXED_COSTS = ("limestone_purchase", "freight", "byproduct_sales", "landfill", "contract_penalty",
               "mill_rejects_disposal", "allowances")


@dataclass(frozen=True)
class ReplayFigures:
    """A plan replayed against futures: cost per future [money], and the highest daily
    chance [-] of limestone below safety stock and of any byproduct store over capacity."""

    costs: np.ndarray
    p_limestone_below_safety: float
    p_any_over_capacity: float


def replay_byproduct_heel(initial_t: float, production_t: np.ndarray, departures_t: np.ndarray,
                          safety_t: float) -> tuple[np.ndarray, np.ndarray]:
    """End-of-day byproduct stock [t] (F, D) when the planned haul-outs [t/d] (D,) take
    at most what is above the safety stock [t] (the heel is not shipped), and the tonnes
    planned but not shipped per future [t] (F,).  With ``safety_t`` = 0 the levels are
    those of `reagentplan.risk.replay_byproduct`."""
    prod = np.ascontiguousarray(np.asarray(production_t, dtype=np.float64).T)  # days x futures
    level = np.empty_like(prod)
    x = np.full(prod.shape[1], float(initial_t))
    unshipped = np.zeros(prod.shape[1])
    for d in range(prod.shape[0]):
        x += prod[d]
        take = np.minimum(departures_t[d], np.maximum(x - safety_t, 0.0))
        unshipped += departures_t[d] - take
        x -= take
        level[d] = x
    return level.T, unshipped


def replay_limestone_capped(initial_t: float, arrivals_t: np.ndarray, use_t: np.ndarray,
                            capacity_t: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """End-of-day limestone [t] (F, D), use not met [t] (F, D), and tonnes not taken
    per future [t] (F,), when a delivery never fills the store above its capacity [t]
    (the coordinator calls off what would not fit).  With an initial level within
    capacity and no delivery refused, the levels are those of
    `reagentplan.risk.replay_limestone`."""
    use = np.ascontiguousarray(np.asarray(use_t, dtype=np.float64).T)  # days x futures
    level = np.empty_like(use)
    unmet = np.zeros_like(use)
    refused = np.zeros(use.shape[1])
    x = np.full(use.shape[1], float(initial_t))
    room = max(float(capacity_t), float(initial_t))
    for d in range(use.shape[0]):
        x += arrivals_t[d]
        over = np.maximum(x - room, 0.0)
        refused += over
        x -= over
        x -= use[d]
        np.maximum(-x, 0.0, out=unmet[d])
        np.maximum(x, 0.0, out=x)
        level[d] = x
    return level.T, unmet.T, refused


def inbound_cost_per_t(result) -> float:
    """The plan's mean delivered cost of limestone [money/t] (price and freight over
    the planned tonnes); 0 with no deliveries."""
    money = tonnes = 0.0
    for lane in result.lanes:
        if lane.kind == SUPPLY:
            t = float(result.plan.tonnes(lane).sum())
            money += lane.cost_per_t * t + lane.cost_per_load * float(
                np.sum(result.plan.quantity[lane.name]))
            tonnes += t
    return money / tonnes if tonnes > 0 else 0.0


def outbound_cost_per_t(result, store: str) -> float:
    """The plan's mean money per tonne hauled out of a byproduct store [money/t]
    (sales negative, landfill positive), weighted by the planned tonnes; 0 with none."""
    money = tonnes = 0.0
    for lane in result.lanes:
        if lane.material == store and lane.kind != SUPPLY:
            t = float(result.plan.tonnes(lane).sum())
            money += lane.cost_per_t * t
            tonnes += t
    return money / tonnes if tonnes > 0 else 0.0


def replay_costs(result, flows: dict[str, np.ndarray]) -> ReplayFigures:
    """Replay a plan (`reagentplan.schedule.PlanResult`) against ``flows`` (store ->
    (F, D) limestone use or byproduct production [t/d]) and price every future.

    Returns the cost of each future [money] (see the module docstring; byproduct
    haul-outs as `replay_byproduct_heel`), and per day the
    share of futures with limestone below safety stock or any byproduct store above
    capacity [-], each at its highest over the horizon (as the plan's risk level is a
    chance per day).
    """
    scn, lanes, plan = result.scenario, result.lanes, result.plan
    p = scn.plant
    n = len(scn.dates)
    fixed = float(sum(result.evaluation.costs.get(k, 0.0) for k in FIXED_COSTS)
                  + result.evaluation.end_parts.get("allowances", 0.0))
    n_futures = int(np.shape(next(iter(flows.values())))[0])
    costs = np.full(n_futures, fixed)
    p_below = np.zeros(n)
    over_any = np.zeros((n_futures, n), dtype=bool)
    for store, st in scn.storage.items():
        moved = store_flows(plan, lanes, store, n)
        f = np.asarray(flows[store], dtype=np.float64)
        if store == "limestone":
            level, unmet, refused = replay_limestone_capped(st.initial_t, moved, f, st.capacity_t)
            costs -= inbound_cost_per_t(result) * refused
            costs += EMPTY_PENALTY_FACTOR * p.shortage_penalty_per_t * unmet.sum(axis=1)
            costs -= cheapest_delivered_cost(scn) * level[:, -1]
            if st.safety_t > 0:
                p_below = (level < st.safety_t - 1e-6).mean(axis=0)
        else:
            level, unshipped = replay_byproduct_heel(st.initial_t, f, moved, st.safety_t)
            costs -= outbound_cost_per_t(result, store) * unshipped
            costs += cheapest_disposal_cost(scn, store) * np.maximum(level[:, -1], 0.0)
            over_any |= level > st.capacity_t + 1e-6
        costs += p.shortage_penalty_per_t * np.clip(st.safety_t - level, 0, None).sum(axis=1)
        costs += p.overflow_penalty_per_t * np.clip(level - st.capacity_t, 0, None).sum(axis=1)
    return ReplayFigures(costs, float(p_below.max(initial=0.0)),
                         float(over_any.mean(axis=0).max(initial=0.0)))


def case_futures(case: Case, shared: DriverSamples):
    """The case's futures: the shared drivers through its balance, or (a driver input
    varied) sampled again with the shared seed."""
    if case.resample:
        return sample_futures(case.scenario, shared.n_futures, seed=shared.seed,
                              keep=FUTURE_FLOWS, workers=1)
    return futures_from_drivers(shared, case.scenario, keep=FUTURE_FLOWS)


def plan_case(case: Case, shared: DriverSamples, settings: PlanSettings) -> PlanRun:
    """The case planned and replayed as `reagentplan plan` would (`plan_with_futures`),
    against its futures (`case_futures`; ``settings.futures`` and ``seed`` are the
    shared futures', not used here)."""
    fut = case_futures(case, shared)
    return plan_with_futures(case.scenario, fut, settings)


@dataclass(frozen=True)
class Movements:
    """What plans move over the horizon: rail loads (trains) and road loads (trucks) of
    limestone [-], and byproduct tonnes sold and landfilled [t]."""

    trains: int
    trucks: int
    sold_t: float
    landfilled_t: float


def movement_totals(plans) -> Movements:
    """The loads and tonnes of one or more plans (`reagentplan.schedule.PlanResult`),
    summed lane by lane in the order given: a station's plan, or a fleet's stations'."""
    trains = trucks = 0
    sold = landfilled = 0.0
    for plan in plans:
        for lane in plan.lanes:
            q = plan.plan.quantity[lane.name]
            if lane.kind == SUPPLY:
                if lane.mode == "rail":
                    trains += int(np.sum(q))
                else:
                    trucks += int(np.sum(q))
            elif lane.kind == SALE:
                sold += float(plan.plan.tonnes(lane).sum())
            elif lane.kind == LANDFILL:
                landfilled += float(plan.plan.tonnes(lane).sum())
    return Movements(trains, trucks, sold, landfilled)


def replay_run(run: PlanRun) -> ReplayFigures:
    """A planned run (`reagentplan.pipeline.PlanRun`, with futures) replayed against its
    own futures (`replay_costs`): each store's flow as sampled, the limestone use and
    gypsum moved to the plan's stone where the silo's quality is coupled
    (`reagentplan.schedule.plan.flows_at_plan_stone`)."""
    plan = run.plan
    flows = {store: run.futures.flows[q] for store, q in STORE_FLOWS.items()
             if store in plan.scenario.storage}
    if plan.scenario.quality_coupled:  # the futures' stone use and gypsum at the plan's silo
        flows = flows_at_plan_stone(plan, flows, balance_frame(plan.scenario))
    return replay_costs(plan, flows)


def result_row(case: Case, run: PlanRun, seconds: float) -> dict:
    """The plain row of a planned case (the fields of `RESULT_COLUMNS` and
    `EXTRA_COLUMNS`)."""
    plan = run.plan
    fig = replay_run(run)
    moved = movement_totals([plan])
    o = plan.outcome
    status = o.status.split(" ")[0]
    q10, q50, q90 = np.quantile(fig.costs, [0.1, 0.5, 0.9])
    return {
        "case": case.case, "status": status if status in PLANNED else o.status,
        "total_cost": round(plan.evaluation.total_cost, 2),
        "cost_p10": round(float(q10), 2), "cost_p50": round(float(q50), 2),
        "cost_p90": round(float(q90), 2),
        "p_limestone_below_safety": round(fig.p_limestone_below_safety, 6),
        "p_any_over_capacity": round(fig.p_any_over_capacity, 6),
        "trains": moved.trains, "trucks": moved.trucks, "sold_t": round(moved.sold_t, 1),
        "landfilled_t": round(moved.landfilled_t, 1), "solve_seconds": round(o.solve_seconds, 3),
        "expected_cost": round(float(fig.costs.mean()), 2),
        "baseline_total_cost": round(plan.baseline_evaluation.total_cost, 2),
        "gap": round(o.gap, 6) if np.isfinite(o.gap) else None,
        "breaches": len(plan.breaches),
        "futures": "resampled" if case.resample else "shared",
        "case_seconds": round(seconds, 3), "message": "" if status in PLANNED else o.status,
    }


def failed_row(case: Case, status: str, message: str, seconds: float | None = None) -> dict:
    """The row of a case with no plan: ``failed``, ``timeout`` or ``not run``."""
    row = {k: None for k in RESULT_COLUMNS + EXTRA_COLUMNS}
    row.update(case=case.case, status=status, message=message,
               futures="resampled" if case.resample else "shared",
               case_seconds=None if seconds is None else round(seconds, 3))
    return row


def _caught(case, plan_row: Callable[[], dict], failed: Callable[..., dict]) -> dict:
    t0 = time.perf_counter()
    try:
        return plan_row()
    except Exception as exc:  # a case that fails is reported, and the study goes on
        where = traceback.extract_tb(exc.__traceback__)[-1]
        return failed(case, "failed", f"{type(exc).__name__}: {exc} (at {where.name}, "
                      f"{where.filename.rsplit('/', 1)[-1]}:{where.lineno})",
                      time.perf_counter() - t0)


def run_guarded(case, plan_row: Callable[[], dict], failed: Callable[..., dict], *,
                case_timeout: float | None = None, time_limit: float = 0.0) -> dict:
    """``plan_row()`` (the row of one planned case) as a study runs it, whatever study:
    a case that raises gives ``failed(case, "failed", message, seconds)`` with the error
    and where it was raised; with ``case_timeout`` (wall-clock seconds of the whole case
    [s]; None: none), a case that has not finished by then gives ``failed(case,
    "timeout", message, seconds)`` naming ``time_limit``, the solver's limit per solve
    [s] (its thread cannot be stopped from outside: it runs on to its solver time limit
    in the background and its result is dropped).  ``case`` needs a ``case`` number."""
    if not case_timeout:
        return _caught(case, plan_row, failed)
    box: list[dict] = []
    t0 = time.perf_counter()
    worker = threading.Thread(target=lambda: box.append(_caught(case, plan_row, failed)),
                              name=f"study-case-{case.case}", daemon=True)
    worker.start()
    worker.join(case_timeout)
    if box:
        return box[0]
    return failed(case, "timeout",
                  f"no result after {case_timeout:g} s (solver limit "
                  f"{time_limit:g} s per solve); the result is dropped",
                  time.perf_counter() - t0)


def _planned_row(case: Case, shared: DriverSamples, settings: PlanSettings) -> dict:
    t0 = time.perf_counter()
    run = plan_case(case, shared, settings)
    return result_row(case, run, time.perf_counter() - t0)


def run_case(case: Case, shared: DriverSamples, settings: PlanSettings,
             case_timeout: float | None = None) -> dict:
    """Plan one case and replay it against its futures: its result row.

    A case that raises gives a ``failed`` row with the error; with ``case_timeout``
    (wall-clock seconds of the whole case [s]; None: none), a case that has not finished by then gives a ``timeout``
    row (`run_guarded`).
    """
    return run_guarded(case, functools.partial(_planned_row, case, shared, settings), failed_row,
                       case_timeout=case_timeout, time_limit=settings.time_limit)


__all__ = ["ReplayFigures", "replay_costs", "replay_run", "Movements", "movement_totals", "replay_byproduct_heel",
           "outbound_cost_per_t", "replay_limestone_capped", "inbound_cost_per_t", "case_futures", "plan_case",
           "result_row", "failed_row", "run_guarded", "run_case", "RESULT_COLUMNS", "EXTRA_COLUMNS", "PLANNED"]
