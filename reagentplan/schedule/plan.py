"""Planning a scenario end to end: lanes, baseline, optimised plan, their evaluation and
the contract outputs (`movements.csv`, `inventory.csv`, `summary.json`)."""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .. import CAUTION
from ..balance import balance_frame
from ..scenario import Scenario
from ..schema import STORE_FLOW_COLUMN
from .baseline import baseline_plan
from .causes import explain
from .evaluate import DailyPlan, Evaluation, evaluate, freight_by_day
from .lanes import LANDFILL, SALE, SUPPLY, Lane, build_lanes, firm_loads, horizon_months
from .model import CHANGE_COST_PER_LOAD, LATE_TRAIN_DAYS, SolveOutcome, solve_plan
from .permit import permit_breaches
from .lever import (AllowanceTerms, RemovalLever, allowance_frame, baseline_trades, removal_dips,
                    removal_setpoint)
from .quality import SiloChemistry
from .settle import earliest_departures

#: Successive linear solves of the silo's mix at most (`quality.py`).
MAX_SILO_ITERATIONS = 5
#: Share of the time limit the successive silo solves may use; the rest is for the exact
#: byproduct solve at the chosen stone.
SILO_SHARE = 0.8
#: The mix has settled when no day's CaCO3 moves more than this [%-points] between solves.
SILO_TOLERANCE_PCT = 0.05
#: Share of the time limit kept back for what follows the last solve (the exact replays,
#: the evaluation, the breaches), so the whole plan fits in the time the user gave.
WALL_RESERVE = 0.05

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
    stability: dict | None = None

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
    off-spec shipments, over the permit, without allowances."""
    return sum(ev.costs.get(k, 0.0) for k in ("shortage_penalty", "overflow_penalty", "empty_penalty",
                                               "quality_penalty", "permit_penalty", "allowance_penalty"))


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


def gap_scope(scenario: Scenario, iterations: list[dict] | None) -> str:
    """What the reported gap proves, in words: the whole model's optimum, or (stone of
    several qualities) only the byproduct plan at the stone the successive solves chose."""
    if not scenario.quality_coupled:
        return "the whole plan: its cost is within the gap of the best plan of this model"
    settled = bool(iterations) and any(
        isinstance(i["iteration"], int) and i["iteration"] > 1 and i["max_caco3_change_pct"] is not None
        and i["max_caco3_change_pct"] < SILO_TOLERANCE_PCT for i in iterations)
    return ("the byproduct plan at the chosen stone only: the stone was chosen by successive linear "
            "solves of the silo's mix, which " + ("settled" if settled else "had not settled when they stopped")
            + ", so no bound on the best stone plan is proven")


def make_plan(scenario: Scenario, balance: pd.DataFrame | None = None, *,
              flows: dict[str, np.ndarray] | None = None, risk_level: float = 0.05,
              firm_days: int = 56, solver: str = "highs", time_limit: float = 60.0,
              gap: float = 5e-4, progress: bool = False, previous: pd.DataFrame | None = None,
              change_cost_per_load: float = CHANGE_COST_PER_LOAD,
              late_days: int = LATE_TRAIN_DAYS) -> PlanResult:
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
    outcome = solve_plan(scenario, balance, lanes, firm, guard, firm_days=firm_days, solver=solver,
                         time_limit=time_limit * (SILO_SHARE / MAX_SILO_ITERATIONS if chem is not None else 1),
                         gap=gap, hint=base, progress=progress, chem=chem,
                         scale=gross, to_days=chem is None, lever=lever, allow=allow, keep=keep,
                         change_cost=change_cost_per_load, late_days=late_days)
    plan_bal = bal_of(outcome.plan)
    ev = evaluate(scenario, plan_bal, lanes, outcome.plan)
    iterations = [{"iteration": 1, "total_cost": round(ev.total_cost, 2), "gap": outcome.gap,
                   "solve_seconds": round(outcome.solve_seconds, 3), "max_caco3_change_pct": None}]
    if chem is not None:
        # successive linear solves: linearise the silo at the last plan until its mix settles
        last = outcome.plan
        best = (ev.total_cost, outcome, plan_bal, ev)
        for it in range(2, MAX_SILO_ITERATIONS + 1):
            left = SILO_SHARE * time_limit - (time.perf_counter() - t0)
            if left < 1.0:
                break
            nxt = solve_plan(scenario, balance, lanes, firm, guard, firm_days=firm_days, solver=solver,
                             time_limit=left / (MAX_SILO_ITERATIONS + 1 - it), gap=gap, hint=best[1].plan, progress=progress, chem=chem,
                             around=last, scale=gross, to_days=False, lever=lever, allow=allow,
                             keep=keep, change_cost=change_cost_per_load, late_days=late_days)
            bal_n = chem.plan_balance(scenario, lanes, nxt.plan)
            ev_n = evaluate(scenario, bal_n, lanes, nxt.plan)
            change = float(np.max(np.abs(bal_n["limestone_caco3_pct"].to_numpy()
                                         - chem.plan_balance(scenario, lanes, last)["limestone_caco3_pct"].to_numpy())))
            iterations.append({"iteration": it, "total_cost": round(ev_n.total_cost, 2), "gap": nxt.gap,
                               "solve_seconds": round(nxt.solve_seconds, 3),
                               "max_caco3_change_pct": round(change, 4)})
            if ev_n.total_cost < best[0] - 1e-6:
                best = (ev_n.total_cost, nxt, bal_n, ev_n)
            last = nxt.plan
            if change < SILO_TOLERANCE_PCT:
                break
        _, outcome, plan_bal, ev = best
    if chem is not None or lever is not None:
        # the stone and the removal chosen, the byproducts planned again against the
        # gypsum they make (exact: the silo and the removal are now known), so no shipment
        # rests on the linearisation
        lanes_x = build_lanes(scenario, plan_bal, exact_quality=True)
        fixed = {l.name: outcome.plan.quantity[l.name] for l in lanes if l.kind == SUPPLY}
        left = max((1 - WALL_RESERVE) * time_limit - (time.perf_counter() - t0) - 1.0, 3.0)
        try:
            pol = solve_plan(scenario, plan_bal, lanes_x, firm, guard, firm_days=max(firm_days, 1),
                             solver=solver, time_limit=left, gap=gap, hint=outcome.plan,
                             scale=gross, fixed=fixed, allow=allow, keep=keep,
                             change_cost=change_cost_per_load, late_days=late_days)
            pol.plan.removal = outcome.plan.removal
            ev_p = evaluate(scenario, plan_bal, lanes, pol.plan)
            iterations.append({"iteration": "byproducts at the chosen stone" if chem is not None
                               else "byproducts at the chosen removal",
                               "total_cost": round(ev_p.total_cost, 2), "gap": pol.gap,
                               "solve_seconds": round(pol.solve_seconds, 3), "max_caco3_change_pct": 0.0})
            if ev_p.total_cost <= ev.total_cost + 1e-6:
                pol.status = outcome.status if pol.status == "optimal" else pol.status
                outcome, ev = pol, ev_p
        except RuntimeError:
            pass
        outcome.solve_seconds = time.perf_counter() - t0
    outcome.status += solver_note
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
    base_ev.breaches = explain(scenario, lanes, base, base_ev) + permit_breaches(base_bal, removal)
    breaches = explain(scenario, lanes, chosen, ev) + permit_breaches(
        plan_bal, removal if chosen.removal is None else None)
    dips = [] if chosen.removal is None else removal_dips(scenario, lanes, chosen, bal_of, lever, late_days)
    stability = None
    if keep:
        held = sum(float(v.sum()) for v in keep.values())
        kept = sum(float(np.minimum(v, chosen.quantity[k] - chosen.booked.get(k, 0)).sum())
                   for k, v in keep.items())
        stability = {"change_cost_per_load": change_cost_per_load, "loads_held_in_firm_window": int(held),
                     "of_them_kept_on_their_day": int(kept)}
    return PlanResult(scenario, plan_bal, lanes, chosen, ev, base, base_ev, outcome, breaches,
                      firm_days, base_bal, iterations, dips, stability)


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
