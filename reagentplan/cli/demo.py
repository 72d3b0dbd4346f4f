"""``reagentplan demo``: the invented demo station built and run end to end, and a
few weeks of its invented operations record re-planned week by week."""

from __future__ import annotations

import sys
from pathlib import Path

from .. import CAUTION
from ..settings import PLAN
from .common import EXIT_OK, warn
from .options import add_futures, add_out, add_time_limit, plan_settings


def register(sub) -> None:
    p = sub.add_parser("demo", help="build the demo station's workbook and run it end to end")
    add_out(p, required=False, default="reagentplan-demo")
    add_futures(p, PLAN.futures)
    add_time_limit(p, PLAN)
    p.add_argument("--weeks", type=int, default=8,
                   help="weeks of the invented operations record run through the weekly re-plan "
                        "(0 = none; default %(default)s)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..demo.build_demo import build_demo_workbook
    from ..output import staged_output, write_run
    from ..pipeline import run_plan
    from ..scenario import load_scenario
    from ..summary import describe_demo

    settings = plan_settings(args, PLAN)
    out = Path(args.out)
    with staged_output(out) as tmp:
        build_demo_workbook(tmp / "demo_station.xlsx")
        scenario = load_scenario(tmp / "demo_station.xlsx")
        warn(scenario)
        run = run_plan(scenario, settings, progress=True)
        written = write_run(run, tmp)
        reports = None
        if args.weeks > 0:
            from ..demo.record_demo import WEEKLY_HORIZON_DAYS, weekly_loop

            weekly = tmp / "weekly"
            weekly.mkdir()
            wb = build_demo_workbook(weekly / "demo_weekly.xlsx",
                                     horizon_days=WEEKLY_HORIZON_DAYS + 7 * args.weeks)
            print(f"Weekly loop: {args.weeks} weeks of an invented record, re-planned each week...",
                  file=sys.stderr)
            reports = weekly_loop(wb, weekly, weeks=args.weeks, time_limit=settings.time_limit)
    print(describe_demo(run, out, ["demo_station.xlsx"] + [p.name for p in written]
                        + (["weekly/"] if reports is not None else [])))
    if reports is not None:
        from ..demo.record_demo import describe_weeks

        print()
        print(describe_weeks(reports, run.plan.scenario.plant.currency))
        print(f"\nThe record is {out / 'weekly' / 'record.db'}; try: reagentplan review --db "
              f"sqlite:///{out / 'weekly' / 'record.db'} --out {out / 'weekly' / 'review'}")
        print(f"and: reagentplan calibrate --db sqlite:///{out / 'weekly' / 'record.db'} --scenario "
              f"{out / 'weekly' / 'demo_weekly.xlsx'} --out {out / 'weekly' / 'calibration'}")
    print(f"\nCaution: {CAUTION}")
    return EXIT_OK
