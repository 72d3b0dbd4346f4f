"""One policy against one world, week by week, through a throwaway operations record.

Each week: plan as of the week's eve from the record (`run_plan_from_record` for the
optimised plan; `baseline_from_record` for the reorder-point policy, the same record
path without the solve); book the inbound lines whose order-by day falls in the week;
carry the week out day by day against the world's true use and production with the
disturbances (late trains, partial takes; haul-outs as planned but never below the
store's safety stock); record the week's arrivals, shipments and
orders (a late train re-dated once it is known to be late) and the end-of-week survey of
every store; re-plan as of the week's last day.
"""

from __future__ import annotations

import datetime as dt
import io
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from ..pipeline import baseline_from_record, run_plan_from_record
from ..record.db import connect, upgrade
from ..record.importer import record_files
from ..record.versions import StoredPlan, diff_plans
from ..scenario import Scenario
from ..schedule.lanes import LANDFILL, SALE, SUPPLY
from .truth import Disturbances, World, partial_take, surveyed, train_delay

POLICIES = ("plan", "baseline")

ORDER_COLUMNS = ["order_id", "date", "supplier", "mode", "loads", "tonnes", "status"]
ARRIVAL_COLUMNS = ["date", "supplier", "mode", "loads", "tonnes", "ticket"]
SHIPMENT_COLUMNS = ["date", "party", "material", "mode", "loads", "tonnes", "ticket"]


@dataclass
class PolicyRun:
    """What happened when one policy was followed in one world.

    Attributes
    ----------
    daily : one row per day and store: level_t (true, end of day), unmet_t (limestone
        use the empty store could not meet), overflow_t (above capacity, dumped),
        safety_t, capacity_t [t]
    moved : realised movements: date, lane, kind, material, party, loads, tonnes [t]
    orders : every order booked: order_id, lane, planned (day the plan wanted it),
        arrival (true day), loads, tonnes, week booked
    plans : per week, the policy's movements of the plan it followed
    changes : per week after the first, the firm-window diff against the previous plan
    lanes : the lanes by name (prices, contracts)
    """

    policy: str
    world: int
    daily: pd.DataFrame
    moved: pd.DataFrame
    orders: pd.DataFrame
    plans: list[pd.DataFrame]
    changes: list[pd.DataFrame]
    lanes: dict
    plan_seconds: float = 0.0
    statuses: list[str] = field(default_factory=list)


def _xlsx(frames: dict[str, pd.DataFrame]) -> bytes:
    """A record file in memory (the record's sheet names), for `record_files`."""
    from openpyxl import Workbook

    wb = Workbook()
    wb.remove(wb.active)
    for name, frame in frames.items():
        ws = wb.create_sheet(name)
        ws.append(list(frame.columns))
        for row in frame.itertuples(index=False, name=None):
            ws.append([v.date() if isinstance(v, pd.Timestamp) else
                       (None if v is None or (isinstance(v, float) and v != v) else v) for v in row])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _policy_plan(policy: str, workbook, engine, as_of, scenario, lookahead_days, firm_days, time_limit, solver,
                 guard=None, previous: pd.DataFrame | None = None):
    """(movements, lanes, status) of the policy's plan as of ``as_of``; ``guard`` gives
    the futures guarding it (`GuardFutures`, or None for none); ``previous`` is the plan in
    force (its firm-window loads cost something to move)."""
    if policy == "plan":
        run = run_plan_from_record(workbook, engine, as_of, scenario=scenario, horizon_days=lookahead_days,
                                   store=False, futures=0, sampler=guard, firm_days=firm_days,
                                   time_limit=time_limit, solver=solver, previous=previous)
        return run.plan.movements, run.plan.lanes, run.plan.outcome.status
    _, lanes, _, mv = baseline_from_record(workbook, engine, as_of, scenario=scenario,
                                           horizon_days=lookahead_days, firm_days=firm_days)
    return mv, lanes, "reorder point"


def _stored(mv: pd.DataFrame, start: dt.date, days: int) -> StoredPlan:
    """A plan's movements as the record's `StoredPlan` covering ``days`` from ``start``
    (the firm window), so `diff_plans` compares what both plans hold firm."""
    return StoredPlan(0, None, start, days, dt.datetime(2000, 1, 1), "", {}, mv)


def rehearse_policy(workbook: str | Path, scenario: Scenario, world: World, policy: str, *, weeks: int,
                    disturbances: Disturbances, seed: int = 0, lookahead_days: int = 120,
                    firm_days: int = 14, time_limit: float = 20.0, solver: str = "highs",
                    guard=None, on_week=None) -> PolicyRun:
    """Follow ``policy`` (``plan`` or ``baseline``) for ``weeks`` weeks in ``world``.

    The disturbances come from ``numpy.random.default_rng([seed, world.index])``: both
    policies meet the same stream of chances (common random numbers), though what they
    meet depends on what they book.  ``guard`` (`GuardFutures`) gives the futures that
    guard each weekly plan (None: none, the deterministic balance only).  ``on_week(week)`` is called after each
    week."""
    import time

    rng = np.random.default_rng([seed, world.index])
    start = scenario.plant.start_date
    as_of = start - dt.timedelta(days=1)
    true = {k: float(st.initial_t) for k, st in scenario.storage.items()}
    daily, moved, changes, plans, statuses = [], [], [], [], []
    orders: dict[str, dict] = {}
    plan_seconds = 0.0
    all_lanes: dict = {}
    with tempfile.TemporaryDirectory(prefix="rehearse-") as tmp:
        engine = connect(f"sqlite:///{Path(tmp) / 'record.db'}")
        try:
            upgrade(engine)
            first = [{"order_id": f"WB-{i + 1}", "date": pd.Timestamp(o.date), "supplier": o.party,
                      "mode": o.mode, "loads": o.loads, "tonnes": o.tonnes, "status": "booked"}
                     for i, o in enumerate(scenario.firm_orders) if o.material == "limestone"]
            for r in first:
                orders[r["order_id"]] = dict(r, lane=None, planned=r["date"], arrival=r["date"], week=0)
            survey = pd.DataFrame([{"date": pd.Timestamp(as_of), "store": k, "level_t": surveyed(rng, v, disturbances),
                                    "method": "survey"} for k, v in true.items()])
            facts = {"stock_surveys": survey}
            if first:
                facts["orders"] = pd.DataFrame(first, columns=ORDER_COLUMNS)
            record_files(engine, [("week_0.xlsx", _xlsx(facts))], scenario=scenario, today=as_of)
            prev = None
            for week in range(1, weeks + 1):
                week_end = as_of + dt.timedelta(days=7)
                t0 = time.perf_counter()
                mv, lanes, status = _policy_plan(policy, workbook, engine, as_of, scenario, lookahead_days,
                                                 firm_days, time_limit, solver, guard,
                                                 None if prev is None else prev[0])
                plan_seconds += time.perf_counter() - t0
                statuses.append(status)
                lane_of = {ln.name: ln for ln in lanes}
                all_lanes.update(lane_of)
                plan_start = as_of + dt.timedelta(days=1)
                plans.append(mv.assign(week=week))
                if prev is not None:
                    d = diff_plans(_stored(prev[0], prev[1], firm_days), _stored(mv, plan_start, firm_days))
                    changes.append(d.assign(week=week))
                prev = (mv, plan_start)
                # the coordinator books what must be ordered this week
                due = mv[(mv["direction"] == "in") & ~mv["booked"].astype(bool)
                         & (mv["date"] > pd.Timestamp(as_of)) & (mv["order_by"] <= pd.Timestamp(week_end))]
                for r in due.itertuples(index=False):
                    lane = lane_of[r.lane]
                    oid = f"R{week}-{r.lane[:24]}-{r.date:%Y%m%d}"
                    late = train_delay(rng, disturbances) if lane.mode == "rail" else 0
                    orders[oid] = {"order_id": oid, "date": r.date, "supplier": r.party, "mode": lane.mode,
                                   "loads": int(r.loads), "tonnes": float(r.tonnes), "status": "booked",
                                   "lane": r.lane, "planned": r.date,
                                   "arrival": r.date + pd.Timedelta(days=late), "week": week}
                # an order booked before the rehearsal (the workbook's) may be late too
                for o in orders.values():
                    if o["week"] == 0 and o["lane"] is None:
                        o["lane"] = _supply_lane(lane_of, o)
                        if o["mode"] == "rail":
                            o["arrival"] = o["planned"] + pd.Timedelta(days=train_delay(rng, disturbances))
                arrivals, shipments = [], []
                for day in pd.date_range(plan_start, week_end, freq="D"):
                    i = world.day(day)
                    got = [o for o in orders.values() if o["arrival"] == day]
                    for o in got:
                        lane = all_lanes.get(o["lane"]) or lane_of[_supply_lane(lane_of, o)]
                        tonnes = float(o["loads"] * lane.load_t)
                        arrivals.append({"date": day, "supplier": o["supplier"], "mode": o["mode"],
                                         "loads": o["loads"], "tonnes": tonnes, "ticket": f"A-{o['order_id']}"})
                        moved.append({"date": day, "lane": lane.name, "kind": SUPPLY, "material": "limestone",
                                      "party": o["supplier"], "loads": o["loads"], "tonnes": tonnes})
                    rows = {}
                    for store in true:
                        st = scenario.storage[store]
                        unmet = overflow = 0.0
                        if store == "limestone":
                            x = true[store] + sum(a["tonnes"] for a in arrivals if a["date"] == day) \
                                - world.flows[store][i]
                            if x < 0:
                                unmet, x = -x, 0.0
                        else:
                            x = true[store] + world.flows[store][i]
                            out = mv[(mv["direction"] == "out") & (mv["date"] == day) & (mv["material"] == store)]
                            for r in out.sort_values("cost").itertuples(index=False):
                                lane = lane_of[r.lane]
                                # a haul-out goes as planned but never below the store's
                                # safety stock (the heel a coordinator keeps), as the
                                # reorder-point rule ships only the stock above safety
                                room = max(x - st.safety_t, 0.0)
                                if lane.kind == SALE:
                                    loads = partial_take(rng, int(r.loads), disturbances)
                                    loads = min(loads, int(np.floor(room / lane.load_t)))
                                    tonnes = loads * lane.load_t
                                else:
                                    loads, tonnes = None, float(min(r.tonnes, room))
                                if (loads is not None and loads <= 0) or tonnes <= 1e-6:
                                    continue
                                x -= tonnes
                                ticket = f"S-{week}-{len(shipments) + 1:05d}"
                                shipments.append({"date": day, "party": r.party, "material": store,
                                                  "mode": lane.mode, "loads": loads, "tonnes": round(tonnes, 3),
                                                  "ticket": ticket})
                                moved.append({"date": day, "lane": lane.name, "kind": lane.kind, "material": store,
                                              "party": r.party, "loads": loads if loads is not None else np.nan,
                                              "tonnes": round(tonnes, 3)})
                            if x > st.capacity_t:
                                overflow, x = x - st.capacity_t, float(st.capacity_t)
                        true[store] = x
                        rows[store] = (x, unmet, overflow)
                    for store, (x, unmet, overflow) in rows.items():
                        st = scenario.storage[store]
                        daily.append({"date": day, "store": store, "level_t": x, "unmet_t": unmet,
                                      "overflow_t": overflow, "safety_t": st.safety_t, "capacity_t": st.capacity_t})
                # the week recorded as a coordinator would: orders (a train known late re-dated),
                # arrivals, shipments, and the survey at the week's end
                replace = False
                for o in orders.values():
                    if o["planned"] <= pd.Timestamp(week_end) < o["arrival"] and o["date"] != o["arrival"]:
                        o["date"], replace = o["arrival"], True
                facts = {"orders": pd.DataFrame([{k: o[k] for k in ORDER_COLUMNS} for o in orders.values()],
                                                columns=ORDER_COLUMNS),
                         "stock_surveys": pd.DataFrame([{"date": pd.Timestamp(week_end), "store": k,
                                                         "level_t": surveyed(rng, v, disturbances),
                                                         "method": "survey"} for k, v in true.items()])}
                if arrivals:
                    facts["arrivals"] = pd.DataFrame(arrivals, columns=ARRIVAL_COLUMNS)
                if shipments:
                    facts["shipments"] = pd.DataFrame(shipments, columns=SHIPMENT_COLUMNS)
                record_files(engine, [(f"week_{week}.xlsx", _xlsx(facts))], scenario=scenario,
                             replace=replace, today=week_end)
                as_of = week_end
                if on_week is not None:
                    on_week(week)
        finally:
            engine.dispose()
    order_frame = pd.DataFrame(list(orders.values()),
                               columns=["order_id", "lane", "supplier", "mode", "planned", "arrival", "date",
                                        "loads", "tonnes", "week"])
    return PolicyRun(policy, world.index, pd.DataFrame(daily), pd.DataFrame(
        moved, columns=["date", "lane", "kind", "material", "party", "loads", "tonnes"]), order_frame,
        plans, changes, all_lanes, plan_seconds, statuses)


def _supply_lane(lane_of: dict, order: dict) -> str:
    """The supply lane an order (supplier, mode, day) arrives by."""
    month = pd.Timestamp(order["planned"]).month - 1
    for name, lane in lane_of.items():
        if lane.kind == SUPPLY and lane.party == order["supplier"] and lane.mode == order["mode"] \
                and month in getattr(lane.source, "months", range(12)):
            return name
    for name, lane in lane_of.items():
        if lane.kind == SUPPLY and lane.party == order["supplier"]:
            return name
    raise KeyError(order["supplier"])


__all__ = ["PolicyRun", "rehearse_policy", "POLICIES", "LANDFILL"]
