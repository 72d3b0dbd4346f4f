"""Planning a fleet: every station's plan as `plan` makes it, planned together where
pooled contracts or a shared car set tie stations.

1. Each station is loaded (`workbook.load_fleet`), its futures sampled and its guard
   set as `pipeline.run_plan` does.
2. Stations are grouped by what ties them (a pooled contract both have a row of, a
   shared train set both name).  A station that nothing ties is planned alone, exactly
   as `reagentplan plan` plans it (`pipeline.plan_with_futures`), so fleet planning is
   never a worse way to plan one station.
3. A group is planned as one model (`solve.solve_joint`): every station's own model
   with its rows of pooled contracts and shared sets giving way to the pooled rows.
   The baseline is the desk's hand split (`split.hand_scenario`) with each station's
   reorder-point rule on its share; it is the warm start, and, as for one station, the
   plan gives way to it when it prices dearer (and, guarded, breaks more limits).
4. Every plan is priced by `schedule.evaluate` at its own balance; the pooled
   shortfalls are priced once for the fleet (`pool_accounts`), the same way for the
   plan and the baseline.

Stations of quarries of different CaCO3 are planned with the silo linearised where the
joint linear programme's recursion settles (`solve.settle_silos`, as
`schedule.plan._plan_the_silo` starts a station's), one whole-load joint solve there, and
every plan replayed exactly.  Then the byproducts of every station are planned again,
jointly, at the stone chosen (`_byproducts_at_stone`: supply pinned, sale lanes closed on
the days a station's gypsum fails a buyer's purity), and that plan is kept when the
fleet's cost is not higher, so no shipment rests on the linearisation.

References
----------
Haverly, C. A. (1978), ACM SIGMAP Bulletin 25:19-28 (the silo linearised at a plan).
Silver, E. A., Pyke, D. F. and Thomas, D. J. (2016), *Inventory and Production
Management in Supply Chains*, 4th ed., CRC Press (the reorder-point baseline).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from ..balance import balance_frame
from ..pipeline import FUTURE_FLOWS, SO2_FLOWS, STORE_FLOWS, PlanRun, plan_with_futures, settings_of
from ..risk import replay
from ..scenario import Scenario
from ..schedule.baseline import baseline_plan
from ..schedule.causes import explain
from ..schedule.evaluate import CONTRACT_PENALTY_PER_T, DailyPlan, Evaluation, evaluate
from ..schedule.lanes import SUPPLY, build_lanes, contract_month_note, firm_loads, horizon_months
from ..schedule.lever import AllowanceTerms, RemovalLever, baseline_trades
from ..schedule.model import SolveOutcome, SolveStatus, WorkLimits
from ..schedule.permit import permit_breaches
from ..schedule.plan import (LINEAR_SILO_STEPS, SILO_TOLERANCE_PCT, PlanResult, _penalties, flows_at_plan_stone, guard_margins, held_loads, permit_guard,
                             saving_by_cause)
from ..schedule.quality import SiloChemistry
from ..schedule.settle import earliest_departures
from ..settings import PlanSettings
from .solve import solve_joint
from .split import (covers, expected_use, has_party, hand_scenario, month_limits, open_scenario,
                    pool_month_to_date, shares, uses_set)
from .workbook import Fleet


@dataclass
class StationWork:
    """A station of a joint group while it is planned."""

    name: str
    scenario: Scenario
    open: Scenario
    hand: Scenario
    balance: pd.DataFrame
    lanes: list
    firm: dict
    guard: dict
    chem: object | None
    lever: object | None
    allow: object | None
    pguard: np.ndarray | None
    fut: object | None
    flows: dict | None
    base: DailyPlan | None = None
    base_bal: pd.DataFrame | None = None
    base_ev: Evaluation | None = None
    split: dict = field(default_factory=dict)
    keep: dict = field(default_factory=dict)

    def bal_of(self, p: DailyPlan) -> pd.DataFrame:
        """The balance a plan makes: at its silo's stone and its removal."""
        if self.chem is not None:
            return self.chem.plan_balance(self.open, self.lanes, p)
        if p.removal is not None:
            return balance_frame(self.open, removal_pct=p.removal)
        return self.balance


@dataclass
class FleetResult:
    """A planned fleet: each station's run (as `pipeline.PlanRun`), the pooled accounts
    of the plan and of the hand split, and how the joint solve went."""

    fleet: Fleet
    runs: dict[str, PlanRun]
    pools: dict
    base_pools: dict
    sets: dict
    base_sets: dict
    split: dict
    groups: list[list[str]]
    solver: str
    gap: float | None
    solve_seconds: float
    status: str
    objective: float = float("nan")
    bound: float = float("nan")
    breaches: list[dict] = field(default_factory=list)

    @property
    def total_cost(self) -> float:
        return sum(r.plan.evaluation.total_cost for r in self.runs.values()) + self.pools["cost"]

    @property
    def baseline_total_cost(self) -> float:
        return sum(r.plan.baseline_evaluation.total_cost for r in self.runs.values()) + self.base_pools["cost"]

    @property
    def all_breaches(self) -> list[dict]:
        out = [dict(b, station=name) for name, r in self.runs.items() for b in r.plan.breaches]
        return out + self.breaches

    def saving_by_cause(self) -> dict:
        out: dict[str, float] = {}
        for r in self.runs.values():
            for k, v in saving_by_cause(r.plan.evaluation, r.plan.baseline_evaluation).items():
                out[k] = out.get(k, 0.0) + v
        out["pooled_shortfalls"] = self.base_pools["cost"] - self.pools["cost"]
        return {k: round(v, 2) for k, v in out.items()}


# --------------------------------------------------------------------------- grouping


def groups_of(fleet: Fleet) -> list[list[str]]:
    """Stations tied by a pooled contract or a shared train set, as connected groups (in
    the workbook's order); a station nothing ties is a group of its own."""
    names = [s.station for s in fleet.stations]
    parent = {n: n for n in names}

    def root(a):
        while parent[a] != a:
            a = parent[a]
        return a

    ties = [[s.station for s in fleet.stations if has_party(s.scenario, c)] for c in fleet.shared_contracts]
    ties += [[s.station for s in fleet.stations if uses_set(s.scenario, t)] for t in fleet.shared_train_sets]
    for tie in ties:
        for other in tie[1:]:
            parent[root(other)] = root(tie[0])
    out: dict[str, list[str]] = {}
    for n in names:
        out.setdefault(root(n), []).append(n)
    return list(out.values())


def touched(fleet: Fleet, name: str) -> bool:
    """True when a pooled contract or shared train set covers the station."""
    scn = fleet.station(name).scenario
    return (any(has_party(scn, c) for c in fleet.shared_contracts)
            or any(uses_set(scn, t) for t in fleet.shared_train_sets))


# --------------------------------------------------------------------------- accounts


def pool_accounts(fleet: Fleet, plans: dict[str, tuple[list, DailyPlan]]) -> dict:
    """Per pooled contract and calendar month: the tonnes of each station and their
    sum, the pooled limits as they apply to the planned days, the shortfall and its cost
    [money], and the breaches (over the maximum; short of a minimum at the default
    penalty).  ``plans``: per station its lanes and daily plan."""
    dates = fleet.stations[0].scenario.dates
    month_index, months, _ = horizon_months(dates)
    out = {"contracts": {}, "cost": 0.0, "breaches": [], "shortfalls": []}
    scenarios = [s.scenario for s in fleet.stations]
    for c in fleet.shared_contracts:
        lo, hi = month_limits(dates, c, pool_month_to_date(scenarios, c))
        rate = CONTRACT_PENALTY_PER_T if c.shortfall_per_t is None else float(c.shortfall_per_t)
        rows = {}
        for j, m in enumerate(months):
            by = {}
            for name, (lanes, plan) in plans.items():
                t = 0.0
                for lane in lanes:
                    if lane.kind != "landfill" and covers(c, lane.source):
                        q = np.asarray(plan.quantity[lane.name], float) * (lane.load_t or 1.0)
                        t += float(q[month_index == j].sum())
                if any(lane.kind != "landfill" and covers(c, lane.source) for lane in lanes):
                    by[name] = round(t, 3)
            total = sum(by.values())
            short = max(float(lo[j]) - total, 0.0) if np.isfinite(lo[j]) else 0.0
            days = np.flatnonzero(month_index == j)
            first, last = f"{dates[days[0]]:%Y-%m-%d}", f"{dates[days[-1]]:%Y-%m-%d}"
            if short > 1e-6:
                out["cost"] += rate * short
                if c.shortfall_per_t is not None:
                    out["shortfalls"].append({"contract": c.contract, "month": str(m), "tonnes": round(short, 1),
                                              "cost": round(rate * short, 2)})
                else:
                    out["breaches"].append({"store": f"{c.contract} (pooled minimum)", "first_date": first,
                                            "last_date": last, "tonnes": round(short, 1),
                                            "cause": "pooled contract minimum not reached"})
            if np.isfinite(hi[j]) and total > hi[j] + 1e-6:
                out["breaches"].append({"store": f"{c.contract} (pooled maximum)", "first_date": first,
                                        "last_date": last, "tonnes": round(total - float(hi[j]), 1),
                                        "cause": "pooled contract maximum exceeded"})
            rows[str(m)] = {"tonnes": round(total, 3),
                            "min_t": round(float(lo[j]), 3) if np.isfinite(lo[j]) else None,
                            "max_t": round(float(hi[j]), 3) if np.isfinite(hi[j]) else None,
                            "short_t": round(short, 3), "stations": by}
        out["contracts"][c.contract] = rows
    out["cost"] = float(out["cost"])
    return out


def train_arrivals(fleet: Fleet, plans: dict[str, tuple[list, DailyPlan]]) -> dict[str, pd.DataFrame]:
    """Per shared train set, the trains arriving at each station per day (date × station)."""
    dates = fleet.stations[0].scenario.dates
    out = {}
    for ts in fleet.shared_train_sets:
        frame = pd.DataFrame({"date": dates})
        for name, (lanes, plan) in plans.items():
            trains = np.zeros(len(dates))
            members = [l for l in lanes if l.kind == SUPPLY and getattr(l.source, "train_set", None) == ts.train_set]
            for l in members:
                trains += np.asarray(plan.quantity[l.name], float)
            if members:
                frame[name] = trains.astype(int)
        out[ts.train_set] = frame
    return out


def set_accounts(fleet: Fleet, plans: dict[str, tuple[list, DailyPlan]]) -> dict:
    """Per shared train set: the most arrivals at all its stations in any window, and a
    breach for each window over the limit."""
    out = {"sets": {}, "breaches": []}
    dates = fleet.stations[0].scenario.dates
    for ts in fleet.shared_train_sets:
        frame = train_arrivals(fleet, plans)[ts.train_set]
        trains = frame.drop(columns="date").sum(axis=1).to_numpy(float)
        c = np.r_[0.0, np.cumsum(trains)]
        w = ts.window_days
        windows = np.array([c[min(a + w, len(trains))] - c[a] for a in range(max(1, len(trains) - w + 1))])
        most = int(windows.max()) if len(windows) else 0
        out["sets"][ts.train_set] = {"max_trains": ts.max_trains, "window_days": w, "most_in_window": most,
                                     "trains": int(trains.sum())}
        for a in np.flatnonzero(windows > ts.max_trains + 1e-9):
            out["breaches"].append({"store": f"{ts.train_set} (shared train set)", "first_date": f"{dates[a]:%Y-%m-%d}",
                                    "last_date": f"{dates[min(a + w, len(dates)) - 1]:%Y-%m-%d}",
                                    "tonnes": float(windows[a] - ts.max_trains),
                                    "cause": f"more than {ts.max_trains} trains in {w} days"})
    return out


# --------------------------------------------------------------------------- planning


def _sample(scn: Scenario, settings: PlanSettings, progress: bool):
    if settings.futures <= 0:
        return None
    from ..forecast import sample_futures

    return sample_futures(scn, settings.futures, seed=settings.seed, progress=progress, keep=FUTURE_FLOWS)


def _prepare(fleet: Fleet, names: list[str], futs: dict, settings: PlanSettings,
             previous: dict | None = None) -> list[StationWork]:
    """Each station of a joint group: its open and hand-split scenarios, lanes, guard and
    hand-split baseline (priced on the open lanes: pooled shortfalls go to the fleet)."""
    balances = {n: balance_frame(fleet.station(n).scenario) for n in names}
    c_share = {}
    for c in fleet.shared_contracts:
        uses = {n: expected_use(fleet.station(n).scenario, balances[n], c.material) for n in names
                if has_party(fleet.station(n).scenario, c)}
        if uses:
            for n, s in shares(uses).items():
                c_share.setdefault(n, {})[c.contract] = s
    t_share = {}
    for t in fleet.shared_train_sets:
        uses = {n: expected_use(fleet.station(n).scenario, balances[n], "limestone") for n in names
                if uses_set(fleet.station(n).scenario, t)}
        if uses:
            for n, s in shares(uses).items():
                t_share.setdefault(n, {})[t.train_set] = s
    out = []
    for n in names:
        scn = fleet.station(n).scenario
        opened = open_scenario(scn, fleet.shared_contracts, fleet.shared_train_sets)
        hand = hand_scenario(scn, fleet.shared_contracts, c_share.get(n, {}), fleet.shared_train_sets,
                             t_share.get(n, {}))
        balance = balances[n]
        lanes = build_lanes(opened, balance)
        firm = firm_loads(opened, lanes)
        fut = futs.get(n)
        flows = None
        if fut is not None:
            flows = {store: fut.flows[q] for store, q in STORE_FLOWS.items()
                     if store in scn.storage and q in fut.flows}
        guard = guard_margins(balance, flows, settings.risk_level)
        chem = SiloChemistry.from_balance(opened, balance, lanes) if opened.quality_coupled else None
        lever = RemovalLever.from_scenario(opened)
        allow = AllowanceTerms.from_scenario(opened)
        if chem is not None:
            chem.lever = lever
        pguard = None
        if lever is not None and lever.limit_kg_per_gj is not None:
            pguard = permit_guard(balance, None if fut is None else fut.flows.get("so2_emitted_t"),
                                  settings.risk_level, lever.avg_days)
        w = StationWork(n, scn, opened, hand, balance, lanes, firm, guard, chem, lever, allow, pguard, fut, flows)
        hand_lanes = build_lanes(hand, balance)
        w.base = baseline_plan(hand, balance, hand_lanes, firm, chem=chem)
        w.base_bal = w.bal_of(w.base)
        if allow is not None:
            w.base.bought_t, w.base.sold_t = baseline_trades(allow, w.base_bal["so2_emitted_t"].to_numpy(float),
                                                             horizon_months(opened.dates)[0])
        w.base_ev = evaluate(opened, w.base_bal, lanes, w.base)
        w.split = {"contracts": c_share.get(n, {}), "train_sets": t_share.get(n, {})}
        w.keep = held_loads(opened, lanes, firm, (previous or {}).get(n), settings.firm_days)
        out.append(w)
    return out


def _plan_group(fleet: Fleet, names: list[str], futs: dict, settings: PlanSettings, work: WorkLimits | None,
                previous: dict | None = None):
    stations = _prepare(fleet, names, futs, settings, previous)
    contracts = [c for c in fleet.shared_contracts if any(has_party(s.scenario, c) for s in stations)]
    sets = [t for t in fleet.shared_train_sets if any(uses_set(s.scenario, t) for s in stations)]
    solver = settings.solver
    note = ""
    if solver == "cp-sat" and any(s.chem is not None for s in stations):
        solver, note = "scip", " (cp-sat cannot take a silo's mix; solved with scip)"
    scale = sum(sum(abs(v) for v in s.base_ev.costs.values()) for s in stations)
    used = {c.contract: pool_month_to_date([s.open for s in stations], c) for c in contracts}
    try:
        plans, first, seconds = solve_joint(stations, contracts, sets, firm_days=settings.firm_days, solver=solver,
                                            gap=settings.gap, time_limit=settings.time_limit,
                                            late_days=_late_days(), work=work, scale=scale, used=used,
                                            silo_steps=LINEAR_SILO_STEPS, silo_tolerance_pct=SILO_TOLERANCE_PCT)
        if any(s.chem is not None for s in stations):
            plans, more, note_x = _byproducts_at_stone(fleet, stations, plans, contracts, sets, settings, solver, work,
                                                       scale, used)
            seconds += more
            note += note_x
        state, status = first.status, first.status.value + note
        if first.clock_cut:
            status += (f" (the {settings.time_limit:g} s safety net cut a solve short: a re-run may give another "
                       "plan; allow more time with --time-limit)")
        objective, bound, gap = first.objective, first.bound, first.gap
        clock = first.clock_cut
    except RuntimeError as e:
        plans, seconds = {s.name: s.base for s in stations}, 0.0
        state, status = SolveStatus.NO_SOLUTION_FOUND, f"no_solution_found ({e}; the hand split kept)"
        objective = bound = gap = float("nan")
        clock = False
    evs = {s.name: evaluate(s.open, s.bal_of(plans[s.name]), s.lanes, plans[s.name]) for s in stations}
    pools = pool_accounts(fleet, {s.name: (s.lanes, plans[s.name]) for s in stations})
    base_pools = pool_accounts(fleet, {s.name: (s.lanes, s.base) for s in stations})
    total = sum(e.total_cost for e in evs.values()) + pools["cost"]
    base_total = sum(s.base_ev.total_cost for s in stations) + base_pools["cost"]
    guarded = any(s.guard for s in stations)
    dearer = total > base_total + 1e-6 * abs(base_total)
    pen = sum(_penalties(e) for e in evs.values())
    base_pen = sum(_penalties(s.base_ev) for s in stations)
    if plans and dearer and (not guarded or pen > base_pen + 1e-6):
        plans = {s.name: s.base for s in stations}
        evs = {s.name: s.base_ev for s in stations}
        status += " (hand split kept: the fleet plan priced dearer" + (")" if not guarded else " and broke more limits)")
    runs = {}
    for s in stations:
        chosen, ev = plans[s.name], evs[s.name]
        plan_bal = s.bal_of(chosen)
        if chosen is not s.base:
            settled, n_moved = earliest_departures(s.open, plan_bal, s.lanes, chosen)
            if n_moved:
                ev_s = evaluate(s.open, plan_bal, s.lanes, settled)
                if ev_s.total_cost <= ev.total_cost + 1e-6 * max(abs(ev.total_cost), 1.0):
                    chosen, ev = settled, ev_s
        removal = s.open.scrubber.removal_pct
        s.base_ev.breaches = explain(s.open, s.lanes, s.base, s.base_ev) + permit_breaches(s.base_bal, removal)
        breaches = explain(s.open, s.lanes, chosen, ev) + permit_breaches(
            plan_bal, removal if chosen.removal is None else None)
        outcome = SolveOutcome(chosen, solver, state, objective, bound, gap, seconds, clock_cut=clock)
        if status != state.value:
            outcome.status = status
        result = PlanResult(s.open, plan_bal, s.lanes, chosen, ev, s.base, s.base_ev, outcome, breaches,
                            settings.firm_days, s.base_bal,
                            [{"iteration": "fleet", "total_cost": round(ev.total_cost, 2), "gap": gap,
                              "solve_seconds": round(seconds, 3), "max_caco3_change_pct": None}])
        risk = None
        if s.fut is not None:
            so2 = {k: s.fut.flows[k] for k in SO2_FLOWS if k in s.fut.flows}
            risk = replay(result, flows_at_plan_stone(result, s.flows, s.balance),
                          so2=so2 if len(so2) == len(SO2_FLOWS) else None)
        runs[s.name] = PlanRun(result, s.fut, risk, {"contract_months": contract_month_note(s.open),
                                                     "fleet": {"name": fleet.name, "planned_with": names,
                                                               "hand_split": s.split,
                                                               "objective_scope": "objective, bound and gap are "
                                                               "the joint model's, of every station planned with "
                                                               "this one; baseline_total_cost is the hand split's; "
                                                               "pooled shortfalls are in fleet_summary.json"}})
    plans_out = {s.name: (s.lanes, runs[s.name].plan.plan) for s in stations}
    return runs, plans_out, {s.name: (s.lanes, s.base) for s in stations}, \
        {s.name: s.split for s in stations}, (solver, objective, bound, seconds, status)


def _fleet_cost(fleet: Fleet, stations, plans: dict) -> float:
    """The fleet's cost of ``plans`` [money]: each station's evaluation at the balance its
    plan makes, and the pooled shortfalls."""
    evs = sum(evaluate(s.open, s.bal_of(plans[s.name]), s.lanes, plans[s.name]).total_cost for s in stations)
    return evs + pool_accounts(fleet, {s.name: (s.lanes, plans[s.name]) for s in stations})["cost"]


def _byproducts_at_stone(fleet: Fleet, stations, plans: dict, contracts, sets, settings: PlanSettings, solver: str,
                         work: WorkLimits | None, scale: float, used: dict) -> tuple[dict, float, str]:
    """The byproducts planned again, jointly, at the stone each station's plan chose: its
    supply lanes pinned, its balance replayed at its silo's mix and its removal, its sale
    lanes closed on the days its gypsum fails a buyer's purity (exact quality, as
    `schedule.plan._plan_the_silo` does for one station).  The re-plan is kept when the
    fleet's cost is not higher.  Returns (plans, seconds, note)."""
    t0 = time.perf_counter()
    again, fixed = [], {}
    for s in stations:
        p = plans[s.name]
        bal = s.bal_of(p)
        again.append(replace(s, balance=bal, lanes=build_lanes(s.open, bal, exact_quality=True), chem=None,
                             lever=None, pguard=None))
        fixed[s.name] = {l.name: p.quantity[l.name] for l in s.lanes if l.kind == SUPPLY}
    try:
        new, _, _ = solve_joint(again, contracts, sets, firm_days=max(settings.firm_days, 1), solver=solver,
                                gap=settings.gap, time_limit=settings.time_limit, late_days=_late_days(),
                                work=work, scale=scale, used=used, fixed=fixed, hints=plans)
    except RuntimeError:
        return plans, time.perf_counter() - t0, ""
    for s in stations:
        new[s.name].removal = plans[s.name].removal
    if _fleet_cost(fleet, stations, new) <= _fleet_cost(fleet, stations, plans) + 1e-6:
        return new, time.perf_counter() - t0, " (byproducts planned again at the chosen stone)"
    return plans, time.perf_counter() - t0, ""


def _late_days() -> int:
    from ..schedule.model import LATE_TRAIN_DAYS

    return LATE_TRAIN_DAYS


def plan_fleet(fleet: Fleet, settings: PlanSettings | None = None, *, progress: bool = False,
               work: WorkLimits | None = None, decompose: bool = True, previous: dict | None = None,
               **changes) -> FleetResult:
    """Plan every station of ``fleet`` (settings as `pipeline.run_plan`).  ``decompose``
    False plans even stations nothing ties in one joint model (the tests compare the two).
    ``previous``: per station, the movements of the plan in force (a load it held in the
    firm window costs the change cost to move, as `make_plan` prices it)."""
    settings = settings_of(settings, **changes)
    t0 = time.perf_counter()
    futs = {s.station: _sample(s.scenario, settings, progress) for s in fleet.stations}
    groups = groups_of(fleet) if decompose else [[s.station for s in fleet.stations]]
    runs: dict[str, PlanRun] = {}
    plans, bases, split = {}, {}, {}
    solvers, objs, bounds, statuses = [], [], [], []
    for names in groups:
        if decompose and len(names) == 1 and not touched(fleet, names[0]):
            n = names[0]
            run = plan_with_futures(fleet.station(n).scenario, futs[n], settings, progress=progress,
                                    previous=(previous or {}).get(n))
            run.summary_extra["fleet"] = {"name": fleet.name, "planned_with": [n], "hand_split": {}}
            runs[n] = run
            plans[n] = (run.plan.lanes, run.plan.plan)
            bases[n] = (run.plan.lanes, run.plan.baseline)
            solvers.append(run.plan.outcome.solver)
            objs.append(run.plan.outcome.objective)
            bounds.append(run.plan.outcome.bound)
            statuses.append(run.plan.outcome.status)
            continue
        g_runs, g_plans, g_bases, g_split, (solver, obj, bound, _, status) = _plan_group(fleet, names, futs, settings,
                                                                                       work, previous)
        runs.update(g_runs)
        plans.update(g_plans)
        bases.update(g_bases)
        split.update(g_split)
        solvers.append(solver)
        objs.append(obj)
        bounds.append(bound)
        statuses.append(status)
    order = [s.station for s in fleet.stations]
    runs = {n: runs[n] for n in order}
    pools = pool_accounts(fleet, plans)
    base_pools = pool_accounts(fleet, bases)
    sets = set_accounts(fleet, plans)
    base_sets = set_accounts(fleet, bases)
    # the whole fleet's gap: every group's objective against its bound, summed
    obj, bound = float(np.sum(objs)), float(np.sum(bounds))
    gap = abs(obj - bound) / max(abs(obj), 1.0) if np.isfinite(obj) and np.isfinite(bound) else None
    result = FleetResult(fleet, runs, pools, base_pools, sets, base_sets, split, groups,
                         ",".join(sorted(set(solvers))), gap, time.perf_counter() - t0, "; ".join(statuses),
                         objective=obj, bound=bound)
    result.breaches = pools["breaches"] + sets["breaches"]
    return result


def fleet_summary(result: FleetResult) -> dict:
    """``fleet_summary.json`` (FLEET.md)."""
    stations = {}
    for name, run in result.runs.items():
        stations[name] = {"total_cost": round(run.plan.evaluation.total_cost, 2),
                          "baseline_total_cost": round(run.plan.baseline_evaluation.total_cost, 2),
                          "breaches": run.plan.breaches,
                          "planned_with": run.summary_extra.get("fleet", {}).get("planned_with", [name]),
                          "hand_split": result.split.get(name, {})}
    return {
        "fleet": result.fleet.name,
        "currency": result.fleet.currency,
        "total_cost": round(result.total_cost, 2),
        "baseline_total_cost": round(result.baseline_total_cost, 2),
        "baseline": ("the desk's hand split: every pooled contract and shared train set split between its "
                     "stations in proportion to their expected use over the horizon (limestone burned; the "
                     "material made for a buyer), each station's reorder-point rule on its share"),
        "saving_by_cause": result.saving_by_cause(),
        "stations": stations,
        "shared_contracts": result.pools["contracts"],
        "baseline_shared_contracts": result.base_pools["contracts"],
        "pooled_shortfall_cost": round(result.pools["cost"], 2),
        "baseline_pooled_shortfall_cost": round(result.base_pools["cost"], 2),
        "pooled_shortfalls": result.pools["shortfalls"],
        "shared_train_sets": result.sets["sets"],
        "baseline_shared_train_sets": result.base_sets["sets"],
        "breaches": result.all_breaches,
        "groups": result.groups,
        "solver": result.solver,
        "status": result.status,
        "gap": None if result.gap is None else round(result.gap, 6),
        "objective": round(result.objective, 2) if np.isfinite(result.objective) else None,
        "bound": round(result.bound, 2) if np.isfinite(result.bound) else None,
        "gap_scope": ("the whole fleet: the sum of every group's objective (costs with the model's penalty "
                      "weights) against the sum of their bounds"),
        "solve_seconds": round(result.solve_seconds, 3),
    }


def room_went(result: FleetResult) -> list[dict]:
    """Where each pooled contract's tonnes went: per contract and station, the plan's
    tonnes over the horizon against the hand split's (the baseline's)."""
    out = []
    for c, months in result.pools["contracts"].items():
        base = result.base_pools["contracts"][c]
        names = sorted({n for m in months.values() for n in m["stations"]})
        for n in names:
            plan_t = sum(m["stations"].get(n, 0.0) for m in months.values())
            base_t = sum(m["stations"].get(n, 0.0) for m in base.values())
            out.append({"contract": c, "station": n, "tonnes": round(plan_t, 1), "hand_split_tonnes": round(base_t, 1)})
    return out


def fleet_frames(result: FleetResult) -> dict[str, pd.DataFrame]:
    """The tables of ``fleet.xlsx``: the pooled contracts month by month with each
    station's share, the shared train sets' arrivals by day, each station's stores at a
    glance, and where the pooled room went."""
    rows = []
    for c, months in result.pools["contracts"].items():
        for m, v in months.items():
            for n, t in v["stations"].items():
                base_t = result.base_pools["contracts"][c][m]["stations"].get(n)
                rows.append({"contract": c, "month": m, "station": n, "tonnes": t,
                             "share_pct": round(100 * t / v["tonnes"], 2) if v["tonnes"] > 0 else None,
                             "hand_split_tonnes": base_t, "pool_tonnes": v["tonnes"], "pool_min_t": v["min_t"],
                             "pool_max_t": v["max_t"], "pool_short_t": v["short_t"]})
    pooled = pd.DataFrame(rows, columns=["contract", "month", "station", "tonnes", "share_pct", "hand_split_tonnes",
                                         "pool_tonnes", "pool_min_t", "pool_max_t", "pool_short_t"])
    parts = []
    plans = {n: (r.plan.lanes, r.plan.plan) for n, r in result.runs.items()}
    for name, frame in train_arrivals(result.fleet, plans).items():
        ts = next(t for t in result.fleet.shared_train_sets if t.train_set == name)
        f = frame.copy()
        f.insert(0, "train_set", name)
        f.insert(2, "weekday", pd.to_datetime(f["date"]).dt.strftime("%a"))
        trains = f.drop(columns=["train_set", "date", "weekday"]).sum(axis=1)
        f["trains"] = trains
        f["trains_in_window"] = trains[::-1].rolling(ts.window_days, min_periods=1).sum()[::-1].astype(int)
        f["max_trains"] = ts.max_trains
        parts.append(f)
    cars = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame(columns=["train_set", "date"])
    stores = []
    for n, r in result.runs.items():
        inv = r.plan.inventory
        for store, g in inv.groupby("store", sort=False):
            lv = g["level_t"].to_numpy(float)
            stores.append({"station": n, "store": store, "capacity_t": float(g["capacity_t"].iloc[0]),
                           "safety_t": float(g["safety_t"].iloc[0]), "opening_t": round(float(lv[0]), 1),
                           "lowest_t": round(float(lv.min()), 1), "highest_t": round(float(lv.max()), 1),
                           "end_t": round(float(lv[-1]), 1),
                           "days_below_safety": int((lv < g["safety_t"].to_numpy(float) - 1e-6).sum()),
                           "days_over_capacity": int((lv > g["capacity_t"].to_numpy(float) + 1e-6).sum())})
    return {"Pooled contracts": pooled, "Car sets": cars, "Stores": pd.DataFrame(stores),
            "Pooled room": pd.DataFrame(room_went(result))}
