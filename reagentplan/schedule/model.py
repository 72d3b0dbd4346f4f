"""The optimisation model: one MathOpt formulation, solved by CP-SAT, HiGHS or SCIP.

Decisions per period (a day in the firm window, a week after it, cut at month ends so
that monthly contracts stay exact):

- whole loads per supplier lane (arrivals) and per buyer lane (departures), within the
  lane's open days (calendar, closures, lead time, quality eligibility) × loads per day;
- landfill tonnes per site and material, within the daily limit and remaining airspace.

Stores balance period by period.  Safety stock, capacity and contract minimums are soft
with the workbook's penalties, so a plan always comes back.  A second, guarded level
(`guard`: the extra cumulative demand or production of a high quantile of the sampled
futures over the deterministic balance) is held above safety and below capacity with the
same penalties: this is how the plan keeps the chance of breaking a limit under the
user's level.  Stock left at the end is credited (limestone, at its cheapest delivered
cost) or charged (byproducts, at their cheapest landfill cost).

References
----------
OR-Tools MathOpt, https://developers.google.com/optimization/math_opt (model API).
Silver, E. A., Pyke, D. F. and Thomas, D. J. (2016), *Inventory and Production
Management in Supply Chains*, 4th ed., CRC Press: inventory balance, safety stock
against a demand quantile.
"""

from __future__ import annotations

import datetime as dt
import time
from dataclasses import dataclass

import numpy as np
import pandas as pd
from ortools.math_opt.python import mathopt

from ..scenario import Scenario
from .evaluate import EMPTY_PENALTY_FACTOR, PRODUCTION, DailyPlan, shortfall_rate
from .lanes import LANDFILL, SALE, SUPPLY, Lane, cheapest_delivered_cost, cheapest_disposal_cost, horizon_months
from .quality import SiloLots

#: Share of the limestone safety stock the quality-coupled model keeps above it [-].
SILO_SAFETY_MARGIN = 0.03

#: Weight of a guarded (worse-future) shortfall against a planned one: the plan first keeps
#: its own median levels inside the limits, then buys what protection it can.
GUARD_WEIGHT = 0.25

#: Money per load the plan gives up by moving or cancelling a load that the previous plan
#: held inside the firm window (a train re-booked, a buyer told of a new day): the price
#: of nervousness, so the coordinator is not asked to re-book for pennies.  Common
#: practice, no source; `make_plan(change_cost_per_load=...)` sets it.  Not a cost of the
#: plan: `evaluate` leaves it out.
CHANGE_COST_PER_LOAD = 250.0

#: Days a train may come late that the plan holds stock against in its firm window: on
#: each day, the silo less the rail deliveries of the last this-many days (any of which
#: may not have come yet) is kept above safety stock, at the guard's weight.  Common
#: practice, no source (unit trains a day or two late are routine; the reorder-point rule
#: keeps five days of use at each arrival).
LATE_TRAIN_DAYS = 2

SOLVERS = {"highs": mathopt.SolverType.HIGHS, "cp-sat": mathopt.SolverType.CP_SAT,
           "scip": mathopt.SolverType.GSCIP}


def build_periods(dates: pd.DatetimeIndex, firm_days: int) -> list[tuple[int, int]]:
    """(first, last) day index of each period: daily for ``firm_days``, then weekly
    buckets cut at month boundaries."""
    n = len(dates)
    periods = [(d, d) for d in range(min(firm_days, n))]
    d = len(periods)
    while d < n:
        end = min(d + 6, n - 1)
        month_end = np.flatnonzero(dates.month[d:end + 1] != dates.month[d])
        if len(month_end):
            end = d + month_end[0] - 1
        periods.append((d, end))
        d = end + 1
    return periods


@dataclass
class SolveOutcome:
    plan: DailyPlan
    solver: str
    status: str
    objective: float
    bound: float
    gap: float
    solve_seconds: float
    #: True when the wall-clock safety net, not the work limit, ended a solve: a re-run
    #: may then give another plan
    clock_cut: bool = False
    #: branch-and-bound nodes of the (first) solve
    nodes: int = 0
    #: the plan's price where a caller priced it (`plan._plan_the_silo`) [money]
    price: float = float("nan")


#: The seed every solver gets, so a re-run takes the same path through the search.
RANDOM_SEED = 20261203


@dataclass(frozen=True)
class WorkLimits:
    """Deterministic work a solve may do: branch-and-bound nodes [-] of the plan's solves, of
    the silo relaxation that gives the bound, and of the daily placement of the outlook
    weeks, and the placement's relative gap [-].
    Unlike a time limit, the same work gives the same plan on a quiet or a loaded machine
    (one thread, a fixed seed)."""

    nodes: int = 1000
    bound_nodes: int = 0
    placement_nodes: int = 200
    placement_gap: float = 1e-4


def solve_parameters(solver: str, time_limit: float, gap: float, scale: float | None,
                     node_limit: int | None) -> "mathopt.SolveParameters":
    """The solver's parameters: relative gap, absolute gap from the plan's money scale, one
    thread, a fixed seed, a node limit (the deterministic bound of the search) and the wall
    clock as a safety net only."""
    params = mathopt.SolveParameters(time_limit=dt.timedelta(seconds=max(time_limit, 1.0)),
                                     relative_gap_tolerance=gap, random_seed=RANDOM_SEED)
    if node_limit and solver != "cp-sat":
        params.node_limit = int(node_limit)
    if solver == "highs":
        # MathOpt refuses `threads` for HiGHS; its own options say one thread, no parallel
        params.highs.string_options["parallel"] = "off"
        params.highs.int_options["threads"] = 1
    else:
        params.threads = 1
    if scale:
        # the gap is relative to the plan's whole cost (with its constants), which solvers
        # that drop the objective's offset cannot see: give it as an absolute gap too
        params.absolute_gap_tolerance = 0.5 * gap * abs(scale)
    if solver == "cp-sat":
        params.cp_sat.mip_max_bound = 1e9
        if node_limit is not None:
            # CP-SAT's own deterministic clock, about a second of work per unit
            params.cp_sat.max_deterministic_time = max(node_limit / 50.0, 5.0)
    return params


def solve_plan(scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane],
               firm: dict[str, tuple[np.ndarray, np.ndarray]], guard: dict[str, np.ndarray],
               *, firm_days: int = 56, solver: str = "highs", time_limit: float = 60.0,
               gap: float = 5e-4, hint: DailyPlan | None = None,
               progress: bool = False, chem=None, around: DailyPlan | None = None,
               scale: float | None = None, fixed: dict | None = None,
               to_days: bool = True, lever=None, allow=None, keep: dict | None = None,
               change_cost: float = CHANGE_COST_PER_LOAD, late_days: int = LATE_TRAIN_DAYS,
               work: "WorkLimits | None" = None, silo_lots: bool = False, trust: tuple | None = None,
               limestone_end_per_t: float | None = None) -> SolveOutcome:
    """Solve the firm-window + weekly-outlook model, then place each outlook week's loads
    on its days with a daily model whose weekly totals are those of the first solve
    (arrivals exactly, sales at most, landfill free within its limits), so the daily
    levels that the outputs show are planned, not guessed."""
    n = len(scenario.dates)
    t0 = time.perf_counter()
    periods = build_periods(scenario.dates, firm_days)
    lin = None
    if chem is not None and not silo_lots:
        lin = chem.linearisation(lanes, around if around is not None else hint, periods,
                                 _silo_floor(scenario))
    first = _solve_periods(scenario, balance, lanes, firm, guard, periods, solver, time_limit, gap,
                           hint, progress=progress, label=f"plan ({solver})", chem=chem, lin=lin,
                           scale=scale, fixed=fixed, lever=lever, allow=allow, keep=keep,
                           change_cost=change_cost, late_days=late_days, margin_days=firm_days,
                           node_limit=work.nodes, silo_lots=silo_lots, trust=trust,
                           limestone_end_per_t=limestone_end_per_t)
    clock_cut = first["clock_cut"]
    plan = spread_to_days(scenario, balance, lanes, firm, periods, first["qty"], first, lever)
    if len(periods) < n and to_days:
        daily = [(d, d) for d in range(n)]
        totals = {lane.name: [(a, b, first["qty"][lane.name][k]) for k, (a, b) in enumerate(periods)
                              if b > a] for lane in lanes}
        left = max(time_limit - (time.perf_counter() - t0), 5.0)
        try:
            lin2 = None if chem is None or silo_lots else chem.linearisation(lanes, plan, daily, _silo_floor(scenario))
            second = _solve_periods(scenario, balance, lanes, firm, guard, daily, solver, left, work.placement_gap,
                                    plan, totals, progress=progress, label="outlook to days",
                                    chem=chem, lin=lin2, fixed=fixed, lever=lever, allow=allow, silo_lots=silo_lots,
                                    keep=keep, change_cost=change_cost, late_days=late_days,
                                    margin_days=firm_days, node_limit=work.placement_nodes,
                                    limestone_end_per_t=limestone_end_per_t)
            plan = spread_to_days(scenario, balance, lanes, firm, daily, second["qty"], second, lever)
            clock_cut = clock_cut or second["clock_cut"]
        except RuntimeError:
            pass  # keep the even spread of the weekly totals
    return SolveOutcome(plan, solver, first["status"], first["objective"], first["bound"],
                        first["gap"], time.perf_counter() - t0, clock_cut, first["nodes"])


def _silo_floor(scenario: Scenario) -> float:
    """Smallest silo CaCO3 [t] the linearisation divides by (a tenth of the safety stock,
    at least 1 t), so a nearly empty silo does not blow up the first-order term."""
    return max(0.1 * scenario.storage["limestone"].safety_t, 1.0)


def end_caco3_value(scenario: Scenario, chem) -> float:
    """Money per tonne of CaCO3 left in the silo at the end [money/t]: the cheapest
    delivered cost of a tonne of CaCO3 over the supply lanes."""
    return min(s.delivered_cost_per_t / (scenario.stone_caco3_pct(s) / 100) for s in scenario.suppliers)


class SolveProgress:
    """A progress line on stderr for long solves: elapsed time against the time limit and,
    where the solver reports them during the search (CP-SAT), the best cost and bound;
    every solver's final cost and bound at the end."""

    def __init__(self, enabled: bool, time_limit: float, label: str):
        self.enabled, self.time_limit, self.label = enabled, time_limit, label
        self.best, self.bound = float("nan"), float("nan")
        self._stop = None

    def __enter__(self):
        if not self.enabled:
            return self
        import threading

        from tqdm import tqdm

        self.bar = tqdm(total=round(self.time_limit), desc=self.label, unit="s", leave=False,
                        bar_format="{desc}: {n_fmt}/{total_fmt} s {postfix}")
        self._stop = threading.Event()
        self._t0 = time.perf_counter()

        def tick():
            while not self._stop.wait(1.0):
                self.bar.n = min(round(time.perf_counter() - self._t0), self.bar.total)
                self.bar.set_postfix_str(self._postfix())

        self._thread = threading.Thread(target=tick, daemon=True)
        self._thread.start()
        return self

    def _postfix(self) -> str:
        if np.isfinite(self.best):
            return f"best {self.best:,.0f}, bound {self.bound:,.0f}"
        return "searching"

    def solve_kwargs(self, solver: str) -> dict:
        if not self.enabled or solver != "cp-sat":
            return {}

        def cb(data):
            self.best = data.mip_stats.primal_bound
            self.bound = data.mip_stats.dual_bound
            return mathopt.CallbackResult()

        return {"callback_reg": mathopt.CallbackRegistration(events={mathopt.Event.MIP}), "cb": cb}

    def done(self, result) -> None:
        if self.enabled and result.has_primal_feasible_solution():
            self.best = result.objective_value()
            self.bound = result.termination.objective_bounds.dual_bound

    def __exit__(self, *exc):
        if self._stop is not None:
            self._stop.set()
            self._thread.join()
            self.bar.close()
            import sys

            print(f"{self.label}: {time.perf_counter() - self._t0:.1f} s, {self._postfix()}",
                  file=sys.stderr)
        return False


def _solve_periods(scenario, balance, lanes, firm, guard, periods, solver, time_limit, gap,
                   hint: DailyPlan | None, totals: dict | None = None, progress: bool = False,
                   label: str = "solving", chem=None, lin=None, scale: float | None = None,
                   fixed: dict | None = None, lever=None, allow=None, keep: dict | None = None,
                   change_cost: float = CHANGE_COST_PER_LOAD, late_days: int = LATE_TRAIN_DAYS,
                   margin_days: int | None = None, node_limit: int | None = None,
                   silo_lots: bool = False, trust: tuple | None = None,
                   limestone_end_per_t: float | None = None) -> dict:
    """Build and solve the model over ``periods``; ``totals`` fixes outlook-week sums;
    ``lever`` (`lever.RemovalLever`) makes the removal a decision per period, ``allow``
    (`lever.AllowanceTerms`) adds the allowance account."""
    dates = scenario.dates
    n = len(dates)
    P = len(periods)
    if margin_days is None:
        margin_days = n
    pid = np.empty(n, dtype=int)
    for k, (a, b) in enumerate(periods):
        pid[a:b + 1] = k
    days_in = np.array([b - a + 1 for a, b in periods], dtype=float)
    month_index, months, _ = horizon_months(dates)
    period_month = np.array([month_index[a] for a, _ in periods])
    pen = scenario.plant
    m = mathopt.Model(name="reagentplan")

    def per_period(x: np.ndarray) -> np.ndarray:
        return np.bincount(pid, weights=x, minlength=P)

    # ---- the removal per period (lever.py): each balance column is intercept + slope × r
    r_var = ([m.add_variable(lb=lever.lo, ub=lever.hi, name=f"r[{k}]") for k in range(P)]
             if lever is not None else None)

    def column(name: str, chem_array: np.ndarray | None = None) -> list:
        """Per period, a balance column: constants, or affine in the period's removal."""
        if r_var is None:
            return [float(v) for v in per_period(balance[name].to_numpy(float) if chem_array is None
                                                  else chem_array)]
        ic, sl = lever.chem_affine(name, chem) if chem_array is not None else (lever.intercept[name],
                                                                                 lever.slope[name])
        icp, slp = per_period(ic), per_period(sl)
        return [float(icp[k]) + float(slp[k]) * r_var[k] for k in range(P)]

    def column_most(name: str, chem_array: np.ndarray | None = None) -> np.ndarray:
        """Per period, the most a column can be (at the range's end that makes most)."""
        if lever is None:
            return per_period(balance[name].to_numpy(float) if chem_array is None else chem_array)
        ic, sl = lever.chem_affine(name, chem) if chem_array is not None else (lever.intercept[name],
                                                                                 lever.slope[name])
        return per_period(np.maximum(ic + sl * lever.lo, ic + sl * lever.hi))

    # ---- lane variables
    x: dict[str, list] = {}
    firm_t: dict[str, np.ndarray] = {}
    cost_terms = []
    for lane in lanes:
        f_loads, f_t = firm.get(lane.name, (np.zeros(n, int), np.zeros(n)))
        firm_t[lane.name] = per_period(f_t)
        if lane.load_t:
            daily_cap = np.where(lane.open, np.maximum(lane.max_per_day - f_loads, 0), 0)
            ub = per_period(daily_cap.astype(float))
            x[lane.name] = [m.add_integer_variable(lb=0, ub=float(ub[k]), name=f"n[{lane.name},{k}]")
                            if ub[k] > 0 else None for k in range(P)]
            unit_cost = lane.cost_per_t * lane.load_t + lane.cost_per_load
        else:
            made = balance[PRODUCTION[lane.material]].to_numpy(float).sum()
            made += scenario.storage[lane.material].initial_t if lane.material in scenario.storage else 0.0
            cap = np.where(lane.open, min(lane.max_per_day, made), 0.0)  # finite for CP-SAT
            cap = np.minimum(cap, lane.airspace_t)
            ub = per_period(cap)
            x[lane.name] = [m.add_variable(lb=0, ub=float(ub[k]), name=f"t[{lane.name},{k}]")
                            if ub[k] > 0 else None for k in range(P)]
            unit_cost = lane.cost_per_t
        if fixed and lane.name in fixed:
            # decided already (the stone of a plan whose byproducts are being re-planned)
            q = per_period(np.asarray(fixed[lane.name], float) - f_loads)
            for k, v in enumerate(x[lane.name]):
                if v is not None:
                    v.lower_bound = v.upper_bound = float(max(q[k], 0.0))
        if trust is not None and lane.kind == SUPPLY and lane.load_t and not (fixed and lane.name in fixed):
            # the trust region of the successive silo solves: loads per period within
            # `radius` of the incumbent's
            t_plan, radius = trust
            q = per_period(np.asarray(t_plan.quantity[lane.name], float) - f_loads)
            for k, v in enumerate(x[lane.name]):
                if v is not None:
                    v.lower_bound = float(max(q[k] - radius, 0.0))
                    v.upper_bound = float(max(min(q[k] + radius, v.upper_bound), v.lower_bound))
        cost_terms += [unit_cost * v for v in x[lane.name] if v is not None]
        if keep and lane.name in keep and lane.load_t:
            # loads the previous plan held on these days (not booked): moving or
            # cancelling one costs CHANGE_COST_PER_LOAD
            held = keep[lane.name]
            for k, (a, b) in enumerate(periods):
                if a != b or a >= len(held) or held[a] <= 0:
                    continue
                v = x[lane.name][k]
                gone = m.add_variable(lb=0, ub=float(held[a]), name=f"moved[{lane.name},{k}]")
                m.add_linear_constraint(gone >= float(held[a]) - (v if v is not None else 0.0))
                cost_terms.append(change_cost * gone)

    # ---- stone quality: gypsum sales that need the silo's stone good enough (quality.py)
    quality_rows = []
    if chem is not None:
        for lane in lanes:
            limit = getattr(lane.source, "min_purity_pct", None)
            if lane.kind != SALE or lane.material != "gypsum" or limit is None:
                continue
            # one decision per buyer and month: ship it, and keep the silo's stone good
            # enough in every period it is shipped, or not
            u_max = chem.u_max(limit, margin=not silo_lots)
            z_month = {}
            for k, v in enumerate(x[lane.name]):
                if v is None:
                    continue
                a, b = periods[k]
                um = float(np.min(u_max[a:b + 1]))
                if um >= chem.u_hi:
                    continue
                if um < chem.u_lo:
                    v.upper_bound = 0.0
                    continue
                j = int(period_month[k])
                if j not in z_month:
                    z_month[j] = m.add_binary_variable(name=f"q[{lane.name},{j}]")
                m.add_linear_constraint(v <= v.upper_bound * z_month[j])
                quality_rows.append((k, um, z_month[j]))
    silo_after = {}

    def tonnes(lane: Lane, k: int):
        v = x[lane.name][k]
        base = firm_t[lane.name][k]
        if v is None:
            return base
        return base + (lane.load_t * v if lane.load_t else v)

    # ---- weekly totals of a first solve (second, daily solve only)
    if totals:
        for lane in lanes:
            for a, b, q in totals[lane.name]:
                terms = [v for v in x[lane.name][a:b + 1] if v is not None]
                if not terms:
                    continue
                if lane.kind == SUPPLY:
                    m.add_linear_constraint(sum(terms, 0.0) == float(q))
                elif lane.kind == SALE:
                    m.add_linear_constraint(sum(terms, 0.0) <= float(q) + 1e-6)
                # landfill stays free day by day: the way out that is always there

    # ---- monthly contracts and airspace
    for lane in lanes:
        for j in range(len(months)):
            ks = np.flatnonzero(period_month == j)
            total = sum((tonnes(lane, k) for k in ks), 0.0)
            hi, lo = lane.month_max_t[j], lane.month_min_t[j]
            if not np.isnan(hi) and not isinstance(total, float):
                booked = float(sum(firm_t[lane.name][k] for k in ks))
                m.add_linear_constraint(total <= max(hi, booked))  # firm orders are kept as given
            if not np.isnan(lo) and lo > 0:
                short = m.add_variable(lb=0, ub=lo, name=f"cshort[{lane.name},{j}]")
                m.add_linear_constraint(total + short >= lo)
                cost_terms.append(shortfall_rate(lane) * short)
            n_tier = getattr(lane.source, "tier_loads_per_month", None)
            if lane.kind == SUPPLY and n_tier is not None:
                # freight tier: loads above n_tier in the month at the tier rate.  extra is
                # the loads above the tier; z = 1 only when the month reaches it
                loads = sum((x[lane.name][k] for k in ks if x[lane.name][k] is not None), 0.0)
                loads = loads + float(sum(firm.get(lane.name, (np.zeros(n, int), None))[0][pid == k].sum()
                                          for k in ks))
                most_loads = float(sum(x[lane.name][k].upper_bound for k in ks if x[lane.name][k] is not None))
                most_loads += float(sum(firm.get(lane.name, (np.zeros(n, int), None))[0][pid == k].sum() for k in ks))
                if most_loads > n_tier:
                    extra = m.add_variable(lb=0, ub=most_loads - n_tier, name=f"tier[{lane.name},{j}]")
                    z = m.add_binary_variable(name=f"tierz[{lane.name},{j}]")
                    m.add_linear_constraint(extra <= (most_loads - n_tier) * z)
                    m.add_linear_constraint(extra <= loads - n_tier + (n_tier + 0.0) * (1 - z))
                    cost_terms.append((float(lane.source.tier_freight_per_load) - lane.cost_per_load) * extra)
    # ---- train sets: at most max_trains arrivals of the set's lanes in any window_days days
    for ts in scenario.train_sets:
        members = [l for l in lanes if l.kind == SUPPLY and getattr(l.source, "train_set", None) == ts.train_set]
        if not members:
            continue
        starts = np.array([a for a, _ in periods])
        ends = np.array([b for _, b in periods])
        seen = set()
        for d in range(n):
            inside = tuple(np.flatnonzero((starts >= d) & (ends <= d + ts.window_days - 1)))
            if not inside or inside in seen:
                continue
            seen.add(inside)
            terms = [x[l.name][k] for l in members for k in inside if x[l.name][k] is not None]
            booked_loads = float(sum(firm.get(l.name, (np.zeros(n, int), None))[0][starts[k]:ends[k] + 1].sum()
                                     for l in members for k in inside))
            if terms:
                m.add_linear_constraint(sum(terms, 0.0) <= max(ts.max_trains, booked_loads) - booked_loads)
        for k, (a, b) in enumerate(periods):  # a bucket longer than the window
            length = b - a + 1
            if length > ts.window_days:
                terms = [x[l.name][k] for l in members if x[l.name][k] is not None]
                if terms:
                    m.add_linear_constraint(sum(terms, 0.0) <= ts.max_trains * int(np.ceil(length / ts.window_days)))
        if lane.kind == LANDFILL and np.isfinite(lane.airspace_t):
            m.add_linear_constraint(sum((v for v in x[lane.name] if v is not None), 0.0) <= lane.airspace_t)

    # ---- stores
    end_value = []
    silo_inerts: list = []
    # limestone first: the gypsum made depends on the stone the silo feeds
    for store, st in sorted(scenario.storage.items(), key=lambda kv: kv[0] != "limestone"):
        # flow_terms: the period's use (negative) or production, constants or affine in
        # the removal; flow: the most of it, for the bounds
        if store == "limestone":
            flow_terms = [-t for t in column("limestone_t")]
            flow = -column_most("limestone_t")
            ins = [l for l in lanes if l.kind == SUPPLY]
            outs = []
        else:
            flow_terms = column(PRODUCTION[store])
            flow = column_most(PRODUCTION[store])
            ins = []
            outs = [l for l in lanes if l.material == store and l.kind != SUPPLY]
        flow_expr = None
        if chem is not None and store == "gypsum":
            # wet cake = (cake without stone inerts + the inerts drawn with the scrubber's
            # share of the CaCO3) / (1 − moisture); the inerts drawn come from the silo
            base_terms = column("cake_base_wet", chem.cake_base * chem.wet_factor)
            share = per_period(chem.need_gypsum * chem.wet_factor) / np.maximum(per_period(chem.need), 1e-9)
            flow_expr = [base_terms[k] + float(share[k]) * silo_inerts[k] for k in range(P)]
            # for the bounds below: the most it can make
            flow = per_period(chem.cake_base * chem.wet_factor + chem.need_gypsum * chem.wet_factor
                              * (chem.u_hi - 1.0))
            if lever is not None:
                flow = (column_most("cake_base_wet", chem.cake_base * chem.wet_factor)
                        + column_most("need_gypsum", chem.need_gypsum) * per_period(chem.wet_factor)
                        / days_in * (chem.u_hi - 1.0))
        g = guard.get(store)
        g_end = np.zeros(P) if g is None else np.array([g[b] for _, b in periods])
        # finite bounds everywhere (CP-SAT needs them; they also tighten the others)
        if store == "limestone":
            # a plan never holds more than capacity plus two days of the most that can
            # arrive (beyond it, buying less is always cheaper); firm orders may force more
            day_in = sum(l.max_per_day * l.load_t for l in ins)
            most = max(st.capacity_t, st.initial_t) + sum(firm_t[l.name].sum() for l in ins) + 2 * day_in
        else:
            most = st.initial_t + float(flow.sum())
        most = max(most, st.capacity_t, st.safety_t) + float(g_end.max(initial=0.0))
        demand_total = float(-flow.sum()) if store == "limestone" else 0.0
        prev = round(st.initial_t) if solver == "cp-sat" else st.initial_t
        margin = 3.0 if solver == "cp-sat" else 0.0  # room for the rounding to whole tonnes
        safety, capacity = st.safety_t + margin, st.capacity_t - margin
        if chem is not None and store == "limestone" and not silo_lots:
            # room for the fixed ratio of inerts drawn (quality.py): the replayed silo may
            # draw a little more stone than the model did
            safety += SILO_SAFETY_MARGIN * st.safety_t
        if chem is not None and store == "limestone":
            need_terms = column("need", chem.need)
            need_most = column_most("need", chem.need)
            if silo_lots:
                lots = SiloLots(m, chem, lanes, st.initial_t, most)
            else:
                u_lin, j_lin = lin
            prev_j = st.initial_t * chem.initial_caco3
            silo_inerts.clear()
        for k in range(P):
            level = m.add_variable(lb=0, ub=most, name=f"I[{store},{k}]")
            moved = sum((tonnes(l, k) for l in ins), 0.0) - sum((tonnes(l, k) for l in outs), 0.0)
            if store == "limestone" and chem is not None and silo_lots:
                unmet = m.add_variable(lb=0, ub=max(float(need_most.sum()), 1.0), name=f"unmet[{k}]")
                inerts = lots.period(k, level, {l.name: tonnes(l, k) for l in ins}, need_terms[k], unmet)
                cost_terms.append(EMPTY_PENALTY_FACTOR * pen.shortage_penalty_per_t * chem.u_lo * unmet)
                silo_inerts.append(inerts)
            elif store == "limestone" and chem is not None:
                # the well-mixed silo: tonnes I and CaCO3 J after the period's deliveries;
                # the CaCO3 drawn is the need, the inerts drawn with it need × (I' − J')/J',
                # with that ratio fixed at the last plan's replayed silo (Haverly's recursion)
                caco3_in = sum((chem.lane_caco3[l.name] * tonnes(l, k) for l in ins), 0.0)
                i_after, j_after = prev + moved, prev_j + caco3_in
                rho = float(u_lin[k]) - 1.0
                inerts = need_terms[k] * rho
                unmet = m.add_variable(lb=0, ub=max(float(need_most.sum()), 1.0), name=f"unmet[{k}]")
                m.add_linear_constraint(level == i_after - need_terms[k] - inerts + (1.0 + rho) * unmet)
                j_level = m.add_variable(lb=0, ub=most, name=f"J[{k}]")
                m.add_linear_constraint(j_level == j_after - need_terms[k] + unmet)
                cost_terms.append(EMPTY_PENALTY_FACTOR * pen.shortage_penalty_per_t * (1.0 + rho) * unmet)
                silo_inerts.append(inerts)
                silo_after[k] = (i_after, j_after, most, prev, prev_j)
                prev_j = j_level
            elif store == "limestone":
                unmet = m.add_variable(lb=0, ub=max(demand_total, 1.0), name=f"unmet[{k}]")
                m.add_linear_constraint(level == prev + moved + flow_terms[k] + unmet)
                cost_terms.append(EMPTY_PENALTY_FACTOR * pen.shortage_penalty_per_t * unmet)
            elif flow_expr is not None:
                m.add_linear_constraint(level == prev + moved + flow_expr[k])
            else:
                m.add_linear_constraint(level == prev + moved + flow_terms[k])
            w = days_in[k]
            if st.safety_t > 0 or store == "limestone":
                short = m.add_variable(lb=0, ub=st.safety_t + 1.0, name=f"short[{store},{k}]")
                m.add_linear_constraint(short + level >= safety)
                cost_terms.append(pen.shortage_penalty_per_t * w * short)
            over = m.add_variable(lb=0, ub=most, name=f"over[{store},{k}]")
            m.add_linear_constraint(level - over <= capacity)
            cost_terms.append(pen.overflow_penalty_per_t * w * over)
            if (store == "limestone" and late_days > 0 and periods[k][0] == periods[k][1]
                    and periods[k][0] < margin_days):
                # a train of the last late_days days (booked or planned) may not have come yet
                d = periods[k][0]
                late = sum((tonnes(l, int(pid[t])) for l in ins if l.mode == "rail"
                            for t in range(max(d - late_days + 1, 0), d + 1)
                            if periods[int(pid[t])][0] == periods[int(pid[t])][1]), 0.0)
                if not (isinstance(late, float) and late == 0.0):
                    lg = m.add_variable(lb=0, ub=most, name=f"late[{k}]")
                    m.add_linear_constraint(level - late + lg >= safety)
                    cost_terms.append(GUARD_WEIGHT * pen.shortage_penalty_per_t * lg)
            if g is not None and g_end[k] > 0:
                gs = m.add_variable(lb=0, ub=most, name=f"guard[{store},{k}]")
                if store == "limestone":
                    m.add_linear_constraint(gs + level >= safety + float(g_end[k]))
                    cost_terms.append(GUARD_WEIGHT * pen.shortage_penalty_per_t * w * gs)
                else:
                    m.add_linear_constraint(level - gs <= capacity - float(g_end[k]))
                    cost_terms.append(GUARD_WEIGHT * pen.overflow_penalty_per_t * w * gs)
            prev = level
        if store == "limestone" and chem is not None:
            end_value.append(-end_caco3_value(scenario, chem) * (lots.caco3_left() if silo_lots else prev_j))
            continue
        if store == "limestone":
            value = -(cheapest_delivered_cost(scenario) if limestone_end_per_t is None else limestone_end_per_t)
        else:
            value = cheapest_disposal_cost(scenario, store)
        end_value.append(value * prev)
    for k, um, z in quality_rows:
        if silo_lots:
            lots.purity_row(k, um, z, periods[k][0] == periods[k][1])
            continue
        # a gypsum sale in period k needs stone per CaCO3 in the silo, I'/J', at most u_max
        # (the purity limit): I' − u_max J' ≤ 0, exact in the silo's own tonnes
        i_after, j_after, most_t, i_before, j_before = silo_after[k]
        m.add_linear_constraint(i_after - um * j_after <= (chem.u_hi - um) * most_t * (1 - z))
        if periods[k][1] > periods[k][0]:
            # a week: its first days draw the silo as it was before the week's deliveries
            m.add_linear_constraint(i_before - um * j_before <= (chem.u_hi - um) * most_t * (1 - z))
    # ---- the permit's rolling average, where the plan chooses the removal (lever.py)
    if r_var is not None and lever.limit_kg_per_gj is not None:
        cost_terms += _permit_rows(m, lever, r_var, periods, pid, pen.shortage_penalty_per_t)
    # ---- the allowance account (lever.py)
    trades = None
    if allow is not None:
        trades, allowance_cost = _allowance_rows(m, allow, column("so2_emitted_t"), periods, period_month,
                                                 column_most("so2_emitted_t"), pen.shortage_penalty_per_t)
        cost_terms += allowance_cost
    # firm orders are constants of the plan: their cost is part of the objective
    booked = 0.0
    for lane in lanes:
        if lane.name in firm:
            f_loads, f_t = firm[lane.name]
            booked += lane.cost_per_t * f_t.sum() + lane.cost_per_load * f_loads.sum()
    m.minimize(sum(cost_terms, 0.0) + sum(end_value, 0.0) + float(booked))

    # ---- solve
    params = solve_parameters(solver, time_limit, gap, scale, node_limit)
    if node_limit == 0:
        # no search at all: the linear relaxation (whole loads and yes/no decisions
        # relaxed), whose optimum bounds the model's
        for v in m.variables():
            if v.integer:
                v.integer = False
    model_params = None
    if hint is not None:
        values = {}
        for lane in lanes:
            q = hint.quantity[lane.name] - (firm.get(lane.name, (np.zeros(n, int), None))[0]
                                            if lane.load_t else 0)
            agg = per_period(np.asarray(q, float))
            for k, v in enumerate(x[lane.name]):
                if v is not None:
                    values[v] = float(min(max(agg[k], 0), v.upper_bound))
        model_params = mathopt.ModelSolveParameters(solution_hints=[mathopt.SolutionHint(variable_values=values)])
    with SolveProgress(progress, time_limit, label) as watch:
        kwargs = watch.solve_kwargs(solver)
        try:
            result = mathopt.solve(m, SOLVERS[solver], params=params, model_params=model_params, **kwargs)
        except Exception:  # a solver that refuses hints or callbacks
            result = mathopt.solve(m, SOLVERS[solver], params=params)
        watch.done(result)
    if not result.has_primal_feasible_solution():
        raise RuntimeError(f"{solver} found no plan in {time_limit:g} s ({result.termination.reason.name})")
    obj = result.objective_value()
    bound = result.termination.objective_bounds.dual_bound
    if node_limit == 0 and result.termination.reason == mathopt.TerminationReason.OPTIMAL:
        bound = obj  # the linear relaxation's optimum
    gap_ = abs(obj - bound) / max(abs(obj), 1.0) if np.isfinite(bound) else float("nan")
    values = result.variable_values()
    qty = {}
    for lane in lanes:
        per = np.array([0.0 if v is None else values[v] for v in x[lane.name]])
        if lane.load_t:
            per = np.rint(per).astype(int)
        qty[lane.name] = per
    clock_cut = (result.termination.reason != mathopt.TerminationReason.OPTIMAL
                 and result.termination.limit == mathopt.Limit.TIME)
    out = {"qty": qty, "status": result.termination.reason.name.lower(), "objective": obj,
           "bound": bound, "gap": gap_, "removal": None, "bought": None, "sold": None,
           "clock_cut": bool(clock_cut), "nodes": int(result.solve_stats.node_count)}
    if r_var is not None:
        out["removal"] = np.array([values[v] for v in r_var])
    if trades is not None:
        # buying and selling in one period nets out (at equal prices the solver may do
        # both): keep the net, which holds the same and never costs more
        net = np.array([values[b] - values[s_] for b, s_ in zip(*trades)])
        out["bought"], out["sold"] = np.clip(net, 0, None), np.clip(-net, 0, None)
    return out


def _permit_rows(m, lever, r_var, periods, pid, shortage_penalty: float) -> list:
    """For each day, SO2 emitted over the permit's averaging period ending that day (affine
    in the removals of the periods it spans) at most the limit × their heat input, plus a
    priced excess; days that keep the limit even at the lowest removal get no row."""
    from .lever import PERMIT_PENALTY_FACTOR

    n = len(pid)
    D = lever.avg_days
    ic, sl = lever.intercept["so2_emitted_t"], lever.slope["so2_emitted_t"]
    c_ic, c_sl = np.r_[0.0, np.cumsum(ic)], np.r_[0.0, np.cumsum(sl)]
    c_heat = np.r_[0.0, np.cumsum(lever.heat_gj)]
    terms = []
    for d in range(n):
        lo_d = max(0, d - D + 1)
        allowed = lever.limit_kg_per_gj * (c_heat[d + 1] - c_heat[lo_d]) / 1000.0
        const = c_ic[d + 1] - c_ic[lo_d]
        coefs = {}
        for k in range(pid[lo_d], pid[d] + 1):
            a, b = max(periods[k][0], lo_d), min(periods[k][1], d)
            coefs[k] = c_sl[b + 1] - c_sl[a]
        worst = const + sum(c * (lever.lo if c < 0 else lever.hi) for c in coefs.values())
        if worst <= allowed + 1e-9:
            continue
        over = m.add_variable(lb=0, ub=max(worst - allowed, 0.0) + 1.0, name=f"permit[{d}]")
        m.add_linear_constraint(const + sum((float(c) * r_var[k] for k, c in coefs.items()), 0.0) - over
                                <= allowed)
        terms.append(PERMIT_PENALTY_FACTOR * shortage_penalty * over)
    return terms


def _allowance_rows(m, allow, emitted: list, periods, period_month, emitted_most, shortage_penalty: float):
    """The holding of SO2 allowances period by period: opening + allocations + bought − sold
    − emitted, never below zero (a tonne short priced and reported); purchases (and, apart,
    sales) within the month's limit; bought at the period's first day's price, sold at its
    last day's, the holding left at the end credited at the last sell price.  Returns
    ((bought vars, sold vars), cost terms)."""
    from .lever import ALLOWANCE_SHORT_PENALTY_FACTOR

    P = len(periods)
    big = float(allow.opening_t + allow.allocated_t.sum() + np.sum(emitted_most)) + 1.0
    buys = [m.add_variable(lb=0, ub=big, name=f"buy[{k}]") for k in range(P)]
    sells = [m.add_variable(lb=0, ub=big, name=f"sell[{k}]") for k in range(P)]
    terms = []
    for j in np.unique(period_month):
        ks = np.flatnonzero(period_month == j)
        cap = allow.max_trade_t_per_month[periods[ks[0]][0]]
        if np.isfinite(cap):
            m.add_linear_constraint(sum((buys[k] for k in ks), 0.0) <= float(cap))
            m.add_linear_constraint(sum((sells[k] for k in ks), 0.0) <= float(cap))
    prev = float(allow.opening_t)
    for k, (a, b) in enumerate(periods):
        hold = m.add_variable(lb=-big, ub=big, name=f"hold[{k}]")
        short = m.add_variable(lb=0, ub=big, name=f"hold_short[{k}]")
        alloc = float(allow.allocated_t[a:b + 1].sum())
        m.add_linear_constraint(hold == prev + alloc + buys[k] - sells[k] - emitted[k])
        m.add_linear_constraint(hold + short >= 0)
        terms += [float(allow.buy_price[a]) * buys[k], -float(allow.sell_price[b]) * sells[k],
                  ALLOWANCE_SHORT_PENALTY_FACTOR * shortage_penalty * (b - a + 1) * short]
        prev = hold
    terms.append(-float(allow.sell_price[-1]) * prev)
    return (buys, sells), terms


def spread_to_days(scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane],
                   firm: dict[str, tuple[np.ndarray, np.ndarray]], periods: list[tuple[int, int]],
                   qty: dict[str, np.ndarray], solved: dict | None = None, lever=None) -> DailyPlan:
    """Turn per-period quantities into days: a daily period is its day; a weekly
    bucket's loads go to its open days, evenly spaced, within loads per day.  A period's
    removal holds on each of its days; allowances are bought on its first day and sold
    on its last."""
    n = len(scenario.dates)
    removal = bought = sold = None
    if solved is not None and solved.get("removal") is not None:
        removal = np.empty(n)
        for k, (a, b) in enumerate(periods):
            removal[a:b + 1] = solved["removal"][k]
        balance = balance.copy()
        for c in lever.intercept:
            balance[c] = lever.at(c, removal)
    if solved is not None and solved.get("bought") is not None:
        bought, sold = np.zeros(n), np.zeros(n)
        for k, (a, b) in enumerate(periods):
            bought[a] += solved["bought"][k]
            sold[b] += solved["sold"][k]
    out, booked = {}, {}
    for lane in lanes:
        f_loads = firm.get(lane.name, (np.zeros(n, int), None))[0]
        daily = np.zeros(n, dtype=int if lane.load_t else float)
        for k, (a, b) in enumerate(periods):
            q = qty[lane.name][k]
            if q <= 0:
                continue
            if a == b:
                daily[a] += q
                continue
            open_days = [d for d in range(a, b + 1) if lane.open[d]]
            if lane.load_t:
                cap = {d: max(lane.max_per_day - f_loads[d], 0) for d in open_days}
                left = int(q)
                while left > 0 and any(cap.values()):
                    k_days = [d for d in open_days if cap[d] > 0]
                    step = max(len(k_days) / left, 1.0)
                    picks = [k_days[int(i * step + step / 2) if int(i * step + step / 2) < len(k_days) else -1]
                             for i in range(min(left, len(k_days)))]
                    for d in picks:
                        if left and cap[d] > 0:
                            daily[d] += 1
                            cap[d] -= 1
                            left -= 1
            else:
                each = q / max(len(open_days), 1)
                for d in open_days:
                    daily[d] += min(each, lane.max_per_day)
        out[lane.name] = daily + (f_loads if lane.load_t else 0)
        if lane.load_t:
            booked[lane.name] = f_loads.copy()
    for store in ("gypsum", "fly_ash", "bottom_ash"):
        if store in scenario.storage:
            _never_ship_more_than_stock(scenario, balance, store, lanes, periods, out, booked)
    return DailyPlan(out, booked, removal, bought, sold)


def _never_ship_more_than_stock(scenario, balance, store, lanes, periods, qty, booked) -> None:
    """Within a weekly bucket, move departures that would ship more than is in the store
    to the next open day of the same bucket (or drop them at the bucket's end)."""
    n = len(balance)
    prod = balance[PRODUCTION[store]].to_numpy(float)
    outs = [l for l in lanes if l.material == store and l.kind != SUPPLY]
    end_of = np.empty(n, dtype=int)
    for a, b in periods:
        end_of[a:b + 1] = b
    level = scenario.storage[store].initial_t
    for d in range(n):
        level += prod[d]
        for lane in sorted(outs, key=lambda l: -l.cost_per_t):  # cut the dearest way out first
            t = qty[lane.name][d] * (lane.load_t or 1.0)
            level -= t
        for lane in sorted(outs, key=lambda l: -l.cost_per_t):
            if level >= -0.01:
                break
            fixed = booked.get(lane.name, np.zeros(n, int))[d] if lane.load_t else 0
            while level < -0.01 and qty[lane.name][d] > fixed:
                if lane.load_t:
                    qty[lane.name][d] -= 1
                    level += lane.load_t
                    move = 1
                else:
                    move = min(qty[lane.name][d], -level)
                    qty[lane.name][d] -= move
                    level += move
                later = [e for e in range(d + 1, end_of[d] + 1)
                         if lane.open[e] and qty[lane.name][e] + move <= lane.max_per_day + 1e-9]
                if later:
                    qty[lane.name][later[0]] += move
