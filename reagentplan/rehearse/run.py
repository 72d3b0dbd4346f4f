"""A whole rehearsal: K sampled futures taken as the truth, each played once following
the optimised plan and once following the reorder-point policy."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from ..errors import Problem, ScenarioError
from ..scenario import Scenario, load_scenario
from ..settings import WEEKLY_PLAN, PlanSettings
from .loop import POLICIES, rehearse_policy
from .guard import GuardFutures
from .metrics import COST_CAUSES, months_over_max, policy_figures
from .truth import TRUE_FLOWS, Disturbances, worlds_from_futures

@dataclass
class RehearsalResult:
    """``table``: one row per policy × future (`policy_figures`); ``runs``: the
    `PolicyRun` of each row; ``settings``: what was rehearsed; ``seconds``: the wall
    time (``total``), the futures' sampling, and the time every run spent planning and
    carrying out (summed over the workers, so with several they add to more than the
    wall time) [s]."""

    table: pd.DataFrame
    runs: list = field(repr=False, default_factory=list)
    settings: dict = field(default_factory=dict)
    seconds: dict = field(default_factory=dict)

    def summary(self) -> dict:
        """Per policy: median and P90 realised cost, median cost by cause, the share of
        futures with no stockout and no overflow, and the median nervousness."""
        out = {}
        for policy, g in self.table.groupby("policy", sort=False):
            clean = (g["stockout_days"] == 0) & (g["overflow_days"] == 0)
            out[policy] = {
                "realised_cost_p50": round(float(g["realised_cost"].median()), 2),
                "realised_cost_p90": round(float(g["realised_cost"].quantile(0.9)), 2),
                "controllable_cost_p50": round(float(g["controllable_cost"].median()), 2),
                "costs_p50": {k: round(float(g[f"cost_{k}"].median()), 2) for k in COST_CAUSES},
                "share_clean": round(float(clean.mean()), 4),
                "days_under_safety_p50": float(g["days_under_safety"].median()),
                "stockout_futures": int((g["stockout_days"] > 0).sum()),
                "overflow_futures": int((g["overflow_days"] > 0).sum()),
                "nervousness_p50": float(g["nervousness"].median()),
                "months_over_max": int(g["months_over_max"].sum()),
            }
        if set(POLICIES) <= set(out):
            p, b = out["plan"], out["baseline"]
            base_ctrl = abs(b["controllable_cost_p50"]) or 1.0
            out["saving_p50"] = round(b["realised_cost_p50"] - p["realised_cost_p50"], 2)
            out["saving_share_of_controllable"] = round(out["saving_p50"] / base_ctrl, 4)
        return out


def _check(scenario: Scenario, weeks: int, futures: int, lookahead_days: int, settings: PlanSettings,
           d: Disturbances, workers: int = 1) -> None:
    firm_days, plan_futures, risk_level = settings.firm_days, settings.futures, settings.risk_level
    problems = []
    def bad(option, found, expected):
        problems.append(Problem(None, None, option, f"found {found}", expected))
    if not 1 <= weeks <= 104:
        bad("--weeks", weeks, "a whole number of weeks from 1 to 104")
    if not 1 <= futures <= 1000:
        bad("--futures", futures, "a whole number of futures from 1 to 1000")
    if not 7 <= lookahead_days <= 1096:
        bad("--lookahead-days", lookahead_days, "a whole number of days from 7 to 1096")
    if not 0 <= plan_futures <= 10000:
        bad("--plan-futures", plan_futures, "a whole number of futures from 0 to 10000")
    if not 0 < risk_level < 0.5:
        bad("--risk-level", f"{100 * risk_level:g} %", "a percentage above 0 and below 50")
    if not 1 <= workers <= 64:
        bad("--workers", workers, "a whole number of processes from 1 to 64")
    if not 7 <= firm_days:
        bad("--firm-days", firm_days, "at least 7 days (a week is carried out day by day)")
    need = 7 * weeks + lookahead_days
    if scenario.plant.horizon_days < need:
        bad("--weeks", weeks, f"weeks × 7 + lookahead ({need} days) within the workbook's horizon of "
            f"{scenario.plant.horizon_days} days (plant.horizon_days), or fewer weeks / a shorter lookahead")
    for option, v, hi in (("--late-chance", d.late_chance, 1), ("--partial-chance", d.partial_chance, 1),
                          ("--partial-share", d.partial_share, 1), ("--survey-error", d.survey_sd, 0.5)):
        if not 0 <= v <= hi:
            bad(option, f"{100 * v:g} %", f"a percentage from 0 to {100 * hi:g}")
    if not 0 <= d.late_max_days <= 14:
        bad("--late-days", d.late_max_days, "a whole number of days from 0 to 14")
    if problems:
        raise ScenarioError(problems, "The rehearsal's options")


def at_setpoint(scenario: Scenario) -> Scenario:
    """The scenario with the scrubber's removal fixed at its setpoint and no allowance
    market: the futures the rehearsal takes as the truth are sampled at the setpoint, and
    the weekly loop it carries out books stone and byproducts, not removal or allowances,
    so a plan that chose another removal would be judged against the wrong stone use."""
    import dataclasses

    if scenario.scrubber.removal_range is None and scenario.allowances is None:
        return scenario
    scrub = dataclasses.replace(scenario.scrubber, removal_min_pct=None, removal_max_pct=None)
    return dataclasses.replace(scenario, scrubber=scrub, allowances=None)


def _play(job: dict):
    """One policy in one world (a worker's task): its `PolicyRun` and its figures.
    ``job["queue"]``, when set, receives one item per week played."""
    import time

    q = job.pop("queue", None)
    scenario = job["scenario"]
    t0 = time.perf_counter()
    run = rehearse_policy(on_week=(lambda _w: q.put(1)) if q is not None else None, **job)
    return run, policy_figures(scenario, run), time.perf_counter() - t0


def rehearse(workbook: str | Path, *, weeks: int = 16, futures: int = 20, seed: int = 0,
             lookahead_days: int = 120, settings: PlanSettings = WEEKLY_PLAN,
             disturbances: Disturbances = Disturbances(), policies=POLICIES, progress: bool = False,
             scenario: Scenario | None = None, workers: int = 1) -> RehearsalResult:
    """Rehearse ``weeks`` weeks of the weekly loop on ``futures`` sampled futures
    (seeded by ``seed``) for each policy.  Each weekly plan is made with ``settings``
    (`reagentplan.settings.WEEKLY_PLAN` by default) and guarded by ``settings.futures``
    futures sampled once from a seed of their own and cut to its days (`GuardFutures`;
    0: none) at ``settings.risk_level`` (``settings.seed`` is not used: the guard's seed
    follows ``seed``).  ``workers`` processes play the
    futures at once (each future's two policies are independent of the others'); they
    are spawned, so a script calling this with ``workers`` > 1 needs the
    ``if __name__ == "__main__":`` guard.  Raises `ScenarioError` for bad settings."""
    import time

    from ..forecast import sample_futures

    scenario = at_setpoint(scenario or load_scenario(workbook))
    _check(scenario, weeks, futures, lookahead_days, settings, disturbances, workers)
    t0 = time.perf_counter()
    fut = sample_futures(scenario, futures, seed=seed, keep=tuple(TRUE_FLOWS.values()))
    worlds = worlds_from_futures(fut, scenario.storage)
    guard = GuardFutures.sample(scenario, settings.futures, seed)
    t_sample = time.perf_counter() - t0
    jobs = [dict(workbook=workbook, scenario=scenario, world=w, policy=policy, weeks=weeks,
                 disturbances=disturbances, seed=seed, lookahead_days=lookahead_days, settings=settings,
                 guard=guard if policy == "plan" else None)
            for w in worlds for policy in policies]
    bar = None
    if progress:
        from tqdm import tqdm

        bar = tqdm(total=len(jobs) * weeks, unit="week", desc="rehearsal")
    done: dict[int, tuple] = {}
    try:
        if workers <= 1 or len(jobs) == 1:
            for i, job in enumerate(jobs):
                if bar is not None:
                    bar.set_postfix_str(f"future {job['world'].index + 1}/{len(worlds)} {job['policy']}")
                done[i] = _play(dict(job, queue=_BarQueue(bar) if bar is not None else None))
        else:
            done = _play_in_processes(jobs, workers, bar)
    finally:
        if bar is not None:
            bar.close()
    runs = [done[i][0] for i in range(len(jobs))]
    rows = [done[i][1] for i in range(len(jobs))]
    total = time.perf_counter() - t0
    plan_s = sum(r.plan_seconds for r in runs)
    settings = {"workbook": Path(workbook).name, "weeks": weeks, "futures": futures, "seed": seed,
                "lookahead_days": lookahead_days, "firm_days": settings.firm_days,
                "time_limit": settings.time_limit, "solver": settings.solver,
                "plan_futures": settings.futures, "risk_level": settings.risk_level, "workers": workers,
                "start_date": f"{scenario.plant.start_date:%Y-%m-%d}",
                "removal": "fixed at the setpoint (the truth is sampled at it; a removal range and "
                           "allowances are left out)",
                "currency": scenario.plant.currency, **disturbances.as_dict()}
    return RehearsalResult(pd.DataFrame(rows), runs, settings,
                           {"total": round(total, 2), "sampling": round(t_sample, 2),
                            "planning": round(plan_s, 2),
                            "carrying_out_and_record": round(sum(d[2] for d in done.values()) - plan_s, 2)})


class _BarQueue:
    """The in-process stand-in for a worker's queue: a week played moves the bar."""

    def __init__(self, bar):
        self.bar = bar

    def put(self, n: int) -> None:
        self.bar.update(n)


def _ignore_interrupt() -> None:
    """A worker leaves Ctrl-C to the parent, which stops the workers itself."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _play_in_processes(jobs: list[dict], workers: int, bar) -> dict[int, tuple]:
    """Play the jobs in ``workers`` fresh processes (spawned: the solver's threads do not
    survive a fork); the bar moves as the workers report their weeks.  On Ctrl-C or a
    worker's error the workers are stopped at once, not after the jobs already queued."""
    import multiprocessing as mp
    import queue as queue_mod
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    ctx = mp.get_context("spawn")
    done: dict[int, tuple] = {}
    with ctx.Manager() as manager:
        pool = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_ignore_interrupt)
        q = manager.Queue() if bar is not None else None
        pending = {pool.submit(_play, dict(job, queue=q)): i for i, job in enumerate(jobs)}
        try:
            while pending:
                finished, _ = wait(pending, timeout=0.5, return_when=FIRST_COMPLETED)
                if q is not None:
                    while True:
                        try:
                            bar.update(q.get_nowait())
                        except queue_mod.Empty:
                            break
                for f in finished:
                    done[pending.pop(f)] = f.result()
        except BaseException:
            for proc in list(getattr(pool, "_processes", {}).values()):
                proc.terminate()
            pool.shutdown(wait=False, cancel_futures=True)
            raise
        pool.shutdown(wait=True)
    return done


__all__ = ["RehearsalResult", "rehearse", "months_over_max"]


def describe_rehearsal(result: RehearsalResult) -> str:
    """The console summary: per policy the realised cost, its causes, risk and
    nervousness, and the plan's saving against the baseline."""
    from .metrics import COST_CAUSES

    s, cfg = result.summary(), result.settings
    cur = cfg.get("currency", "")
    lines = [f"Rehearsal: {cfg['weeks']} weeks x {cfg['futures']} futures from {cfg['start_date']} "
             f"(lookahead {cfg['lookahead_days']} d, firm {cfg['firm_days']} d); late trains "
             f"{cfg['late_chance']:.0%} up to {cfg['late_max_days']} d, partial takes {cfg['partial_chance']:.0%} "
             f"at {cfg['partial_share']:.0%}, survey error {cfg['survey_sd']:.1%}",
             f"  each weekly plan guarded by {cfg.get('plan_futures', 0)} futures at a "
             f"{cfg.get('risk_level', 0):.1%} daily risk level; the stone fed follows the silo's mix",
             f"  {'median cost by cause [' + cur + ']':<34}{'plan':>14}{'baseline':>14}"]
    pols = [p for p in POLICIES if p in s]
    for k in COST_CAUSES:
        lines.append(f"  {k:<34}" + "".join(f"{s[p]['costs_p50'][k]:>14,.0f}" for p in pols))
    lines.append(f"  {'realised cost P50':<34}" + "".join(f"{s[p]['realised_cost_p50']:>14,.0f}" for p in pols))
    lines.append(f"  {'realised cost P90':<34}" + "".join(f"{s[p]['realised_cost_p90']:>14,.0f}" for p in pols))
    for label, key, fmt in (("futures with no stockout/overflow", "share_clean", "{:>14.0%}"),
                            ("futures with a stockout", "stockout_futures", "{:>14d}"),
                            ("futures with an overflow", "overflow_futures", "{:>14d}"),
                            ("days under safety P50", "days_under_safety_p50", "{:>14.0f}"),
                            ("nervousness P50 (firm changes)", "nervousness_p50", "{:>14.0f}"),
                            ("contract months over maximum", "months_over_max", "{:>14d}")):
        lines.append(f"  {label:<34}" + "".join(fmt.format(s[p][key]) for p in pols))
    if "saving_p50" in s:
        verdict = "cheaper" if s["saving_p50"] > 0 else "dearer"
        lines.append(f"  The plan came out {abs(s['saving_p50']):,.0f} {cur} {verdict} than the reorder-point "
                     f"rule at the median ({abs(s['saving_share_of_controllable']):.1%} of the rule's "
                     "controllable cost).")
    workers = cfg.get("workers", 1)
    lines.append(f"  time: {result.seconds.get('total', 0):.0f} s wall with {workers} worker{'s' if workers > 1 else ''} "
                 f"(planning {result.seconds.get('planning', 0):.0f} s of worker time)")
    return "\n".join(lines)
