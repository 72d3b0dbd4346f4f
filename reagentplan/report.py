"""Writing outputs safely: CSVs and the summary go to a temporary folder beside the
output folder and are renamed into place only when everything has been written, so a
crash or a bad input never leaves a half-written result and never destroys the last one.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path

import pandas as pd


@contextlib.contextmanager
def staged_output(out_dir: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary folder; on success move its files into ``out_dir``.

    Files of ``out_dir`` that the run did not write are left as they were.  On an
    exception the temporary folder is removed and ``out_dir`` is untouched.
    """
    out = Path(out_dir)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".tmp", dir=out.parent))
    try:
        yield tmp
        out.mkdir(exist_ok=True)
        for item in sorted(tmp.iterdir()):
            os.replace(item, out / item.name)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def write_csv(frame: pd.DataFrame, path: Path, float_format: str = "%.10g") -> Path:
    """Write a frame as CSV with ISO dates and no index."""
    frame.to_csv(path, index=False, float_format=float_format, date_format="%Y-%m-%d")
    return path


def write_run(run, folder: Path) -> list[Path]:
    """Every output of a planned run into ``folder``: balance.csv, movements.csv,
    inventory.csv, summary.json (with the top risks), and with futures risk.csv and
    forecast.csv; then plan.xlsx."""
    import json

    from .plan_workbook import write_plan_workbook
    from .schedule import write_plan_files

    folder = Path(folder)
    paths = write_plan_files(run.plan, folder)
    summary = run.plan.summary()
    if run.risk is not None:
        risk = run.risk.frame
        paths.append(write_csv(risk, folder / "risk.csv"))
        summary["top_risks"] = run.risk.top
        summary["futures"] = run.risk.n_futures
    (folder / "summary.json").write_text(json.dumps(summary, indent=2))
    if run.futures is not None:
        from .forecast import forecast_frame

        paths.append(write_csv(forecast_frame(run.futures), folder / "forecast.csv"))
    paths.append(write_plan_workbook(run, folder / "plan.xlsx"))
    return paths
