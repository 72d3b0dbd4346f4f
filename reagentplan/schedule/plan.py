"""Planning a scenario end to end: lanes, baseline, optimised plan, their evaluation and
the contract outputs (`movements.csv`, `inventory.csv`, `summary.json`)."""

from __future__ import annotations

import functools
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from .. import CAUTION
from ..settings import PLAN
from ..balance import balance_frame
from ..scenario import Scenario
from ..schema import STORE_FLOW_COLUMN
from .baseline import baseline_plan
from .causes import explain, mark_windows
from .evaluate import DailyPlan, Evaluation, evaluate, freight_by_day
from .lanes import LANDFILL, SALE, SUPPLY, Lane, build_lanes, firm_loads, horizon_months
from .model import (CHANGE_COST_PER_LOAD, LATE_TRAIN_DAYS, SiloSteps, SolveOutcome, WorkLimits, build_periods,
                    end_caco3_value, lever_cost_at, solve_plan)
from .permit import permit_breaches
from .lever import (AllowanceTerms, RemovalLever, allowance_frame, baseline_trades, removal_dips,
                    removal_setpoint, setpoint_saving)
from .penalties import PENALTY_LINES
from .quality import SiloChemistry
from .settle import earliest_departures

#: Successive solves of the silo's mix with whole loads at most (`_plan_the_silo`).
MAX_SILO_STEPS = 5
#: Successive solves of the silo's mix with loads relaxed to fractions (linear programmes,
#: a fraction of a second each) at most, run first to find where the mix settles.
LINEAR_SILO_STEPS = 5
#: The mix has settled when the silo's CaCO3 the model assumed and the one its plan makes
#: differ by no more than this in any period [%-points].
SILO_TOLERANCE_PCT = 0.05
#: Share of the way the next linearisation point moves from the assumed silo towards the
#: silo the last plan made (1 = Haverly's plain recursion; below 1, damped).  Measured on
#: the demo with the linear steps first (guide, "The silo's recursion"), the plain
#: recursion settled where the damped one crept and gave the cheaper plans.
SILO_DAMPING = 1.0
#: The solver of the silo's whole-load steps, by the plan's solver: with HiGHS, SCIP (one
#: thread, bounded by the same nodes).  Measured on the demo (guide, "The silo's
#: recursion" and "Solver"): HiGHS spends each such solve in its root node's sub-MIP
#: heuristics, SCIP finds stone as cheap in about half the time.  Linear programmes and
#: the byproducts' re-plans stay on HiGHS.
WHOLE_LOAD_SOLVER = {"highs": "scip"}


DEMAND_COLUMN = STORE_FLOW_COLUMN


def guard_margins(balance: pd.DataFrame, flows: dict[str, np.ndarray] | None,
                  risk_level: float) -> dict[str, np.ndarray]:
    """Extra cumulative tonnes [t] per store and day that the plan holds against.

    For each store, the (1 − risk_level) quantile over the futures of the cumulative
    demand (limestone) or production (byproducts) minus the deterministic cumulative
    amount, never below zero.  If the plan's level stays above safety (below capacity)
    by this margin on a day, the chance of breaking the limit that day, with the
    movements held fixed, is at most ``risk_level``.
    """
    if not flows:
        return {}
    out = {}
    for store, column in DEMAND_COLUMN.items():
        if store not in flows:
            continue
        cum = np.cumsum(np.asarray(flows[store], dtype=float), axis=1)
        q = np.quantile(cum, 1 - risk_level, axis=0)
        out[store] = np.clip(q - np.cumsum(balance[column].to_numpy(float)), 0, None)
    return out


def permit_guard(balance: pd.DataFrame, emitted_futures: np.ndarray | None, risk_level: float,
                 avg_days: int) -> np.ndarray | None:
    """Per day, how much worse the permit's rolling SO2 is in the guarded future [-]: the
    (1 − ``risk_level``) quantile over the futures (futures × days [t/d] at the setpoint)
    of the SO2 emitted over the ``avg_days`` ending that day, over the deterministic
    balance's, never below 1.  The model holds the plan's rolling emissions times this
    under the compliance margin (`model._permit`), so the chance of the rolling average
    crossing the margin line on a day is at most about ``risk_level``."""
    if emitted_futures is None:
        return None
    from ..balance import trailing_sum

    e = np.asarray(emitted_futures, dtype=float)
    det = trailing_sum(balance["so2_emitted_t"].to_numpy(float), avg_days)
    q = np.quantile(trailing_sum(e, avg_days), 1 - risk_level, axis=0)
    return np.maximum(np.divide(q, det, out=np.ones_like(det), where=det > 1e-9), 1.0)


@dataclass
class SiloReport:
    """How the stone plan was found: the relaxation's bound [money], the whole plan's gap
    against it [-], whether the successive solves settled and the last CaCO3 change
    [%-points] between the incumbent and the step tried."""

    bound: float
    objective: float
    gap: float
    settled: bool
    why: str
    max_caco3_change_pct: float | None
    steps: int
    #: the solver of the whole-load steps (`WHOLE_LOAD_SOLVER`)
    solver: str = ""

    def as_dict(self) -> dict:
        return {"method": "successive linear solves of the silo (Haverly), bounded by the relaxation that keeps each stone as a lot",
                "whole_load_solver": self.solver,
                "bound": round(self.bound, 2) if np.isfinite(self.bound) else None,
                "objective": round(self.objective, 2),
                "gap": round(self.gap, 6) if np.isfinite(self.gap) else None,
                "settled": self.settled, "why": self.why,
                "max_caco3_change_pct": None if self.max_caco3_change_pct is None
                else round(self.max_caco3_change_pct, 4),
                "steps": self.steps}


@dataclass
class PlanResult:
    scenario: Scenario
    balance: pd.DataFrame
    lanes: list[Lane]
    plan: DailyPlan
    evaluation: Evaluation
    baseline: DailyPlan
    baseline_evaluation: Evaluation
    outcome: SolveOutcome
    breaches: list[dict]
    firm_days: int
    baseline_balance: pd.DataFrame | None = None
    iterations: list[dict] | None = None
    removal_dips: list[dict] | None = None
    #: what running above the setpoint saves: ``saves`` (cash) and
    #: ``setpoint_penalty_weights`` (the limits the setpoint would break) [money]
    #: (`lever.setpoint_saving`)
    above_setpoint_saves: dict | None = None
    stability: dict | None = None
    silo: SiloReport | None = None

    @property
    def movements(self) -> pd.DataFrame:
        return movements_frame(self.scenario, self.lanes, self.plan, self.firm_days)

    @property
    def inventory(self) -> pd.DataFrame:
        return inventory_frame(self.scenario, self.evaluation)

    def summary(self) -> dict:
        o = self.outcome
        return {
            "solver": o.solver, "status": o.status, "objective": round(o.objective, 2),
            "bound": round(o.bound, 2) if np.isfinite(o.bound) else None,
            "gap": round(o.gap, 6) if np.isfinite(o.gap) else None,
            "gap_scope": gap_scope(self.scenario, self.iterations),
            "solve_seconds": round(o.solve_seconds, 3),
            "clock_cut": bool(o.clock_cut),
            **({"silo": self.silo.as_dict()} if self.silo is not None else {}),
            "total_cost": round(self.evaluation.total_cost, 2),
            "baseline_total_cost": round(self.baseline_evaluation.total_cost, 2),
            "costs": {k: round(v, 2) for k, v in self.evaluation.costs.items()},
            "baseline_costs": {k: round(v, 2) for k, v in self.baseline_evaluation.costs.items()},
            "currency": self.scenario.plant.currency,
            "firm_days": self.firm_days,
            "breaches": self.breaches,
            "baseline_breaches": len(self.baseline_evaluation.breaches),
            "silo_iterations": self.iterations or [],
            "shortfalls": self.evaluation.shortfalls,
            "baseline_shortfalls": self.baseline_evaluation.shortfalls,
            "saving_by_cause": saving_by_cause(self.evaluation, self.baseline_evaluation),
            "caution": CAUTION,
            **self._lever_summary(),
            **({"stability": self.stability} if self.stability else {}),
        }

    def _lever_summary(self) -> dict:
        """``removal`` (where the plan chooses it) and ``allowances`` (where the station
        holds them) for `summary.json`."""
        out = {}
        scn = self.scenario
        if self.plan.removal is not None:
            r = self.plan.removal
            setpoint = removal_setpoint(scn)
            lo, hi = scn.scrubber.removal_range
            out["removal"] = {"min_pct": lo, "max_pct": hi, "setpoint_pct": round(float(np.mean(setpoint)), 3),
                              "mean_pct": round(float(np.mean(r)), 3), "lowest_pct": round(float(r.min()), 3),
                              "highest_pct": round(float(r.max()), 3),
                              "days_below_setpoint": int((r < setpoint - 0.01).sum()),
                              "days_above_setpoint": int((r > setpoint + 0.01).sum()),
                              "above_setpoint_saves": self.above_setpoint_saves,
                              "dips": self.removal_dips or []}
        terms = AllowanceTerms.from_scenario(scn)
        if terms is not None:
            n = len(scn.dates)
            frame = allowance_frame(scn, terms, self.balance["so2_emitted_t"].to_numpy(float),
                                    np.zeros(n) if self.plan.bought_t is None else self.plan.bought_t,
                                    np.zeros(n) if self.plan.sold_t is None else self.plan.sold_t)
            out["allowances"] = {"opening_t": terms.opening_t, "months": frame.to_dict("records")}
        return out


def _penalties(ev: Evaluation) -> float:
    """The penalty weights of an evaluation [money]: below safety, over capacity, empty,
    off-spec shipments, over the permit, without allowances (`penalties.PENALTY_LINES`)."""
    return sum(ev.costs.get(k, 0.0) for k in PENALTY_LINES)


def held_loads(scenario: Scenario, lanes: list[Lane], firm: dict, previous: pd.DataFrame | None,
               firm_days: int) -> dict[str, np.ndarray]:
    """Per lane with whole loads, the loads [-] the previous plan held on each day of this
    plan's firm window, less what is booked (firm orders stay whatever happens): what
    moving or cancelling costs ``CHANGE_COST_PER_LOAD`` a load."""
    if previous is None or previous.empty:
        return {}
    n = len(scenario.dates)
    start = pd.Timestamp(scenario.plant.start_date)
    days = (pd.to_datetime(previous["date"]) - start).dt.days.to_numpy()
    out = {}
    for lane in lanes:
        if not lane.load_t:
            continue
        rows = (previous["lane"].to_numpy() == lane.name) & (days >= 0) & (days < min(firm_days, n))
        if not rows.any():
            continue
        held = np.zeros(n)
        np.add.at(held, days[rows], pd.to_numeric(previous["loads"][rows], errors="coerce").fillna(0).to_numpy(float))
        booked = firm.get(lane.name, (np.zeros(n, int), None))[0]
        held = np.clip(held - booked, 0, None)
        if held.any():
            out[lane.name] = held
    return out


def _plan_the_silo(scenario, balance, lanes, firm, guard, chem, lever, base, common, net):
    """The stone plan of a silo fed by quarries of different CaCO3, and its byproducts.

    1. The relaxation (`quality.SiloLots`: each stone a lot of its own, any blend fed) is
       solved as a linear programme: its optimum is a lower bound on every well-mixed plan
       of the model.
    2. Successive linear solves (Haverly's recursion): the silo linearised at the last
       plan's exact replay, the model solved again, until no day's CaCO3 moves more than
       `SILO_TOLERANCE_PCT` between two solves (the mix has settled).  First with loads
       relaxed to fractions (`LINEAR_SILO_STEPS` linear programmes at most), which finds
       where the mix settles in a second or two; then with whole loads from that point,
       `MAX_SILO_STEPS` times at most (on `WHOLE_LOAD_SOLVER`).  Each whole-load
       candidate's stone is priced by planning its byproducts again against the gypsum
       its silo really makes (`_byproducts_at_stone`: the well-mixed silo replayed
       exactly, lanes closed on the days it fails a buyer's purity, the limestone left
       valued by its CaCO3); the cheapest is kept, so a linearisation error can cost money
       but never ships off-spec gypsum or hides a broken limit.
    3. The chosen stone's byproduct plan has its outlook placed on its days.  Its
       objective is a feasible plan's, so
       (objective − bound) / objective is a gap that covers the whole plan.  When the
       relaxation's optimum lies above it (an outlook in weekly buckets, whose relaxation
       does not bound the byproducts' daily plan), no gap is claimed.

    Every solve is bounded by work (nodes, one thread, a fixed seed), so the same inputs
    give the same stone plan on any machine.

    References
    ----------
    Haverly, C. A. (1978), ACM SIGMAP Bulletin 25:19-28 (the recursion).
    Audet, C. et al. (2004), Management Science 50(6):761-776 (the pooling relaxation).
    """
    t_start = time.perf_counter()
    work = common["work"]
    relax = solve_plan(scenario, balance, lanes, firm, guard, time_limit=net(), chem=chem, to_days=False,
                       lever=lever, silo_lots=True, **{**common, "work": replace(work, nodes=work.bound_nodes)})
    bound = relax.bound
    clock = relax.clock_cut
    iterations = [{"iteration": "relaxation (each stone a lot)", "total_cost": None, "gap": None,
                   "solve_seconds": round(relax.solve_seconds, 3), "max_caco3_change_pct": None,
                   "bound": round(bound, 2) if np.isfinite(bound) else None}]

    periods = build_periods(scenario.dates, common["firm_days"])
    floor = max(0.1 * scenario.storage["limestone"].safety_t, 1.0)
    point = chem.linearisation(lanes, base, periods, floor)
    # the recursion with loads relaxed to fractions first: cheap, and the fractional plans
    # move the silo smoothly, so it settles in a few steps where the whole-load solves,
    # started from the baseline's lumpy silo, swing between trains
    steps_model = SiloSteps(scenario, balance, lanes, firm, guard, chem=chem, firm_days=common["firm_days"],
                            lever=lever, allow=common["allow"], keep=common["keep"],
                            change_cost=common["change_cost"], late_days=common["late_days"],
                            permit_guard=common["permit_guard"])
    solve_step = functools.partial(steps_model.solve, gap=common["gap"], scale=common["scale"],
                                   progress=common["progress"])
    for k in range(LINEAR_SILO_STEPS):
        try:
            lp = solve_step(point, solver=common["solver"], hint=None, time_limit=net(), node_limit=0)
        except RuntimeError:
            break
        clock = clock or lp.clock_cut
        made = chem.linearisation(lanes, lp.plan, periods, floor)
        moved = float(np.max(np.abs(100 / made[0] - 100 / point[0])))
        iterations.append({"iteration": f"linear {k + 1} (loads as fractions)", "total_cost": None,
                           "objective": round(lp.objective, 2), "gap": None,
                           "solve_seconds": round(lp.solve_seconds, 3), "max_caco3_change_pct": round(moved, 4)})
        point = made
        if moved < SILO_TOLERANCE_PCT:
            break
    step_solver = WHOLE_LOAD_SOLVER.get(common["solver"], common["solver"])
    best, change, settled, steps, scores, tried = None, None, False, 0, {}, []
    # a candidate is priced (its byproducts planned again, `_byproducts_at_stone`) on a
    # second thread while the next whole-load step solves: the solvers let go of the
    # interpreter, and the two solves share nothing, so a plan is the same whatever their
    # timing.  The price needs the candidate alone; the next step starts at the silo the
    # candidate makes, warm-started at the candidate
    with ThreadPoolExecutor(max_workers=1) as pricing:
        previous = None
        while steps < MAX_SILO_STEPS:
            steps += 1
            try:
                step = solve_step(point, solver=step_solver, hint=base if previous is None else previous.plan,
                                  time_limit=net(), node_limit=work.nodes)
            except RuntimeError:
                break
            clock = clock or step.clock_cut
            # the candidate's price: its byproducts planned again at the silo its stone
            # really makes (the outlook in its buckets), the objective of that plan.  Its
            # exact replay with the byproducts of the linearised solve would price mostly the
            # linearisation's error (sales on the few days the lumpy silo dips under a
            # buyer's purity).  A stone plan met before keeps its price
            key = b"".join(step.plan.quantity[l.name].tobytes() for l in lanes if l.kind == SUPPLY)
            if key not in scores:
                scores[key] = pricing.submit(_byproducts_at_stone, scenario, lanes, firm, guard, chem, lever,
                                             {**common, "progress": False}, net, step.plan, to_days=False)
            made = chem.linearisation(lanes, step.plan, periods, floor)
            # the linearisation's error: the silo's CaCO3 the model assumed against the one
            # the plan really makes, per period [%-points]
            change = float(np.max(np.abs(100 / made[0] - 100 / point[0])))
            tried.append((steps, key, step, change))
            previous = step
            if change < SILO_TOLERANCE_PCT:
                settled = True
                break
            # the next point: the silo the plan made (damped: part of the way towards it)
            point = tuple((1 - SILO_DAMPING) * a + SILO_DAMPING * b for a, b in zip(point, made))
        for k, key, step, moved in tried:
            try:
                scored = scores[key].result()
            except RuntimeError:
                continue
            clock = clock or scored[0].clock_cut
            iterations.append({"iteration": k, "total_cost": None, "objective": round(scored[2], 2),
                               "gap": step.gap, "solver": step_solver,
                               "solve_seconds": round(step.solve_seconds, 3),
                               "pricing_seconds": round(scored[0].solve_seconds, 3),
                               "max_caco3_change_pct": round(moved, 4)})
            if best is None or scored[2] < best[0] - 1e-6:
                best = (scored[2], step, scored)
    stone = best[1].plan if best is not None else base
    # the chosen stone: its byproducts' outlook placed on its days (a plan of every day has
    # nothing to place)
    if best is not None:
        final, bal, obj = best[2]
        if final.place_days is not None:
            final.place_days()
    else:
        final, bal, obj = _byproducts_at_stone(scenario, lanes, firm, guard, chem, lever, common, net, stone,
                                               to_days=True)
    final.plan.removal = stone.removal
    clock = clock or final.clock_cut
    ev = evaluate(scenario, bal, lanes, final.plan)
    gap = (obj - bound) / max(abs(obj), 1.0) if np.isfinite(bound) else float("nan")
    if gap < -max(common["gap"], 1e-6):
        # the relaxation's optimum above this plan's objective: with an outlook in weekly
        # buckets the relaxation's weeks are not a relaxation of the byproducts' day-by-day
        # plan, so its optimum bounds nothing here; say so rather than print a gap of 0
        gap, bound = float("nan"), float("nan")
    gap = max(gap, 0.0) if np.isfinite(gap) else gap
    final.objective, final.bound, final.gap, final.clock_cut = obj, bound, gap, clock
    final.status = "optimal" if gap <= common["gap"] * 1.0001 else "feasible"
    iterations.append({"iteration": "byproducts at the chosen stone", "total_cost": round(ev.total_cost, 2),
                       "objective": round(obj, 2), "gap": round(gap, 6) if np.isfinite(gap) else None,
                       "solve_seconds": round(final.solve_seconds, 3), "max_caco3_change_pct": 0.0})
    why = ("no day's CaCO3 moved more than the tolerance between the last two solves" if settled
           else "the solves stopped at their step limit with the mix still moving")
    if not np.isfinite(gap):
        why += ("; no gap: the relaxation's optimum lies above this plan's objective (its weekly buckets"
                " do not bound the byproducts' day-by-day plan)")
    report = SiloReport(bound, obj, gap, settled, why, change, steps, step_solver)
    final.solve_seconds = time.perf_counter() - t_start
    return final, bal, ev, report, iterations


def _byproducts_at_stone(scenario, lanes, firm, guard, chem, lever, common, net, stone: DailyPlan,
                         to_days: bool):
    """The byproducts planned again against the gypsum the silo of ``stone`` really makes
    (its supply pinned, sale lanes closed on the days the silo fails a buyer's purity, the
    limestone left valued by its CaCO3): the solve's outcome, the balance at that stone and
    the objective [money] with the chosen removal's setpoint move and permit terms (constants
    of this solve) added back, so it is the objective the lever's model gives the plan.
    ``to_days`` also places the outlook buckets on their days."""
    bal = chem.plan_balance(scenario, lanes, stone)
    lanes_x = build_lanes(scenario, bal, exact_quality=True)
    end_c = float(bal["limestone_caco3_pct"].to_numpy(float)[-1]) / 100
    out = solve_plan(scenario, bal, lanes_x, firm, guard, time_limit=net(), hint=stone, to_days=to_days,
                     fixed={l.name: stone.quantity[l.name] for l in lanes if l.kind == SUPPLY},
                     limestone_end_per_t=end_caco3_value(scenario, chem) * end_c,
                     **{**common, "firm_days": max(common["firm_days"], 1)})
    obj = out.objective
    if stone.removal is not None:
        periods = build_periods(scenario.dates, common["firm_days"])
        obj += lever_cost_at(scenario, lever, periods, np.array([stone.removal[a] for a, _ in periods]),
                             common.get("permit_guard"))
    return out, bal, obj


def gap_scope(scenario: Scenario, iterations: list[dict] | None = None) -> str:
    """What the reported gap proves, in words."""
    if not scenario.quality_coupled:
        return "the whole plan: its cost is within the gap of the best plan of this model"
    return ("the whole plan: its cost against a lower bound on every well-mixed silo plan (the relaxation "
            "that keeps each stone as a lot of its own)")


def make_plan(scenario: Scenario, balance: pd.DataFrame | None = None, *,
              flows: dict[str, np.ndarray] | None = None, risk_level: float = PLAN.risk_level,
              firm_days: int = PLAN.firm_days, solver: str = PLAN.solver, time_limit: float = PLAN.time_limit,
              gap: float = PLAN.gap, progress: bool = False, previous: pd.DataFrame | None = None,
              change_cost_per_load: float = CHANGE_COST_PER_LOAD,
              late_days: int = LATE_TRAIN_DAYS, work: WorkLimits | None = None,
              permit_flows: np.ndarray | None = None) -> PlanResult:
    """Plan a scenario.

    Parameters
    ----------
    balance : the deterministic daily balance (computed when not given).
    flows : sampled futures per store, arrays (futures × days) [t/d] of limestone demand
        or byproduct production; they set the guard margins (`guard_margins`).
    risk_level : accepted chance of breaking safety stock or capacity on a day [-].
    firm_days : days planned one by one; weekly buckets after [d].
    previous : the movements (``movements.csv`` rows: lane, date, loads) of the plan in
        force; a load it held inside this plan's firm window that is moved or cancelled
        costs ``change_cost_per_load`` [money] in the model (not in the plan's cost).
    late_days : days a train may come late that the firm window holds stock against
        (`model.LATE_TRAIN_DAYS`; 0: none) [d].
    permit_flows : sampled futures' SO2 emitted (futures × days) [t/d] at the setpoint;
        with a removal range and a permit they guard the permit's rolling average
        (`permit_guard`) as ``flows`` guard the stores.
    time_limit : the wall-clock safety net of the whole plan [s]; the solves are bounded by
        ``work`` (`model.WorkLimits`: nodes, one thread, a fixed seed), so the same inputs
        give the same plan on any machine unless the net cuts in (then the status and
        `summary.json` ``clock_cut`` say so).
    """
    if balance is None:
        balance = balance_frame(scenario)
    lanes = build_lanes(scenario, balance)
    firm = firm_loads(scenario, lanes)
    guard = guard_margins(balance, flows, risk_level)
    keep = held_loads(scenario, lanes, firm, previous, firm_days)
    chem = SiloChemistry.from_balance(scenario, balance, lanes) if scenario.quality_coupled else None
    lever = RemovalLever.from_scenario(scenario)
    allow = AllowanceTerms.from_scenario(scenario)
    if chem is not None:
        chem.lever = lever

    def bal_of(p: DailyPlan) -> pd.DataFrame:
        """The balance a plan makes: at its silo's stone and its removal."""
        if chem is not None:
            return chem.plan_balance(scenario, lanes, p)
        if p.removal is not None:
            return balance_frame(scenario, removal_pct=p.removal)
        return balance

    solver_note = ""
    if chem is not None and solver == "cp-sat":
        # CP-SAT takes integer models only (MathOpt scales continuous ones); the silo's
        # tonnes of CaCO3 and inerts do not scale, so the mixed-integer solver plans them
        solver, solver_note = "scip", " (cp-sat cannot take the silo's mix; solved with scip)"
    base = baseline_plan(scenario, balance, lanes, firm, chem=chem)
    base_bal = bal_of(base)
    if allow is not None:
        base.bought_t, base.sold_t = baseline_trades(allow, base_bal["so2_emitted_t"].to_numpy(float),
                                                     horizon_months(scenario.dates)[0])
    base_ev = evaluate(scenario, base_bal, lanes, base)
    # the money the plan moves (every cost line of the baseline, in absolute value): the
    # scale of the absolute gap a solve may stop at, so a plan whose costs and revenues
    # nearly cancel is not chased to a relative gap of a number near zero
    gross = sum(abs(v) for v in base_ev.costs.values())
    t0 = time.perf_counter()
    work = work or WorkLimits()
    pguard = None
    if lever is not None and lever.limit_kg_per_gj is not None:
        pguard = permit_guard(balance, permit_flows, risk_level, lever.avg_days)
    common = dict(firm_days=firm_days, solver=solver, gap=gap, progress=progress, scale=gross, allow=allow,
                  keep=keep, change_cost=change_cost_per_load, late_days=late_days, work=work,
                  permit_guard=pguard)

    def net() -> float:
        """What is left of the wall-clock safety net [s]."""
        return max(time_limit - (time.perf_counter() - t0), 1.0)

    silo = None
    iterations = []
    if chem is None:
        outcome = solve_plan(scenario, balance, lanes, firm, guard, time_limit=net(), hint=base,
                             to_days=True, lever=lever, **common)
        plan_bal = bal_of(outcome.plan)
        ev = evaluate(scenario, plan_bal, lanes, outcome.plan)
        iterations.append({"iteration": 1, "total_cost": round(ev.total_cost, 2), "gap": outcome.gap,
                           "solve_seconds": round(outcome.solve_seconds, 3), "max_caco3_change_pct": None})
    else:
        outcome, plan_bal, ev, silo, iterations = _plan_the_silo(
            scenario, balance, lanes, firm, guard, chem, lever, base, common, net)
    if chem is None and lever is not None:
        # the removal chosen, the byproducts planned again against the gypsum they make
        # (exact: the removal is now known), so no shipment rests on the linearisation
        lanes_x = build_lanes(scenario, plan_bal, exact_quality=True)
        fixed = {l.name: outcome.plan.quantity[l.name] for l in lanes if l.kind == SUPPLY}
        try:
            pol = solve_plan(scenario, plan_bal, lanes_x, firm, guard, time_limit=net(), hint=outcome.plan,
                             fixed=fixed, **{**common, "firm_days": max(firm_days, 1)})
            pol.plan.removal = outcome.plan.removal
            ev_p = evaluate(scenario, plan_bal, lanes, pol.plan)
            iterations.append({"iteration": "byproducts at the chosen removal",
                               "total_cost": round(ev_p.total_cost, 2), "gap": pol.gap,
                               "solve_seconds": round(pol.solve_seconds, 3), "max_caco3_change_pct": 0.0})
            if ev_p.total_cost <= ev.total_cost + 1e-6:
                pol.status = outcome.status if pol.status == "optimal" else pol.status
                pol.clock_cut = pol.clock_cut or outcome.clock_cut
                outcome, ev = pol, ev_p
        except RuntimeError:
            pass
    outcome.solve_seconds = time.perf_counter() - t0
    outcome.status += solver_note
    if outcome.clock_cut:
        outcome.status += (f" (the {time_limit:g} s safety net cut a solve short: a re-run may give another plan;"
                           " allow more time with --time-limit)")
    chosen = outcome.plan
    dearer = ev.total_cost > base_ev.total_cost + 1e-6 * abs(base_ev.total_cost)
    if dearer and (not guard or _penalties(ev) > _penalties(base_ev) + 1e-6):
        # the outlook weeks, once spread to days (or the silo, replayed exactly), priced
        # dearer than the warm start: keep the warm start (the baseline).  A guarded plan
        # may cost more than the baseline on the median (it buys protection), but not
        # while it also breaks more of the limits on the median: a time-limited solve on a
        # loaded machine can end that badly, and then the baseline is the better plan
        chosen, ev, plan_bal = base, evaluate(scenario, base_bal, lanes, base), base_bal
        outcome.status += " (baseline kept: the replayed plan priced dearer"
        outcome.status += ")" if not guard else " and broke more limits)"
    settled, n_moved = (chosen, 0) if chosen is base else earliest_departures(scenario, plan_bal, lanes, chosen)
    if n_moved:
        ev_s = evaluate(scenario, plan_bal, lanes, settled)
        if ev_s.total_cost <= ev.total_cost + 1e-6 * max(abs(ev.total_cost), 1.0):
            chosen, ev = settled, ev_s
            outcome.status += f" ({n_moved} sale loads moved to the earliest equal day)"
    removal = scenario.scrubber.removal_pct
    base_ev.breaches = mark_windows(explain(scenario, lanes, base, base_ev) + permit_breaches(base_bal, removal),
                                    scenario.dates, firm_days)
    breaches = mark_windows(explain(scenario, lanes, chosen, ev) + permit_breaches(
        plan_bal, removal if chosen.removal is None else None), scenario.dates, firm_days)
    dips = [] if chosen.removal is None else removal_dips(scenario, lanes, chosen, bal_of, lever, late_days)
    above = None
    if chosen.removal is not None:
        sp = removal_setpoint(scenario)
        up = chosen.removal > sp + 0.01
        cash, pen = setpoint_saving(scenario, lanes, chosen, bal_of, sp, up) if up.any() else (0.0, 0.0)
        above = {"saves": round(cash, 2), "setpoint_penalty_weights": round(pen, 2)}
    stability = None
    if keep:
        held = sum(float(v.sum()) for v in keep.values())
        kept = sum(float(np.minimum(v, chosen.quantity[k] - chosen.booked.get(k, 0)).sum())
                   for k, v in keep.items())
        stability = {"change_cost_per_load": change_cost_per_load, "loads_held_in_firm_window": int(held),
                     "of_them_kept_on_their_day": int(kept)}
    return PlanResult(scenario, plan_bal, lanes, chosen, ev, base, base_ev, outcome, breaches,
                      firm_days, base_bal, iterations, dips, above, stability, silo)


#: The causes a saving is split by, and the cost lines of `evaluate` in each; the stock
#: left at the end goes with what it is: limestone with the stone, byproducts with landfill.
SAVING_CAUSES = {"stone": ("limestone_purchase", "end:limestone"), "freight": ("freight",),
                 "byproduct_sales": ("byproduct_sales",),
                 "landfill": ("landfill", "end:byproducts", "mill_rejects_disposal"),
                 "allowances": ("allowances", "end:allowances"),
                 "penalties": ("shortage_penalty", "overflow_penalty", "empty_penalty",
                               "contract_penalty", "quality_penalty", "permit_penalty",
                               "allowance_penalty")}


def saving_by_cause(plan: Evaluation, baseline: Evaluation) -> dict:
    """What the plan saves against the baseline [money], by cause: stone (purchase less the
    value of the limestone left at the end), freight, byproduct sales, landfill (with the
    byproducts left at the end at their landfill cost), penalties (with take-or-pay
    shortfalls)."""
    def line(ev: Evaluation, key: str) -> float:
        if key.startswith("end:"):
            return ev.end_parts.get(key[4:], 0.0)
        return ev.costs.get(key, 0.0)

    return {cause: round(sum(line(baseline, k) - line(plan, k) for k in keys), 2)
            for cause, keys in SAVING_CAUSES.items()}


def flows_at_plan_stone(result: "PlanResult", flows: dict[str, np.ndarray] | None,
                        balance: pd.DataFrame) -> dict[str, np.ndarray] | None:
    """Sampled futures' limestone use and gypsum [t/d] moved to the stone the plan puts
    in the silo and to the removal it chose: each day's flow scaled by the plan's balance
    over the balance at the initial stone and the setpoint (``balance``).  Limestone use
    is exactly proportional to the stone (need / CaCO3) and nearly so to the removal (the
    HCl's share does not move with it); for gypsum the stone's inerts and the fly ash in
    the cake are a small share and are scaled with it."""
    if not flows or (not result.scenario.quality_coupled and result.plan.removal is None):
        return flows
    out = dict(flows)
    for store, column in (("limestone", "limestone_t"), ("gypsum", "gypsum_wet_t")):
        if store in out:
            base = balance[column].to_numpy(float)
            ratio = np.divide(result.balance[column].to_numpy(float), base,
                              out=np.ones_like(base), where=base > 0)
            out[store] = np.asarray(out[store], float) * ratio[None, :]
    return out


def movements_frame(scenario: Scenario, lanes: list[Lane], plan: DailyPlan, firm_days: int) -> pd.DataFrame:
    """One row per lane and day with something moving (DESIGN §6 ``movements.csv``)."""
    dates = scenario.dates
    month_index, _, _ = horizon_months(dates)
    rows = []
    for lane in lanes:
        q = plan.quantity[lane.name]
        booked = plan.booked.get(lane.name)
        freight = freight_by_day(lane, q, month_index) if lane.load_t else np.zeros(len(q))
        for d in np.flatnonzero(q > 1e-9):
            tonnes = float(q[d] * lane.load_t) if lane.load_t else float(q[d])
            cost = tonnes * lane.cost_per_t + float(freight[d])
            order_by = dates[d] - pd.Timedelta(days=lane.lead_days) if lane.kind == SUPPLY else pd.NaT
            rows.append({
                "date": dates[d], "material": lane.material,
                "direction": "in" if lane.kind == SUPPLY else "out", "party": lane.party,
                "lane": lane.name, "loads": int(q[d]) if lane.load_t else np.nan,
                "tonnes": tonnes, "cost": round(cost, 2), "order_by": order_by,
                "firm": bool(d < firm_days),
                "booked": bool(booked is not None and booked[d] > 0),
                "kind": lane.kind,
            })
    cols = ["date", "material", "direction", "party", "lane", "loads", "tonnes", "cost", "order_by",
            "firm", "booked", "kind"]
    frame = pd.DataFrame(rows, columns=cols)
    frame["loads"] = frame["loads"].astype("Int64")
    return frame.sort_values(["date", "direction", "material", "lane"]).reset_index(drop=True)


def inventory_frame(scenario: Scenario, ev: Evaluation) -> pd.DataFrame:
    """End-of-day level per store with safety and capacity (``inventory.csv``)."""
    parts = []
    for store, level in ev.levels.items():
        st = scenario.storage[store]
        parts.append(pd.DataFrame({"date": scenario.dates, "store": store, "level_t": level,
                                   "safety_t": st.safety_t, "capacity_t": st.capacity_t}))
    return pd.concat(parts, ignore_index=True)


__all__ = ["make_plan", "PlanResult", "guard_margins", "movements_frame", "inventory_frame",
           "LANDFILL", "SALE"]
