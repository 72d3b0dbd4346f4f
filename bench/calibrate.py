"""Benchmark: calibrating a year of daily records.

Run:  python bench/calibrate.py [--days-between-surveys N]

Invents a year of daily facts for the tests' minimal station (tests/calibrate_data.py:
daily generation, a train every other week, weekday gypsum trucks, weekly landfill
hauls, every store surveyed daily by default, 0.7 % survey error; the plant really runs
at Ca/S 1.09, 12 % cake moisture and 84 % fly ash share against the workbook's 1.03, 10 %
and 80 %), records it into a fresh SQLite file and times what ``reagentplan calibrate``
does: reading the record and fitting the factors.  Prints the fitted values.

Target on 2 cores: a year of daily records calibrates in under 5 s.
"""

from __future__ import annotations

import argparse
import datetime as dt
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from calibrate_data import TRUE, record_sheets_of, synthetic_record  # noqa: E402
from helpers import START, minimal_sheets, write_workbook  # noqa: E402

from reagentplan.output.record import write_record_workbook  # noqa: E402
from reagentplan.record.asof import load_record  # noqa: E402
from reagentplan.record.calibrate import calibrate, describe_calibration  # noqa: E402
from reagentplan.record.db import connect, upgrade  # noqa: E402
from reagentplan.record.importer import record_files  # noqa: E402
from reagentplan.scenario import load_scenario  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--days-between-surveys", type=int, default=1)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as d:
        folder = Path(d)
        scenario = load_scenario(write_workbook(minimal_sheets(30), folder / "station.xlsx"))
        rec = synthetic_record(scenario, weeks=52, seed=1, survey_every=args.days_between_surveys)
        path = write_record_workbook(record_sheets_of(rec), folder / "year.xlsx")
        engine = connect(f"sqlite:///{folder / 'record.db'}")
        upgrade(engine)
        t = time.perf_counter()
        record_files(engine, [path], scenario=scenario, today=START - dt.timedelta(days=1))
        print(f"recorded {sum(len(f) for f in (rec.surveys, rec.arrivals, rec.shipments, rec.generation)):,} "
              f"rows in {time.perf_counter() - t:.2f} s")
        best = float("inf")
        for _ in range(args.repeat):
            t = time.perf_counter()
            cal = calibrate(scenario, load_record(engine))
            best = min(best, time.perf_counter() - t)
        engine.dispose()
    print(describe_calibration(cal))
    print(f"truth: {TRUE}")
    print(f"calibrate (load the record + fit), {len(rec.surveys):,} surveys over 365 days: best of "
          f"{args.repeat} {best:.2f} s (target < 5 s)")


if __name__ == "__main__":
    main()
