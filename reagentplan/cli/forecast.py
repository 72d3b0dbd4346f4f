"""``reagentplan forecast WORKBOOK --out DIR``: sampled futures and their backtest."""

from __future__ import annotations

from pathlib import Path

from .. import CAUTION
from ..settings import PLAN
from .common import EXIT_OK, warn
from .options import add_futures, add_out, add_seed

#: Futures a forecast samples by default (more than a plan's: it only samples).
FORECAST_FUTURES = 1000


def register(sub) -> None:
    p = sub.add_parser("forecast", help="sampled futures of generation, coal quality and the "
                                        "balance (forecast.csv)")
    p.add_argument("workbook")
    add_out(p)
    add_futures(p, FORECAST_FUTURES, "futures to sample")
    add_seed(p, PLAN, "random seed; the same seed gives the same futures")
    p.add_argument("--backtest", type=int, default=None, metavar="K",
                   help="also hold back the last K days of history, forecast them and score "
                        "the forecast (backtest.csv)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..forecast import (backtest, describe_backtest, describe_forecast, forecast_frame,
                            notes_text, sample_futures)
    from ..output import staged_output, write_csv
    from ..scenario import load_scenario

    scenario = load_scenario(args.workbook)
    warn(scenario)
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
