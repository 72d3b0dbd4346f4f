"""``reagentplan record FILE...``: facts of the operations into the record."""

from __future__ import annotations

from .common import EXIT_OK
from .options import add_as_of, add_db, add_user


def register(sub) -> None:
    p = sub.add_parser("record", help="record stock surveys, arrivals, shipments, orders, "
                                      "generation and lab results in the database")
    p.add_argument("files", nargs="+", metavar="FILE",
                   help=".xlsx with record sheets, or .csv named after one (arrivals.csv); several "
                        "files are recorded together, all or none")
    add_db(p)
    p.add_argument("--scenario", metavar="WORKBOOK", default=None,
                   help="the station's scenario workbook: names, lanes and load sizes are checked "
                        "against it")
    p.add_argument("--replace", action="store_true",
                   help="accept new values for facts already recorded (the old ones go to the audit trail)")
    add_as_of(p, "refuse facts after this day (default: today)")
    add_user(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from ..record.db import connect
    from ..record.importer import describe_import, record_files
    from ..record.users import writer
    from ..scenario import load_scenario

    scenario = load_scenario(args.scenario) if args.scenario else None
    engine = connect(args.db)
    try:
        result = record_files(engine, args.files, scenario=scenario, replace=args.replace,
                              today=args.as_of, who=writer(engine, args.user))
    finally:
        engine.dispose()
    print(describe_import(result))
    if scenario is None:
        print("(No --scenario given: names, lanes and load sizes were not checked against a workbook.)")
    return EXIT_OK
