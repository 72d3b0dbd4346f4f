"""Files of the operations record's commands: ``orders_changed.csv`` (diff) and
``plan_vs_actual.csv`` with ``survey_drift.csv`` (review)."""

from __future__ import annotations

from pathlib import Path

from .files import write_csv


def write_diff(diff, folder: Path) -> list[Path]:
    return [write_csv(diff, Path(folder) / "orders_changed.csv")]


def write_review(review, folder: Path) -> list[Path]:
    folder = Path(folder)
    return [write_csv(review.plan_vs_actual, folder / "plan_vs_actual.csv", float_format="%.3f"),
            write_csv(review.drift, folder / "survey_drift.csv", float_format="%.3f")]
