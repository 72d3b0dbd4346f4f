"""The study's table and its winner.

A case's *risk* is the higher of its two daily chances, ``p_limestone_below_safety``
and ``p_any_over_capacity`` (each the highest over the horizon of the share of futures
breaking that limit on a day), the same measure the plan's risk level bounds.  The
winner is the planned case with the lowest expected cost (the mean over the futures of
`reagentplan.study.run.replay_costs`) among those whose risk is within the risk level;
ties go to the lower case number.
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from .grid import Grid, cell_value
from .run import EXTRA_COLUMNS, PLANNED, RESULT_COLUMNS


def case_table(specs, cases, rows: list[dict], columns: tuple[str, ...] | None = None, *,
               cells: bool = True) -> pd.DataFrame:
    """A study's table: per row (matched to its case by ``case``), the case number, one
    column per spec (named as its ``target``; the value as a cell, `cell_value`, or with
    ``cells`` False as the text given), then the row's ``columns`` (``None``: every
    field the rows have, in the order they come).  Any study's specs and cases (a
    station's `Grid`, a fleet's)."""
    by_case = {c.case: c for c in cases}
    targets = [spec.target for spec in specs]
    records = []
    for row in rows:
        case = by_case[row["case"]]
        rec = {"case": case.case}
        for target, value in zip(targets, case.values):
            rec[target] = cell_value(value) if cells else value
        rec.update(row if columns is None else {k: row.get(k) for k in columns})
        records.append(rec)
    if columns is None:
        return pd.DataFrame(records)
    return pd.DataFrame(records, columns=["case", *targets, *columns])


def study_frame(grid: Grid, rows: list[dict]) -> pd.DataFrame:
    """``study.csv``: case, one column per ``--vary`` (named as its target), then
    `RESULT_COLUMNS` (DESIGN §7) and `EXTRA_COLUMNS` (`case_table`)."""
    return case_table(grid.specs, grid.cases, rows, RESULT_COLUMNS + EXTRA_COLUMNS)


def case_risk(frame: pd.DataFrame) -> pd.Series:
    """The higher of the two daily chances per case [-] (NaN for a case with no plan)."""
    return frame[["p_limestone_below_safety", "p_any_over_capacity"]].astype(float).max(
        axis=1, skipna=False)


@dataclass(frozen=True)
class Winner:
    """The winning case (``None`` when no case qualifies) and why, in words."""

    case: int | None
    reason: str


def pick_winner(frame: pd.DataFrame, risk_level: float, currency: str = "",
                labels: dict[int, str] | None = None) -> Winner:
    """The case with the lowest expected cost among the planned cases whose risk
    (`case_risk`) is at most ``risk_level`` [-]."""
    labels = labels or {}
    planned = frame[frame["status"].isin(PLANNED)].copy()
    level = f"{100 * risk_level:g} %"
    if planned.empty:
        return Winner(None, "no case was planned, so none wins (see the status and message "
                            "columns)")
    planned["risk"] = case_risk(planned)
    within = planned[planned["risk"] <= risk_level + 1e-12]
    if within.empty:
        best = planned.sort_values(["risk", "expected_cost", "case"]).iloc[0]
        return Winner(None, (
            f"no case keeps its daily chance of limestone below safety stock or a store over "
            f"capacity within {level}; the least risky is case {int(best['case'])} "
            f"({labels.get(int(best['case']), '')}) at {100 * best['risk']:.1f} %"))
    ranked = within.sort_values(["expected_cost", "case"])
    win = ranked.iloc[0]
    text = (f"case {int(win['case'])} ({labels.get(int(win['case']), '')}) has the lowest "
            f"expected cost, {win['expected_cost']:,.0f} {currency}".rstrip()
            + f", among the {len(within)} of {len(frame)} cases whose daily chance of limestone "
            f"below safety stock or a store over capacity stays within {level} (its highest: "
            f"{100 * win['risk']:.1f} %)")
    if len(ranked) > 1:
        nxt = ranked.iloc[1]
        text += (f"; the next, case {int(nxt['case'])}, costs "
                 f"{nxt['expected_cost'] - win['expected_cost']:,.0f} {currency} more".rstrip())
    excluded = planned[planned["risk"] > risk_level + 1e-12]
    cheaper = excluded[excluded["expected_cost"] < win["expected_cost"]]
    if len(cheaper):
        c = cheaper.sort_values("expected_cost").iloc[0]
        text += (f"; case {int(c['case'])} would cost less "
                 f"({c['expected_cost']:,.0f} {currency}) but its risk is "
                 f"{100 * c['risk']:.1f} %").replace("  ", " ")
    return Winner(int(win["case"]), text)


def study_summary(frame: pd.DataFrame) -> dict:
    """Counts of the cases by status."""
    counts = frame["status"].value_counts()
    return {str(k): int(v) for k, v in counts.items()}


def read_study_table(source) -> tuple[pd.DataFrame, dict]:
    """A study written by `reagentplan study`: its ``study.csv`` as a frame, and its
    ``study.json`` (``{}`` when absent).  ``source`` is the output folder, the path of
    a ``study.csv``, or the bytes of one (an upload).

    Raises
    ------
    ValueError
        Not a study table (the columns of DESIGN §7 are missing), or no such file.
    """
    import io
    import json
    import os
    from pathlib import Path

    meta: dict = {}
    if isinstance(source, (bytes, bytearray)):
        data = io.BytesIO(bytes(source))
        name = "the file"
    else:
        path = Path(os.fspath(source))
        if path.is_dir():
            if (path / "study.json").is_file():
                meta = json.loads((path / "study.json").read_text(encoding="utf-8"))
            path = path / "study.csv"
        if not path.is_file():
            raise ValueError(f"{path} does not exist; expected the folder a study was written "
                             "to (with its study.csv)")
        data, name = path, path.name
    try:
        frame = pd.read_csv(data)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise ValueError(f"{name} could not be read as CSV ({type(exc).__name__})") from None
    missing = [c for c in ("case", *RESULT_COLUMNS, "expected_cost") if c not in frame.columns]
    if missing:
        raise ValueError(f"{name} is not a study.csv: it has no column "
                         + ", ".join(f"'{c}'" for c in missing))
    return frame, meta


def varied_columns(frame: pd.DataFrame) -> list[str]:
    """The columns of the varied values: those between ``case`` and ``status``."""
    cols = list(frame.columns)
    return cols[cols.index("case") + 1:cols.index("status")]


__all__ = ["case_table", "study_frame", "case_risk", "Winner", "pick_winner", "study_summary",
           "read_study_table", "varied_columns"]
