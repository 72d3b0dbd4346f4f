"""The optimisation model: one MathOpt formulation, solved by CP-SAT, HiGHS or SCIP.

Decisions per period k (a day in the firm window, a week after it, cut at month ends so
that monthly contracts stay exact):

- n[l,k], whole loads per supplier lane (arrivals) and per buyer lane (departures),
  within the lane's open days (calendar, closures, lead time, quality eligibility) ×
  loads per day;
- t[l,k], landfill tonnes per site and material, within the daily limit and remaining
  airspace;
- r[k], the scrubber's removal, where the workbook gives a range (`lever.py`);
- buy[k], sell[k], SO2 allowances traded, where the station holds them.

Stores balance period by period.  Safety stock, capacity and contract minimums are soft
with the workbook's penalties, so a plan always comes back.  A second, guarded level
(`guard`: the extra cumulative demand or production of a high quantile of the sampled
futures over the deterministic balance) is held above safety and below capacity with the
same penalties: this is how the plan keeps the chance of breaking a limit under the
user's level.  Stock left at the end is credited (limestone, at its cheapest delivered
cost) or charged (byproducts, at their cheapest landfill cost).

The model is built by one function per constraint family, each adding its variables,
its named rows and its cost terms to a `Problem`, in a fixed order (`formulate`); the
penalty factors are in `penalties.py`.

References
----------
OR-Tools MathOpt, https://developers.google.com/optimization/math_opt (model API).
Silver, E. A., Pyke, D. F. and Thomas, D. J. (2016), *Inventory and Production
Management in Supply Chains*, 4th ed., CRC Press: inventory balance, safety stock
against a demand quantile.
Haverly, C. A. (1978), "Studies of the behavior of recursion for the pooling problem",
ACM SIGMAP Bulletin 25:19-28 (the silo's mix, linearised at the last plan).
"""

from __future__ import annotations

import dataclasses
import functools
import datetime as dt
import enum
import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from ortools.math_opt.python import mathopt
from ortools.math_opt.python.normalized_inequality import as_normalized_linear_inequality

from ..scenario import Scenario
from .evaluate import PRODUCTION, DailyPlan, shortfall_rate
from .lanes import LANDFILL, SALE, SUPPLY, Lane, cheapest_delivered_cost, cheapest_disposal_cost, horizon_months
from .penalties import (ALLOWANCE_SHORT_PENALTY_FACTOR, CHANGE_COST_PER_LOAD, EMPTY_PENALTY_FACTOR, GUARD_WEIGHT,
                        LATE_TRAIN_DAYS, PERMIT_MARGIN_FACTOR, PERMIT_PENALTY_FACTOR, SETPOINT_MOVE_SHARE,
                        SILO_SAFETY_MARGIN)
from .quality import SiloLots
from .terms import AllowanceTerms, end_caco3_value

SOLVERS = {"highs": mathopt.SolverType.HIGHS, "cp-sat": mathopt.SolverType.CP_SAT,
           "scip": mathopt.SolverType.GSCIP}

__all__ = ["CHANGE_COST_PER_LOAD", "GUARD_WEIGHT", "LATE_TRAIN_DAYS", "SILO_SAFETY_MARGIN", "SOLVERS",
           "PeriodSolution", "Problem", "SolveOutcome", "SolveStatus", "build_periods", "end_caco3_value",
           "formulate", "run_solver", "solve_plan", "spread_to_days"]


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


# ====================================================================== typed results


class SolveStatus(enum.Enum):
    """How a solve ended: MathOpt's termination reason, as the summary writes it."""

    OPTIMAL = "optimal"
    FEASIBLE = "feasible"
    IMPRECISE = "imprecise"
    NO_SOLUTION_FOUND = "no_solution_found"
    INFEASIBLE = "infeasible"
    UNBOUNDED = "unbounded"
    INFEASIBLE_OR_UNBOUNDED = "infeasible_or_unbounded"
    NUMERICAL_ERROR = "numerical_error"
    OTHER_ERROR = "other_error"

    @classmethod
    def of(cls, reason: mathopt.TerminationReason) -> "SolveStatus":
        return cls(reason.name.lower())


@dataclass
class PeriodSolution:
    """One solve of the model over its periods.

    quantity : per lane, loads (load lanes) or tonnes (landfill) per period, firm orders
        not included
    removal : the removal per period [%] where the plan chooses it, else None
    bought, sold : allowances traded per period [t SO2] (the net of the two), else None
    """

    status: SolveStatus
    objective: float
    bound: float
    gap: float
    quantity: dict[str, np.ndarray]
    removal: np.ndarray | None = None
    bought: np.ndarray | None = None
    sold: np.ndarray | None = None
    #: the wall-clock safety net ended the solve (not the work limit)
    clock_cut: bool = False


#: The seed every solver gets, so a re-run takes the same path through the search.
RANDOM_SEED = 20261203


@dataclass(frozen=True)
class WorkLimits:
    """Deterministic work a solve may do: branch-and-bound nodes [-] of the plan's solves, of
    the silo relaxation that gives the bound (0: its linear relaxation only) and of the
    daily placement of the outlook weeks, and the placement's relative gap [-].  Unlike a
    time limit, the same work gives the same plan on a quiet or a loaded machine (one
    thread, a fixed seed)."""

    nodes: int = 200
    bound_nodes: int = 0
    placement_nodes: int = 200
    placement_gap: float = 1e-3


@dataclass
class SolveOutcome:
    """The plan of `solve_plan` and how its (first) solve ended.

    ``state`` is the status as a `SolveStatus`; ``notes`` are what the planning around
    the solve adds (" (baseline kept: ...)"); ``status`` (also ``status_text``) is the two
    as one text, as the summary and older callers read it: assigning a text to it (or
    ``+=``) sets the state from its first word and keeps the rest as a note.
    """

    plan: DailyPlan
    solver: str
    state: SolveStatus
    objective: float
    bound: float
    gap: float
    solve_seconds: float
    notes: list[str] = field(default_factory=list)
    #: True when the wall-clock safety net, not the work limit, ended a solve: a re-run
    #: may then give another plan
    clock_cut: bool = False
    #: the plan's price where a caller priced it (`plan._plan_the_silo`) [money]
    price: float = float("nan")
    #: with an outlook in buckets solved with ``to_days=False``: places the buckets on
    #: their days later (`solve_plan`), so a caller that prices several plans in buckets
    #: places only the one it keeps
    place_days: object = field(default=None, repr=False, compare=False)

    @property
    def status_text(self) -> str:
        return self.state.value + "".join(self.notes)

    @property
    def status(self) -> str:
        return self.status_text

    @status.setter
    def status(self, text: str) -> None:
        for s in sorted(SolveStatus, key=lambda s: -len(s.value)):
            if text == s.value or text.startswith(s.value + " "):
                rest = text[len(s.value):]
                self.state, self.notes = s, [rest] if rest else []
                return
        raise ValueError(f"not a solve status: {text!r}")

    def add_note(self, note: str) -> None:
        """Add a note to the status text (starting with a space, e.g. " (...)")."""
        self.notes.append(note)


# ====================================================================== solving


def solve_plan(scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane],
               firm: dict[str, tuple[np.ndarray, np.ndarray]], guard: dict[str, np.ndarray],
               *, firm_days: int = 56, solver: str = "highs", time_limit: float = 60.0,
               gap: float = 5e-4, hint: DailyPlan | None = None,
               progress: bool = False, chem=None, around: DailyPlan | None = None,
               scale: float | None = None, fixed: dict | None = None,
               to_days: bool = True, lever=None, allow=None, keep: dict | None = None,
               change_cost: float = CHANGE_COST_PER_LOAD, late_days: int = LATE_TRAIN_DAYS,
               work: "WorkLimits | None" = None, silo_lots: bool = False,
               limestone_end_per_t: float | None = None, permit_guard: np.ndarray | None = None) -> SolveOutcome:
    """Solve the firm-window + weekly-outlook model, then place each outlook week's loads
    on its days with a daily model whose weekly totals are those of the first solve
    (arrivals exactly, sales at most, landfill free within its limits), so the daily
    levels that the outputs show are planned, not guessed.

    ``work`` bounds each solve by deterministic work (`WorkLimits`); ``time_limit`` [s] is
    then only a safety net, and `SolveOutcome.clock_cut` says when it cut in.
    ``silo_lots`` solves the silo's relaxation (`quality.SiloLots`) instead of the
    linearised silo; ``limestone_end_per_t`` [money/t of stone] values the limestone left;
    ``permit_guard`` per day, the futures' worse rolling SO2 over the plan's (`_permit`)."""
    work = work or WorkLimits()
    n = len(scenario.dates)
    t0 = time.perf_counter()
    periods = build_periods(scenario.dates, firm_days)
    lin = None
    if chem is not None and not silo_lots:
        if isinstance(around, tuple):
            lin = around  # the point itself: (u, j) per period, `quality.SiloChemistry.linearisation`
        else:
            lin = chem.linearisation(lanes, around if around is not None else hint, periods,
                                     _silo_floor(scenario))
    problem = Problem(scenario, balance, lanes, firm, guard, periods, solver, chem=chem, lin=lin,
                      lever=lever, allow=allow, fixed=fixed, keep=keep, change_cost=change_cost,
                      late_days=late_days, margin_days=firm_days, silo_lots=silo_lots,
                      limestone_end_per_t=limestone_end_per_t, permit_guard=permit_guard)
    first = solve_problem(problem, time_limit=time_limit, gap=gap, hint=hint, scale=scale,
                          progress=progress, label=f"plan ({solver})", node_limit=work.nodes)
    plan = spread_to_days(scenario, balance, lanes, firm, periods, first.quantity, first, lever)
    out = SolveOutcome(plan, solver, first.status, first.objective, first.bound, first.gap,
                       time.perf_counter() - t0, clock_cut=first.clock_cut)
    if len(periods) < n:
        out.place_days = functools.partial(_place_on_days, out, problem, first, work, time_limit, progress)
        if to_days:
            out.place_days()
    return out


class SiloSteps:
    """The successive solves of a silo's recursion (`plan._plan_the_silo`) on one model per
    solver, formulated once: each step moves the model's linearisation to its point
    (`relinearise`) and solves it, with loads relaxed to fractions (``node_limit`` 0) or
    whole.  The model each step solves is the one `solve_plan` would formulate for it, so
    a step gives the same plan; the rows are built once instead of once a step (on the
    365-day demo, about 0.45 s of Python a step)."""

    def __init__(self, scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane],
                 firm: dict[str, tuple[np.ndarray, np.ndarray]], guard: dict[str, np.ndarray], *, chem,
                 firm_days: int, lever=None, allow=None, keep: dict | None = None,
                 change_cost: float = CHANGE_COST_PER_LOAD, late_days: int = LATE_TRAIN_DAYS,
                 permit_guard: np.ndarray | None = None):
        self.periods = build_periods(scenario.dates, firm_days)
        self._problem = functools.partial(
            Problem, scenario, balance, lanes, firm, guard, self.periods, chem=chem, lever=lever, allow=allow,
            keep=keep, change_cost=change_cost, late_days=late_days, margin_days=firm_days,
            permit_guard=permit_guard)
        self._formulated: dict[str, tuple[Problem, list]] = {}

    def solve(self, point: tuple, *, solver: str, hint: DailyPlan | None, time_limit: float, gap: float,
              node_limit: int, scale: float | None = None, progress: bool = False) -> SolveOutcome:
        """One step: the model linearised at ``point`` (`quality.SiloChemistry.linearisation`)
        solved on ``solver`` within ``node_limit`` nodes (0: its linear relaxation),
        warm-started at ``hint``; its plan with buckets spread evenly (no placement)."""
        t0 = time.perf_counter()
        if solver not in self._formulated:
            p = formulate(self._problem(solver, lin=point))
            self._formulated[solver] = (p, [v for v in p.model.variables() if v.integer])
        else:
            relinearise(self._formulated[solver][0], point)
        p, integers = self._formulated[solver]
        for v in integers:
            v.integer = node_limit != 0
        first = solve_formulated(p, time_limit=time_limit, gap=gap, hint=hint, scale=scale, progress=progress,
                                 label=f"plan ({solver})", node_limit=node_limit)
        plan = spread_to_days(p.scenario, p.balance, p.lanes, p.firm, p.periods, first.quantity, first, p.lever)
        return SolveOutcome(plan, solver, first.status, first.objective, first.bound, first.gap,
                            time.perf_counter() - t0, clock_cut=first.clock_cut)


def _place_on_days(out: SolveOutcome, problem: "Problem", first: "PeriodSolution", work: "WorkLimits",
                   time_limit: float, progress: bool) -> SolveOutcome:
    """Place the outlook buckets of ``out`` (the solve of ``problem``) on their days: a
    daily model whose bucket totals are those of the first solve (arrivals exactly, sales
    at most, landfill free within its limits), solved to ``work.placement_gap``; its plan
    replaces ``out.plan`` (the even spread stays when no placement is found).  Once."""
    out.place_days = None
    t0 = time.perf_counter()
    sc, lanes = problem.scenario, problem.lanes
    daily = [(d, d) for d in range(len(sc.dates))]
    totals = {lane.name: [(a, b, first.quantity[lane.name][k]) for k, (a, b) in enumerate(problem.periods)
                          if b > a] for lane in lanes}
    left = max(time_limit - out.solve_seconds, 5.0)
    try:
        lin2 = (None if problem.chem is None or problem.silo_lots
                else problem.chem.linearisation(lanes, out.plan, daily, _silo_floor(sc)))
        second = solve_problem(dataclasses.replace(problem, periods=daily, lin=lin2, totals=totals),
                               time_limit=left, gap=work.placement_gap, hint=out.plan, progress=progress,
                               label="outlook to days", node_limit=work.placement_nodes)
        out.plan = spread_to_days(sc, problem.balance, lanes, problem.firm, daily, second.quantity, second,
                                  problem.lever)
        out.clock_cut = out.clock_cut or second.clock_cut
    except RuntimeError:
        pass  # keep the even spread of the bucket totals
    out.solve_seconds += time.perf_counter() - t0
    return out


def _silo_floor(scenario: Scenario) -> float:
    """Smallest silo CaCO3 [t] the linearisation divides by (a tenth of the safety stock,
    at least 1 t), so a nearly empty silo does not blow up the first-order term."""
    return max(0.1 * scenario.storage["limestone"].safety_t, 1.0)


def solve_problem(problem: "Problem", *, time_limit: float, gap: float, hint: DailyPlan | None = None,
                  scale: float | None = None, progress: bool = False, label: str = "solving",
                  node_limit: int | None = None) -> PeriodSolution:
    """Formulate ``problem``, solve it (warm-started at ``hint``) and read its solution;
    RuntimeError when the solver finds no plan in time."""
    formulate(problem)
    if node_limit == 0:
        # no search at all: the linear relaxation (whole loads and yes/no decisions
        # relaxed), whose optimum bounds the model's
        for v in problem.model.variables():
            if v.integer:
                v.integer = False
    return solve_formulated(problem, time_limit=time_limit, gap=gap, hint=hint, scale=scale, progress=progress,
                            label=label, node_limit=node_limit)


def solve_formulated(problem: "Problem", *, time_limit: float, gap: float, hint: DailyPlan | None = None,
                     scale: float | None = None, progress: bool = False, label: str = "solving",
                     node_limit: int | None = None) -> PeriodSolution:
    """Solve a formulated ``problem`` on its solver (`solve_problem`)."""
    result = run_solver(problem.model, problem.solver, time_limit=time_limit, gap=gap, scale=scale,
                        hints=None if hint is None else _hint_values(problem, hint),
                        progress=progress, label=label, node_limit=node_limit)
    if not result.has_primal_feasible_solution():
        raise RuntimeError(f"{problem.solver} found no plan in {time_limit:g} s ({result.termination.reason.name})")
    out = _read_solution(problem, result)
    if node_limit == 0 and out.status is SolveStatus.OPTIMAL:
        out.bound, out.gap = out.objective, 0.0  # the linear relaxation's optimum
    return out


def run_solver(model: mathopt.Model, solver: str, *, time_limit: float, gap: float,
               scale: float | None = None, hints: dict | None = None, progress: bool = False,
               label: str = "solving", node_limit: int | None = None) -> mathopt.SolveResult:
    """The one place the solver is called: its parameters, the warm start and the call.

    ``gap`` is the relative gap to stop at [-]; ``scale`` the plan's whole cost [money]
    with its constants (solvers that drop the objective's offset cannot see it), which
    makes the gap an absolute one too; ``hints`` a value per variable; ``node_limit`` the
    deterministic bound of the search (branch-and-bound nodes; CP-SAT: its deterministic
    time).  One thread and a fixed seed, so the same model gives the same answer on any
    machine; ``time_limit`` [s] is a safety net only."""
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
        params.absolute_gap_tolerance = 0.5 * gap * abs(scale)
    if solver == "cp-sat":
        params.cp_sat.mip_max_bound = 1e9
        if node_limit:
            # CP-SAT's own deterministic clock (about a second of work per unit)
            params.cp_sat.max_deterministic_time = max(node_limit / 50.0, 5.0)
    model_params = None
    if hints is not None:
        model_params = mathopt.ModelSolveParameters(solution_hints=[mathopt.SolutionHint(variable_values=hints)])
    with SolveProgress(progress, time_limit, label) as watch:
        kwargs = watch.solve_kwargs(solver)
        try:
            result = mathopt.solve(model, SOLVERS[solver], params=params, model_params=model_params, **kwargs)
        except Exception:  # a solver that refuses hints or callbacks
            result = mathopt.solve(model, SOLVERS[solver], params=params)
        watch.done(result)
    return result


def _hint_values(p: "Problem", hint: DailyPlan) -> dict:
    """The warm start: ``hint``'s quantities (firm orders taken out) summed per period,
    within each variable's bounds."""
    values = {}
    for lane in p.lanes:
        q = hint.quantity[lane.name] - (p.firm_loads(lane) if lane.load_t else 0)
        agg = p.per_period(np.asarray(q, float))
        for k, v in enumerate(p.x[lane.name]):
            if v is not None:
                values[v] = float(min(max(agg[k], 0), v.upper_bound))
    return values


def _read_solution(p: "Problem", result: mathopt.SolveResult) -> PeriodSolution:
    obj = result.objective_value()
    bound = result.termination.objective_bounds.dual_bound
    gap_ = abs(obj - bound) / max(abs(obj), 1.0) if np.isfinite(bound) else float("nan")
    values = result.variable_values()
    qty = {}
    for lane in p.lanes:
        per = np.array([0.0 if v is None else values[v] for v in p.x[lane.name]])
        if lane.load_t:
            per = np.rint(per).astype(int)
        qty[lane.name] = per
    out = PeriodSolution(SolveStatus.of(result.termination.reason), obj, bound, gap_, qty)
    out.clock_cut = bool(result.termination.reason != mathopt.TerminationReason.OPTIMAL
                         and result.termination.limit == mathopt.Limit.TIME)
    if p.r is not None:
        out.removal = np.array([values[v] for v in p.r])
    if p.trades is not None:
        # buying and selling in one period nets out (at equal prices the solver may do
        # both): keep the net, which holds the same and never costs more
        net = np.array([values[b] - values[s_] for b, s_ in zip(*p.trades)])
        out.bought, out.sold = np.clip(net, 0, None), np.clip(-net, 0, None)
    return out


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


# ====================================================================== the problem


@dataclass
class Problem:
    """The model of one solve: its inputs, and, as `formulate` builds it, the MathOpt model,
    its decision variables and its cost terms.

    Inputs: the scenario and its day ``balance``; the ``lanes``; ``firm`` orders per lane
    (loads and tonnes per day, constants of the plan); ``guard`` (per store, the extra
    cumulative demand or production of the guarded future per day [t]); the ``periods``
    ((first, last) day); the ``solver``'s name; ``chem`` and ``lin`` (the silo's mix and
    its linearisation, `quality.py`); ``lever`` (`lever.RemovalLever`) and ``allow``
    (`terms.AllowanceTerms`); ``totals`` (outlook-week sums of a first solve, for the
    daily solve); ``fixed`` (per lane, quantities decided already); ``keep`` (per lane,
    loads the previous plan held per day) with ``change_cost`` [money/load];
    ``late_days`` [d] and ``margin_days`` (the firm window) for the late-train margin.

    Symbols used in the families' docstrings: k a period, w_k its days [d], j a month,
    n[l,k] loads, t[l,k] tonnes of lane l, q_l its load [t/load], F[l,k] its firm tonnes,
    I[s,k] the level of store s after period k [t], S_s, C_s its safety stock and
    capacity [t], p_short, p_over the workbook's penalties [money/t per period-day].
    """

    scenario: Scenario
    balance: pd.DataFrame
    lanes: list[Lane]
    firm: dict[str, tuple[np.ndarray, np.ndarray]]
    guard: dict[str, np.ndarray]
    periods: list[tuple[int, int]]
    solver: str = "highs"
    chem: object | None = None
    lin: tuple | None = None
    lever: object | None = None
    allow: AllowanceTerms | None = None
    totals: dict | None = None
    fixed: dict | None = None
    keep: dict | None = None
    change_cost: float = CHANGE_COST_PER_LOAD
    late_days: int = LATE_TRAIN_DAYS
    margin_days: int | None = None
    silo_lots: bool = False
    limestone_end_per_t: float | None = None
    permit_guard: np.ndarray | None = None
    #: formulate into this MathOpt model (several stations' problems in one model,
    #: `reagentplan.fleet`) instead of one of its own: every variable and row name then
    #: starts with ``prefix`` and the objective is left in ``objective`` for the caller
    into: mathopt.Model | None = None
    prefix: str = ""
    # ---- built by formulate
    objective: object = field(init=False, default=None)
    model: mathopt.Model = field(init=False)
    pid: np.ndarray = field(init=False)
    days_in: np.ndarray = field(init=False)
    month_index: np.ndarray = field(init=False)
    months: list = field(init=False)
    period_month: np.ndarray = field(init=False)
    r: list | None = field(init=False, default=None)
    x: dict[str, list] = field(init=False, default_factory=dict)
    firm_t: dict[str, np.ndarray] = field(init=False, default_factory=dict)
    cost: list = field(init=False, default_factory=list)
    end_value: list = field(init=False, default_factory=list)
    quality_rows: list = field(init=False, default_factory=list)
    silo_after: dict = field(init=False, default_factory=dict)
    silo_inerts: list = field(init=False, default_factory=list)
    silo_draws: list = field(init=False, default_factory=list)
    gypsum_rows: dict = field(init=False, default_factory=dict)
    trades: tuple | None = field(init=False, default=None)
    lots: object | None = field(init=False, default=None)

    def __post_init__(self):
        n = self.n
        if self.margin_days is None:
            self.margin_days = n
        self.pid = np.empty(n, dtype=int)
        for k, (a, b) in enumerate(self.periods):
            self.pid[a:b + 1] = k
        self.days_in = np.array([b - a + 1 for a, b in self.periods], dtype=float)
        self.month_index, self.months, _ = horizon_months(self.scenario.dates)
        self.period_month = np.array([self.month_index[a] for a, _ in self.periods])
        self.model = mathopt.Model(name="reagentplan") if self.into is None else _Named(self.into, self.prefix)

    @property
    def n(self) -> int:
        return len(self.scenario.dates)

    @property
    def P(self) -> int:
        return len(self.periods)

    def per_period(self, values: np.ndarray) -> np.ndarray:
        """Day values summed per period."""
        return np.bincount(self.pid, weights=values, minlength=self.P)

    def firm_loads(self, lane: Lane) -> np.ndarray:
        """The lane's firm loads per day (zeros without firm orders)."""
        return self.firm.get(lane.name, (np.zeros(self.n, int), None))[0]

    def column(self, name: str, chem_array: np.ndarray | None = None) -> list:
        """Per period, a balance column: constants, or affine in the period's removal
        (intercept + slope × r[k], `lever.py`)."""
        if self.r is None:
            return [float(v) for v in self.per_period(self.balance[name].to_numpy(float) if chem_array is None
                                                       else chem_array)]
        ic, sl = self._affine(name, chem_array)
        icp, slp = self.per_period(ic), self.per_period(sl)
        return [float(icp[k]) + float(slp[k]) * self.r[k] for k in range(self.P)]

    def column_most(self, name: str, chem_array: np.ndarray | None = None) -> np.ndarray:
        """Per period, the most a column can be (at the range's end that makes most)."""
        if self.lever is None:
            return self.per_period(self.balance[name].to_numpy(float) if chem_array is None else chem_array)
        ic, sl = self._affine(name, chem_array)
        return self.per_period(np.maximum(ic + sl * self.lever.lo, ic + sl * self.lever.hi))

    def _affine(self, name: str, chem_array):
        if chem_array is not None:
            return self.lever.chem_affine(name, self.chem)
        return self.lever.intercept[name], self.lever.slope[name]

    def tonnes(self, lane: Lane, k: int):
        """Tonnes moved on ``lane`` in period k: firm F[l,k] + q_l n[l,k] (or t[l,k])."""
        v = self.x[lane.name][k]
        base = self.firm_t[lane.name][k]
        if v is None:
            return base
        return base + (lane.load_t * v if lane.load_t else v)

    def row(self, expr, name: str):
        """Add a named linear row."""
        return self.model.add_linear_constraint(expr, name=name)


class _Named:
    """A MathOpt model shared by several problems: the variables and rows one problem adds
    are named with its ``prefix`` (MathOpt refuses two of one name); the rest is the
    model's own."""

    def __init__(self, model: mathopt.Model, prefix: str):
        self._model, self._prefix = model, prefix

    def add_variable(self, *, lb: float = -np.inf, ub: float = np.inf, is_integer: bool = False, name: str = ""):
        return self._model.add_variable(lb=lb, ub=ub, is_integer=is_integer, name=self._prefix + name)

    def add_integer_variable(self, *, lb: float = -np.inf, ub: float = np.inf, name: str = ""):
        return self._model.add_integer_variable(lb=lb, ub=ub, name=self._prefix + name)

    def add_binary_variable(self, *, name: str = ""):
        return self._model.add_binary_variable(name=self._prefix + name)

    def add_linear_constraint(self, bounded_expr=None, *, lb=None, ub=None, expr=None, name: str = ""):
        return self._model.add_linear_constraint(bounded_expr, lb=lb, ub=ub, expr=expr, name=self._prefix + name)

    def __getattr__(self, attr):
        return getattr(self._model, attr)


def formulate(p: Problem) -> Problem:
    """Build the model of ``p``: its variables, one constraint family after another, and
    the objective, in a fixed order (the order is part of the model a solver sees).

    minimise  Σ lane costs + change cost + contract shortfalls + freight tiers
              + store penalties (empty, short, over, late train, guard)
              + permit excess + allowance trades and shortfall
              + end-stock value + firm orders' cost
    """
    _removal_variables(p)
    _setpoint_move(p)
    for lane in p.lanes:
        _lane_variables(p, lane)
        _change_cost(p, lane)
    _silo_quality_switches(p)
    _outlook_week_totals(p)
    for lane in p.lanes:
        for j in range(len(p.months)):
            _contract_month(p, lane, j)
            _freight_tier(p, lane, j)
    for ts in p.scenario.train_sets:
        _car_set(p, ts)
    _landfill_airspace(p)
    # limestone first: the gypsum made depends on the stone the silo feeds
    for store, st in sorted(p.scenario.storage.items(), key=lambda kv: kv[0] != "limestone"):
        _store_balance(p, store, st)
    _silo_quality(p)
    _permit(p)
    _allowances(p)
    _objective(p)
    return p


# ====================================================================== constraint families


def _removal_variables(p: Problem) -> None:
    """r[k] ∈ [r_lo, r_hi] [%], the scrubber's removal in period k, where the plan chooses
    it (`lever.RemovalLever`): every balance column is then intercept + slope × r[k]."""
    if p.lever is not None:
        p.r = [p.model.add_variable(lb=p.lever.lo, ub=p.lever.hi, name=f"r[{k}]") for k in range(p.P)]


def setpoint_move_rates(scenario: Scenario, lever, per_period, days_in) -> tuple[np.ndarray, np.ndarray]:
    """Per period, the setpoint R_k [%] (the mean of its days) and the cost c_k of a point
    away from it [money/%-point] (`_setpoint_move`); ``per_period`` sums day values."""
    setpoint = per_period(np.asarray(lever.setpoint, float)) / days_in
    per_point = per_period(np.abs(lever.slope["limestone_t"])) * cheapest_delivered_cost(scenario)
    return setpoint, SETPOINT_MOVE_SHARE * per_point


def _setpoint_move(p: Problem) -> None:
    """Setpoint: moving the removal away from the setpoint R_k [%] (the period's mean)
    costs c_k per %-point, up[k] ≥ r[k] − R_k, dn[k] ≥ R_k − r[k] (rows ``setpoint_up[k]``,
    ``setpoint_dn[k]``), c_k = `penalties.SETPOINT_MOVE_SHARE` × Σ_{d∈k} |∂stone_d/∂r| × the
    cheapest delivered stone [money/t] (`setpoint_move_rates`): the plan leaves the
    operators' setpoint only for a saving worth naming.  Only in the model (`evaluate`
    leaves it out)."""
    if p.r is None:
        return
    lever = p.lever
    setpoint, rate = setpoint_move_rates(p.scenario, lever, p.per_period, p.days_in)
    for k in range(p.P):
        c = float(rate[k])
        if c <= 0:
            continue
        up = p.model.add_variable(lb=0, ub=lever.hi - lever.lo, name=f"up[{k}]")
        dn = p.model.add_variable(lb=0, ub=lever.hi - lever.lo, name=f"dn[{k}]")
        p.row(up >= p.r[k] - float(setpoint[k]), f"setpoint_up[{k}]")
        p.row(dn >= float(setpoint[k]) - p.r[k], f"setpoint_dn[{k}]")
        p.cost.append(c * (up + dn))


def _lane_variables(p: Problem, lane: Lane) -> None:
    """Loads n[l,k] ∈ {0, ..., Σ_{d∈k, open} (L_l − firm loads_d)} of a load lane, or tonnes
    t[l,k] ∈ [0, Σ_{d∈k, open} min(T_l, made, A_l)] of a landfill lane (L_l loads per day,
    T_l [t/d] its daily limit, A_l [t] its airspace, made [t] all the store can ever hold);
    cost c_l n[l,k] with c_l = q_l × cost per tonne + cost per load [money/load], or
    cost per tonne × t[l,k].  A ``fixed`` lane's quantities are pinned (the stone of a plan
    whose byproducts are planned again)."""
    n, m = p.n, p.model
    f_loads, f_t = p.firm.get(lane.name, (np.zeros(n, int), np.zeros(n)))
    p.firm_t[lane.name] = p.per_period(f_t)
    if lane.load_t:
        daily_cap = np.where(lane.open, np.maximum(lane.max_per_day - f_loads, 0), 0)
        ub = p.per_period(daily_cap.astype(float))
        p.x[lane.name] = [m.add_integer_variable(lb=0, ub=float(ub[k]), name=f"n[{lane.name},{k}]")
                          if ub[k] > 0 else None for k in range(p.P)]
        unit_cost = lane.cost_per_t * lane.load_t + lane.cost_per_load
    else:
        made = p.balance[PRODUCTION[lane.material]].to_numpy(float).sum()
        made += p.scenario.storage[lane.material].initial_t if lane.material in p.scenario.storage else 0.0
        cap = np.where(lane.open, min(lane.max_per_day, made), 0.0)  # finite for CP-SAT
        cap = np.minimum(cap, lane.airspace_t)
        ub = p.per_period(cap)
        p.x[lane.name] = [m.add_variable(lb=0, ub=float(ub[k]), name=f"t[{lane.name},{k}]")
                          if ub[k] > 0 else None for k in range(p.P)]
        unit_cost = lane.cost_per_t
    if p.fixed and lane.name in p.fixed:
        q = p.per_period(np.asarray(p.fixed[lane.name], float) - f_loads)
        for k, v in enumerate(p.x[lane.name]):
            if v is not None:
                v.lower_bound = v.upper_bound = float(max(q[k], 0.0))
    p.cost += [unit_cost * v for v in p.x[lane.name] if v is not None]


def _change_cost(p: Problem, lane: Lane) -> None:
    """Change cost: for a day k of the firm window where the previous plan held H[l,k]
    loads (not booked), moved[l,k] ≥ H[l,k] − n[l,k], 0 ≤ moved[l,k] ≤ H[l,k] [loads],
    priced at ``change_cost`` [money/load] (`penalties.CHANGE_COST_PER_LOAD`).
    Rows ``keep[l,k]``."""
    if not (p.keep and lane.name in p.keep and lane.load_t):
        return
    held = p.keep[lane.name]
    for k, (a, b) in enumerate(p.periods):
        if a != b or a >= len(held) or held[a] <= 0:
            continue
        v = p.x[lane.name][k]
        gone = p.model.add_variable(lb=0, ub=float(held[a]), name=f"moved[{lane.name},{k}]")
        p.row(gone >= float(held[a]) - (v if v is not None else 0.0), f"keep[{lane.name},{k}]")
        p.cost.append(p.change_cost * gone)


def _silo_quality_switches(p: Problem) -> None:
    """Silo quality, the switch: a gypsum buyer l with a purity limit ships in month j
    only if z[l,j] = 1 (binary), n[l,k] ≤ ub(n[l,k]) z[l,j] (rows ``ship_if[l,k]``); in
    those months the silo's stone must be good enough (`_silo_quality`).  A period
    whose tightest u_max (stone per CaCO3 the buyer's purity allows, [t/t]) is below the
    linearisation's range ships nothing; one above it needs no switch."""
    if p.chem is None:
        return
    chem = p.chem
    for lane in p.lanes:
        limit = getattr(lane.source, "min_purity_pct", None)
        if lane.kind != SALE or lane.material != "gypsum" or limit is None:
            continue
        u_max = chem.u_max(limit, margin=not p.silo_lots)
        z_month = {}
        for k, v in enumerate(p.x[lane.name]):
            if v is None:
                continue
            a, b = p.periods[k]
            um = float(np.min(u_max[a:b + 1]))
            if um >= chem.u_hi:
                continue
            if um < chem.u_lo:
                v.upper_bound = 0.0
                continue
            j = int(p.period_month[k])
            if j not in z_month:
                z_month[j] = p.model.add_binary_variable(name=f"q[{lane.name},{j}]")
            p.row(v <= v.upper_bound * z_month[j], f"ship_if[{lane.name},{k}]")
            p.quality_rows.append((k, um, z_month[j]))


def _outlook_week_totals(p: Problem) -> None:
    """Daily solve only: the outlook weeks' totals Q[l,w] of the first solve hold,
    Σ_{k∈w} n[l,k] = Q[l,w] for arrivals, ≤ Q[l,w] for sales; landfill stays free day by
    day (the way out that is always there).  Rows ``week[l,a]`` (a: the week's first day)."""
    if not p.totals:
        return
    for lane in p.lanes:
        for a, b, q in p.totals[lane.name]:
            terms = [v for v in p.x[lane.name][a:b + 1] if v is not None]
            if not terms:
                continue
            if lane.kind == SUPPLY:
                p.row(sum(terms, 0.0) == float(q), f"week[{lane.name},{a}]")
            elif lane.kind == SALE:
                p.row(sum(terms, 0.0) <= float(q) + 1e-6, f"week[{lane.name},{a}]")


def _contract_month(p: Problem, lane: Lane, j: int) -> None:
    """Contract months: Σ_{k∈j} tonnes[l,k] ≤ max(M_hi[l,j], firm tonnes of the month)
    (firm orders are kept as given; row ``contract_max[l,j]``) and
    Σ_{k∈j} tonnes[l,k] + short[l,j] ≥ M_lo[l,j] (row ``contract_min[l,j]``), the
    shortfall [t] priced at the contract's rate (`evaluate.shortfall_rate`, [money/t])."""
    ks = np.flatnonzero(p.period_month == j)
    total = sum((p.tonnes(lane, k) for k in ks), 0.0)
    hi, lo = lane.month_max_t[j], lane.month_min_t[j]
    if not np.isnan(hi) and not isinstance(total, float):
        booked = float(sum(p.firm_t[lane.name][k] for k in ks))
        p.row(total <= max(hi, booked), f"contract_max[{lane.name},{j}]")
    if not np.isnan(lo) and lo > 0:
        short = p.model.add_variable(lb=0, ub=lo, name=f"cshort[{lane.name},{j}]")
        p.row(total + short >= lo, f"contract_min[{lane.name},{j}]")
        p.cost.append(shortfall_rate(lane) * short)


def _freight_tier(p: Problem, lane: Lane, j: int) -> None:
    """Freight tiers: a supplier's loads above N (``tier_loads_per_month``) in month j ride
    at the tier rate f_T instead of f [money/load].  With N_j = Σ n[l,k] + firm loads,
    U its most, binary z and extra[l,j] ∈ [0, U − N]:
    extra ≤ (U − N) z (``tier_on[l,j]``), extra ≤ N_j − N + N (1 − z) (``tier_loads[l,j]``);
    cost (f_T − f) × extra.  No row when the month cannot reach the tier."""
    n_tier = getattr(lane.source, "tier_loads_per_month", None)
    if lane.kind != SUPPLY or n_tier is None:
        return
    ks = np.flatnonzero(p.period_month == j)
    xs = p.x[lane.name]
    f_loads = p.firm_loads(lane)
    loads = sum((xs[k] for k in ks if xs[k] is not None), 0.0)
    loads = loads + float(sum(f_loads[p.pid == k].sum() for k in ks))
    most_loads = float(sum(xs[k].upper_bound for k in ks if xs[k] is not None))
    most_loads += float(sum(f_loads[p.pid == k].sum() for k in ks))
    if most_loads > n_tier:
        m = p.model
        extra = m.add_variable(lb=0, ub=most_loads - n_tier, name=f"tier[{lane.name},{j}]")
        z = m.add_binary_variable(name=f"tierz[{lane.name},{j}]")
        p.row(extra <= (most_loads - n_tier) * z, f"tier_on[{lane.name},{j}]")
        p.row(extra <= loads - n_tier + (n_tier + 0.0) * (1 - z), f"tier_loads[{lane.name},{j}]")
        p.cost.append((float(lane.source.tier_freight_per_load) - lane.cost_per_load) * extra)


def window_period_sets(periods: list[tuple[int, int]], window_days: int, n: int):
    """Each distinct set of whole periods inside a window of ``window_days`` days starting
    on a day d, once, as (d, period indices): the periods a car set's window row sums."""
    starts = np.array([a for a, _ in periods])
    ends = np.array([b for _, b in periods])
    seen = set()
    for d in range(n):
        inside = tuple(np.flatnonzero((starts >= d) & (ends <= d + window_days - 1)))
        if inside and inside not in seen:
            seen.add(inside)
            yield d, inside


def _car_set(p: Problem, ts) -> None:
    """Car sets (train sets): the lanes sharing a set bring at most N_T trains in any
    W consecutive days: for every distinct group K of periods lying inside a W-day window,
    Σ_{l∈set, k∈K} n[l,k] ≤ max(N_T, B_K) − B_K, B_K the firm trains of those periods
    (rows ``train_set[set,d]``, d the window's first day); a bucket longer than W days
    takes at most N_T ⌈w_k / W⌉ (``train_set_bucket[set,k]``)."""
    n = p.n
    members = [l for l in p.lanes if l.kind == SUPPLY and getattr(l.source, "train_set", None) == ts.train_set]
    if not members:
        return
    starts = np.array([a for a, _ in p.periods])
    ends = np.array([b for _, b in p.periods])
    for d, inside in window_period_sets(p.periods, ts.window_days, n):
        terms = [p.x[l.name][k] for l in members for k in inside if p.x[l.name][k] is not None]
        booked_loads = float(sum(p.firm_loads(l)[starts[k]:ends[k] + 1].sum() for l in members for k in inside))
        if terms:
            p.row(sum(terms, 0.0) <= max(ts.max_trains, booked_loads) - booked_loads,
                  f"train_set[{ts.train_set},{d}]")
    for k, (a, b) in enumerate(p.periods):
        length = b - a + 1
        if length > ts.window_days:
            terms = [p.x[l.name][k] for l in members if p.x[l.name][k] is not None]
            if terms:
                p.row(sum(terms, 0.0) <= ts.max_trains * int(np.ceil(length / ts.window_days)),
                      f"train_set_bucket[{ts.train_set},{k}]")


def _landfill_airspace(p: Problem) -> None:
    """Landfill airspace: each landfill lane (a site and a material) takes at most its
    remaining airspace A_l [t] over the horizon, Σ_k t[l,k] + F_l ≤ A_l (F_l its firm
    tonnes), for every lane with a finite airspace, whatever else the station has (row
    ``airspace[l]``).  No row where the lane's bounds already keep it (Σ_k ub(t[l,k]) ≤
    A_l − F_l): the row could never bind."""
    for lane in p.lanes:
        if lane.kind != LANDFILL or not np.isfinite(lane.airspace_t):
            continue
        terms = [v for v in p.x[lane.name] if v is not None]
        room = max(float(lane.airspace_t) - float(p.firm_t[lane.name].sum()), 0.0)
        if terms and sum(v.upper_bound for v in terms) > room + 1e-9:
            p.row(sum(terms, 0.0) <= room, f"airspace[{lane.name}]")


def _store_balance(p: Problem, store: str, st) -> None:
    """Store balance: I[s,k] = I[s,k−1] + Σ_in tonnes[l,k] − Σ_out tonnes[l,k] + flow[s,k]
    (row ``balance[s,k]``), flow the period's production [t] (byproducts) or minus its
    use [t] (limestone, with unmet[k] ≥ 0 [t] the scrubber needed and the silo did not
    have, priced at `penalties.EMPTY_PENALTY_FACTOR` × p_short); a mixed silo balances
    its tonnes and its CaCO3 (`_silo_period`).  Each period adds the soft limits
    (`_safety_and_capacity`), the late-train margin (`_late_train_margin`) and the guard
    (`_guard`); the level left at the end is valued (`_end_stock_value`).
    0 ≤ I[s,k] ≤ most [t], a finite bound every level can keep (CP-SAT needs it)."""
    m, chem, P = p.model, p.chem, p.P
    pen = p.scenario.plant
    silo = chem is not None and store == "limestone"
    if store == "limestone":
        flow_terms = [-t for t in p.column("limestone_t")]
        flow = -p.column_most("limestone_t")
        ins = [l for l in p.lanes if l.kind == SUPPLY]
        outs = []
    else:
        flow_terms = p.column(PRODUCTION[store])
        flow = p.column_most(PRODUCTION[store])
        ins = []
        outs = [l for l in p.lanes if l.material == store and l.kind != SUPPLY]
    if chem is not None and store == "gypsum":
        flow_terms, flow = _gypsum_from_silo(p)
    g = p.guard.get(store)
    g_end = np.zeros(P) if g is None else np.array([g[b] for _, b in p.periods])
    if store == "limestone":
        # a plan never holds more than capacity plus two days of the most that can
        # arrive (beyond it, buying less is always cheaper); firm orders may force more
        day_in = sum(l.max_per_day * l.load_t for l in ins)
        most = max(st.capacity_t, st.initial_t) + sum(p.firm_t[l.name].sum() for l in ins) + 2 * day_in
    else:
        most = st.initial_t + float(flow.sum())
    most = max(most, st.capacity_t, st.safety_t) + float(g_end.max(initial=0.0))
    demand_total = float(-flow.sum()) if store == "limestone" else 0.0
    prev = round(st.initial_t) if p.solver == "cp-sat" else st.initial_t
    margin = 3.0 if p.solver == "cp-sat" else 0.0  # room for the rounding to whole tonnes
    safety, capacity = st.safety_t + margin, st.capacity_t - margin
    prev_j = need = None
    if silo:
        if p.silo_lots:
            p.lots = SiloLots(m, chem, p.lanes, st.initial_t, most)
        else:
            # room for the fixed ratio of inerts drawn: the replayed silo may draw a
            # little more (or less) stone than the linearised model did, so its level is
            # kept that share inside both limits (on the demo, without the capacity side,
            # the chosen stone overflowed the silo by 426-515 t on two outlook days)
            safety += SILO_SAFETY_MARGIN * st.safety_t
            capacity -= SILO_SAFETY_MARGIN * st.capacity_t
        need = (p.column("need", chem.need), p.column_most("need", chem.need))
        prev_j = st.initial_t * chem.initial_caco3
        p.silo_inerts.clear()
        p.silo_draws.clear()
    for k in range(P):
        level = m.add_variable(lb=0, ub=most, name=f"I[{store},{k}]")
        moved = sum((p.tonnes(l, k) for l in ins), 0.0) - sum((p.tonnes(l, k) for l in outs), 0.0)
        if silo and p.silo_lots:
            _silo_lots_period(p, k, level, ins, need)
        elif silo:
            prev_j = _silo_period(p, k, level, prev, prev_j, moved, ins, most, need)
        elif store == "limestone":
            unmet = m.add_variable(lb=0, ub=max(demand_total, 1.0), name=f"unmet[{k}]")
            p.row(level == prev + moved + flow_terms[k] + unmet, f"balance[{store},{k}]")
            p.cost.append(EMPTY_PENALTY_FACTOR * pen.shortage_penalty_per_t * unmet)
        else:
            con = p.row(level == prev + moved + flow_terms[k], f"balance[{store},{k}]")
            if chem is not None and store == "gypsum" and not p.silo_lots:
                p.gypsum_rows[k] = (con, level, prev, moved)
        _safety_and_capacity(p, store, st, k, level, safety, capacity, most)
        if store == "limestone":
            _late_train_margin(p, k, level, ins, safety, most)
        _guard(p, store, k, level, float(g_end[k]), safety, capacity, most)
        prev = level
    _end_stock_value(p, store, prev, prev_j)


def _gypsum_from_silo(p: Problem) -> tuple[list, np.ndarray]:
    """The gypsum made where the silo's mix is modelled, per period [t wet]: wet cake =
    (cake without stone inerts + the inerts drawn with the scrubber's share of the CaCO3)
    / (1 − moisture), the inerts drawn being those of the silo (`_silo_period`).
    Returns (the flow per period, the most it can make per period)."""
    chem, P = p.chem, p.P
    base_terms = p.column("cake_base_wet", chem.cake_base * chem.wet_factor)
    share = p.per_period(chem.need_gypsum * chem.wet_factor) / np.maximum(p.per_period(chem.need), 1e-9)
    flow_expr = [base_terms[k] + float(share[k]) * p.silo_inerts[k] for k in range(P)]
    flow = p.per_period(chem.cake_base * chem.wet_factor + chem.need_gypsum * chem.wet_factor
                        * (chem.u_hi - 1.0))
    if p.lever is not None:
        flow = (p.column_most("cake_base_wet", chem.cake_base * chem.wet_factor)
                + p.column_most("need_gypsum", chem.need_gypsum) * p.per_period(chem.wet_factor)
                / p.days_in * (chem.u_hi - 1.0))
    return flow_expr, flow


def _silo_period(p: Problem, k: int, level, prev, prev_j, moved, ins: list[Lane], most: float,
                 need: tuple[list, np.ndarray]):
    """Silo quality, the well-mixed silo in period k: tonnes I' = I[k−1] + arrivals and
    CaCO3 J' = J[k−1] + Σ c_l tonnes[l,k] after the deliveries (c_l the lane's CaCO3
    fraction); the CaCO3 drawn is the need N_k [t], the inerts drawn with it N_k ρ_k, with
    ρ_k = u_k − 1 the inerts per CaCO3 fixed at the last plan's replayed silo (Haverly's
    recursion): I[k] = I' − N_k (1 + ρ_k) + (1 + ρ_k) unmet[k] (``balance[limestone,k]``),
    J[k] = J' − N_k + unmet[k] (``silo_caco3[k]``), unmet priced at
    `penalties.EMPTY_PENALTY_FACTOR` × p_short per tonne of stone.  ``need``: N per period
    and its most.  Returns J[k]."""
    m, chem = p.model, p.chem
    need_terms, need_most = need
    u_lin, _ = p.lin
    caco3_in = sum((chem.lane_caco3[l.name] * p.tonnes(l, k) for l in ins), 0.0)
    i_after, j_after = prev + moved, prev_j + caco3_in
    unmet = m.add_variable(lb=0, ub=max(float(need_most.sum()), 1.0), name=f"unmet[{k}]")
    parts = SiloDraw(None, level, i_after, need_terms[k], unmet, len(p.cost))
    row, cost, inerts = _silo_draw(p, parts, float(u_lin[k]) - 1.0)
    parts.row = p.row(row, f"balance[limestone,{k}]")
    j_level = m.add_variable(lb=0, ub=most, name=f"J[{k}]")
    p.row(j_level == j_after - need_terms[k] + unmet, f"silo_caco3[{k}]")
    p.cost.append(cost)
    p.silo_inerts.append(inerts)
    p.silo_draws.append(parts)
    p.silo_after[k] = (i_after, j_after, most, prev, prev_j)
    return j_level


@dataclass
class SiloDraw:
    """What period k's stone drawn from the silo is made of (`_silo_period`), kept so the
    linearisation can be moved in place (`relinearise`): its row ``balance[limestone,k]``,
    the level I[k], the tonnes after the deliveries I', the CaCO3 need N_k, unmet[k] and
    the index of unmet's cost term in ``Problem.cost``."""

    row: object
    level: object
    after: object
    need: object
    unmet: object
    cost_index: int


def _silo_draw(p: Problem, d: SiloDraw, rho: float):
    """At ρ inerts per CaCO3 [t/t]: the row I[k] = I' − N_k − N_k ρ + (1 + ρ) unmet[k], the
    cost of unmet[k] (`penalties.EMPTY_PENALTY_FACTOR` × p_short per tonne of stone) and
    the inerts drawn N_k ρ [t]."""
    inerts = d.need * rho
    row = d.level == d.after - d.need - inerts + (1.0 + rho) * d.unmet
    cost = EMPTY_PENALTY_FACTOR * p.scenario.plant.shortage_penalty_per_t * (1.0 + rho) * d.unmet
    return row, cost, inerts


def relinearise(p: Problem, lin: tuple) -> None:
    """Move a formulated problem's silo linearisation to ``lin`` (per period the stone per
    CaCO3 u_k [t/t] and the CaCO3 [t], `quality.SiloChemistry.linearisation`) in place:
    the rows ``balance[limestone,k]`` and ``balance[gypsum,k]`` and unmet's cost are set
    to what `formulate` builds at ``lin``; nothing else depends on it, so the model is the
    one a new formulation would give (`tests/test_schedule.py` compares the two), without
    building the rest again (a successive solve of the silo, `plan._plan_the_silo`)."""
    p.lin = lin
    u_lin, _ = lin
    for k, d in enumerate(p.silo_draws):
        row, cost, inerts = _silo_draw(p, d, float(u_lin[k]) - 1.0)
        _set_row(d.row, row)
        p.cost[d.cost_index] = cost
        p.model.objective.set_linear_coefficient(d.unmet, mathopt.as_flat_linear_expression(cost).terms[d.unmet])
        p.silo_inerts[k] = inerts
    flow_terms, _ = _gypsum_from_silo(p)
    for k, (con, level, prev, moved) in p.gypsum_rows.items():
        _set_row(con, level == prev + moved + flow_terms[k])


def _set_row(con, bounded) -> None:
    """Set a row's bounds and coefficients to those of ``bounded`` (a linear (in)equality)."""
    norm = as_normalized_linear_inequality(bounded)
    old = {t.variable for t in con.terms()}
    con.lower_bound, con.upper_bound = norm.lb, norm.ub
    for v, c in norm.coefficients.items():
        con.set_coefficient(v, c)
    for v in old.difference(norm.coefficients):
        con.set_coefficient(v, 0.0)


def _silo_lots_period(p: Problem, k: int, level, ins: list[Lane], need: tuple[list, np.ndarray]) -> None:
    """The silo's relaxation in period k (`quality.SiloLots`): each stone a lot of its own,
    the scrubber fed any blend that carries the period's CaCO3 need N_k [t]; unmet[k]
    [t CaCO3] priced at `penalties.EMPTY_PENALTY_FACTOR` × p_short × u_lo (the fewest
    tonnes of stone a tonne of CaCO3 can come in, so the relaxation never prices it
    above the well-mixed model)."""
    need_terms, need_most = need
    unmet = p.model.add_variable(lb=0, ub=max(float(need_most.sum()), 1.0), name=f"unmet[{k}]")
    inerts = p.lots.period(k, level, {l.name: p.tonnes(l, k) for l in ins}, need_terms[k], unmet)
    p.cost.append(EMPTY_PENALTY_FACTOR * p.scenario.plant.shortage_penalty_per_t * p.chem.u_lo * unmet)
    p.silo_inerts.append(inerts)


def _safety_and_capacity(p: Problem, store: str, st, k: int, level, safety: float, capacity: float,
                         most: float) -> None:
    """Soft limits of a store in period k: short[s,k] + I[s,k] ≥ S_s (``safety[s,k]``, where
    the store has a safety stock, and always for limestone) and I[s,k] − over[s,k] ≤ C_s
    (``capacity[s,k]``); short and over [t] priced at p_short w_k and p_over w_k."""
    m, pen, w = p.model, p.scenario.plant, p.days_in[k]
    if st.safety_t > 0 or store == "limestone":
        short = m.add_variable(lb=0, ub=st.safety_t + 1.0, name=f"short[{store},{k}]")
        p.row(short + level >= safety, f"safety[{store},{k}]")
        p.cost.append(pen.shortage_penalty_per_t * w * short)
    over = m.add_variable(lb=0, ub=most, name=f"over[{store},{k}]")
    p.row(level - over <= capacity, f"capacity[{store},{k}]")
    p.cost.append(pen.overflow_penalty_per_t * w * over)


def _late_train_margin(p: Problem, k: int, level, ins: list[Lane], safety: float, most: float) -> None:
    """Late-train margin: on a day d of the firm window, the silo less the rail tonnes of
    the last D = ``late_days`` days (any of which may not have come yet) stays above
    safety: I[d] − Σ_{t=d−D+1..d} rail tonnes[t] + late[d] ≥ S (``late_train[k]``), late [t]
    at `penalties.GUARD_WEIGHT` × p_short."""
    a, b = p.periods[k]
    if not (p.late_days > 0 and a == b and a < p.margin_days):
        return
    d, pid, periods = a, p.pid, p.periods
    late = sum((p.tonnes(l, int(pid[t])) for l in ins if l.mode == "rail"
                for t in range(max(d - p.late_days + 1, 0), d + 1)
                if periods[int(pid[t])][0] == periods[int(pid[t])][1]), 0.0)
    if isinstance(late, float) and late == 0.0:
        return
    lg = p.model.add_variable(lb=0, ub=most, name=f"late[{k}]")
    p.row(level - late + lg >= safety, f"late_train[{k}]")
    p.cost.append(GUARD_WEIGHT * p.scenario.plant.shortage_penalty_per_t * lg)


def _guard(p: Problem, store: str, k: int, level, g_k: float, safety: float, capacity: float,
           most: float) -> None:
    """Guard: the level of a worse future (the guarded quantile's extra cumulative demand
    or production G[s,k] [t]) kept inside the limits: limestone I[k] + gs[k] ≥ S + G[k],
    byproducts I[s,k] − gs[s,k] ≤ C_s − G[s,k] (``guard[s,k]``); gs [t] at
    `penalties.GUARD_WEIGHT` × p_short w_k (or p_over w_k)."""
    if not g_k > 0:
        return
    pen, w = p.scenario.plant, p.days_in[k]
    gs = p.model.add_variable(lb=0, ub=most, name=f"guard[{store},{k}]")
    if store == "limestone":
        p.row(gs + level >= safety + g_k, f"guard[{store},{k}]")
        p.cost.append(GUARD_WEIGHT * pen.shortage_penalty_per_t * w * gs)
    else:
        p.row(level - gs <= capacity - g_k, f"guard[{store},{k}]")
        p.cost.append(GUARD_WEIGHT * pen.overflow_penalty_per_t * w * gs)


def _end_stock_value(p: Problem, store: str, last, last_j) -> None:
    """The stock left at the end: limestone credited at its cheapest delivered cost
    [money/t] (per tonne of CaCO3 J[K] where the silo's mix is modelled,
    `terms.end_caco3_value`), byproducts charged at their cheapest disposal [money/t]."""
    if store == "limestone" and p.chem is not None:
        p.end_value.append(-end_caco3_value(p.scenario, p.chem) * (p.lots.caco3_left() if p.silo_lots else last_j))
        return
    if store == "limestone":
        # ``limestone_end_per_t``: a silo of known mix, valued by the CaCO3 in its stone
        value = -(cheapest_delivered_cost(p.scenario) if p.limestone_end_per_t is None else p.limestone_end_per_t)
    else:
        value = cheapest_disposal_cost(p.scenario, store)
    p.end_value.append(value * last)


def _silo_quality(p: Problem) -> None:
    """Silo quality, the purity rows: a gypsum sale in period k needs stone per CaCO3 in
    the silo, I'/J', at most u_max (the buyer's purity limit), exact in the silo's own
    tonnes: I' − u_max J' ≤ (u_hi − u_max) most (1 − z) (``purity[i]``); a week's first
    days draw the silo as it was before the week's deliveries, so a week also holds it
    for I[k−1], J[k−1] (``purity_before[i]``)."""
    chem = p.chem
    for i, (k, um, z) in enumerate(p.quality_rows):
        if p.silo_lots:
            p.lots.purity_row(k, um, z, p.periods[k][0] == p.periods[k][1])
            continue
        i_after, j_after, most_t, i_before, j_before = p.silo_after[k]
        p.row(i_after - um * j_after <= (chem.u_hi - um) * most_t * (1 - z), f"purity[{i}]")
        if p.periods[k][1] > p.periods[k][0]:
            p.row(i_before - um * j_before <= (chem.u_hi - um) * most_t * (1 - z), f"purity_before[{i}]")


def permit_days(lever, periods, pid, margin: float, guard: np.ndarray | None):
    """The permit's rows, day by day (`_permit`): (d, allowed [t], constant [t], {period:
    coefficient [t/%-point]}, worst [t] at the removal that emits most, margin line [t],
    guard g_d [-])."""
    n = len(pid)
    D = lever.avg_days
    ic, sl = lever.intercept["so2_emitted_t"], lever.slope["so2_emitted_t"]
    c_ic, c_sl = np.r_[0.0, np.cumsum(ic)], np.r_[0.0, np.cumsum(sl)]
    c_heat = np.r_[0.0, np.cumsum(lever.heat_gj)]
    g_all = np.ones(n) if guard is None else np.maximum(np.asarray(guard, float), 1.0)
    for d in range(n):
        lo_d = max(0, d - D + 1)
        allowed = lever.limit_kg_per_gj * (c_heat[d + 1] - c_heat[lo_d]) / 1000.0
        const = c_ic[d + 1] - c_ic[lo_d]
        coefs = {}
        for k in range(pid[lo_d], pid[d] + 1):
            a, b = max(periods[k][0], lo_d), min(periods[k][1], d)
            coefs[k] = c_sl[b + 1] - c_sl[a]
        worst = const + sum(c * (lever.lo if c < 0 else lever.hi) for c in coefs.values())
        yield d, allowed, const, coefs, worst, (1.0 - margin) * allowed, float(g_all[d])


def _permit(p: Problem) -> None:
    """Permit: where the plan chooses the removal, for each day d the SO2 emitted over the
    averaging period D ending on d (affine in the removals r[k] of the periods it spans),
    E_d(r) = Σ_{t=d−D+1..d} (a_t + b_t r[k(t)]) [t], is held

    - under the limit E [kg/GJ] × their heat input H [GJ] / 1000, plus a priced excess:
      E_d(r) − permit[d] ≤ E H / 1000 (``permit[d]``), permit [t] at
      `penalties.PERMIT_PENALTY_FACTOR` × p_short;
    - under the compliance margin m (``so2_limit_margin_pct``), also in the guarded worse
      future (g_d ≥ 1: the futures' (1 − risk level) quantile of the rolling emissions over
      the plan's own, ``permit_guard``): g_d E_d(r) − margin[d] ≤ (1 − m) E H / 1000
      (``permit_margin[d]``), margin [t] at `penalties.PERMIT_MARGIN_FACTOR` × p_short.

    Days that keep a row even at the worst removal get no row (`permit_days`)."""
    lever = p.lever
    if p.r is None or lever.limit_kg_per_gj is None:
        return
    penalty = p.scenario.plant.shortage_penalty_per_t
    margin = permit_margin(p.scenario)
    # the emissions summed from the first day, S[d] = S[d−1] + a_d + b_d r[k(d)] (rows
    # ``so2_sum[d]``), so each rolling sum is S[d] − S[d−D]: two terms a row, not D
    ic, sl = lever.intercept["so2_emitted_t"], lever.slope["so2_emitted_t"]
    most = float(np.sum(np.maximum(ic + sl * lever.lo, ic + sl * lever.hi))) + 1.0
    cum, prev = [], 0.0
    for d in range(p.n):
        v = p.model.add_variable(lb=-most, ub=most, name=f"so2_sum[{d}]")
        p.row(v == prev + float(ic[d]) + float(sl[d]) * p.r[int(p.pid[d])], f"so2_sum[{d}]")
        cum.append(v)
        prev = v
    for d, allowed, const, coefs, worst, line, g in permit_days(lever, p.periods, p.pid, margin, p.permit_guard):
        lo_d = max(0, d - lever.avg_days + 1)
        emitted = cum[d] - (cum[lo_d - 1] if lo_d > 0 else 0.0)
        if worst > allowed + 1e-9:
            over = p.model.add_variable(lb=0, ub=max(worst - allowed, 0.0) + 1.0, name=f"permit[{d}]")
            p.row(emitted - over <= allowed, f"permit[{d}]")
            p.cost.append(PERMIT_PENALTY_FACTOR * penalty * over)
        if (margin > 0 or g > 1.0) and g * worst > line + 1e-9:
            inside = p.model.add_variable(lb=0, ub=max(g * worst - line, 0.0) + 1.0, name=f"margin[{d}]")
            p.row(g * emitted - inside <= line, f"permit_margin[{d}]")
            p.cost.append(PERMIT_MARGIN_FACTOR * penalty * inside)


def permit_margin(scenario: Scenario) -> float:
    """The plant's compliance margin as a fraction [-]."""
    return float(getattr(scenario.plant, "so2_limit_margin_pct", 0.0) or 0.0) / 100


def lever_cost_at(scenario: Scenario, lever, periods, removal_per_period: np.ndarray,
                  permit_guard: np.ndarray | None = None) -> float:
    """What the removal's families (`_setpoint_move`, `_permit`) add to the objective at a
    removal fixed per period [%] [money]: the objective of a plan solved at that removal
    without the lever (the byproducts at the chosen stone) plus this is the objective the
    lever's model gives the same plan, so the two compare with one bound."""
    if lever is None:
        return 0.0
    n = len(scenario.dates)
    pid = np.empty(n, dtype=int)
    for k, (a, b) in enumerate(periods):
        pid[a:b + 1] = k
    days_in = np.array([b - a + 1 for a, b in periods], dtype=float)
    r = np.asarray(removal_per_period, dtype=float)
    setpoint, rate = setpoint_move_rates(scenario, lever, lambda v: np.bincount(pid, weights=v, minlength=len(periods)),
                                         days_in)
    total = float(np.sum(rate * np.abs(r - setpoint)))
    if lever.limit_kg_per_gj is None:
        return total
    penalty = scenario.plant.shortage_penalty_per_t
    margin = permit_margin(scenario)
    for d, allowed, const, coefs, worst, line, g in permit_days(lever, periods, pid, margin, permit_guard):
        emitted = const + sum(c * r[k] for k, c in coefs.items())
        if worst > allowed + 1e-9:
            total += PERMIT_PENALTY_FACTOR * penalty * max(emitted - allowed, 0.0)
        if (margin > 0 or g > 1.0) and g * worst > line + 1e-9:
            total += PERMIT_MARGIN_FACTOR * penalty * max(g * emitted - line, 0.0)
    return total


def _allowances(p: Problem) -> None:
    """Allowances: the holding of SO2 allowances period by period,
    hold[k] = hold[k−1] + allocated_k + buy[k] − sell[k] − emitted_k (``allowance[k]``),
    never below zero: hold[k] + hold_short[k] ≥ 0 (``allowance_short[k]``), the shortfall
    [t] at `penalties.ALLOWANCE_SHORT_PENALTY_FACTOR` × p_short w_k; purchases (and,
    apart, sales) within the monthly limit in force: at the end of each period k the
    month's trades so far are at most the smallest limit L_k in force on k's days,
    Σ_{i≤k, i in k's month} buy[i] ≤ L_k (``trade_buy[k]``, ``trade_sell[k]``; a row only
    where no later period of the month has a limit as small, `month_to_date_limits`);
    bought at the period's first day's price, sold at
    its last day's [money/t]; the holding left at the end, hold[K] = held − owed
    (``allowance_end``), credited at the last sell price s_K and a shortfall bought at the
    last buy price b_K: −s_K held + b_K owed (`terms.allowance_end_value`; b_K ≥ s_K, so
    the solver never holds both)."""
    allow = p.allow
    if allow is None:
        return
    m, periods, period_month = p.model, p.periods, p.period_month
    emitted = p.column("so2_emitted_t")
    emitted_most = p.column_most("so2_emitted_t")
    penalty = p.scenario.plant.shortage_penalty_per_t
    P = p.P
    big = float(allow.opening_t + allow.allocated_t.sum() + np.sum(emitted_most)) + 1.0
    buys = [m.add_variable(lb=0, ub=big, name=f"buy[{k}]") for k in range(P)]
    sells = [m.add_variable(lb=0, ub=big, name=f"sell[{k}]") for k in range(P)]
    for k, cap in month_to_date_limits(allow, periods, period_month):
        ks = [i for i in range(k + 1) if period_month[i] == period_month[k]]
        p.row(sum((buys[i] for i in ks), 0.0) <= cap, f"trade_buy[{k}]")
        p.row(sum((sells[i] for i in ks), 0.0) <= cap, f"trade_sell[{k}]")
    prev = float(allow.opening_t)
    for k, (a, b) in enumerate(periods):
        hold = m.add_variable(lb=-big, ub=big, name=f"hold[{k}]")
        short = m.add_variable(lb=0, ub=big, name=f"hold_short[{k}]")
        alloc = float(allow.allocated_t[a:b + 1].sum())
        p.row(hold == prev + alloc + buys[k] - sells[k] - emitted[k], f"allowance[{k}]")
        p.row(hold + short >= 0, f"allowance_short[{k}]")
        p.cost += [float(allow.buy_price[a]) * buys[k], -float(allow.sell_price[b]) * sells[k],
                   ALLOWANCE_SHORT_PENALTY_FACTOR * penalty * (b - a + 1) * short]
        prev = hold
    # the holding left at the end: credited at the last sell price, a shortfall bought at
    # the last buy price (as `terms.allowance_end_value` prices it)
    end_held = m.add_variable(lb=0, ub=big, name="hold_end_held")
    end_owed = m.add_variable(lb=0, ub=big, name="hold_end_owed")
    p.row(end_held - end_owed == prev, "allowance_end")
    p.cost += [-float(allow.sell_price[-1]) * end_held, float(allow.buy_price[-1]) * end_owed]
    p.trades = (buys, sells)


def month_to_date_limits(allow: AllowanceTerms, periods: list[tuple[int, int]],
                         period_month: np.ndarray) -> list[tuple[int, float]]:
    """(period, limit [t]) pairs of the monthly trade limit: the smallest limit in force on
    the period's days (NaN: none), kept only where no later period of the same month has
    a limit at most as large (a later, smaller limit on the month-to-date total implies
    it)."""
    out = []
    later_min: dict[int, float] = {}
    for k in range(len(periods) - 1, -1, -1):
        a, b = periods[k]
        vals = np.asarray(allow.max_trade_t_per_month[a:b + 1], float)
        vals = vals[np.isfinite(vals)]
        if not len(vals):
            continue
        cap, j = float(vals.min()), int(period_month[k])
        if cap < later_min.get(j, np.inf):
            out.append((k, cap))
            later_min[j] = cap
    return out[::-1]


def _objective(p: Problem) -> None:
    """minimise Σ cost terms + Σ end-stock values + the firm orders' cost (a constant:
    firm orders are part of the plan's cost)."""
    booked = 0.0
    for lane in p.lanes:
        if lane.name in p.firm:
            f_loads, f_t = p.firm[lane.name]
            booked += lane.cost_per_t * f_t.sum() + lane.cost_per_load * f_loads.sum()
    p.objective = sum(p.cost, 0.0) + sum(p.end_value, 0.0) + float(booked)
    if p.into is None:
        p.model.minimize(p.objective)


# ====================================================================== days


def spread_to_days(scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane],
                   firm: dict[str, tuple[np.ndarray, np.ndarray]], periods: list[tuple[int, int]],
                   qty: dict[str, np.ndarray], solved: PeriodSolution | None = None, lever=None) -> DailyPlan:
    """Turn per-period quantities into days: a daily period is its day; a weekly
    bucket's loads go to its open days, evenly spaced, within loads per day.  A period's
    removal holds on each of its days; allowances are bought on its first day and sold
    on its last."""
    n = len(scenario.dates)
    removal = bought = sold = None
    if solved is not None and solved.removal is not None:
        removal = np.empty(n)
        for k, (a, b) in enumerate(periods):
            removal[a:b + 1] = solved.removal[k]
        balance = balance.copy()
        for c in lever.intercept:
            balance[c] = lever.at(c, removal)
    if solved is not None and solved.bought is not None:
        bought, sold = np.zeros(n), np.zeros(n)
        for k, (a, b) in enumerate(periods):
            bought[a] += solved.bought[k]
            sold[b] += solved.sold[k]
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
