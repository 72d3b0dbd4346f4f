"""One policy against one world, week by week, through a throwaway operations record.

The world's futures are sampled at the workbook's stone.  The stone really fed is the
well-mixed silo's (`balance.silo_replay`): the world's CaCO3 need is drawn from it, so a
poorer stone is used in more tonnes, and the gypsum is the world's scaled by the
deterministic balance at the silo's CaCO3 over that at the workbook's stone, with its
purity there.  A buyer's laboratory refuses a day's loads that break the buyer's
limits (`lanes.quality_ok`); they stay in the store.

Each week: plan as of the week's eve from the record (`run_plan_from_record` for the
optimised plan; `baseline_from_record` for the reorder-point policy, the same record
path without the solve); book the inbound lines whose order-by day falls in the week;
carry the week out day by day against the world's true use and production with the
disturbances (late trains, partial takes; haul-outs as planned but never below the
store's safety stock); record the week's arrivals (with the supplier's CaCO3 as the
delivery's lab result), shipments and
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

from ..balance import balance_frame, silo_replay
from ..pipeline import baseline_from_record, run_plan_from_record
from ..record.db import connect, upgrade
from ..record.importer import record_files
from ..record.versions import StoredPlan, diff_plans
from ..scenario import Scenario
from ..settings import WEEKLY_PLAN, PlanSettings
from ..schedule.lanes import LANDFILL, SALE, SUPPLY, quality_ok
from .truth import Disturbances, World, partial_take, surveyed, train_delay

POLICIES = ("plan", "baseline")

ORDER_COLUMNS = ["order_id", "date", "supplier", "mode", "loads", "tonnes", "status"]
ARRIVAL_COLUMNS = ["date", "supplier", "mode", "loads", "tonnes", "ticket", "caco3_pct"]
SHIPMENT_COLUMNS = ["date", "party", "material", "mode", "loads", "tonnes", "ticket"]


@dataclass
class PolicyRun:
    """What happened when one policy was followed in one world.

    Attributes
    ----------
    daily : one row per day and store: level_t (true, end of day), unmet_t (limestone
        use the empty store could not meet), overflow_t (above capacity, dumped),
        safety_t, capacity_t, used_t (limestone drawn), refused_t (loads a buyer's
        laboratory refused) [t]; caco3_pct (the stone fed, limestone rows) [%]
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


def _policy_plan(policy: str, workbook, engine, as_of, scenario, lookahead_days, settings: PlanSettings,
                 guard=None, previous: pd.DataFrame | None = None):
    """(movements, lanes, status) of the policy's plan as of ``as_of`` made with
    ``settings``; ``guard`` gives the futures guarding it (`GuardFutures`, or None for
    none; ``settings.futures`` is not sampled here); ``previous`` is the plan in force
    (its firm-window loads cost something to move)."""
    if policy == "plan":
        run = run_plan_from_record(workbook, engine, as_of, settings, scenario=scenario,
                                   horizon_days=lookahead_days, store=False, futures=0, sampler=guard,
                                   previous=previous)
        return run.plan.movements, run.plan.lanes, run.plan.outcome.status
    _, lanes, _, mv = baseline_from_record(workbook, engine, as_of, scenario=scenario,
                                           horizon_days=lookahead_days, firm_days=settings.firm_days)
    return mv, lanes, "reorder point"


def _stored(mv: pd.DataFrame, start: dt.date, days: int) -> StoredPlan:
    """A plan's movements as the record's `StoredPlan` covering ``days`` from ``start``
    (the firm window), so `diff_plans` compares what both plans hold firm."""
    return StoredPlan(0, None, start, days, dt.datetime(2000, 1, 1), "", {}, mv)


@dataclass
class _Walk:
    """What one policy's walk through its world carries from week to week: the true
    stock per store [t], the rows gathered so far and the plan in force."""

    scenario: Scenario
    world: World
    policy: str
    disturbances: Disturbances
    rng: np.random.Generator
    engine: object
    as_of: dt.date
    true: dict[str, float]
    ref_caco3: np.ndarray        # the balance's CaCO3 of the stone fed per day [-]
    ref_gypsum: np.ndarray       # the balance's wet gypsum per day [t/d]
    fed: np.ndarray              # the CaCO3 of the stone really fed per day [-]
    silo_caco3: float            # the silo's CaCO3 now [-]
    orders: dict[str, dict] = field(default_factory=dict)
    daily: list = field(default_factory=list)
    moved: list = field(default_factory=list)
    plans: list = field(default_factory=list)
    changes: list = field(default_factory=list)
    statuses: list = field(default_factory=list)
    all_lanes: dict = field(default_factory=dict)
    plan_seconds: float = 0.0
    prev: tuple | None = None    # (movements, first day) of the plan in force


def _open_record(walk: _Walk) -> None:
    """The record as the rehearsal starts: the workbook's booked limestone orders and a
    survey of every store at the eve of the start."""
    scenario, as_of = walk.scenario, walk.as_of
    first = [{"order_id": f"WB-{i + 1}", "date": pd.Timestamp(o.date), "supplier": o.party,
              "mode": o.mode, "loads": o.loads, "tonnes": o.tonnes, "status": "booked"}
             for i, o in enumerate(scenario.firm_orders) if o.material == "limestone"]
    for r in first:
        walk.orders[r["order_id"]] = dict(r, lane=None, planned=r["date"], arrival=r["date"], week=0)
    survey = pd.DataFrame([{"date": pd.Timestamp(as_of), "store": k,
                            "level_t": surveyed(walk.rng, v, walk.disturbances), "method": "survey"}
                           for k, v in walk.true.items()])
    facts = {"stock_surveys": survey}
    if first:
        facts["orders"] = pd.DataFrame(first, columns=ORDER_COLUMNS)
    record_files(walk.engine, [("week_0.xlsx", _xlsx(facts))], scenario=scenario, today=as_of)


def _plan_week(walk: _Walk, week: int, workbook, lookahead_days: int, settings: PlanSettings, guard):
    """Plan as of the week's eve from the record and keep the plan (and, after the first
    week, its firm-window changes against the plan in force): (movements, lanes by name,
    the plan's first day)."""
    import time

    t0 = time.perf_counter()
    mv, lanes, status = _policy_plan(walk.policy, workbook, walk.engine, walk.as_of, walk.scenario,
                                     lookahead_days, settings, guard,
                                     None if walk.prev is None else walk.prev[0])
    walk.plan_seconds += time.perf_counter() - t0
    walk.statuses.append(status)
    lane_of = {ln.name: ln for ln in lanes}
    walk.all_lanes.update(lane_of)
    plan_start = walk.as_of + dt.timedelta(days=1)
    walk.plans.append(mv.assign(week=week))
    if walk.prev is not None:
        firm = settings.firm_days
        d = diff_plans(_stored(walk.prev[0], walk.prev[1], firm), _stored(mv, plan_start, firm))
        walk.changes.append(d.assign(week=week))
    walk.prev = (mv, plan_start)
    return mv, lane_of, plan_start


def _book_orders(walk: _Walk, week: int, mv: pd.DataFrame, lane_of: dict, week_end: dt.date) -> None:
    """The coordinator books the inbound lines whose order-by day falls in the week; a
    train may turn out late (and an order booked before the rehearsal, the workbook's,
    too)."""
    rng, dist = walk.rng, walk.disturbances
    due = mv[(mv["direction"] == "in") & ~mv["booked"].astype(bool)
             & (mv["date"] > pd.Timestamp(walk.as_of)) & (mv["order_by"] <= pd.Timestamp(week_end))]
    for r in due.itertuples(index=False):
        lane = lane_of[r.lane]
        oid = f"R{week}-{r.lane[:24]}-{r.date:%Y%m%d}"
        late = train_delay(rng, dist) if lane.mode == "rail" else 0
        walk.orders[oid] = {"order_id": oid, "date": r.date, "supplier": r.party, "mode": lane.mode,
                            "loads": int(r.loads), "tonnes": float(r.tonnes), "status": "booked",
                            "lane": r.lane, "planned": r.date,
                            "arrival": r.date + pd.Timedelta(days=late), "week": week}
    for o in walk.orders.values():
        if o["week"] == 0 and o["lane"] is None:
            o["lane"] = _supply_lane(lane_of, o)
            if o["mode"] == "rail":
                o["arrival"] = o["planned"] + pd.Timedelta(days=train_delay(rng, dist))


def _carry_out_limestone(walk: _Walk, week_days: pd.DatetimeIndex, lane_of: dict) -> list[dict]:
    """The week's trains and trucks arrive and the scrubber draws its true CaCO3 need
    from the well-mixed silo (`silo_replay`), so poorer stone is drawn in more tonnes:
    the daily rows of the limestone store, and the week's arrivals as recorded."""
    scenario, world = walk.scenario, walk.world
    coupled = scenario.quality_coupled
    arrivals = []
    came, came_c = np.zeros(len(week_days)), np.zeros((len(week_days), 1))
    for k, day in enumerate(week_days):
        for o in [o for o in walk.orders.values() if o["arrival"] == day]:
            lane = walk.all_lanes.get(o["lane"]) or lane_of[_supply_lane(lane_of, o)]
            tonnes = float(o["loads"] * lane.load_t)
            # one stone (no supplier gives its own CaCO3): the scrubber sheet's
            # value that day, period settings included, and no lab result
            c = scenario.stone_caco3_pct(lane.source) if coupled else None
            came[k] += tonnes
            if coupled:
                came_c[k, 0] += tonnes * c / 100
            arrivals.append({"date": day, "supplier": o["supplier"], "mode": o["mode"],
                             "loads": o["loads"], "tonnes": tonnes, "ticket": f"A-{o['order_id']}",
                             "caco3_pct": c})
            walk.moved.append({"date": day, "lane": lane.name, "kind": SUPPLY, "material": "limestone",
                               "party": o["supplier"], "loads": o["loads"], "tonnes": tonnes})
    days_i = np.array([world.day(day) for day in week_days])
    need = world.flows["limestone"][days_i] * walk.ref_caco3[days_i]
    if coupled:
        r = silo_replay(walk.true["limestone"], [walk.silo_caco3], came, came_c, need)
        walk.silo_caco3 = float(r["frac"][-1, 0])
    else:
        # one stone: the silo holds the day's stone, as the balance takes it
        # (period settings included), so the world's use is drawn as it is
        r = silo_replay(walk.true["limestone"], [1.0], came, came[:, None],
                        world.flows["limestone"][days_i])
        r["unmet_caco3_t"] = r["unmet_caco3_t"] * walk.ref_caco3[days_i]
        r["frac"] = walk.ref_caco3[days_i][:, None]
    walk.true["limestone"] = float(r["level_t"][-1])
    walk.fed[days_i] = r["frac"][:, 0]
    st = scenario.storage["limestone"]
    for k, day in enumerate(week_days):
        walk.daily.append({"date": day, "store": "limestone", "level_t": float(r["level_t"][k]),
                           "unmet_t": float(r["unmet_caco3_t"][k] / r["frac"][k, 0]), "overflow_t": 0.0,
                           "safety_t": st.safety_t, "capacity_t": st.capacity_t,
                           "used_t": float(r["stone_t"][k]), "caco3_pct": float(100 * r["frac"][k, 0]),
                           "refused_t": 0.0})
    return arrivals


def _carry_out_byproducts(walk: _Walk, week: int, week_days: pd.DatetimeIndex, mv: pd.DataFrame,
                          lane_of: dict) -> list[dict]:
    """The byproducts of the stone really fed (the day's cake and its purity at the
    silo's CaCO3: the world's gypsum scaled by the balance there) pile up and leave as
    planned, never below the store's safety stock, a buyer taking only part of a day's
    loads at times and its laboratory refusing off-spec product: the daily rows of each
    byproduct store, and the week's shipments as recorded."""
    scenario, world, rng = walk.scenario, walk.world, walk.rng
    shipments = []
    bal = balance_frame(scenario, caco3_pct=100 * walk.fed)
    gyp_scale = np.divide(bal["gypsum_wet_t"].to_numpy(float), walk.ref_gypsum,
                          out=np.ones(len(walk.fed)), where=walk.ref_gypsum > 0)
    spec_ok = {}
    for day in week_days:
        i = world.day(day)
        for store in walk.true:
            if store == "limestone":
                continue
            st = scenario.storage[store]
            overflow = refused = 0.0
            made = world.flows[store][i] * (gyp_scale[i] if store == "gypsum" else 1.0)
            x = walk.true[store] + made
            out = mv[(mv["direction"] == "out") & (mv["date"] == day) & (mv["material"] == store)]
            for r in out.sort_values("cost").itertuples(index=False):
                lane = lane_of[r.lane]
                # a haul-out goes as planned but never below the store's
                # safety stock (the heel a coordinator keeps), as the
                # reorder-point rule ships only the stock above safety
                room = max(x - st.safety_t, 0.0)
                if lane.kind == SALE:
                    if r.lane not in spec_ok:
                        spec_ok[r.lane] = quality_ok(lane.source, bal)[0]
                    loads = partial_take(rng, int(r.loads), walk.disturbances)
                    loads = min(loads, int(np.floor(room / lane.load_t)))
                    if not spec_ok[r.lane][i]:
                        # the buyer's laboratory refuses the day's product
                        refused += loads * lane.load_t
                        continue
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
                walk.moved.append({"date": day, "lane": lane.name, "kind": lane.kind, "material": store,
                                   "party": r.party, "loads": loads if loads is not None else np.nan,
                                   "tonnes": round(tonnes, 3)})
            if x > st.capacity_t:
                overflow, x = x - st.capacity_t, float(st.capacity_t)
            walk.true[store] = x
            walk.daily.append({"date": day, "store": store, "level_t": x, "unmet_t": 0.0,
                               "overflow_t": overflow, "safety_t": st.safety_t, "capacity_t": st.capacity_t,
                               "used_t": 0.0, "caco3_pct": np.nan, "refused_t": refused})
    return shipments


def _record_week(walk: _Walk, week: int, week_end: dt.date, arrivals: list[dict],
                 shipments: list[dict]) -> None:
    """The week recorded as a coordinator would: orders (a train known late re-dated),
    arrivals, shipments, and the survey at the week's end."""
    replace = False
    for o in walk.orders.values():
        if o["planned"] <= pd.Timestamp(week_end) < o["arrival"] and o["date"] != o["arrival"]:
            o["date"], replace = o["arrival"], True
    facts = {"orders": pd.DataFrame([{k: o[k] for k in ORDER_COLUMNS} for o in walk.orders.values()],
                                    columns=ORDER_COLUMNS),
             "stock_surveys": pd.DataFrame([{"date": pd.Timestamp(week_end), "store": k,
                                             "level_t": surveyed(walk.rng, v, walk.disturbances),
                                             "method": "survey"} for k, v in walk.true.items()])}
    if arrivals:
        facts["arrivals"] = pd.DataFrame(arrivals, columns=ARRIVAL_COLUMNS)
    if shipments:
        facts["shipments"] = pd.DataFrame(shipments, columns=SHIPMENT_COLUMNS)
    record_files(walk.engine, [(f"week_{week}.xlsx", _xlsx(facts))], scenario=walk.scenario,
                 replace=replace, today=week_end)


def rehearse_policy(workbook: str | Path, scenario: Scenario, world: World, policy: str, *, weeks: int,
                    disturbances: Disturbances, seed: int = 0, lookahead_days: int = 120,
                    settings: PlanSettings = WEEKLY_PLAN, guard=None, on_week=None) -> PolicyRun:
    """Follow ``policy`` (``plan`` or ``baseline``) for ``weeks`` weeks in ``world``.

    The disturbances come from ``numpy.random.default_rng([seed, world.index])``: both
    policies meet the same stream of chances (common random numbers), though what they
    meet depends on what they book.  ``guard`` (`GuardFutures`) gives the futures that
    guard each weekly plan (None: none, the deterministic balance only); ``settings``
    (`reagentplan.settings.WEEKLY_PLAN` by default) are how each weekly plan is made.
    ``on_week(week)`` is called after each week.

    Each week is the steps `_plan_week`, `_book_orders`, `_carry_out_limestone`,
    `_carry_out_byproducts` and `_record_week`, in this order (the order the random
    chances are drawn in)."""
    ref = balance_frame(scenario)
    ref_caco3 = ref["limestone_caco3_pct"].to_numpy(float) / 100
    start = scenario.plant.start_date
    with tempfile.TemporaryDirectory(prefix="rehearse-") as tmp:
        engine = connect(f"sqlite:///{Path(tmp) / 'record.db'}")
        try:
            upgrade(engine)
            walk = _Walk(scenario, world, policy, disturbances, np.random.default_rng([seed, world.index]),
                         engine, start - dt.timedelta(days=1),
                         {k: float(st.initial_t) for k, st in scenario.storage.items()},
                         ref_caco3, ref["gypsum_wet_t"].to_numpy(float), ref_caco3.copy(),
                         scenario.scrubber.limestone_caco3_pct / 100)
            _open_record(walk)
            for week in range(1, weeks + 1):
                week_end = walk.as_of + dt.timedelta(days=7)
                mv, lane_of, plan_start = _plan_week(walk, week, workbook, lookahead_days, settings, guard)
                _book_orders(walk, week, mv, lane_of, week_end)
                week_days = pd.date_range(plan_start, week_end, freq="D")
                arrivals = _carry_out_limestone(walk, week_days, lane_of)
                shipments = _carry_out_byproducts(walk, week, week_days, mv, lane_of)
                _record_week(walk, week, week_end, arrivals, shipments)
                walk.as_of = week_end
                if on_week is not None:
                    on_week(week)
        finally:
            engine.dispose()
    order_frame = pd.DataFrame(list(walk.orders.values()),
                               columns=["order_id", "lane", "supplier", "mode", "planned", "arrival", "date",
                                        "loads", "tonnes", "week"])
    return PolicyRun(policy, world.index, pd.DataFrame(walk.daily), pd.DataFrame(
        walk.moved, columns=["date", "lane", "kind", "material", "party", "loads", "tonnes"]), order_frame,
        walk.plans, walk.changes, walk.all_lanes, walk.plan_seconds, walk.statuses)


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
