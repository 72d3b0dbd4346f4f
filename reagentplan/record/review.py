"""Plan against book against survey (``review``), and the drift between the book and
the surveys per store: how well the balance matches the plant.

At each survey after a store's first, the book level rolled from the survey before is
set against what the survey found: drift = book - survey [t].  A steady positive drift
of the limestone store means the balance under-states the use (or the weighbridge
over-states the arrivals); its size per day of rolling and as a share of the tonnes
used or made in between measures the balance's accuracy.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..scenario import Scenario
from .asof import RecordFrames, book_levels
from .versions import load_plan, plan_calibrations, plans_in_force

PLAN_VS_ACTUAL_COLUMNS = ["date", "store", "planned_level_t", "book_level_t", "surveyed_level_t",
                          "plan_id"]
DRIFT_COLUMNS = ["store", "survey_date", "previous_survey_date", "days", "book_level_t",
                 "surveyed_level_t", "drift_t", "drift_t_per_day", "flow_t", "drift_pct_of_flow"]


@dataclass(frozen=True)
class Review:
    plan_vs_actual: pd.DataFrame
    drift: pd.DataFrame
    by_store: pd.DataFrame   # store, surveys, mean_drift_t, mean_abs_drift_t, drift_t_per_day, drift_pct_of_flow
    #: plan versions in force in the review made with ``plan --calibrated``: id -> calibration
    calibrated: dict = dataclasses.field(default_factory=dict)


def last_fact_day(record: RecordFrames) -> dt.date | None:
    days = [f["date"].max() for f in (record.surveys, record.arrivals, record.shipments, record.generation)
            if not f.empty]
    return max(days).date() if days else None


def planned_levels(engine, first: pd.Timestamp, last: pd.Timestamp) -> pd.DataFrame:
    """The level each day in the plan in force that day: the newest plan version that
    starts on or before the day and covers it (date, store, planned_level_t, plan_id)."""
    plans = plans_in_force(engine)
    parts = []
    for p in plans.itertuples(index=False):
        inv = load_plan(engine, int(p.id), inventory=True).inventory
        inv = inv[(inv["date"] >= first) & (inv["date"] <= last)]
        parts.append(inv[["date", "store", "level_t"]].assign(plan_id=int(p.id)))
    if not parts:
        return pd.DataFrame(columns=["date", "store", "planned_level_t", "plan_id"])
    allp = pd.concat(parts, ignore_index=True).sort_values("plan_id")
    newest = allp.drop_duplicates(["date", "store"], keep="last")
    return newest.rename(columns={"level_t": "planned_level_t"})


def review(engine, scenario: Scenario, record: RecordFrames, until: dt.date | None = None) -> Review:
    """Plan against book against survey from the first survey to ``until`` (default:
    the last recorded fact)."""
    until = until or last_fact_day(record)
    if until is None:
        empty = pd.DataFrame(columns=PLAN_VS_ACTUAL_COLUMNS)
        return Review(empty, pd.DataFrame(columns=DRIFT_COLUMNS), pd.DataFrame())
    book = book_levels(scenario, record, until)
    first, last = book["date"].min(), book["date"].max()
    planned = planned_levels(engine, first, last)
    pva = book.merge(planned, on=["date", "store"], how="left")
    pva = pva[PLAN_VS_ACTUAL_COLUMNS]
    pva = pva[pva[["planned_level_t", "book_level_t", "surveyed_level_t"]].notna().any(axis=1)]
    pva = pva.sort_values(["date", "store"]).reset_index(drop=True)
    pva["plan_id"] = pva["plan_id"].astype("Int64")
    drift = drift_table(book)
    in_force = set(pva["plan_id"].dropna().astype(int))
    calibrated = {i: c for i, c in plan_calibrations(engine).items() if i in in_force}
    return Review(pva, drift, drift_by_store(drift), calibrated)


def drift_table(book: pd.DataFrame) -> pd.DataFrame:
    """One row per survey with a survey before it: the book rolled to it and the drift."""
    rows = []
    for store, g in book.groupby("store", sort=False):
        g = g.reset_index(drop=True)
        flow = np.cumsum(g["flow_t"].to_numpy(float))
        for i in np.flatnonzero(g["surveyed_level_t"].notna() & g["rolled_from"].notna()):
            prev = pd.Timestamp(g.at[i, "rolled_from"])
            j = int(np.flatnonzero(g["date"] == prev)[0]) if (g["date"] == prev).any() else 0
            days = int((g.at[i, "date"] - prev).days)
            d = float(g.at[i, "rolled_level_t"] - g.at[i, "surveyed_level_t"])
            f = float(flow[i] - flow[j])
            rows.append({"store": store, "survey_date": g.at[i, "date"], "previous_survey_date": prev,
                         "days": days, "book_level_t": float(g.at[i, "rolled_level_t"]),
                         "surveyed_level_t": float(g.at[i, "surveyed_level_t"]), "drift_t": d,
                         "drift_t_per_day": d / days if days else np.nan, "flow_t": f,
                         "drift_pct_of_flow": 100 * d / f if f > 0 else np.nan})
    return pd.DataFrame(rows, columns=DRIFT_COLUMNS)


def drift_by_store(drift: pd.DataFrame) -> pd.DataFrame:
    if drift.empty:
        return pd.DataFrame(columns=["store", "surveys", "mean_drift_t", "mean_abs_drift_t",
                                     "drift_t_per_day", "drift_pct_of_flow"])
    g = drift.groupby("store", sort=False)
    return pd.DataFrame({
        "surveys": g.size(),
        "mean_drift_t": g["drift_t"].mean(),
        "mean_abs_drift_t": g["drift_t"].apply(lambda x: x.abs().mean()),
        "drift_t_per_day": g["drift_t"].sum() / g["days"].sum(),
        "drift_pct_of_flow": 100 * g["drift_t"].sum() / g["flow_t"].sum(),
    }).reset_index()


def describe_review(r: Review) -> str:
    if r.plan_vs_actual.empty:
        return "Nothing to review: the record holds no surveys."
    lines = [f"Plan against book against survey, {r.plan_vs_actual['date'].min():%Y-%m-%d} to "
             f"{r.plan_vs_actual['date'].max():%Y-%m-%d}."]
    if r.by_store.empty:
        lines.append("No store has two surveys yet, so the book cannot be checked against one.")
    else:
        lines.append("Book minus survey (the balance's drift), per store:")
        for s in r.by_store.itertuples(index=False):
            lines.append(f"  {s.store:<10} {s.surveys} survey(s): mean {s.mean_drift_t:+,.0f} t, mean abs "
                         f"{s.mean_abs_drift_t:,.0f} t, {s.drift_t_per_day:+,.1f} t/day, "
                         f"{s.drift_pct_of_flow:+.1f} % of the tonnes used or made")
    if r.calibrated:
        from .calibrate import describe_applied

        lines.append("Plans in force made with calibrated factors (the others use the workbook's):")
        for pid, cal in r.calibrated.items():
            lines.append(f"  plan {pid}: {describe_applied(cal)}")
    elif r.plan_vs_actual["plan_id"].notna().any():
        lines.append("Every plan in force uses the workbook's factors (none was made with --calibrated).")
    return "\n".join(lines)
