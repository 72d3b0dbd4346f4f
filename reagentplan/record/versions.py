"""Plan versions: each plan made from the record is stored (the workbook it came from,
its fingerprint, summary, movements and inventory), so that two plans can be compared
(`diff_plans`) and a plan set against what happened (``review``).
"""

from __future__ import annotations

import datetime as dt
import getpass
import hashlib
import json
from dataclasses import dataclass

import numpy as np
import pandas as pd
import sqlalchemy as sa

from ..errors import Problem
from .db import RecordError, require_current, write_transaction
from .models import PlanInventory, PlanMovement, PlanVersion, StoredWorkbook

PV, PM, PI, WB = (PlanVersion.__table__, PlanMovement.__table__, PlanInventory.__table__,
                  StoredWorkbook.__table__)

#: A load that leaves one day and reappears on the same lane within this many days is
#: "moved", not cancelled and added [d] (common practice, no source).
MOVE_WINDOW_DAYS = 7
#: Lines a coordinator acts on first: orders to place or cancel within this many days [d].
ACT_WITHIN_DAYS = 7


def fingerprint(workbook_bytes: bytes, as_of: dt.date | None, last_import_id: int | None,
                options: dict) -> str:
    """A digest of everything the plan was made from: the workbook, the as-of day, the
    record (its last import) and the planning options."""
    h = hashlib.sha256(workbook_bytes)
    h.update(json.dumps({"as_of": str(as_of), "import": last_import_id, "options": options},
                        sort_keys=True, default=str).encode())
    return h.hexdigest()


def _py(v):
    if v is None or (isinstance(v, float) and np.isnan(v)) or v is pd.NaT or v is pd.NA:
        return None
    if isinstance(v, pd.Timestamp):
        return v.date()
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return float(v)
    if isinstance(v, np.bool_):
        return bool(v)
    return v


def store_plan(engine, *, summary: dict, movements: pd.DataFrame, inventory: pd.DataFrame,
               workbook_bytes: bytes, workbook_name: str, as_of: dt.date | None,
               start_date: dt.date, horizon_days: int, finger: str,
               last_import_id: int | None, who: str | None = None) -> int:
    """Store one plan version (one transaction); returns its id.  ``who`` made it
    (default: the operating-system user)."""
    require_current(engine)
    sha = hashlib.sha256(workbook_bytes).hexdigest()
    with write_transaction(engine) as conn:
        if conn.execute(sa.select(WB.c.sha256).where(WB.c.sha256 == sha)).first() is None:
            conn.execute(sa.insert(WB).values(sha256=sha, file_name=workbook_name[:500],
                                              content=workbook_bytes))
        plan_id = conn.execute(sa.insert(PV).values(
            created_at=dt.datetime.now(dt.timezone.utc).replace(tzinfo=None), created_by=who or _user(),
            as_of=as_of, start_date=start_date, horizon_days=horizon_days, workbook_sha256=sha,
            fingerprint=finger, last_import_id=last_import_id, status=str(summary.get("status"))[:200],
            total_cost=float(summary.get("total_cost") or 0.0),
            summary_json=json.dumps(summary, default=str))).inserted_primary_key[0]
        cols = ["date", "material", "direction", "party", "lane", "kind", "loads", "tonnes", "cost",
                "order_by", "firm", "booked"]
        mv = movements.copy()
        mv["loads"] = mv["loads"].astype(object).where(mv["loads"].notna(), None)
        rows = [{c: _py(v) for c, v in zip(cols, t)} | {"plan_id": plan_id}
                for t in mv[cols].itertuples(index=False, name=None)]
        if rows:
            conn.execute(sa.insert(PM), rows)
        icols = ["date", "store", "level_t", "safety_t", "capacity_t"]
        rows = [{c: _py(v) for c, v in zip(icols, t)} | {"plan_id": plan_id}
                for t in inventory[icols].itertuples(index=False, name=None)]
        if rows:
            conn.execute(sa.insert(PI), rows)
    return int(plan_id)


def _user() -> str:
    try:
        return getpass.getuser()
    except Exception:  # no user name in this environment
        return "unknown"


@dataclass(frozen=True)
class StoredPlan:
    id: int
    as_of: dt.date | None
    start_date: dt.date
    horizon_days: int
    created_at: dt.datetime
    workbook_sha256: str
    summary: dict
    movements: pd.DataFrame
    inventory: pd.DataFrame | None = None
    created_by: str | None = None

    @property
    def end_date(self) -> dt.date:
        return self.start_date + dt.timedelta(days=self.horizon_days - 1)


def plan_ids(engine) -> list[int]:
    require_current(engine)
    with engine.connect() as conn:
        return [r[0] for r in conn.execute(sa.select(PV.c.id).order_by(PV.c.id))]


def load_plan(engine, plan_id: int, inventory: bool = False) -> StoredPlan:
    with engine.connect() as conn:
        v = conn.execute(sa.select(PV).where(PV.c.id == plan_id)).mappings().first()
        if v is None:
            raise RecordError(Problem(None, None, "plan id", f"no plan version {plan_id}",
                                      "the id of a stored plan (`reagentplan diff` lists them)"), "The command")
        mv = pd.DataFrame(conn.execute(sa.select(PM).where(PM.c.plan_id == plan_id)).mappings().all(),
                          columns=[c.name for c in PM.c])
        inv = None
        if inventory:
            inv = pd.DataFrame(conn.execute(sa.select(PI).where(PI.c.plan_id == plan_id)).mappings().all(),
                               columns=[c.name for c in PI.c])
            inv["date"] = pd.to_datetime(inv["date"])
    for c in ("date", "order_by"):
        mv[c] = pd.to_datetime(mv[c])
    return StoredPlan(v["id"], v["as_of"], v["start_date"], v["horizon_days"], v["created_at"],
                      v["workbook_sha256"], json.loads(v["summary_json"]), mv, inv, v["created_by"])


def latest_summary(engine) -> dict | None:
    """The plan in force (the newest stored version) as its ``summary.json`` says it,
    with ``plan_id``, ``created_at`` and ``created_by``; None when the record holds no
    plan."""
    require_current(engine)
    with engine.connect() as conn:
        v = conn.execute(sa.select(PV.c.id, PV.c.created_at, PV.c.created_by, PV.c.summary_json)
                         .order_by(PV.c.id.desc()).limit(1)).first()
    if v is None:
        return None
    summary = json.loads(v.summary_json)
    summary["plan_id"] = int(v.id)
    summary["created_at"] = v.created_at.isoformat(timespec="seconds") + "Z"
    summary["created_by"] = v.created_by
    return summary


def load_workbook_bytes(engine, sha256: str) -> bytes:
    with engine.connect() as conn:
        return conn.execute(sa.select(WB.c.content).where(WB.c.sha256 == sha256)).scalar_one()


def plan_calibrations(engine) -> dict[int, dict]:
    """The plan versions made with ``--calibrated``: id -> the calibration stored with
    it (the ``calibration`` key of its summary)."""
    with engine.connect() as conn:
        rows = conn.execute(sa.select(PV.c.id, PV.c.summary_json).order_by(PV.c.id)).all()
    out = {}
    for pid, text in rows:
        cal = json.loads(text).get("calibration") if text else None
        if cal:
            out[int(pid)] = cal
    return out


def plans_in_force(engine) -> pd.DataFrame:
    """Every plan version: id, as_of, start_date, end_date (for ``review``)."""
    with engine.connect() as conn:
        rows = conn.execute(sa.select(PV.c.id, PV.c.as_of, PV.c.start_date, PV.c.horizon_days)
                            .order_by(PV.c.id)).all()
    frame = pd.DataFrame(rows, columns=["id", "as_of", "start_date", "horizon_days"])
    frame["start_date"] = pd.to_datetime(frame["start_date"])
    return frame


# --------------------------------------------------------------------------- diff

DIFF_COLUMNS = ["lane", "date", "loads_before", "loads_after", "order_by", "change", "date_before",
                "direction", "material", "tonnes_before", "tonnes_after", "booked", "booked_before"]


def diff_plans(before: StoredPlan, after: StoredPlan) -> pd.DataFrame:
    """Orders that differ between two plans (``orders_changed.csv``).

    Compared per lane and day over the days both plans cover from the later plan's first
    day: a day with loads only in the later plan is ``added``, only in the earlier one
    ``cancelled``, in both with other loads ``changed`` (``booked``: the later plan's
    loads that day are orders already booked in the record); a cancelled and an added load of
    one lane within `MOVE_WINDOW_DAYS` pair into ``moved`` (``date`` is the new day,
    ``date_before`` the old).  Landfill (tonnes, not loads) is left out.
    """
    lo = max(pd.Timestamp(before.start_date), pd.Timestamp(after.start_date))
    hi = min(pd.Timestamp(before.end_date), pd.Timestamp(after.end_date))

    def loads(p: StoredPlan) -> pd.DataFrame:
        m = p.movements
        m = m[(m["kind"] != "landfill") & (m["date"] >= lo) & (m["date"] <= hi)]
        return (m.groupby(["lane", "date"], as_index=False)
                .agg(loads=("loads", "sum"), tonnes=("tonnes", "sum"), order_by=("order_by", "first"),
                     direction=("direction", "first"), material=("material", "first"),
                     booked=("booked", "any")))

    a, b = loads(before), loads(after)
    m = a.merge(b, on=["lane", "date"], how="outer", suffixes=("_before", "_after"))
    for c in ("loads", "tonnes"):
        m[f"{c}_before"] = m[f"{c}_before"].fillna(0)
        m[f"{c}_after"] = m[f"{c}_after"].fillna(0)
    m = m[m["loads_before"] != m["loads_after"]].copy()
    m["order_by"] = m["order_by_after"].fillna(m["order_by_before"])
    m["direction"] = m["direction_after"].fillna(m["direction_before"])
    m["material"] = m["material_after"].fillna(m["material_before"])
    m["booked"] = m["booked_after"].fillna(False).astype(bool)
    m["booked_before"] = m["booked_before"].fillna(False).astype(bool)
    m["change"] = np.where(m["loads_before"] == 0, "added",
                           np.where(m["loads_after"] == 0, "cancelled", "changed"))
    m["date_before"] = pd.NaT
    rows = []
    for lane, g in m.sort_values("date").groupby("lane", sort=False):
        g = g.to_dict("records")
        cancelled = [r for r in g if r["change"] == "cancelled"]
        for r in g:
            if r["change"] != "added":
                continue
            near = [c for c in cancelled if abs((c["date"] - r["date"]).days) <= MOVE_WINDOW_DAYS
                    and c["loads_before"] == r["loads_after"]]
            if near:
                c = min(near, key=lambda c: abs((c["date"] - r["date"]).days))
                cancelled.remove(c)
                c["change"] = "_paired"
                r.update(change="moved", date_before=c["date"], loads_before=c["loads_before"],
                         tonnes_before=c["tonnes_before"], booked_before=c["booked_before"])
        rows += [r for r in g if r["change"] != "_paired"]
    out = pd.DataFrame(rows, columns=list(m.columns))
    out = out[DIFF_COLUMNS].sort_values(["date", "lane"]).reset_index(drop=True)
    out["loads_before"] = out["loads_before"].astype(int)
    out["loads_after"] = out["loads_after"].astype(int)
    return out


def act_first(diff: pd.DataFrame, as_of: dt.date | None, within: int = ACT_WITHIN_DAYS) -> pd.DataFrame:
    """The lines to act on this week: inbound orders whose order-by day falls within
    ``within`` days of the later plan's as-of day (to place, cancel or move), then
    haul-outs added or cancelled in those days.

    A change the record itself made (an order booked, moved or cancelled there: booked
    in the later plan for an added or moved line, in the earlier one for a cancelled
    line) is already known to the coordinator and is left out."""
    if diff.empty or as_of is None:
        return diff.iloc[0:0]
    t1 = pd.Timestamp(as_of) + pd.Timedelta(days=within)
    recorded = ((diff["booked"] & diff["change"].isin(["added", "moved"]))
                | (diff["booked_before"] & (diff["change"] == "cancelled")))
    inbound = diff[(diff["direction"] == "in") & ((diff["order_by"] <= t1) | (diff["date"] <= t1))
                   & ~recorded]
    outbound = diff[(diff["direction"] == "out") & diff["change"].isin(["added", "cancelled"])
                    & (diff["date"] <= t1)]
    return pd.concat([inbound.sort_values(["order_by", "lane"]), outbound.sort_values(["date", "lane"])])


def describe_diff(before: StoredPlan, after: StoredPlan, diff: pd.DataFrame, first: pd.DataFrame) -> str:
    lines = [f"Plan {before.id} (as of {before.as_of}) -> plan {after.id} (as of {after.as_of}): "
             f"{len(diff)} order line(s) changed"]
    from .calibrate import describe_applied

    for p in (before, after):
        if p.summary.get("calibration"):
            lines.append(f"  plan {p.id} {describe_applied(p.summary['calibration'])}")
    if bool(before.summary.get("calibration")) != bool(after.summary.get("calibration")):
        lines.append("  (one plan uses the calibrated factors and the other the workbook's: part of the "
                     "change comes from the balance itself)")
    for direction, label in (("in", "limestone orders"), ("out", "haul-outs")):
        counts = diff.loc[diff["direction"] == direction, "change"].value_counts()
        if len(counts):
            lines.append(f"  {label}: " + ", ".join(f"{n} {k}" for k, n in counts.items()))
    if len(first):
        lines.append(f"Act on these first (within {ACT_WITHIN_DAYS} days of {after.as_of}):")
        for r in first.head(15).itertuples(index=False):
            what = {"added": "place", "cancelled": "cancel", "moved": "move", "changed": "change"}[r.change]
            by = f", order by {r.order_by:%Y-%m-%d}" if r.direction == "in" and pd.notna(r.order_by) else ""
            extra = f" (was {r.date_before:%Y-%m-%d})" if r.change == "moved" else ""
            lines.append(f"  {what:6s} {r.lane}: {r.date:%Y-%m-%d}{extra}, loads {r.loads_before} -> "
                         f"{r.loads_after}{by}")
        if len(first) > 15:
            lines.append(f"  ... and {len(first) - 15} more in orders_changed.csv")
    else:
        lines.append("Nothing to place, cancel or move this week.")
    known = int(((diff["booked"] & diff["change"].isin(["added", "moved"]))
                 | (diff["booked_before"] & (diff["change"] == "cancelled"))).sum()) if len(diff) else 0
    if known:
        lines.append(f"({known} change(s) came from orders booked, moved or cancelled in the record "
                     "itself: nothing to do for them.)")
    held = after.summary.get("stability")
    if held:
        lines.append(f"The new plan weighed each move or cancellation of a load the plan in force held in its "
                     f"firm window at {held['change_cost_per_load']:,.0f} per load: "
                     f"{held['of_them_kept_on_their_day']} of {held['loads_held_in_firm_window']} kept on their day.")
    dt_cost = after.summary.get("total_cost", 0) - before.summary.get("total_cost", 0)
    lines.append(f"Total cost {before.summary.get('total_cost', 0):,.0f} -> "
                 f"{after.summary.get('total_cost', 0):,.0f} ({dt_cost:+,.0f}).")
    return "\n".join(lines)
