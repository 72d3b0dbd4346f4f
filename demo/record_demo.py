"""The demo's weekly loop: an invented operations record for the demo station, and the
weekly re-plan run through it.

Week by week, from the plan in force: the orders whose order-by day falls in the week
are booked; the week happens (arrivals weighed with a little noise, shipments as
planned, generation near the dispatch plan, new lab results every weekday); then the
piles are surveyed (the book level less a slow drift, plus measurement noise), the week
is recorded, and the station re-plans as of the week's last day and sees what changed.
Scripted events: a late train (week 3), a higher-sulfur seam in the lab results from
week 4, a wallboard buyer who takes half the planned trucks (week 5).  Throughout, the
plant really runs at a Ca/S 0.05 above the workbook's and makes a cake 2 points wetter
(`true_plant`): the drift `reagentplan calibrate` finds.

Invented data for the demo only.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from reagentplan.output.record import write_diff, write_record_workbook
from reagentplan.pipeline import run_plan_from_record
from reagentplan.record.asof import asof_state, load_record, past_balance
from reagentplan.record.db import connect, upgrade
from reagentplan.record.importer import record_files
from reagentplan.record.versions import act_first, diff_plans, load_plan
from reagentplan.scenario import load_scenario

RNG_STATE = 20270108
#: Days each weekly re-plan covers, and of those planned day by day [d].
WEEKLY_HORIZON_DAYS, WEEKLY_FIRM_DAYS = 60, 28
LATE_TRAIN_WEEK, LATE_DAYS = 3, 3
HIGH_SULFUR_WEEK, SULFUR_STEP_PCT = 4, 0.35
SHORT_BUYER_WEEK, SHORT_BUYER, SHORT_SHARE = 5, "Larkspan Wallboard", 0.5
#: The plant really runs at a Ca/S this much above the workbook's [mol/mol] and makes a
#: cake this many points wetter [%], so the book drifts from the surveys as it would at a
#: plant and `reagentplan calibrate` has something to find; the survey's noise [-].
TRUE_CA_S_STEP, TRUE_MOISTURE_STEP, SURVEY_SD = 0.05, 2.0, 0.007


def true_plant(scenario):
    """The demo station as it really runs: the workbook with `TRUE_CA_S_STEP` and
    `TRUE_MOISTURE_STEP` added (invented)."""
    import dataclasses

    s = scenario.scrubber
    return dataclasses.replace(scenario, scrubber=dataclasses.replace(
        s, ca_s_ratio=s.ca_s_ratio + TRUE_CA_S_STEP, gypsum_moisture_pct=s.gypsum_moisture_pct + TRUE_MOISTURE_STEP))


@dataclass
class WeekReport:
    week: int
    as_of: dt.date
    events: list[str]
    surveys: dict[str, tuple[float, float]]   # store -> (surveyed, book)
    changes: dict[str, int]
    first: list[str]
    plan_id: int
    total_cost: float


def _orders_from(plan_mv: pd.DataFrame, scenario, booked: set[str], as_of: dt.date,
                 week_end: dt.date) -> pd.DataFrame:
    """Orders the coordinator places this week: inbound lines of the plan whose order-by
    day is on or before the week's end (and not booked yet)."""
    mode_of = {s.lane: s.mode for s in scenario.suppliers}
    mv = plan_mv[(plan_mv["direction"] == "in") & ~plan_mv["booked"] & (plan_mv["date"] > pd.Timestamp(as_of))
                 & (plan_mv["order_by"] <= pd.Timestamp(week_end))]
    rows = []
    for r in mv.itertuples(index=False):
        oid = f"PO-{r.party.split()[0][:4].upper()}-{mode_of[r.lane][0].upper()}-{r.date:%Y%m%d}"
        if oid in booked:
            continue
        booked.add(oid)
        rows.append({"order_id": oid, "date": r.date, "supplier": r.party, "mode": mode_of[r.lane],
                     "loads": int(r.loads), "tonnes": float(r.tonnes), "status": "booked"})
    return pd.DataFrame(rows, columns=["order_id", "date", "supplier", "mode", "loads", "tonnes", "status"])


def weekly_loop(workbook: Path, folder: Path, weeks: int = 8, *, horizon_days: int = WEEKLY_HORIZON_DAYS,
                progress: bool = False, time_limit: float = 30.0) -> list[WeekReport]:
    """Run ``weeks`` weekly re-plans of ``horizon_days`` each of the demo station through
    an invented record in ``folder`` (``record.db``, the weekly record files and diffs).
    The workbook's dispatch plan should cover the last re-plan (start + 7 x weeks +
    horizon), so no generation forecast is needed and the loop stays quick."""
    rng = np.random.default_rng(RNG_STATE)
    folder.mkdir(parents=True, exist_ok=True)
    engine = connect(f"sqlite:///{folder / 'record.db'}")
    upgrade(engine)
    scenario = load_scenario(workbook)
    start = scenario.plant.start_date
    as_of = start - dt.timedelta(days=1)
    # daily for the first four weeks, weekly buckets after: the weekly loop stays quick
    opts = dict(futures=0, time_limit=time_limit, progress=progress, scenario=scenario,
                horizon_days=horizon_days, firm_days=WEEKLY_FIRM_DAYS)
    reports: list[WeekReport] = []
    try:
        # week 0: the trains the workbook lists as booked, and the opening survey
        wb_orders = pd.DataFrame([{"order_id": f"PO-WB-{i + 1}", "date": pd.Timestamp(o.date), "supplier": o.party,
                                   "mode": o.mode, "loads": o.loads, "tonnes": o.tonnes, "status": "booked"}
                                  for i, o in enumerate(scenario.firm_orders) if o.material == "limestone"])
        surveys = pd.DataFrame([{"date": pd.Timestamp(as_of), "store": k, "level_t": st.initial_t,
                                 "method": "survey"} for k, st in scenario.storage.items()])
        f0 = write_record_workbook({"orders": wb_orders, "stock_surveys": surveys}, folder / "record_week_0.xlsx")
        record_files(engine, [f0], scenario=scenario, today=as_of)
        booked = set(wb_orders["order_id"])
        run = run_plan_from_record(workbook, engine, as_of, **opts)
        plan_id = run.summary_extra["plan_id"]
        orders = wb_orders.copy()
        for week in range(1, weeks + 1):
            week_end = as_of + dt.timedelta(days=7)
            days = pd.date_range(as_of + dt.timedelta(days=1), week_end, freq="D")
            events: list[str] = []
            plan = load_plan(engine, plan_id)
            mv = plan.movements
            new_orders = _orders_from(mv, scenario, booked, as_of, week_end)
            orders = pd.concat([orders, new_orders], ignore_index=True)
            replace = False
            if week >= LATE_TRAIN_WEEK and not any("late train" in e for r in reports for e in r.events):
                rail = orders[(orders["mode"] == "rail") & (orders["date"].isin(days))]
                if len(rail):
                    i = rail.index[0]
                    old = orders.at[i, "date"]
                    orders.at[i, "date"] = old + pd.Timedelta(days=LATE_DAYS)
                    replace = True
                    events.append(f"late train: {orders.at[i, 'supplier']} {orders.at[i, 'order_id']} due "
                                  f"{old:%Y-%m-%d}, arrives {orders.at[i, 'date']:%Y-%m-%d}")
            week_orders = orders[orders["date"].isin(days)]
            arrivals = pd.DataFrame([{"date": r.date, "supplier": r.supplier, "mode": r.mode, "loads": r.loads,
                                      "tonnes": round(r.tonnes * rng.uniform(0.97, 1.01), 1),
                                      "ticket": f"W-{r.order_id}", "caco3_pct": round(rng.normal(95.5, 0.6), 2)}
                                     for r in week_orders.itertuples(index=False)],
                                    columns=["date", "supplier", "mode", "loads", "tonnes", "ticket", "caco3_pct"])
            out = mv[(mv["direction"] == "out") & mv["date"].isin(days)]
            ship_rows = []
            for r in out.itertuples(index=False):
                loads = None if pd.isna(r.loads) else int(r.loads)
                tonnes = float(r.tonnes)
                if week == SHORT_BUYER_WEEK and r.party == SHORT_BUYER and loads:
                    loads = max(loads // 2, 0) if loads > 1 else loads
                    tonnes = tonnes * loads / int(r.loads)
                if loads == 0:
                    continue
                ship_rows.append({"date": r.date, "party": r.party, "material": r.material,
                                  "loads": loads, "tonnes": round(tonnes * rng.uniform(0.98, 1.0), 1),
                                  "ticket": f"S-{week}-{len(ship_rows) + 1:05d}"})
            if week == SHORT_BUYER_WEEK:
                events.append(f"{SHORT_BUYER} took about {SHORT_SHARE:.0%} of the planned trucks")
            shipments = pd.DataFrame(ship_rows, columns=["date", "party", "material", "loads", "tonnes", "ticket"])
            gen = scenario.generation[scenario.generation["date"].isin(days)].copy()
            caps = {u.unit: u.capacity_mw * 24 for u in scenario.units}
            gen["mwh"] = np.round(np.minimum(gen["mwh"] * rng.normal(1.0, 0.03, len(gen)),
                                             gen["unit"].map(caps)).clip(0), 1)
            labs = []
            for d in days[days.day_of_week < 5]:
                for s in scenario.coal_sources:
                    step = SULFUR_STEP_PCT if (week >= HIGH_SULFUR_WEEK and s is scenario.coal_sources[0]) else 0.0
                    labs.append({"date": d, "source": s.source,
                                 "sulfur_pct": round(s.sulfur_pct + step + rng.normal(0, s.sulfur_sd_pct / 2), 3),
                                 "ash_pct": round(s.ash_pct + rng.normal(0, 0.3), 2),
                                 "hhv_mj_per_kg": round(s.hhv_mj_per_kg + rng.normal(0, 0.1), 2)})
            if week == HIGH_SULFUR_WEEK:
                events.append(f"lab results: {scenario.coal_sources[0].source} now about "
                              f"+{SULFUR_STEP_PCT:.2f} % S")
            facts = {"orders": orders,
                     "arrivals": arrivals, "shipments": shipments, "generation_history": gen[["date", "unit", "mwh"]],
                     "coal_quality_history": pd.DataFrame(labs)}
            path = write_record_workbook(facts, folder / f"record_week_{week}.xlsx")
            record_files(engine, [path], scenario=scenario, replace=replace, today=week_end)
            # the piles are surveyed at the week's end: the book less the plant's drift, with noise
            record = load_record(engine)
            state = asof_state(scenario, record, week_end)
            as_booked = past_balance(scenario, record, days[0].date(), week_end)
            real = past_balance(true_plant(scenario), record, days[0].date(), week_end)
            # the truth: the book (rolled with the workbook's factors) corrected by what
            # the real plant used and made more than the workbook says
            extra = {"limestone": -float(real["limestone_t"].sum() - as_booked["limestone_t"].sum()),
                     "gypsum": float(real["gypsum_wet_t"].sum() - as_booked["gypsum_wet_t"].sum())}
            found = {}
            rows = []
            for store in ("limestone", "gypsum"):
                book = state.opening[store].level_t
                truth = book + extra[store]
                level = round(max(truth * (1 + rng.normal(0, SURVEY_SD)), 0.0), -1)
                found[store] = (level, book)
                rows.append({"date": pd.Timestamp(week_end), "store": store, "level_t": level, "method": "survey"})
            survey_path = write_record_workbook({"stock_surveys": pd.DataFrame(rows)},
                                                folder / f"survey_week_{week}.xlsx")
            record_files(engine, [survey_path], scenario=scenario, today=week_end)
            run = run_plan_from_record(workbook, engine, week_end, **opts)
            new_id = run.summary_extra["plan_id"]
            before, after = load_plan(engine, plan_id), load_plan(engine, new_id)
            diff = diff_plans(before, after)
            write_diff(diff, folder)
            (folder / "orders_changed.csv").rename(folder / f"orders_changed_week_{week}.csv")
            first = act_first(diff, week_end)
            lines = []
            for r in first[first["direction"] == "in"].head(3).itertuples(index=False):
                verb = {"added": "place", "cancelled": "cancel", "moved": "move", "changed": "change"}[r.change]
                if r.change == "moved":
                    lines.append(f"{verb} {r.lane} from {r.date_before:%Y-%m-%d} to {r.date:%Y-%m-%d} "
                                 f"({r.loads_after} load{'s' if r.loads_after != 1 else ''})")
                else:
                    lines.append(f"{verb} {r.lane} {r.date:%Y-%m-%d} ({r.loads_before} -> "
                                 f"{r.loads_after} loads)")
            changes = {f"{'orders' if d == 'in' else 'haul-outs'} {c}": int(n) for (d, c), n in
                       diff.groupby(["direction", "change"]).size().items()}
            reports.append(WeekReport(week, week_end, events, found, changes,
                                      lines, new_id, after.summary.get("total_cost", 0.0)))
            plan_id, as_of = new_id, week_end
    finally:
        engine.dispose()
    return reports


def describe_weeks(reports: list[WeekReport], currency: str = "USD") -> str:
    lines = ["Weekly loop (invented record; re-planned as of each week's last day; cost = the "
             f"new plan's cost over its own days, in {currency}, sales counted as income):"]
    for r in reports:
        surv = ", ".join(f"{s} {lvl:,.0f} t (book {book:,.0f})" for s, (lvl, book) in r.surveys.items())
        ch = ", ".join(f"{k} {n}" for k, n in sorted(r.changes.items())) or "no change"
        lines.append(f"  week {r.week} as of {r.as_of:%Y-%m-%d}: survey {surv}; plan {r.plan_id}: {ch}; "
                     f"cost {r.total_cost:,.0f}")
        for e in r.events:
            lines.append(f"      event: {e}")
        for a in r.first:
            lines.append(f"      act: {a}")
    return "\n".join(lines)
