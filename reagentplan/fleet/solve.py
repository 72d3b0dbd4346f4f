"""The joint model of several stations: each station's `schedule.model.Problem`
formulated into ONE MathOpt model (names prefixed ``STATION:``), plus the rows that tie
them:

- pooled contract months: for contract c and calendar month j, with T_c,j = Σ over its
  stations i, their lanes l of the contract's party and material, and the periods k of j
  of tonnes[i,l,k] [t]: T_c,j ≤ max(M_hi[c,j], firm tonnes) (``pool_max[c,j]``) and
  T_c,j + pshort[c,j] ≥ M_lo[c,j] (``pool_min[c,j]``), pshort [t] priced at the
  contract's shortfall_per_t, else `penalties.CONTRACT_PENALTY_PER_T`; the stations' own
  limits of those rows are left out (`split.open_scenario`);
- shared car sets: the train set's lanes at all its stations bring at most N trains in
  any W consecutive days, as `model._car_set` writes it for one station (every group of
  whole periods inside a window; exact in daily periods).

The objective is the sum of the stations' objectives and the pooled shortfalls.  Like a
station's plan, the joint model is solved over the firm window's days and the outlook's
weeks, then once more day by day with the outlook weeks' totals held (`solve_joint`).

References
----------
OR-Tools MathOpt, https://developers.google.com/optimization/math_opt (model API).
"""

from __future__ import annotations

import time
from types import SimpleNamespace

import numpy as np
from ortools.math_opt.python import mathopt

from ..schedule.evaluate import CONTRACT_PENALTY_PER_T
from ..schedule.lanes import SUPPLY
from ..schedule.model import (PeriodSolution, Problem, WorkLimits, _hint_values, _read_solution,
                              window_period_sets,
                              _silo_floor, build_periods, formulate, run_solver, spread_to_days)
from .split import covers, month_limits


def _members(p: Problem, contract) -> list:
    return [l for l in p.lanes if l.kind != "landfill" and covers(contract, l.source)]


def _pooled_contracts(probs: dict[str, Problem], contracts, model: mathopt.Model, cost: list,
                      used: dict | None = None) -> None:
    first = next(iter(probs.values()))
    for c in contracts:
        lo, hi = month_limits(first.scenario.dates, c, (used or {}).get(c.contract))
        rate = CONTRACT_PENALTY_PER_T if c.shortfall_per_t is None else float(c.shortfall_per_t)
        for j in range(len(first.months)):
            ks = np.flatnonzero(first.period_month == j)
            total, booked = 0.0, 0.0
            for p in probs.values():
                for lane in _members(p, c):
                    total = total + sum((p.tonnes(lane, k) for k in ks), 0.0)
                    booked += float(sum(p.firm_t[lane.name][k] for k in ks))
            if isinstance(total, float):
                continue
            if np.isfinite(hi[j]):
                model.add_linear_constraint(total <= max(float(hi[j]), booked), name=f"pool_max[{c.contract},{j}]")
            if np.isfinite(lo[j]) and lo[j] > 0:
                short = model.add_variable(lb=0, ub=float(lo[j]), name=f"pshort[{c.contract},{j}]")
                model.add_linear_constraint(total + short >= float(lo[j]), name=f"pool_min[{c.contract},{j}]")
                cost.append(rate * short)


def _shared_car_sets(probs: dict[str, Problem], sets, model: mathopt.Model) -> None:
    first = next(iter(probs.values()))
    periods, n = first.periods, first.n
    starts = np.array([a for a, _ in periods])
    ends = np.array([b for _, b in periods])
    for ts in sets:
        members = [(p, l) for p in probs.values() for l in p.lanes
                   if l.kind == SUPPLY and getattr(l.source, "train_set", None) == ts.train_set]
        if not members:
            continue
        for d, inside in window_period_sets(periods, ts.window_days, n):
            terms = [p.x[l.name][k] for p, l in members for k in inside if p.x[l.name][k] is not None]
            booked = float(sum(p.firm_loads(l)[starts[k]:ends[k] + 1].sum() for p, l in members for k in inside))
            if terms:
                model.add_linear_constraint(sum(terms, 0.0) <= max(ts.max_trains, booked) - booked,
                                            name=f"fleet_train_set[{ts.train_set},{d}]")
        for k, (a, b) in enumerate(periods):
            if b - a + 1 > ts.window_days:
                terms = [p.x[l.name][k] for p, l in members if p.x[l.name][k] is not None]
                if terms:
                    open_days = np.zeros(b - a + 1, dtype=bool)
                    for _, l in members:
                        open_days |= np.asarray(l.open[a:b + 1], bool)
                    model.add_linear_constraint(
                        sum(terms, 0.0) <= ts.max_trains * windows_to_cover(open_days, ts.window_days),
                        name=f"fleet_train_set_bucket[{ts.train_set},{k}]")


def windows_to_cover(open_days: np.ndarray, window: int) -> int:
    """The fewest windows of ``window`` days that cover every open day of a bucket
    (greedy from the first uncovered day, which is optimal on a line): a bucket takes at
    most N trains per such window, tighter than N ⌈length / W⌉ where the set's lanes
    run on few weekdays."""
    count, d, n = 0, 0, len(open_days)
    while d < n:
        if open_days[d]:
            count += 1
            d += window
        else:
            d += 1
    return count


def repair_car_sets(stations, plans: dict, sets) -> dict:
    """A warm start that keeps every shared car set's window: the hand split's trains (each
    station keeping its own share of the set) can meet in one window at several stations.
    Day by day, a train that would break a window moves to the nearest earlier open day of
    its lane that breaks none, else the nearest later one within the window, else it is
    dropped (the store's soft limits then price the gap).  Booked trains never move.
    Returns new `DailyPlan`s (copies; ``plans`` is left as it was)."""
    import copy

    out = {k: copy.copy(v) for k, v in plans.items()}
    for k in out:
        out[k].quantity = {n: np.array(q, copy=True) for n, q in plans[k].quantity.items()}
    for ts in sets:
        members = [(s, l) for s in stations for l in s.lanes
                   if l.kind == SUPPLY and getattr(l.source, "train_set", None) == ts.train_set]
        if not members:
            continue
        n = len(members[0][0].open.dates)
        w = ts.window_days
        trains = np.zeros(n)
        for s, l in members:
            trains += out[s.name].quantity[l.name]

        def fits(day: int) -> bool:
            lo, hi = max(0, day - w + 1), min(n - w, day)
            return all(trains[a:a + w].sum() + 1 <= ts.max_trains + 1e-9 for a in range(lo, max(hi, lo) + 1))

        for d in range(n):
            for s, l in members:
                q = out[s.name].quantity[l.name]
                booked = out[s.name].booked.get(l.name, np.zeros(n, int))
                while q[d] > booked[d]:
                    trains[d] -= 1
                    if fits(d):
                        trains[d] += 1
                        break
                    q[d] -= 1
                    cap = l.max_per_day
                    spots = [e for e in range(d - 1, max(-1, d - w - 1), -1) if l.open[e] and q[e] < cap]
                    spots += [e for e in range(d + 1, min(n, d + w)) if l.open[e] and q[e] < cap]
                    for e in spots:
                        if fits(e):
                            q[e] += 1
                            trains[e] += 1
                            break
    return out


def _in_shared_set(lane, sets) -> bool:
    return lane.kind == SUPPLY and getattr(lane.source, "train_set", None) in {t.train_set for t in sets}


def _one_pass(stations, contracts, sets, periods, *, lins, hints, totals, solver, gap, time_limit,
              node_limit, scale, late_days, firm_days, used=None, change_cost=None, fixed=None,
              relax: bool = False) -> tuple[dict[str, PeriodSolution], dict[str, Problem]]:
    """One solve of the joint model over ``periods``.  ``fixed``: per station, per lane,
    quantities decided already (`Problem.fixed`); ``relax``: whole loads and yes/no
    decisions relaxed to fractions (a linear programme, no node limit)."""
    model = mathopt.Model(name="fleet")
    probs: dict[str, Problem] = {}
    for s in stations:
        own = None
        if totals is not None:
            # a shared set's trains: the week's total at most (``fleet_week[l,a]``), so
            # that the set's window, exact day by day, can always be kept
            own = {l.name: [] if _in_shared_set(l, sets) else totals[s.name][l.name] for l in s.lanes}
        p = Problem(s.open, s.balance, s.lanes, s.firm, s.guard, periods, solver, chem=s.chem,
                    lin=lins.get(s.name), lever=s.lever, allow=s.allow, totals=own, late_days=late_days,
                    margin_days=firm_days, permit_guard=s.pguard, into=model, prefix=f"{s.name}:",
                    keep=s.keep or None, fixed=(fixed or {}).get(s.name),
                    **({} if change_cost is None else {"change_cost": change_cost}))
        formulate(p)
        probs[s.name] = p
        if totals is not None:
            for lane in s.lanes:
                if not _in_shared_set(lane, sets):
                    continue
                for a, b, q in totals[s.name][lane.name]:
                    terms = [v for v in p.x[lane.name][a:b + 1] if v is not None]
                    if terms:
                        model.add_linear_constraint(sum(terms, 0.0) <= float(q) + 1e-6,
                                                    name=f"{s.name}:fleet_week[{lane.name},{a}]")
    cost = [p.objective for p in probs.values()]
    _pooled_contracts(probs, contracts, model, cost, used)
    _shared_car_sets(probs, sets, model)
    model.minimize(sum(cost, 0.0))
    if relax:
        for v in model.variables():
            if v.integer:
                v.integer = False
        node_limit = None
    values = {}
    for s in stations:
        if hints.get(s.name) is not None:
            values.update(_hint_values(probs[s.name], hints[s.name]))
    result = run_solver(model, solver, time_limit=time_limit, gap=gap, scale=scale, hints=values or None,
                        node_limit=node_limit, label="fleet")
    if not result.has_primal_feasible_solution():
        raise RuntimeError(f"{solver} found no fleet plan ({result.termination.reason.name})")
    return {name: _read_solution(p, result) for name, p in probs.items()}, probs


def settle_silos(stations, contracts, sets, periods, *, steps: int, tolerance_pct: float, **pass_args):
    """The linearisation points of the stations' silos where the joint model's linear
    programme settles: Haverly's recursion with whole loads relaxed to fractions, from each
    station's baseline's replayed silo, ``steps`` solves at most or until no station's
    silo CaCO3 moves more than ``tolerance_pct`` [%-points] between two solves (as
    `schedule.plan._plan_the_silo` starts a station's).  Returns ({station: point},
    [largest change per step]).

    References
    ----------
    Haverly, C. A. (1978), ACM SIGMAP Bulletin 25:19-28 (the recursion).
    """
    lins = {s.name: s.chem.linearisation(s.lanes, s.base, periods, _silo_floor(s.open))
            for s in stations if s.chem is not None}
    changes = []
    for _ in range(steps if lins else 0):
        try:
            sols, _ = _one_pass(stations, contracts, sets, periods, lins=lins, hints={}, totals=None,
                                relax=True, **pass_args)
        except RuntimeError:
            break
        moved = 0.0
        for s in stations:
            if s.chem is None:
                continue
            plan = spread_to_days(s.open, s.balance, s.lanes, s.firm, periods, sols[s.name].quantity,
                                  sols[s.name], s.lever)
            made = s.chem.linearisation(s.lanes, plan, periods, _silo_floor(s.open))
            moved = max(moved, float(np.max(np.abs(100 / made[0] - 100 / lins[s.name][0]))))
            lins[s.name] = made
        changes.append(moved)
        if moved < tolerance_pct:
            break
    return lins, changes


#: The joint solve's relative gap [-] above which the stations are re-planned one at a
#: time, day by day (`station_sweeps`), after the daily pass.
SWEEP_ABOVE_GAP = 0.01


def station_sweeps(stations, contracts, sets, periods, sols, plans, *, lins, fixed=None, **pass_args):
    """Each station in turn planned again with every other station's movements held
    (the pooled contracts' and the car set's room they leave is what it may use), warm
    started at the current plan, and kept when the joint objective falls: block
    coordinate descent (Gauss-Seidel over the stations), one sweep.  The current plan is
    feasible for every such solve and is its warm start, so the objective never rises.
    At ten stations the joint solve can end at its warm start; each station's solve is
    one station's size once the held movements are presolved away.  Run day by day (no
    weekly totals): over weekly buckets, the weeks it chose could not all be placed on
    days under a shared car set (the 10 × 365 bench broke 18 limits).  Returns
    (solutions, daily plans).

    References
    ----------
    Bertsekas, D. P. and Tsitsiklis, J. N. (1989), *Parallel and Distributed Computation:
    Numerical Methods*, Prentice Hall, section 3.3.5 (block Gauss-Seidel / coordinate descent).
    """
    best = next(iter(sols.values())).objective
    for s in stations:
        now = {o.name: SimpleNamespace(quantity=_as_days(o, periods, sols[o.name])) for o in stations}
        held = {o.name: now[o.name].quantity for o in stations if o.name != s.name}
        if (fixed or {}).get(s.name):
            held[s.name] = fixed[s.name]
        try:
            new, _ = _one_pass(stations, contracts, sets, periods, lins=lins, hints=now, totals=None,
                               fixed=held, **pass_args)
        except RuntimeError:
            continue
        obj = next(iter(new.values())).objective
        if obj < best - 1e-6 * max(abs(best), 1.0):
            best, sols = obj, new
            plans = dict(plans)
            plans[s.name] = spread_to_days(s.open, s.balance, s.lanes, s.firm, periods, new[s.name].quantity,
                                           new[s.name], s.lever)
    return sols, plans


def _as_days(s, periods, sol: PeriodSolution) -> dict[str, np.ndarray]:
    """A station's solution per period as daily quantities whose period sums, firm
    orders taken out, are the solution's own (each period's quantity on its first day,
    the firm loads on theirs): what `Problem.fixed` and the warm start read back."""
    n = len(s.open.dates)
    starts = np.array([a for a, _ in periods])
    out = {}
    for lane in s.lanes:
        day = np.zeros(n)
        day[starts] = np.asarray(sol.quantity[lane.name], float)
        if lane.load_t:
            day += s.firm.get(lane.name, (np.zeros(n, int), None))[0]
        out[lane.name] = day
    return out


def solve_joint(stations, contracts, sets, *, firm_days: int, solver: str, gap: float, time_limit: float,
                late_days: int, work: WorkLimits | None = None, scale: float | None = None,
                used: dict | None = None, change_cost: float | None = None, fixed: dict | None = None,
                hints: dict | None = None, silo_steps: int = 0, silo_tolerance_pct: float = 0.05):
    """Plan the stations together: the joint model over the firm window's days and the
    outlook's weeks, then (when the horizon has weeks) day by day with each outlook week's
    totals held (arrivals exactly, sales at most), so the shared car set's window holds
    day by day.  Returns ({station: DailyPlan}, the first solve's PeriodSolution, seconds).

    A station of quarries of different CaCO3 (``chem``) has its silo linearised where the
    joint linear programme's recursion settles (`settle_silos`, ``silo_steps`` solves at
    most; 0: at its baseline's replayed mix) for the first solve, and at the first
    solve's mix for the daily solve.  ``fixed`` (per station, per lane) pins quantities
    decided already; ``hints`` (per station, a plan) is the warm start (default: the
    baselines, their car-set collisions repaired).  When the first solve's gap is above
    `SWEEP_ABOVE_GAP`, the stations are then re-planned one at a time, day by day, with the
    others held (`station_sweeps`); the objective, bound and gap returned stay the first
    solve's."""
    work = work or WorkLimits()
    t0 = time.perf_counter()
    first_st = stations[0]
    n = len(first_st.open.dates)
    periods = build_periods(first_st.open.dates, firm_days)
    pass_args = dict(solver=solver, gap=gap, time_limit=time_limit, node_limit=work.nodes, scale=scale,
                     late_days=late_days, firm_days=firm_days, used=used, change_cost=change_cost, fixed=fixed)
    lins, _ = settle_silos(stations, contracts, sets, periods, steps=silo_steps,
                           tolerance_pct=silo_tolerance_pct, **pass_args)
    start = repair_car_sets(stations, hints or {s.name: s.base for s in stations}, sets)
    sols, _ = _one_pass(stations, contracts, sets, periods, lins=lins, hints=start, totals=None, **pass_args)
    plans = {s.name: spread_to_days(s.open, s.balance, s.lanes, s.firm, periods, sols[s.name].quantity,
                                    sols[s.name], s.lever) for s in stations}
    first = next(iter(sols.values()))
    day_sols, day_periods, day_lins = sols, periods, lins
    if len(periods) < n:
        daily = [(d, d) for d in range(n)]
        totals = {s.name: {lane.name: [(a, b, sols[s.name].quantity[lane.name][k])
                                       for k, (a, b) in enumerate(periods) if b > a] for lane in s.lanes}
                  for s in stations}
        lins2 = {s.name: s.chem.linearisation(s.lanes, plans[s.name], daily, _silo_floor(s.open))
                 for s in stations if s.chem is not None}
        left = max(time_limit - (time.perf_counter() - t0), 5.0)
        try:
            sols2, _ = _one_pass(stations, contracts, sets, daily, lins=lins2,
                                 hints=repair_car_sets(stations, plans, sets), totals=totals,
                                 solver=solver, gap=work.placement_gap, time_limit=left,
                                 node_limit=work.placement_nodes, scale=scale, late_days=late_days,
                                 firm_days=firm_days, used=used, change_cost=change_cost, fixed=fixed)
            plans = {s.name: spread_to_days(s.open, s.balance, s.lanes, s.firm, daily, sols2[s.name].quantity,
                                            sols2[s.name], s.lever) for s in stations}
            first.clock_cut = first.clock_cut or next(iter(sols2.values())).clock_cut
            day_sols, day_periods, day_lins = sols2, daily, lins2
        except RuntimeError:
            pass  # keep the even spread of the weekly totals
    if len(stations) > 1 and not first.gap <= SWEEP_ABOVE_GAP and len(day_periods) == n:
        # day by day, no weekly totals held: each station may move its own loads anywhere
        _, plans = station_sweeps(stations, contracts, sets, day_periods, day_sols, plans, lins=day_lins,
                                  **{**pass_args, "node_limit": work.placement_nodes})
    return plans, first, time.perf_counter() - t0
