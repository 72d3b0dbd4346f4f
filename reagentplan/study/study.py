"""A study end to end: grid -> shared futures -> cases on the cluster -> table, winner.

`prepare_study` does everything that can fail on bad input (reading the workbook, the
grid and its validation, the number of futures) before anything runs; `run_study`
runs the cases and picks the winner; `reagentplan.output.study.write_study` writes the
files.  The CLI calls these three and prints.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

import pandas as pd

from ..errors import Problem, ScenarioError
from ..forecast.futures import DriverSamples, sample_drivers
from ..pipeline import PlanRun
from ..workbook import read_raw
from .cluster import StudyRun, run_on_cluster
from .grid import MAX_CASES, Grid, build_grid
from .results import Winner, pick_winner, study_frame
from ..settings import STUDY, PlanSettings
from .run import plan_case

#: Most futures a study shares (they are held by every worker) [-].
MAX_STUDY_FUTURES = 100_000


@dataclass
class StudyResult:
    """A finished (or interrupted) study."""

    grid: Grid
    shared: DriverSamples
    settings: PlanSettings
    run: StudyRun
    frame: pd.DataFrame
    winner: Winner
    winner_run: PlanRun | None
    winner_note: str = ""
    case_timeout: float | None = None  # wall-clock limit of a whole case [s]; None = none

    @property
    def labels(self) -> dict[int, str]:
        return {c.case: c.label(self.grid.specs) for c in self.grid.cases}


def prepare_study(workbook: str | os.PathLike | BinaryIO | bytes, specs: list[str], *,
                  futures: int = STUDY.futures, seed: int = STUDY.seed, max_cases: int = MAX_CASES
                  ) -> tuple[Grid, DriverSamples]:
    """Read the workbook, build and validate the grid, and sample the shared futures
    (of the drivers, from the workbook as it is).

    Raises
    ------
    ScenarioError
        The workbook, a ``--vary`` or ``--futures`` is bad (see `build_grid`).
    """
    if isinstance(futures, bool) or int(futures) != futures or not 1 <= futures <= MAX_STUDY_FUTURES:
        raise ScenarioError(Problem(None, None, "--futures", f"found {futures!r}",
                                    f"a whole number of futures from 1 to {MAX_STUDY_FUTURES:,} "
                                    "(a study compares its cases over the same futures)"))
    raw = read_raw(workbook)
    name = Path(os.fspath(workbook)).name if isinstance(workbook, (str, os.PathLike)) else "upload"
    grid = build_grid(raw, specs, source_name=name, max_cases=max_cases)
    shared = sample_drivers(grid.base, int(futures), seed=seed)
    return grid, shared


def run_study(grid: Grid, shared: DriverSamples, settings: PlanSettings = STUDY, *,
              case_timeout: float | None = None, cluster: str = "local", workers: int | None = None, progress: bool = True,
              on_start=None, winner_plan: bool = True, dashboard: bool = True) -> StudyResult:
    """Run every case (on ``cluster``: ``local``, a scheduler address or ``serial``),
    tabulate them and pick the winner within ``settings.risk_level``; the winner is
    planned once more here (the same inputs give the same plan) for its plan folder.
    ``case_timeout``: see `reagentplan.study.run.run_case`."""
    run = run_on_cluster(grid.cases, shared, settings, cluster=cluster, workers=workers, dashboard=dashboard,
                         case_timeout=case_timeout, progress=progress, on_start=on_start)
    frame = study_frame(grid, run.rows)
    labels = {c.case: c.label(grid.specs) for c in grid.cases}
    winner = pick_winner(frame, settings.risk_level, grid.base.plant.currency, labels)
    winner_run, note = None, ""
    if winner.case is not None and winner_plan:
        if run.interrupted:
            note = "the study was interrupted, so the winner's plan folder was not written"
        else:
            case = next(c for c in grid.cases if c.case == winner.case)
            try:
                winner_run = plan_case(case, shared, settings)
            except KeyboardInterrupt:
                run.interrupted = True
                note = ("interrupted while the winner was planned again, so its plan folder "
                        "was not written")
            if winner_run is not None:
                row = frame.loc[frame["case"] == winner.case].iloc[0]
                again = round(winner_run.plan.evaluation.total_cost, 2)
                if abs(again - float(row["total_cost"])) > 0.01:
                    note = (f"the winner re-planned here cost {again:,.2f}, not "
                            f"{row['total_cost']:,.2f} as in the study (the solver stopped at "
                            "its time limit in one of the two)")
    return StudyResult(grid, shared, settings, run, frame, winner, winner_run, note, case_timeout)


def describe_study(result: StudyResult) -> str:
    """The terminal summary: every case's cost and risk, and the winner."""
    f = result.frame
    cur = result.grid.base.plant.currency
    lines = [f"Study of {result.grid.base.plant.name}: {len(f)} cases x "
             f"{result.shared.n_futures} shared futures, on {result.run.where} "
             f"({result.run.workers} worker{'s' if result.run.workers != 1 else ''}), "
             f"{result.run.seconds:.1f} s"]
    head = (f"  {'case':>4}  {'status':10} {'expected cost':>15} {'P50 cost':>15} {'P90 cost':>15} "
            f"{'risk':>7}  values")
    lines.append(head)
    for _, r in f.iterrows():
        risk = max(r["p_limestone_below_safety"] or 0, r["p_any_over_capacity"] or 0) \
            if r["status"] in ("optimal", "feasible") else None
        exp = "–" if pd.isna(r["expected_cost"]) else f"{r['expected_cost']:,.0f}"
        p50 = "–" if pd.isna(r["cost_p50"]) else f"{r['cost_p50']:,.0f}"
        p90 = "–" if pd.isna(r["cost_p90"]) else f"{r['cost_p90']:,.0f}"
        rk = "–" if risk is None else f"{100 * risk:.1f} %"
        mark = "*" if r["case"] == result.winner.case else " "
        lines.append(f" {mark}{int(r['case']):>4}  {str(r['status']):10} {exp:>15} {p50:>15} "
                     f"{p90:>15} {rk:>7}  {result.labels[int(r['case'])]}")
        if r["status"] not in ("optimal", "feasible") and r["message"]:
            lines.append(f"        {r['message']}")
    lines.append(f"  (costs in {cur} over the horizon: the mean, P50 and P90 over the futures; "
                 "risk = the highest daily chance of limestone below safety or a store over "
                 "capacity)")
    tail = f[(f["expected_cost"] > f["cost_p90"]) & f["status"].isin(("optimal", "feasible"))]
    if len(tail):
        lines.append("  An expected cost above the P90 means that a few futures cost far more than "
                     "the rest (a store running empty or over capacity is priced at the "
                     "workbook's penalties): judge those cases by their risk too.")
    lines.append("")
    lines.append(("Winner: " if result.winner.case is not None else "No winner: ")
                 + result.winner.reason + ".")
    if result.winner_note:
        lines.append(f"Note: {result.winner_note}.")
    return "\n".join(lines)



def study_options_problems(cluster: str, workers: int | None, risk_level_pct: float,
                           time_limit: float, case_timeout: float | None,
                           max_cases: int) -> list[Problem]:
    """What is wrong with the study's options (empty when nothing): each a `Problem`
    naming the option, what was found and what was expected."""
    out = []
    c = (cluster or "").strip()
    if c not in ("local", "serial") and not re.match(r"^([a-z+]+://)?[\w.\-\[\]:]+:\d+$", c):
        out.append(Problem(None, None, "--cluster", f"found '{cluster}'",
                           "local, serial, or a scheduler address like tcp://host:8786"))
    if workers is not None and (workers < 1 or workers > 512):
        out.append(Problem(None, None, "--workers", f"found {workers}",
                           "a whole number of worker processes from 1 to 512"))
    elif workers is not None and c != "local":
        out.append(Problem(None, None, "--workers", f"found {workers} with --cluster {cluster}",
                           "--workers only with --cluster local (a scheduler has its own workers)"))
    if not 0 < risk_level_pct < 100:
        out.append(Problem(None, None, "--risk-level", f"found {risk_level_pct:g}",
                           "a chance in percent, above 0 and below 100"))
    if not time_limit > 0:
        out.append(Problem(None, None, "--time-limit", f"found {time_limit:g}",
                           "a number of seconds above 0"))
    if case_timeout is not None and not case_timeout > 0:
        out.append(Problem(None, None, "--case-timeout", f"found {case_timeout:g}",
                           "a number of seconds above 0"))
    if max_cases < 1:
        out.append(Problem(None, None, "--max-cases", f"found {max_cases}", "at least 1"))
    return out


__all__ = ["StudyResult", "prepare_study", "run_study", "describe_study", "study_options_problems",
           "MAX_STUDY_FUTURES"]
