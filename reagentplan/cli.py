"""The ``reagentplan`` command.  Handlers only parse arguments, call the library and
print; bad input exits with code 2 and a message naming sheet, row and column.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from . import CAUTION, __version__
from .errors import ScenarioError

EXIT_OK, EXIT_BREACH, EXIT_BAD_INPUT = 0, 1, 2


def _warn(scenario, stream=None) -> None:
    """Print the scenario's unusual values (on stderr unless told otherwise)."""
    from .summary import describe_warnings

    text = describe_warnings(getattr(scenario, "warnings", ()))
    if text:
        print(text, file=stream or sys.stderr)


def _cmd_template(args) -> int:
    from .template import write_template

    path = write_template(args.path)
    print(f"Wrote the blank scenario workbook to {path}")
    return EXIT_OK


def _cmd_check(args) -> int:
    from .scenario import load_scenario
    from .summary import describe_scenario

    scenario = load_scenario(args.workbook)
    n = len(scenario.warnings)
    print(f"{args.workbook}: the workbook is sound"
          + (f", with {n} unusual value{'s' if n != 1 else ''} (below)." if n else "."))
    print(describe_scenario(scenario))
    if n:
        print()
        _warn(scenario, sys.stdout)
    return EXIT_OK


def _cmd_balance(args) -> int:
    from .balance import balance_frame
    from .output import staged_output, write_csv
    from .scenario import load_scenario
    from .summary import describe_balance

    scenario = load_scenario(args.workbook)
    _warn(scenario)
    frame = balance_frame(scenario)
    with staged_output(args.out) as tmp:
        write_csv(frame, tmp / "balance.csv")
    print(describe_balance(scenario, frame))
    print(f"\nWrote {Path(args.out) / 'balance.csv'}")
    print(f"\nCaution: {CAUTION}")
    return EXIT_OK


def _cmd_plan(args) -> int:
    from .pipeline import run_plan
    from .output import staged_output, write_run
    from .scenario import load_scenario
    from .summary import describe_plan, describe_risk

    options = dict(futures=args.futures, seed=args.seed, solver=args.solver,
                   time_limit=args.time_limit, firm_days=args.firm_days,
                   risk_level=args.risk_level / 100, progress=True)
    if args.db or args.as_of or os.environ.get("REAGENTPLAN_DB"):
        from .pipeline import run_plan_from_record
        from .record.db import connect
        from .summary import describe_asof

        engine = connect(args.db)
        try:
            with staged_output(args.out) as tmp:
                run = run_plan_from_record(args.workbook, engine, args.as_of,
                                           horizon_days=args.horizon_days, **options)
                written = write_run(run, tmp)
        finally:
            engine.dispose()
        _warn(run.plan.scenario)
        print(describe_asof(run.summary_extra))
    else:
        scenario = load_scenario(args.workbook)
        _warn(scenario)
        run = run_plan(scenario, **options)
        with staged_output(args.out) as tmp:
            written = write_run(run, tmp)
    print(describe_plan(run.plan))
    if not (args.db or args.as_of or os.environ.get("REAGENTPLAN_DB")):
        print(f"  contract months: {run.summary_extra.get('contract_months')}")
    print(describe_risk(run))
    for line in run.warnings:
        print(f"Warning: {line}")
    print(f"\nWrote {', '.join(p.name for p in written)} to {args.out}")
    print(f"\nCaution: {CAUTION}")
    return EXIT_BREACH if run.plan.breaches else EXIT_OK


def _cmd_forecast(args) -> int:
    from .forecast import (backtest, describe_backtest, describe_forecast, forecast_frame,
                           notes_text, sample_futures)
    from .output import staged_output, write_csv
    from .scenario import load_scenario

    scenario = load_scenario(args.workbook)
    _warn(scenario)
    futures = sample_futures(scenario, args.futures, args.seed, progress=None)
    frame = forecast_frame(futures)
    result = (backtest(scenario, args.backtest, args.futures, args.seed, progress=None)
              if args.backtest is not None else None)
    report = describe_backtest(result) if result is not None else None
    out = Path(args.out)
    written = ["forecast.csv", "forecast_notes.txt"]
    with staged_output(out) as tmp:
        write_csv(frame, tmp / "forecast.csv")
        (tmp / "forecast_notes.txt").write_text(
            notes_text(futures, report.splitlines() if report else None), encoding="utf-8")
        if result is not None:
            write_csv(result.summary, tmp / "backtest.csv")
            write_csv(result.daily, tmp / "backtest_daily.csv")
            written += ["backtest.csv", "backtest_daily.csv"]
    print(describe_forecast(futures))
    if report:
        print()
        print(report)
    print(f"\nWrote {', '.join(str(out / name) for name in written)}")
    print(f"\nCaution: {CAUTION}")
    return EXIT_OK


def _cmd_demo(args) -> int:
    from demo.build_demo import build_demo_workbook

    from .pipeline import run_plan
    from .output import staged_output, write_run
    from .scenario import load_scenario
    from .summary import describe_demo

    out = Path(args.out)
    with staged_output(out) as tmp:
        build_demo_workbook(tmp / "demo_station.xlsx")
        scenario = load_scenario(tmp / "demo_station.xlsx")
        _warn(scenario)
        run = run_plan(scenario, futures=args.futures, seed=0, time_limit=args.time_limit,
                       progress=True)
        written = write_run(run, tmp)
        reports = None
        if args.weeks > 0:
            from demo.record_demo import WEEKLY_HORIZON_DAYS, weekly_loop

            weekly = tmp / "weekly"
            weekly.mkdir()
            wb = build_demo_workbook(weekly / "demo_weekly.xlsx",
                                     horizon_days=WEEKLY_HORIZON_DAYS + 7 * args.weeks)
            print(f"Weekly loop: {args.weeks} weeks of an invented record, re-planned each week...",
                  file=sys.stderr)
            reports = weekly_loop(wb, weekly, weeks=args.weeks, time_limit=args.time_limit)
    print(describe_demo(run, out, ["demo_station.xlsx"] + [p.name for p in written]
                        + (["weekly/"] if reports is not None else [])))
    if reports is not None:
        from demo.record_demo import describe_weeks

        print()
        print(describe_weeks(reports, run.plan.scenario.plant.currency))
        print(f"\nThe record is {out / 'weekly' / 'record.db'}; try: reagentplan review --db "
              f"sqlite:///{out / 'weekly' / 'record.db'} --out {out / 'weekly' / 'review'}")
    print(f"\nCaution: {CAUTION}")
    return EXIT_OK


def _cmd_db_upgrade(args) -> int:
    from .record.db import connect, upgrade

    engine = connect(args.db)
    before, after = upgrade(engine)
    if before == after:
        print(f"The database is already at the newest schema (revision {after}).")
    else:
        print(f"Upgraded the database from {'an empty one' if before is None else 'revision ' + before} "
              f"to revision {after}.")
    engine.dispose()
    return EXIT_OK


def _cmd_record(args) -> int:
    from .record.db import connect
    from .record.importer import describe_import, record_files
    from .scenario import load_scenario

    scenario = load_scenario(args.scenario) if args.scenario else None
    engine = connect(args.db)
    try:
        result = record_files(engine, args.files, scenario=scenario, replace=args.replace,
                              today=args.as_of)
    finally:
        engine.dispose()
    print(describe_import(result))
    if scenario is None:
        print("(No --scenario given: names, lanes and load sizes were not checked against a workbook.)")
    return EXIT_OK


def _cmd_diff(args) -> int:
    from .output import staged_output
    from .output.record import write_diff
    from .record.db import RecordError, connect
    from .record.versions import act_first, describe_diff, diff_plans, load_plan, plan_ids
    from .errors import Problem

    engine = connect(args.db)
    try:
        ids = plan_ids(engine)
        if len(ids) < 2 and (args.from_id is None or args.to_id is None):
            raise RecordError(Problem(None, None, None, f"the record holds {len(ids)} plan version(s)",
                                      "two plans to compare: run `reagentplan plan WORKBOOK --db URL "
                                      "--as-of DATE` once more"), "The command")
        to_id = args.to_id if args.to_id is not None else ids[-1]
        earlier = [i for i in ids if i < to_id]
        if args.from_id is None and not earlier:
            raise RecordError(Problem(None, None, "--to", f"plan {to_id} is the first plan version",
                                      "a later plan, or --from ID"), "The command")
        from_id = args.from_id if args.from_id is not None else max(earlier)
        before, after = load_plan(engine, from_id), load_plan(engine, to_id)
    finally:
        engine.dispose()
    diff = diff_plans(before, after)
    first = act_first(diff, after.as_of)
    with staged_output(args.out) as tmp:
        written = write_diff(diff, tmp)
    print(describe_diff(before, after, diff, first))
    print(f"\nWrote {', '.join(p.name for p in written)} to {args.out}")
    return EXIT_OK


def _cmd_review(args) -> int:
    from .output import staged_output
    from .output.record import write_review
    from .record.asof import load_record
    from .record.db import connect
    from .record.review import describe_review, review
    from .record.versions import load_plan, load_workbook_bytes, plan_ids
    from .scenario import load_scenario

    engine = connect(args.db)
    try:
        if args.scenario:
            scenario = load_scenario(args.scenario)
        else:
            ids = plan_ids(engine)
            if not ids:
                from .errors import Problem
                from .record.db import RecordError

                raise RecordError(Problem(None, None, "--scenario", "no plan version in the record",
                                          "--scenario WORKBOOK, or a plan made with --db first"), "The command")
            latest = load_plan(engine, ids[-1])
            scenario = load_scenario(load_workbook_bytes(engine, latest.workbook_sha256))
        result = review(engine, scenario, load_record(engine), until=args.until)
    finally:
        engine.dispose()
    with staged_output(args.out) as tmp:
        written = write_review(result, tmp)
    print(describe_review(result))
    print(f"\nWrote {', '.join(p.name for p in written)} to {args.out}")
    return EXIT_OK


def _cmd_study(args) -> int:
    from .output import staged_output, write_study
    from .study.cluster import StudyClusterError, default_workers
    from .study.run import CaseSettings
    from .study.study import describe_study, prepare_study, run_study, study_options_problems

    problems = study_options_problems(args.cluster, args.workers, args.risk_level,
                                      args.time_limit, args.case_timeout, args.max_cases)
    if problems:
        raise ScenarioError(problems)
    grid, shared = prepare_study(args.workbook, args.vary, futures=args.futures, seed=args.seed,
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

    settings = CaseSettings(solver=args.solver, time_limit=args.time_limit, firm_days=args.firm_days,
                            risk_level=args.risk_level / 100, case_timeout=args.case_timeout)
    try:
        result = run_study(grid, shared, settings, cluster=args.cluster, workers=args.workers,
                           on_start=started)
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
        print("Interrupted: the finished cases are in study.csv; the others are marked 'not run'.",
              file=sys.stderr)
        return 130
    planned = result.frame["status"].isin(("optimal", "feasible")).all()
    return EXIT_OK if planned and result.winner.case is not None else EXIT_BREACH


def _cmd_rehearse(args) -> int:
    from .output import staged_output
    from .output.rehearse import write_rehearsal
    from .rehearse.run import describe_rehearsal, rehearse
    from .rehearse.settings import disturbances

    pct = lambda v: None if v is None else v / 100  # noqa: E731
    dist = disturbances(args.workbook, late_chance=pct(args.late_chance), late_max_days=args.late_days,
                        partial_chance=pct(args.partial_chance), partial_share=pct(args.partial_share),
                        survey_sd=pct(args.survey_error))
    result = rehearse(args.workbook, weeks=args.weeks, futures=args.futures, seed=args.seed,
                      lookahead_days=args.lookahead_days, firm_days=args.firm_days,
                      time_limit=args.time_limit, solver=args.solver, disturbances=dist,
                      plan_futures=args.plan_futures, progress=True,
                      workers=min(os.cpu_count() or 1, 4) if args.workers is None else args.workers,
                      risk_level=args.risk_level / 100)
    with staged_output(args.out) as tmp:
        written = write_rehearsal(result, tmp)
    print(describe_rehearsal(result))
    print(f"\nWrote {', '.join(p.name for p in written)} to {args.out}")
    print(f"\nCaution: {CAUTION}")
    return EXIT_OK


def _cmd_dashboard(args) -> int:
    import os

    from dashboard.security import DashboardRefused, is_loopback, password_for

    try:
        password = password_for(args.host, os.environ)
    except DashboardRefused as exc:
        print(exc, file=sys.stderr)
        return EXIT_BAD_INPUT
    if not 0 <= args.port <= 65535:
        print(f"--port {args.port}: expected a port from 0 to 65535.", file=sys.stderr)
        return EXIT_BAD_INPUT
    from dashboard.app import create_app, serve

    from .plancache import cache_dir

    what = args.workbook or "the demo station"
    print(f"Serving at once; the page shows the first plan of {what} ({args.futures} futures) "
          f"as it is made. Plans are kept in {cache_dir()} (set REAGENTPLAN_CACHE to move it).")
    db = args.db or os.environ.get("REAGENTPLAN_DB")
    if db is None and args.as_of is not None:
        from .record.db import resolve_url

        resolve_url(None)  # says that --as-of needs a database
    try:
        app = create_app(args.workbook, futures=args.futures, seed=args.seed,
                         time_limit=args.time_limit, firm_days=args.firm_days,
                         demo_days=args.demo_days, password=password, study_dir=args.study,
                         db=db, as_of=args.as_of, background=True, plan_cache=True,
                         on_ready=_dashboard_ready)
    except ValueError as exc:
        print(f"--study: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    print(f"Dashboard on http://{args.host}:{args.port}/"
          + (" (password required)" if password else "") + "; Ctrl+C stops it.")
    if not is_loopback(args.host):
        print("Other machines can reach it: serve it behind a TLS-terminating proxy "
              "(basic auth sends the password with every request).")
    print(f"Caution: {CAUTION}")
    serve(app, args.host, args.port, trusted_proxy=args.trusted_proxy)
    return EXIT_OK


def _dashboard_ready(info) -> None:
    """Said on the console when the dashboard's first plan is ready."""
    how = "read back from the plan cache" if info.from_cache else f"made in {info.startup_seconds:.0f} s"
    print(f"The first plan is ready ({how}).", flush=True)
    _warn(info)


def _date(text: str):
    import datetime as dt

    try:
        return dt.date.fromisoformat(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a date; expected YYYY-MM-DD") from None


def _db_option(p, required: bool = False) -> None:
    p.add_argument("--db", default=None, metavar="URL",
                   help="the record: sqlite:///station.db or postgresql+psycopg://user@host/db "
                        "(default: the environment variable REAGENTPLAN_DB)")


#: The MIP solvers a plan can run on (OR-Tools MathOpt).
SOLVERS = ("highs", "scip", "cp-sat")


def _solver_option(p, note: str = "") -> None:
    """``--solver`` of every command that plans (default HiGHS); ``note`` follows the
    default in the help."""
    p.add_argument("--solver", choices=list(SOLVERS), default="highs",
                   help="MIP solver (default %(default)s" + note + ")")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="reagentplan",
        description="Scrubber limestone and byproduct planning for coal-fired stations.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"reagentplan {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("demo", help="build the demo station's workbook and run it end to end")
    p.add_argument("--out", default="reagentplan-demo", help="output folder (default: %(default)s)")
    p.add_argument("--futures", type=int, default=500, help="sampled futures (default %(default)s)")
    p.add_argument("--time-limit", type=float, default=60.0, help="solver seconds (default %(default)s)")
    p.add_argument("--weeks", type=int, default=8,
                   help="weeks of the invented operations record run through the weekly re-plan "
                        "(0 = none; default %(default)s)")
    p.set_defaults(func=_cmd_demo)

    p = sub.add_parser("template", help="write the blank, annotated scenario workbook")
    p.add_argument("path", help="where to write the .xlsx")
    p.set_defaults(func=_cmd_template)

    p = sub.add_parser("check", help="validate a scenario workbook")
    p.add_argument("workbook")
    p.set_defaults(func=_cmd_check)

    p = sub.add_parser("balance", help="the deterministic daily mass balance (balance.csv)")
    p.add_argument("workbook")
    p.add_argument("--out", required=True, help="output folder")
    p.set_defaults(func=_cmd_balance)

    p = sub.add_parser("forecast", help="sampled futures of generation, coal quality and the "
                                        "balance (forecast.csv)")
    p.add_argument("workbook")
    p.add_argument("--out", required=True, help="output folder")
    p.add_argument("--futures", type=int, default=1000,
                   help="futures to sample (default: %(default)s)")
    p.add_argument("--seed", type=int, default=0,
                   help="random seed; the same seed gives the same futures (default: %(default)s)")
    p.add_argument("--backtest", type=int, default=None, metavar="K",
                   help="also hold back the last K days of history, forecast them and score "
                        "the forecast (backtest.csv)")
    p.set_defaults(func=_cmd_forecast)

    p = sub.add_parser("plan", help="optimised deliveries, store levels and haul-outs")
    p.add_argument("workbook")
    p.add_argument("--out", required=True, help="output folder")
    p.add_argument("--futures", type=int, default=500,
                   help="sampled futures to guard the plan against (0 = none; default %(default)s)")
    p.add_argument("--seed", type=int, default=0, help="seed of the futures (default %(default)s)")
    p.add_argument("--time-limit", type=float, default=60.0, help="solver seconds (default %(default)s)")
    _solver_option(p, ", the fastest here by measurement")
    p.add_argument("--firm-days", type=int, default=56,
                   help="days planned one by one; weekly outlook after (default %(default)s)")
    p.add_argument("--risk-level", type=float, default=5.0,
                   help="accepted chance [%%] of dropping below safety or above capacity on a day "
                        "(default %(default)s)")
    _db_option(p)
    p.add_argument("--as-of", type=_date, default=None, metavar="DATE",
                   help="with --db: plan from the record's state at the end of DATE (opening stock, "
                        "month-to-date contract tonnes, booked orders, history); the plan starts the "
                        "next day and is stored as a new version (default: the day before the "
                        "workbook's start_date)")
    p.add_argument("--horizon-days", type=int, default=None, metavar="N",
                   help="with --db: days planned from the day after --as-of (default: the workbook's "
                        "horizon_days)")
    p.set_defaults(func=_cmd_plan)

    p = sub.add_parser("db", help="the operations record's database")
    dbsub = p.add_subparsers(dest="db_command", required=True, metavar="ACTION")
    q = dbsub.add_parser("upgrade", help="create the record's tables or bring them to the newest schema")
    _db_option(q)
    q.set_defaults(func=_cmd_db_upgrade)

    p = sub.add_parser("record", help="record stock surveys, arrivals, shipments, orders, "
                                      "generation and lab results in the database")
    p.add_argument("files", nargs="+", metavar="FILE",
                   help=".xlsx with record sheets, or .csv named after one (arrivals.csv); several "
                        "files are recorded together, all or none")
    _db_option(p)
    p.add_argument("--scenario", metavar="WORKBOOK", default=None,
                   help="the station's scenario workbook: names, lanes and load sizes are checked "
                        "against it")
    p.add_argument("--replace", action="store_true",
                   help="accept new values for facts already recorded (the old ones go to the audit trail)")
    p.add_argument("--as-of", type=_date, default=None, metavar="DATE",
                   help="refuse facts after this day (default: today)")
    p.set_defaults(func=_cmd_record)

    p = sub.add_parser("diff", help="what changed between two stored plans (orders_changed.csv)")
    _db_option(p)
    p.add_argument("--from", dest="from_id", type=int, default=None, metavar="ID",
                   help="the earlier plan version (default: the one before --to)")
    p.add_argument("--to", dest="to_id", type=int, default=None, metavar="ID",
                   help="the later plan version (default: the newest)")
    p.add_argument("--out", required=True, help="output folder")
    p.set_defaults(func=_cmd_diff)

    p = sub.add_parser("review", help="plan against book against survey (plan_vs_actual.csv) and "
                                      "the book-to-survey drift per store")
    _db_option(p)
    p.add_argument("--out", required=True, help="output folder")
    p.add_argument("--scenario", metavar="WORKBOOK", default=None,
                   help="the workbook for the balance of past days (default: the newest plan's)")
    p.add_argument("--until", type=_date, default=None, metavar="DATE",
                   help="last day reviewed (default: the last recorded fact)")
    p.set_defaults(func=_cmd_review)

    p = sub.add_parser("study", help="plans of many variants of one workbook, on Dask "
                                     "distributed (study.csv, study.xlsx, winner/)")
    p.add_argument("workbook")
    p.add_argument("--out", required=True, help="output folder")
    p.add_argument("--vary", action="append", required=True, metavar="SPEC",
                   help="sheet.key=V1,V2 or sheet[row name].column=V1,V2; several make the "
                        "full grid")
    p.add_argument("--futures", type=int, default=200,
                   help="futures sampled once and shared by every case (default %(default)s)")
    p.add_argument("--seed", type=int, default=0, help="seed of the futures (default %(default)s)")
    p.add_argument("--cluster", default="local",
                   help="'local' (a LocalCluster on this machine, the default), the address of "
                        "a running Dask scheduler (tcp://host:8786), or 'serial' (no Dask)")
    p.add_argument("--workers", type=int, default=None,
                   help="worker processes of the local cluster (default: one per core)")
    p.add_argument("--time-limit", type=float, default=60.0,
                   help="solver seconds per solve of a case (default %(default)s)")
    p.add_argument("--case-timeout", type=float, default=None,
                   help="wall-clock seconds after which a case is reported as timed out "
                        "(default: none beyond the solver's time limit)")
    _solver_option(p)
    p.add_argument("--firm-days", type=int, default=56,
                   help="days planned one by one; weekly outlook after (default %(default)s)")
    p.add_argument("--risk-level", type=float, default=5.0,
                   help="accepted daily chance [%%] of limestone below safety or a store over "
                        "capacity: it guards each plan and bounds the winner (default %(default)s)")
    p.add_argument("--max-cases", type=int, default=500,
                   help="refuse grids of more cases than this (default %(default)s)")
    p.set_defaults(func=_cmd_study)

    p = sub.add_parser("rehearse", help="play the weekly loop against sampled futures, following the plan "
                       "and following the reorder-point rule (rehearsal.csv, rehearsal.xlsx)")
    p.add_argument("workbook")
    p.add_argument("--out", required=True, help="output folder")
    p.add_argument("--weeks", type=int, default=16, help="weeks rehearsed (default %(default)s)")
    p.add_argument("--futures", type=int, default=20,
                   help="sampled futures taken as the truth, one after the other (default %(default)s)")
    p.add_argument("--seed", type=int, default=0, help="seed of the futures and disturbances (default %(default)s)")
    p.add_argument("--lookahead-days", type=int, default=120,
                   help="days each weekly plan covers (default %(default)s)")
    p.add_argument("--firm-days", type=int, default=14,
                   help="days of each weekly plan planned one by one (default %(default)s)")
    p.add_argument("--plan-futures", type=int, default=50,
                   help="futures guarding each weekly plan, sampled once with a seed of their own "
                        "and cut to each week (0 = none; default %(default)s)")
    p.add_argument("--workers", type=int, default=None,
                   help="processes playing futures at once (default: one per CPU, at most 4)")
    p.add_argument("--risk-level", type=float, default=1.0, metavar="PCT",
                   help="accepted chance [%%] of breaking a limit on a day, guarding each weekly plan "
                        "(default %(default)s)")
    p.add_argument("--time-limit", type=float, default=20.0,
                   help="solver seconds per weekly plan (default %(default)s)")
    _solver_option(p)
    p.add_argument("--late-chance", type=float, default=None, metavar="PCT",
                   help="chance [%%] a booked train is late (default: the rehearsal sheet, else 30)")
    p.add_argument("--late-days", type=int, default=None, metavar="N",
                   help="a late train is 1 to N days late (default: the rehearsal sheet, else 2)")
    p.add_argument("--partial-chance", type=float, default=None, metavar="PCT",
                   help="chance [%%] a buyer takes only part of a day's loads (default: sheet, else 10)")
    p.add_argument("--partial-share", type=float, default=None, metavar="PCT",
                   help="share [%%] of the loads such a buyer takes (default: sheet, else 50)")
    p.add_argument("--survey-error", type=float, default=None, metavar="PCT",
                   help="standard deviation [%%] of a pile survey (default: sheet, else 1.5)")
    p.set_defaults(func=_cmd_rehearse)

    p = sub.add_parser("dashboard", help="serve the web dashboard (127.0.0.1 unless told otherwise)")
    p.add_argument("workbook", nargs="?", default=None,
                   help="scenario workbook (default: the demo station)")
    p.add_argument("--host", default="127.0.0.1",
                   help="address to bind (default %(default)s); any other needs the environment "
                        "variable REAGENTPLAN_DASHBOARD_PASSWORD")
    p.add_argument("--port", type=int, default=8050, help="port (default %(default)s)")
    p.add_argument("--futures", type=int, default=500, help="sampled futures (default %(default)s)")
    p.add_argument("--seed", type=int, default=0, help="seed of the futures (default %(default)s)")
    p.add_argument("--time-limit", type=float, default=60.0, help="solver seconds (default %(default)s)")
    p.add_argument("--firm-days", type=int, default=56,
                   help="days planned one by one; weekly outlook after (default %(default)s)")
    p.add_argument("--demo-days", type=int, default=365,
                   help="days of the demo station when no workbook is given (default %(default)s)")
    p.add_argument("--trusted-proxy", default=None, metavar="ADDRESS",
                   help="address of a TLS-terminating proxy in front of the dashboard; only its "
                        "X-Forwarded-For/-Host/-Proto headers are believed")
    p.add_argument("--study", default=None, metavar="DIR",
                   help="a folder written by 'reagentplan study', shown in the Studies tab")
    _db_option(p)
    p.add_argument("--as-of", type=_date, default=None, metavar="DATE",
                   help="with --db: plan from the record's state at the end of DATE (default: the "
                        "day of the newest recorded survey, arrival or shipment) and show the "
                        "record tab")
    p.set_defaults(func=_cmd_dashboard)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except ScenarioError as exc:
        print(exc.report(), file=sys.stderr)
        print(exc.fix_hint(), file=sys.stderr)
        return EXIT_BAD_INPUT
    except OSError as exc:
        print(f"Could not read or write a file: {exc}. Nothing was written.", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("Interrupted; nothing was written.", file=sys.stderr)
        return 130
    except Exception as exc:
        if type(exc).__module__.startswith(("sqlalchemy", "psycopg", "alembic")):
            first = (str(exc).strip().splitlines() or [""])[0]
            print(f"The database refused the operation ({type(exc).__name__}: {first}). "
                  "The transaction was rolled back; nothing was written.", file=sys.stderr)
            return EXIT_BAD_INPUT
        raise


if __name__ == "__main__":
    sys.exit(main())
