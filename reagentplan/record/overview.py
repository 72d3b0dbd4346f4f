"""What the dashboard shows of the record: the plan version in force, plan against
book against survey per store, recorded arrivals and shipments against the plan in
force week by week, and what changed between the last two plans.  Pure selections of
the record's library functions; the dashboard draws them."""

from __future__ import annotations

import dataclasses
import datetime as dt
from dataclasses import dataclass

import pandas as pd
import sqlalchemy as sa

from ..scenario import Scenario
from .asof import RecordFrames, load_record
from .models import Import
from .review import Review, review
from .versions import PM, act_first, diff_plans, load_plan, plan_ids


@dataclass(frozen=True)
class Overview:
    in_force: dict | None          # id, as_of, created_at, total_cost of the newest version
    review: Review
    weekly: pd.DataFrame           # week, direction, material, planned_t, recorded_t
    changes: pd.DataFrame          # diff of the last two versions
    act_first: pd.DataFrame
    compared: tuple[int, int] | None
    record: RecordFrames
    #: the factors fitted to the record's surveys (`reagentplan.record.calibrate`), or
    #: None with ``calibration_message`` saying why there is none
    calibration: object | None = None
    calibration_message: str = ""
    #: the newest imports: id, file_name, recorded_at, recorded_by, added, replaced
    imports: pd.DataFrame = dataclasses.field(default_factory=pd.DataFrame)


def weekly_against_plan(engine, record: RecordFrames, ids: list[int]) -> pd.DataFrame:
    """Recorded tonnes in and out per week and material against the plan in force on
    each day (the newest version starting on or before it)."""
    rec_in = record.arrivals.assign(direction="in", material="limestone")[["date", "direction", "material", "tonnes"]]
    rec_out = record.shipments.assign(direction="out")[["date", "direction", "material", "tonnes"]]
    recorded = pd.concat([rec_in, rec_out], ignore_index=True)
    if recorded.empty or not ids:
        return pd.DataFrame(columns=["week", "direction", "material", "planned_t", "recorded_t"])
    first, last = recorded["date"].min(), recorded["date"].max()
    with engine.connect() as conn:
        rows = conn.execute(sa.select(PM.c.plan_id, PM.c.date, PM.c.direction, PM.c.material, PM.c.tonnes)
                            .where(PM.c.date.between(first.date(), last.date()))).all()
    planned = pd.DataFrame([tuple(r) for r in rows], columns=["plan_id", "date", "direction", "material", "tonnes"])
    planned["date"] = pd.to_datetime(planned["date"])
    starts = {i: pd.Timestamp(load_plan(engine, i).start_date) for i in ids}
    planned["start"] = planned["plan_id"].map(starts)
    planned = planned[planned["start"] <= planned["date"]]
    # the plan in force on a day: the newest version that starts on or before it
    newest = planned.groupby("date")["plan_id"].transform("max")
    planned = planned[planned["plan_id"] == newest]

    def weekly(frame):
        return (frame.assign(week=frame["date"].dt.to_period("W-SUN").dt.start_time)
                .groupby(["week", "direction", "material"])["tonnes"].sum())

    out = pd.concat([weekly(planned).rename("planned_t"), weekly(recorded).rename("recorded_t")], axis=1)
    return out.fillna(0.0).reset_index()


def overview(engine, scenario: Scenario, until: dt.date | None = None) -> Overview:
    record = load_record(engine)
    ids = plan_ids(engine)
    in_force = None
    changes = pd.DataFrame()
    first = pd.DataFrame()
    compared = None
    if ids:
        p = load_plan(engine, ids[-1])
        in_force = {"id": p.id, "as_of": p.as_of, "created_at": p.created_at, "created_by": p.created_by,
                    "total_cost": p.summary.get("total_cost"), "start_date": p.start_date,
                    "horizon_days": p.horizon_days}
        if len(ids) >= 2:
            before = load_plan(engine, ids[-2])
            changes = diff_plans(before, p)
            first = act_first(changes, p.as_of)
            compared = (before.id, p.id)
    rv = review(engine, scenario, record, until)
    cal, message = record_calibration(scenario, record, until)
    return Overview(in_force, rv, weekly_against_plan(engine, record, ids), changes, first, compared, record,
                    cal, message, recent_imports(engine))


def record_calibration(scenario: Scenario, record: RecordFrames, until: dt.date | None = None):
    """The calibration of the record's surveys up to ``until`` and "", or None and the
    reason there is none (too few surveys, missing generation...)."""
    from .calibrate import calibrate
    from .db import RecordError

    try:
        return calibrate(scenario, record, last=until), ""
    except RecordError as exc:
        return None, "; ".join(f"{p.found}: {p.expected}" if p.expected else str(p.found) for p in exc.problems)


def recent_imports(engine, limit: int = 20) -> pd.DataFrame:
    """The newest imports, newest first: who recorded which file, when, and how many
    rows it added or replaced."""
    t = Import.__table__
    with engine.connect() as conn:
        rows = conn.execute(sa.select(t.c.id, t.c.file_name, t.c.recorded_at, t.c.recorded_by, t.c.added,
                                      t.c.replaced).order_by(t.c.id.desc()).limit(limit)).all()
    return pd.DataFrame([tuple(r) for r in rows],
                        columns=["id", "file_name", "recorded_at", "recorded_by", "added", "replaced"])
