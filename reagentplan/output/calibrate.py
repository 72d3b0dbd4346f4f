"""Files of ``reagentplan calibrate``: ``calibration.csv`` (OPERATIONS.md: one row per
factor) and ``calibration_drift.csv`` (the survey drift per store before and after the
fitted values)."""

from __future__ import annotations

from pathlib import Path

from .files import write_csv


def write_calibration(cal, folder: Path) -> list[Path]:
    folder = Path(folder)
    return [write_csv(cal.table, folder / "calibration.csv", float_format="%.6g"),
            write_csv(cal.drift, folder / "calibration_drift.csv", float_format="%.4f")]
