"""``reagentplan study WORKBOOK --vary SPEC --out DIR``: plans of many variants of one
workbook, on Dask distributed."""

from __future__ import annotations

import sys

from .. import CAUTION
from ..errors import ScenarioError
from ..settings import MAX_CASES, STUDY
from .common import EXIT_BAD_INPUT, EXIT_BREACH, EXIT_OK, study_interrupted
from .options import (add_firm_days, add_futures, add_out, add_risk_level, add_seed, add_solver,
                      add_time_limit, plan_settings)


def register(sub) -> None:
    p = sub.add_parser("study", help="plans of many variants of one workbook, on Dask "
                                     "distributed (study.csv, study.xlsx, winner/)")
    p.add_argument("workbook")
    add_out(p)
    p.add_argument("--vary", action="append", required=True, metavar="SPEC",
                   help="sheet.key=V1,V2 or sheet[row name].column=V1,V2; several make the "
                        "full grid")
    add_futures(p, STUDY.futures, "futures sampled once and shared by every case")
    add_seed(p, STUDY)
    p.add_argument("--cluster", default="local",
                   help="'local' (a LocalCluster on this machine, the default), the address of "
                        "a running Dask scheduler (tcp://host:8786), or 'serial' (no Dask)")
    p.add_argument("--workers", type=int, default=None,
                   help="worker processes of the local cluster (default: one per core)")
    add_time_limit(p, STUDY, "wall-clock safety net of each case's plan, in seconds (the solves are bounded by work)")
    p.add_argument("--case-timeout", type=float, default=None,
                   help="wall-clock seconds after which a case is reported as timed out "
                        "(default: none beyond the solver's time limit)")
    add_solver(p, STUDY)
    add_firm_days(p, STUDY)
    add_risk_level(p, STUDY, "accepted daily chance [%%] of limestone below safety or a store over "
                             "capacity: it guards each plan and bounds the winner")
    p.add_argument("--max-cases", type=int, default=MAX_CASES,
                   help="refuse grids of more cases than this (default %(default)s)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..output import staged_output, write_study
    from ..study.cluster import StudyClusterError, default_workers
    from ..study.study import describe_study, prepare_study, run_study, study_options_problems

    problems = study_options_problems(args.cluster, args.workers, args.risk_level,
                                      args.time_limit, args.case_timeout, args.max_cases)
    if problems:
        raise ScenarioError(problems)
    settings = plan_settings(args, STUDY)
    from .fleet import is_fleet, study as study_fleet

    if is_fleet(args.workbook):
        return study_fleet(args, settings)
    grid, shared = prepare_study(args.workbook, args.vary, futures=settings.futures, seed=settings.seed,
                                 max_cases=args.max_cases)
    print(f"{len(grid.cases)} case(s) of {grid.base.plant.name}; {shared.n_futures} futures "
          f"sampled once ({shared.nbytes / 2**20:.1f} MB, shared by every case)")
    if args.cluster == "local":
        print(f"Starting a local Dask cluster of {args.workers or default_workers()} worker "
              "process(es)...")

    def started(info):
        where = "this process, one case after the other" if info.where == "serial" else info.where
        print(f"Running on {where}" + (f" ({info.workers} workers)" if info.where != "serial" else ""))
        if info.dashboard:
            print(f"Dask dashboard: {info.dashboard}")
        elif info.where != "serial":
            print("Dask dashboard: none (install bokeh to see one)")

    try:
        result = run_study(grid, shared, settings, case_timeout=args.case_timeout, cluster=args.cluster,
                           workers=args.workers, on_start=started)
    except (OSError, TimeoutError) as exc:
        print(f"Could not reach the Dask scheduler at {args.cluster}: {exc}. Nothing was written.",
              file=sys.stderr)
        return EXIT_BAD_INPUT
    except StudyClusterError as exc:
        print(f"The Dask cluster at {args.cluster} cannot run the study: {exc}. Nothing was "
              "written.", file=sys.stderr)
        return EXIT_BAD_INPUT
    with staged_output(args.out) as tmp:
        written = write_study(result, tmp)
    print(describe_study(result))
    print(f"\nWrote {', '.join(p.name + ('/' if p.is_dir() else '') for p in written)} to {args.out}")
    print(f"\nCaution: {CAUTION}")
    if result.run.interrupted:
        return study_interrupted()
    planned = result.frame["status"].isin(("optimal", "feasible")).all()
    return EXIT_OK if planned and result.winner.case is not None else EXIT_BREACH
