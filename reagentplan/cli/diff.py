"""``reagentplan diff --out DIR``: what changed between two stored plans."""

from __future__ import annotations

from .common import EXIT_OK
from .options import add_db, add_out


def register(sub) -> None:
    p = sub.add_parser("diff", help="what changed between two stored plans (orders_changed.csv)")
    add_db(p)
    p.add_argument("--from", dest="from_id", type=int, default=None, metavar="ID",
                   help="the earlier plan version (default: the one before --to)")
    p.add_argument("--to", dest="to_id", type=int, default=None, metavar="ID",
                   help="the later plan version (default: the newest)")
    add_out(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from ..errors import Problem
    from ..output import staged_output
    from ..output.record import write_diff
    from ..record.db import RecordError, connect
    from ..record.versions import act_first, describe_diff, diff_plans, load_plan, plan_ids

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
