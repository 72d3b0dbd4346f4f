"""``reagentplan check WORKBOOK``: validate a scenario workbook."""

from __future__ import annotations

import sys

from .common import EXIT_OK, warn


def register(sub) -> None:
    p = sub.add_parser("check", help="validate a scenario workbook")
    p.add_argument("workbook")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..scenario import load_scenario
    from ..summary import describe_scenario
    from .fleet import check as check_fleet, is_fleet

    if is_fleet(args.workbook):
        return check_fleet(args)
    scenario = load_scenario(args.workbook)
    n = len(scenario.warnings)
    print(f"{args.workbook}: the workbook is sound"
          + (f", with {n} unusual value{'s' if n != 1 else ''} (below)." if n else "."))
    print(describe_scenario(scenario))
    if n:
        print()
        warn(scenario, sys.stdout)
    return EXIT_OK
