"""``reagentplan review --out DIR``: plan against book against survey."""

from __future__ import annotations

from .common import EXIT_OK
from .options import add_db, add_out, date_arg


def register(sub) -> None:
    p = sub.add_parser("review", help="plan against book against survey (plan_vs_actual.csv) and "
                                      "the book-to-survey drift per store")
    add_db(p)
    add_out(p)
    p.add_argument("--scenario", metavar="WORKBOOK", default=None,
                   help="the workbook for the balance of past days (default: the newest plan's)")
    p.add_argument("--until", type=date_arg, default=None, metavar="DATE",
                   help="last day reviewed (default: the last recorded fact)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..output import staged_output
    from ..output.record import write_review
    from ..record.asof import load_record
    from ..record.db import connect
    from ..record.review import describe_review, review
    from ..record.versions import load_plan, load_workbook_bytes, plan_ids
    from ..scenario import load_scenario

    engine = connect(args.db)
    try:
        if args.scenario:
            scenario = load_scenario(args.scenario)
        else:
            ids = plan_ids(engine)
            if not ids:
                from ..errors import Problem
                from ..record.db import RecordError

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
