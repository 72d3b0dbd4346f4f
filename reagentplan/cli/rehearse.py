"""``reagentplan rehearse WORKBOOK --out DIR``: the weekly loop played against sampled
futures, following the plan and following the reorder-point rule."""

from __future__ import annotations

import os

from .. import CAUTION
from ..settings import WEEKLY_PLAN
from .common import EXIT_OK
from .options import (add_firm_days, add_futures, add_out, add_risk_level, add_seed, add_solver,
                      add_time_limit, plan_settings)

#: Sampled futures a rehearsal takes as the truth by default.
TRUTH_FUTURES = 20


def register(sub) -> None:
    p = sub.add_parser("rehearse", help="play the weekly loop against sampled futures, following the plan "
                       "and following the reorder-point rule (rehearsal.csv, rehearsal.xlsx)")
    p.add_argument("workbook")
    add_out(p)
    p.add_argument("--weeks", type=int, default=16, help="weeks rehearsed (default %(default)s)")
    add_futures(p, TRUTH_FUTURES, "sampled futures taken as the truth, one after the other")
    add_seed(p, WEEKLY_PLAN, "seed of the futures and disturbances")
    p.add_argument("--lookahead-days", type=int, default=120,
                   help="days each weekly plan covers (default %(default)s)")
    add_firm_days(p, WEEKLY_PLAN, "days of each weekly plan planned one by one")
    add_futures(p, WEEKLY_PLAN.futures, "futures guarding each weekly plan, sampled once with a seed "
                "of their own and cut to each week", note="0 = none", option="--plan-futures")
    p.add_argument("--workers", type=int, default=None,
                   help="processes playing futures at once (default: one per CPU, at most 4)")
    add_risk_level(p, WEEKLY_PLAN, "accepted chance [%%] of breaking a limit on a day, guarding each "
                   "weekly plan", metavar="PCT")
    add_time_limit(p, WEEKLY_PLAN, "wall-clock safety net of each weekly plan, in seconds (the solves are bounded by work)")
    add_solver(p, WEEKLY_PLAN)
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
    p.set_defaults(func=run)


def run(args) -> int:
    from ..output import staged_output
    from ..output.rehearse import write_rehearsal
    from ..rehearse.run import describe_rehearsal, rehearse
    from ..rehearse.settings import disturbances

    pct = lambda v: None if v is None else v / 100  # noqa: E731
    dist = disturbances(args.workbook, late_chance=pct(args.late_chance), late_max_days=args.late_days,
                        partial_chance=pct(args.partial_chance), partial_share=pct(args.partial_share),
                        survey_sd=pct(args.survey_error))
    # the truth's futures are --futures; the weekly plans' own are --plan-futures
    settings = plan_settings(args, WEEKLY_PLAN, futures="plan_futures")
    result = rehearse(args.workbook, weeks=args.weeks, futures=args.futures, seed=args.seed,
                      lookahead_days=args.lookahead_days, settings=settings, disturbances=dist,
                      progress=True,
                      workers=min(os.cpu_count() or 1, 4) if args.workers is None else args.workers)
    with staged_output(args.out) as tmp:
        written = write_rehearsal(result, tmp)
    print(describe_rehearsal(result))
    print(f"\nWrote {', '.join(p.name for p in written)} to {args.out}")
    print(f"\nCaution: {CAUTION}")
    return EXIT_OK
