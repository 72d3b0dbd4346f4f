"""A whole rehearsal: K sampled futures taken as the truth, each played once following
the optimised plan and once following the reorder-point policy."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from ..errors import Problem, ScenarioError
from ..scenario import Scenario, load_scenario
from .loop import POLICIES, rehearse_policy
from .metrics import COST_CAUSES, months_over_max, policy_figures
from .truth import TRUE_FLOWS, Disturbances, worlds_from_futures


@dataclass
class RehearsalResult:
    """``table``: one row per policy × future (`policy_figures`); ``runs``: the
    `PolicyRun` of each row; ``settings``: what was rehearsed."""

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


def _check(scenario: Scenario, weeks: int, futures: int, lookahead_days: int, firm_days: int,
           d: Disturbances, plan_futures: int = 0) -> None:
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


def rehearse(workbook: str | Path, *, weeks: int = 16, futures: int = 20, seed: int = 0,
             lookahead_days: int = 120, firm_days: int = 14, time_limit: float = 20.0,
             solver: str = "highs", disturbances: Disturbances = Disturbances(),
             plan_futures: int = 0, policies=POLICIES, progress: bool = False, scenario: Scenario | None = None) -> RehearsalResult:
    """Rehearse ``weeks`` weeks of the weekly loop on ``futures`` sampled futures
    (seeded by ``seed``) for each policy; each weekly plan guarded by ``plan_futures``
    futures of its own (0: none).  Raises `ScenarioError` for bad settings."""
    import time

    from ..forecast import sample_futures

    scenario = at_setpoint(scenario or load_scenario(workbook))
    _check(scenario, weeks, futures, lookahead_days, firm_days, disturbances, plan_futures)
    t0 = time.perf_counter()
    fut = sample_futures(scenario, futures, seed=seed, keep=tuple(TRUE_FLOWS.values()))
    worlds = worlds_from_futures(fut, scenario.storage)
    t_sample = time.perf_counter() - t0
    bar = None
    if progress:
        from tqdm import tqdm

        bar = tqdm(total=len(worlds) * len(policies) * weeks, unit="week", desc="rehearsal")
    rows, runs = [], []
    try:
        for w in worlds:
            for policy in policies:
                if bar is not None:
                    bar.set_postfix_str(f"future {w.index + 1}/{len(worlds)} {policy}")
                run = rehearse_policy(workbook, scenario, w, policy, weeks=weeks, disturbances=disturbances,
                                      seed=seed, lookahead_days=lookahead_days, firm_days=firm_days,
                                      time_limit=time_limit, solver=solver,
                                      plan_futures=plan_futures, on_week=(lambda _w: bar.update(1)) if bar is not None else None)
                runs.append(run)
                rows.append(policy_figures(scenario, run))
    finally:
        if bar is not None:
            bar.close()
    total = time.perf_counter() - t0
    plan_s = sum(r.plan_seconds for r in runs)
    settings = {"workbook": Path(workbook).name, "weeks": weeks, "futures": futures, "seed": seed,
                "lookahead_days": lookahead_days, "firm_days": firm_days, "time_limit": time_limit,
                "solver": solver, "plan_futures": plan_futures, "start_date": f"{scenario.plant.start_date:%Y-%m-%d}",
                "removal": "fixed at the setpoint (the truth is sampled at it; a removal range and "
                           "allowances are left out)",
                "currency": scenario.plant.currency, **disturbances.as_dict()}
    return RehearsalResult(pd.DataFrame(rows), runs, settings,
                           {"total": round(total, 2), "sampling": round(t_sample, 2),
                            "planning": round(plan_s, 2), "carrying_out_and_record": round(total - t_sample - plan_s, 2)})


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
    lines.append(f"  time: {result.seconds.get('total', 0):.0f} s (planning {result.seconds.get('planning', 0):.0f} s)")
    return "\n".join(lines)
