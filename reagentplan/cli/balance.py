"""``reagentplan balance WORKBOOK --out DIR``: the deterministic daily mass balance."""

from __future__ import annotations

from pathlib import Path

from .. import CAUTION
from .common import EXIT_OK, warn
from .options import add_out


def register(sub) -> None:
    p = sub.add_parser("balance", help="the deterministic daily mass balance (balance.csv)")
    p.add_argument("workbook")
    add_out(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from ..balance import balance_frame
    from ..output import staged_output, write_csv
    from ..scenario import load_scenario
    from ..summary import describe_balance

    scenario = load_scenario(args.workbook)
    warn(scenario)
    frame = balance_frame(scenario)
    with staged_output(args.out) as tmp:
        write_csv(frame, tmp / "balance.csv")
    print(describe_balance(scenario, frame))
    print(f"\nWrote {Path(args.out) / 'balance.csv'}")
    print(f"\nCaution: {CAUTION}")
    return EXIT_OK
