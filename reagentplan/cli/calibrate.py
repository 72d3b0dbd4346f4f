"""``reagentplan calibrate --db URL --scenario WORKBOOK --out DIR``: the balance's
factors fitted to the record's surveys (``calibration.csv``), the factors whose interval
misses the workbook's value, and the survey drift per store before and after."""

from __future__ import annotations

from .common import EXIT_OK
from .options import add_db, add_out, date_arg


def register(sub) -> None:
    p = sub.add_parser("calibrate", help="fit the balance's factors (Ca/S, cake moisture, fly ash share) to "
                                         "the recorded surveys, with 90 %% intervals (calibration.csv)")
    add_db(p)
    p.add_argument("--scenario", metavar="WORKBOOK", required=True,
                   help="the station's workbook (its values are the starting point and the comparison)")
    add_out(p)
    p.add_argument("--from", dest="first", type=date_arg, default=None, metavar="DATE",
                   help="first survey day used (default: the first recorded survey)")
    p.add_argument("--to", dest="last", type=date_arg, default=None, metavar="DATE",
                   help="last survey day used (default: the last recorded survey)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..output import staged_output
    from ..output.calibrate import write_calibration
    from ..record.asof import load_record
    from ..record.calibrate import calibrate, describe_calibration
    from ..record.db import connect
    from ..scenario import load_scenario
    from .common import warn

    scenario = load_scenario(args.scenario)
    warn(scenario)
    engine = connect(args.db)
    try:
        record = load_record(engine, until=args.last)
    finally:
        engine.dispose()
    cal = calibrate(scenario, record, args.first, args.last)
    with staged_output(args.out) as tmp:
        written = write_calibration(cal, tmp)
    print(describe_calibration(cal))
    print("\nPlan with these values without re-keying the workbook: reagentplan plan WORKBOOK --db URL "
          "--as-of DATE --calibrated")
    print(f"\nWrote {', '.join(p.name for p in written)} to {args.out}")
    return EXIT_OK
