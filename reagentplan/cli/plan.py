"""``reagentplan plan WORKBOOK --out DIR``: optimised deliveries, store levels and
haul-outs, from the workbook alone or (``--db``) from the operations record's state."""

from __future__ import annotations

import os

from .. import CAUTION
from ..settings import PLAN
from .common import EXIT_BREACH, EXIT_OK, warn
from .options import (add_as_of, add_db, add_firm_days, add_futures, add_out, add_risk_level, add_seed,
                      add_solver, add_time_limit, add_user, plan_settings)


def register(sub) -> None:
    p = sub.add_parser("plan", help="optimised deliveries, store levels and haul-outs")
    p.add_argument("workbook")
    add_out(p)
    add_futures(p, PLAN.futures, "sampled futures to guard the plan against", note="0 = none")
    add_seed(p, PLAN)
    add_time_limit(p, PLAN)
    add_solver(p, PLAN, ", the fastest here by measurement")
    add_firm_days(p, PLAN)
    add_risk_level(p, PLAN, "accepted chance [%%] of dropping below safety or above capacity on a day")
    add_db(p)
    add_as_of(p, "with --db: plan from the record's state at the end of DATE (opening stock, "
                 "month-to-date contract tonnes, booked orders, history); the plan starts the "
                 "next day and is stored as a new version (default: the day before the "
                 "workbook's start_date)")
    add_user(p)
    p.add_argument("--horizon-days", type=int, default=None, metavar="N",
                   help="with --db: days planned from the day after --as-of (default: the workbook's "
                        "horizon_days)")
    p.add_argument("--calibrated", action="store_true",
                   help="with --db: plan with the factors fitted to the record's surveys up to --as-of "
                        "(as `reagentplan calibrate` finds them) instead of the workbook's; the plan "
                        "version records them")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..output import staged_output, write_run
    from ..pipeline import run_plan
    from ..scenario import load_scenario
    from ..schedule.causes import firm_breaches
    from ..summary import describe_plan, describe_risk

    settings = plan_settings(args, PLAN)
    from .fleet import is_fleet, plan as plan_fleet

    if is_fleet(args.workbook):
        return plan_fleet(args, settings)
    from_record = bool(args.db or args.as_of or os.environ.get("REAGENTPLAN_DB"))
    if args.calibrated and not from_record:
        from ..errors import Problem
        from ..record.db import RecordError

        raise RecordError(Problem(None, None, "--calibrated", "no record to calibrate from",
                                  "--db URL (or REAGENTPLAN_DB) with --calibrated"), "The command")
    if from_record:
        from ..pipeline import run_plan_from_record
        from ..record.db import connect
        from ..record.users import writer
        from ..summary import describe_asof

        engine = connect(args.db)
        try:
            who = writer(engine, args.user)
            with staged_output(args.out) as tmp:
                run = run_plan_from_record(args.workbook, engine, args.as_of, settings,
                                           horizon_days=args.horizon_days, progress=True,
                                           calibrated=args.calibrated, who=who)
                written = write_run(run, tmp)
        finally:
            engine.dispose()
        warn(run.plan.scenario)
        print(describe_asof(run.summary_extra))
        if args.calibrated:
            from ..record.calibrate import describe_applied

            print(f"  {describe_applied(run.summary_extra.get('calibration'))}")
    else:
        scenario = load_scenario(args.workbook)
        warn(scenario)
        run = run_plan(scenario, settings, progress=True)
        with staged_output(args.out) as tmp:
            written = write_run(run, tmp)
    print(describe_plan(run.plan))
    if not from_record:
        print(f"  contract months: {run.summary_extra.get('contract_months')}")
    print(describe_risk(run))
    for line in run.warnings:
        print(f"Warning: {line}")
    print(f"\nWrote {', '.join(p.name for p in written)} to {args.out}")
    print(f"\nCaution: {CAUTION}")
    # only the firm window's breaches: the outlook is re-planned week by week before it comes
    return EXIT_BREACH if firm_breaches(run.plan.breaches) else EXIT_OK
