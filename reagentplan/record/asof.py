"""The state of the station at the end of a day, from the record, and the scenario
planned from it.

`load_record` reads the facts (a `RecordFrames` of plain DataFrames); `asof_state` is a
pure function of those facts, the scenario workbook and the day; `apply_asof` returns a
new `Scenario` that starts the next day.  `book_levels` (the same rolling) also serves
``review``.

Rolling a store forward from its latest survey uses the deterministic daily balance
(`reagentplan.balance.balance_frame`) of the days in between, driven by the recorded
generation where there is some (else the workbook's ``generation_history``, else its
dispatch plan), plus the recorded arrivals and minus the recorded shipments.  A survey
is taken as the level at the end of its day.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from dataclasses import dataclass

import numpy as np
import pandas as pd
import sqlalchemy as sa

from ..balance import balance_frame
from ..errors import Problem
from ..scenario import FirmOrder, Scenario, Store
from ..schema import STORE_FLOW_COLUMN
from .db import RecordError
from .importer import resolve_out_lane, resolve_supply_lane
from .models import FACT_TABLES, Import


@dataclass(frozen=True)
class RecordFrames:
    """The recorded facts as frames (columns as the record's sheets; dates as
    ``datetime64``)."""

    surveys: pd.DataFrame
    arrivals: pd.DataFrame
    shipments: pd.DataFrame
    orders: pd.DataFrame
    generation: pd.DataFrame
    labs: pd.DataFrame
    last_import_id: int | None = None


def latest_fact_day(record: RecordFrames) -> dt.date | None:
    """The last day with a recorded survey, arrival or shipment (None with none): the
    day a re-plan from the record naturally starts after."""
    days = [f["date"].max() for f in (record.surveys, record.arrivals, record.shipments)
            if len(f) and pd.notna(f["date"].max())]
    return pd.Timestamp(max(days)).date() if days else None


def load_record(engine, until: dt.date | None = None) -> RecordFrames:
    """Every recorded fact dated on or before ``until`` (orders: all of them)."""
    from .db import require_current

    require_current(engine)
    frames = {}
    with engine.connect() as conn:
        for name, table in FACT_TABLES.items():
            cols = [c for c in table.c if c.name not in ("id", "import_id")]
            # dates as ISO text, parsed once by pandas; rows as plain tuples (both much
            # faster than per-row conversion for years of daily rows)
            q = sa.select(*[sa.type_coerce(c, sa.String).label("date") if c.name == "date" else c
                            for c in cols])
            if until is not None and name != "orders":
                q = q.where(table.c.date <= until)
            rows = [tuple(r) for r in conn.execute(q)]
            frame = pd.DataFrame.from_records(rows, columns=[c.name for c in cols])
            frame["date"] = pd.to_datetime(frame["date"].astype(str).str[:10], format="%Y-%m-%d")
            frames[name] = frame
        last = conn.execute(sa.select(sa.func.max(Import.__table__.c.id))).scalar()
    return RecordFrames(frames["stock_surveys"], frames["arrivals"], frames["shipments"],
                        frames["orders"], frames["generation_history"],
                        frames["coal_quality_history"], last)


@dataclass(frozen=True)
class OpeningStock:
    """A store's level at the end of the as-of day [t], the survey it was rolled from
    (``None``: the workbook's initial level) and the days rolled [d]."""

    store: str
    level_t: float
    survey_date: dt.date | None
    days_rolled: int


@dataclass(frozen=True)
class AsOfState:
    """What the record says at the end of ``as_of``."""

    as_of: dt.date
    opening: dict[str, OpeningStock]
    opening_caco3_pct: float | None          # CaCO3 of the stone in the limestone store [%]
    month_to_date: dict[str, float]          # lane -> tonnes moved this month before the plan [t]
    firm_orders: tuple[FirmOrder, ...]
    generation_history: pd.DataFrame | None  # date, unit, mwh (recorded, with the workbook's)
    coal_quality_history: pd.DataFrame | None
    assumptions: tuple[str, ...] = ()
    last_import_id: int | None = None

    def summary(self) -> dict:
        """The keys ``summary.json`` gets (OPERATIONS.md)."""
        opening = {}
        for s, o in self.opening.items():
            opening[s] = {"level_t": round(o.level_t, 3),
                          "survey_date": None if o.survey_date is None else f"{o.survey_date:%Y-%m-%d}",
                          "days_rolled": o.days_rolled}
            if s == "limestone" and self.opening_caco3_pct is not None:
                opening[s]["caco3_pct"] = round(self.opening_caco3_pct, 3)
        return {"as_of": f"{self.as_of:%Y-%m-%d}", "opening_stock": opening,
                "month_to_date_t": {k: round(v, 3) for k, v in self.month_to_date.items() if v},
                "record_assumptions": list(self.assumptions)}


# --------------------------------------------------------------------------- balance of past days


def past_generation(scenario: Scenario, record: RecordFrames, first: dt.date,
                    last: dt.date) -> pd.DataFrame:
    """Generation (date, unit, mwh) of every unit and day from ``first`` to ``last``:
    recorded, else the workbook's history, else its dispatch plan.  Raises
    `RecordError` naming the first day no source covers."""
    days = pd.date_range(first, last, freq="D")
    units = [u.unit for u in scenario.units]
    table = pd.DataFrame(np.nan, index=days, columns=units)
    sources = [record.generation]
    if scenario.generation_history is not None:
        sources.append(scenario.generation_history)
    sources.append(scenario.generation)
    for src in sources:
        if src is None or src.empty:
            continue
        part = src[src["unit"].isin(units) & (src["date"] >= days[0]) & (src["date"] <= days[-1])]
        if part.empty:
            continue
        wide = part.pivot_table(index="date", columns="unit", values="mwh", aggfunc="last")
        table = table.fillna(wide.reindex(index=days, columns=units))
    missing = table.isna()
    if missing.to_numpy().any():
        u = missing.any().idxmax()
        d = missing[u].idxmax()
        n = int(missing[u].sum())
        raise RecordError(Problem("generation_history", None, "date",
                                  f"no generation for {u} on {n} day(s) from {d:%Y-%m-%d}, needed to roll "
                                  f"the stores forward to {last:%Y-%m-%d}",
                                  "recorded generation (`record` a generation_history sheet) or rows in the "
                                  "workbook's generation_history or generation sheet for those days"),
                          "The record")
    out = table.rename_axis("date").reset_index().melt(id_vars="date", var_name="unit", value_name="mwh")
    return out


def past_balance(scenario: Scenario, record: RecordFrames, first: dt.date, last: dt.date) -> pd.DataFrame:
    """The deterministic balance (`balance_frame`) of past days ``first``..``last``."""
    n = (last - first).days + 1
    plant = dataclasses.replace(scenario.plant, start_date=first, horizon_days=n)
    blend = _blend_from(scenario.coal_blend, first)
    past = dataclasses.replace(scenario, plant=plant, generation=past_generation(scenario, record, first, last),
                               coal_blend=blend, generation_history=None, firm_orders=(),
                               month_to_date=None)
    return balance_frame(past)


def _blend_from(blend: pd.DataFrame, first: dt.date) -> pd.DataFrame:
    """The blend, with its earliest shares carried back to ``first`` when it starts later."""
    t0 = blend["date"].min()
    if pd.Timestamp(first) >= t0:
        return blend
    early = blend[blend["date"] == t0].assign(date=pd.Timestamp(first))
    return pd.concat([early, blend], ignore_index=True)


def _daily(frame: pd.DataFrame, days: pd.DatetimeIndex, mask=None) -> np.ndarray:
    f = frame if mask is None else frame[mask]
    return f.groupby("date")["tonnes"].sum().reindex(days, fill_value=0.0).to_numpy(float)


def book_levels(scenario: Scenario, record: RecordFrames, last: dt.date,
                first: dt.date | None = None) -> pd.DataFrame:
    """Book level of each store at the end of every day up to ``last``: the latest survey
    on or before the day, rolled forward (columns date, store, book_level_t,
    survey_date, surveyed_level_t; and, on survey days, rolled_level_t: the level rolled
    from the survey before, rolled_from: that survey's day; flow_t: the day's use or
    production).  A store never surveyed starts from the workbook's
    initial level on the day before its start date."""
    surveys = _surveys_with_workbook(scenario, record)
    surveys = surveys[surveys["date"] <= pd.Timestamp(last)]
    if surveys.empty:
        return pd.DataFrame(columns=["date", "store", "book_level_t", "survey_date", "surveyed_level_t",
                                     "rolled_level_t", "rolled_from", "flow_t"])
    start = surveys["date"].min() if first is None else max(pd.Timestamp(first), surveys["date"].min())
    # the roll of a day needs the survey in force before it
    roll_from = min(surveys["date"].min(), start)
    days = pd.date_range(roll_from, last, freq="D")
    bal = (past_balance(scenario, record, (roll_from + pd.Timedelta(days=1)).date(), last)
           if len(days) > 1 else None)
    parts = []
    for store in scenario.storage:
        s = surveys[surveys["store"] == store].sort_values("date")
        if s.empty:
            continue
        use = np.zeros(len(days))
        if bal is not None:
            use[1:] = bal[STORE_FLOW_COLUMN[store]].to_numpy(float)
        if store == "limestone":
            net = _daily(record.arrivals, days) - use
        else:
            net = use - _daily(record.shipments, days, record.shipments["material"] == store)
        net[0] = 0.0
        cum = np.cumsum(net)
        level = pd.Series(s["level_t"].to_numpy(float), index=s["date"])
        level = level[~level.index.duplicated(keep="last")]
        at = level.reindex(days)
        base_date = pd.Series(days.where(at.notna().to_numpy()), index=days).ffill()
        base_level = at.ffill()
        cum_s = pd.Series(cum, index=days)
        book = base_level + cum_s - cum_s.reindex(pd.DatetimeIndex(base_date)).to_numpy()
        # the same roll from the survey before, not reset by the day's own survey
        prev_date, prev_level = base_date.shift(1), base_level.shift(1)
        rolled = prev_level + cum_s - cum_s.reindex(pd.DatetimeIndex(prev_date)).to_numpy()
        rolled = rolled.where(at.notna(), book)
        frame = pd.DataFrame({"date": days, "store": store, "book_level_t": book.to_numpy(),
                              "survey_date": base_date.to_numpy(),
                              "surveyed_level_t": level.reindex(days).to_numpy(),
                              "rolled_level_t": rolled.to_numpy(),
                              "rolled_from": prev_date.where(at.notna()).to_numpy(),
                              "flow_t": np.abs(np.r_[0.0, use[1:]])})
        real = record.surveys[record.surveys["store"] == store].set_index("date")["level_t"]
        frame["surveyed_level_t"] = real[~real.index.duplicated()].reindex(days).to_numpy()
        parts.append(frame[frame["date"] >= start])
    return pd.concat(parts, ignore_index=True)


def _surveys_with_workbook(scenario: Scenario, record: RecordFrames) -> pd.DataFrame:
    s = record.surveys[["date", "store", "level_t"]].copy()
    s["workbook"] = False
    have = set(s["store"])
    extra = [{"date": pd.Timestamp(scenario.plant.start_date) - pd.Timedelta(days=1), "store": k,
              "level_t": st.initial_t, "workbook": True}
             for k, st in scenario.storage.items() if k not in have]
    if extra:
        s = pd.concat([s, pd.DataFrame(extra)], ignore_index=True)
    return s


# --------------------------------------------------------------------------- the state


def asof_state(scenario: Scenario, record: RecordFrames, as_of: dt.date) -> AsOfState:
    """The station at the end of ``as_of`` from the record (pure).

    - opening stock of each store (latest survey on or before ``as_of``, rolled forward);
    - the CaCO3 of the stone in the limestone store (well mixed; tonnage-weighted) when
      arrivals carry lab results;
    - tonnes moved per lane in the calendar month of the first planned day, before it;
    - booked orders arriving after ``as_of`` within the horizon (firm);
    - generation and lab history up to ``as_of``.
    """
    assumptions: list[str] = []
    ts = pd.Timestamp(as_of)
    rec = _until(record, ts)
    surveys = _surveys_with_workbook(scenario, rec)
    opening: dict[str, OpeningStock] = {}
    before = surveys[surveys["date"] <= ts]
    # only the latest survey of each store matters for the day's level
    latest = rec.surveys.sort_values("date").drop_duplicates("store", keep="last")
    levels = (book_levels(scenario, dataclasses.replace(rec, surveys=latest), as_of, first=as_of)
              if not before.empty else None)
    for store, st in scenario.storage.items():
        row = None if levels is None else levels[(levels["store"] == store) & (levels["date"] == ts)]
        if row is None or row.empty or pd.isna(row["book_level_t"].iloc[0]):
            opening[store] = OpeningStock(store, st.initial_t, None, 0)
            assumptions.append(f"{store}: no survey on or before {as_of:%Y-%m-%d}; the workbook's initial "
                               f"level {st.initial_t:g} t is taken as the level at the end of that day")
            continue
        level = float(row["book_level_t"].iloc[0])
        sdate = pd.Timestamp(row["survey_date"].iloc[0])
        is_workbook = bool(surveys[(surveys["store"] == store) & (surveys["date"] == sdate)]["workbook"].any())
        if is_workbook:
            assumptions.append(f"{store}: never surveyed; rolled from the workbook's initial level on "
                               f"{sdate:%Y-%m-%d}")
        days = int((ts - sdate).days)
        if days > 0:
            moved = (rec.arrivals if store == "limestone"
                     else rec.shipments[rec.shipments["material"] == store])
            moved = moved[(moved["date"] > sdate) & (moved["date"] <= ts)]
            if moved.empty:
                what = "arrivals" if store == "limestone" else "shipments"
                assumptions.append(f"{store}: no {what} recorded from {sdate + pd.Timedelta(days=1):%Y-%m-%d} "
                                   f"to {as_of:%Y-%m-%d}; none assumed in the book level (record them "
                                   "if there were any)")
        if level < 0:
            assumptions.append(f"{store}: the book level rolled to {level:.0f} t; taken as 0 t (survey it)")
            level = 0.0
        opening[store] = OpeningStock(store, level, None if is_workbook else sdate.date(),
                                      int((ts - sdate).days))
    caco3 = _opening_caco3(scenario, rec, as_of, opening.get("limestone"))
    mtd = _month_to_date(scenario, rec, as_of, assumptions)
    firm = _firm_orders(scenario, record, as_of, assumptions)
    gen_hist, lab_hist = _histories(scenario, rec, ts)
    return AsOfState(as_of, opening, caco3, mtd, firm, gen_hist, lab_hist, tuple(assumptions),
                     record.last_import_id)


def _until(record: RecordFrames, ts: pd.Timestamp) -> RecordFrames:
    cut = {f.name: getattr(record, f.name) for f in dataclasses.fields(record)}
    for k in ("surveys", "arrivals", "shipments", "generation", "labs"):
        cut[k] = cut[k][cut[k]["date"] <= ts]
    return RecordFrames(**cut)


def _opening_caco3(scenario: Scenario, rec: RecordFrames, as_of: dt.date,
                   opening: OpeningStock | None) -> float | None:
    """CaCO3 [%] of the stone in the limestone store at the end of ``as_of``.

    At the survey the pile is taken to hold the latest arrivals adding up to its level
    (the rest at the scrubber sheet's value); each later day the day's use leaves at the
    store's content and the day's arrivals mix in (a well-mixed store, tonnage-weighted).
    ``None`` when no arrival carries a lab result.
    """
    arr = rec.arrivals
    if arr.empty or arr["caco3_pct"].notna().sum() == 0 or opening is None:
        return None
    default = scenario.scrubber.limestone_caco3_pct
    by_supplier = {s.supplier: s.caco3_pct for s in scenario.suppliers if s.caco3_pct is not None}
    q = arr["caco3_pct"].astype(float)
    q = q.fillna(arr["supplier"].map(by_supplier)).fillna(default)
    arr = arr.assign(q=q.to_numpy())
    if opening.survey_date is None:
        t0 = pd.Timestamp(scenario.plant.start_date) - pd.Timedelta(days=1)
    else:
        t0 = pd.Timestamp(opening.survey_date)
    # level at t0: the survey (or the workbook's initial level)
    surveyed = rec.surveys[(rec.surveys["store"] == "limestone") & (rec.surveys["date"] == t0)]
    level0 = float(surveyed["level_t"].iloc[-1]) if len(surveyed) else scenario.storage["limestone"].initial_t
    past = arr[arr["date"] <= t0].sort_values("date", ascending=False)
    take = np.minimum(past["tonnes"].to_numpy(float),
                      np.clip(level0 - np.concatenate([[0.0], np.cumsum(past["tonnes"].to_numpy(float))[:-1]]),
                              0, None))
    rest = max(level0 - take.sum(), 0.0)
    quality = (float((take * past["q"].to_numpy()).sum()) + rest * default) / max(level0, 1e-9) if level0 > 0 else default
    days = pd.date_range(t0 + pd.Timedelta(days=1), pd.Timestamp(as_of), freq="D")
    if len(days):
        bal = past_balance(scenario, rec, days[0].date(), as_of)
        use = bal["limestone_t"].to_numpy(float)
        later = arr[arr["date"] > t0]
        tonnes = later.groupby("date")["tonnes"].sum().reindex(days, fill_value=0.0).to_numpy(float)
        qt = (later["tonnes"] * later["q"]).groupby(later["date"]).sum().reindex(days, fill_value=0.0).to_numpy(float)
        level = level0
        for k in range(len(days)):
            kept = max(level - use[k], 0.0)
            total = kept + tonnes[k]
            quality = (kept * quality + qt[k]) / total if total > 0 else quality
            level = total
    return float(quality)


def _month_to_date(scenario: Scenario, rec: RecordFrames, as_of: dt.date, assumptions: list[str]) -> dict[str, float]:
    first_day = as_of + dt.timedelta(days=1)
    m0 = pd.Timestamp(first_day.replace(day=1))
    mtd = {s.lane: 0.0 for s in scenario.suppliers} | {b.lane: 0.0 for b in scenario.buyers}
    if first_day.day == 1:
        return mtd
    ts = pd.Timestamp(as_of)
    arr = rec.arrivals[(rec.arrivals["date"] >= m0) & (rec.arrivals["date"] <= ts)]
    for r in arr.itertuples(index=False):
        lane, problem = resolve_supply_lane(scenario, r.supplier, r.mode, r.date.date(), r.tonnes, r.loads)
        if lane is None:
            assumptions.append(f"arrival {r.ticket} of {r.supplier} ({r.date:%Y-%m-%d}) matches no supplier "
                               f"lane of the workbook ({problem[1]}); left out of the month's contract tonnes")
            continue
        mtd[lane.lane] = mtd.get(lane.lane, 0.0) + float(r.tonnes)
    shp = rec.shipments[(rec.shipments["date"] >= m0) & (rec.shipments["date"] <= ts)]
    for r in shp.itertuples(index=False):
        lane, problem = resolve_out_lane(scenario, r.party, r.material, r.mode, r.date.date(), r.tonnes, r.loads)
        if lane is None or not hasattr(lane, "buyer"):
            continue  # landfill has no monthly contract
        mtd[lane.lane] = mtd.get(lane.lane, 0.0) + float(r.tonnes)
    return mtd


def _firm_orders(scenario: Scenario, record: RecordFrames, as_of: dt.date,
                 assumptions: list[str]) -> tuple[FirmOrder, ...]:
    end = as_of + dt.timedelta(days=scenario.plant.horizon_days)
    ts, te = pd.Timestamp(as_of), pd.Timestamp(end)
    keep = [o for o in scenario.firm_orders if as_of < o.date <= end]
    orders = record.orders
    if orders.empty:
        return tuple(keep)
    keep = [o for o in keep if o.material != "limestone"]  # the record's orders replace these
    assumptions.append("limestone orders come from the record (booked, arriving after the as-of day); "
                       "the workbook's limestone firm_orders are not used")
    problems = []
    booked = orders[(orders["status"] == "booked") & (orders["date"] > ts) & (orders["date"] <= te)]
    for r in booked.itertuples(index=False):
        lane, problem = resolve_supply_lane(scenario, r.supplier, r.mode, r.date.date(), r.tonnes, r.loads)
        if lane is None:
            problems.append(Problem("orders", None, problem[0], f"order {r.order_id}: {problem[1]}", problem[2]))
            continue
        tonnes = float(r.tonnes) if r.tonnes is not None and not pd.isna(r.tonnes) else r.loads * lane.load_t
        keep.append(FirmOrder(r.date.date(), "limestone", r.supplier, lane.mode, int(r.loads), tonnes))
    if problems:
        raise RecordError(problems, "The record's orders")
    return tuple(sorted(keep, key=lambda o: (o.date, o.party)))


def _histories(scenario: Scenario, rec: RecordFrames, ts: pd.Timestamp):
    gen_parts = []
    if not rec.generation.empty:
        gen_parts.append(rec.generation[["date", "unit", "mwh"]])
    if scenario.generation_history is not None:
        gen_parts.append(scenario.generation_history[["date", "unit", "mwh"]])
    gen_parts.append(scenario.generation[["date", "unit", "mwh"]])  # the dispatch plan of past days
    units = {u.unit for u in scenario.units}
    gen = pd.concat(gen_parts, ignore_index=True)
    gen = gen[(gen["date"] <= ts) & gen["unit"].isin(units)]
    gen = gen.drop_duplicates(["date", "unit"], keep="first").sort_values(["date", "unit"]).reset_index(drop=True)
    gen["mwh"] = gen["mwh"].astype(float)
    lab_parts = []
    cols = ["date", "source", "sulfur_pct", "ash_pct", "hhv_mj_per_kg"]
    if not rec.labs.empty:
        lab_parts.append(rec.labs[cols])
    if scenario.coal_quality_history is not None:
        lab_parts.append(scenario.coal_quality_history[cols])
    labs = None
    if lab_parts:
        sources = {s.source for s in scenario.coal_sources}
        labs = pd.concat(lab_parts, ignore_index=True)
        labs = labs[(labs["date"] <= ts) & labs["source"].isin(sources)]
        labs = labs.drop_duplicates(["date", "source"], keep="first").sort_values(["date", "source"])
        labs = labs.reset_index(drop=True)
        for c in cols[2:]:
            labs[c] = labs[c].astype(float)
    return (gen if len(gen) else None), labs


# --------------------------------------------------------------------------- applied


def apply_asof(scenario: Scenario, state: AsOfState, horizon_days: int | None = None) -> Scenario:
    """The scenario planned from the record: first day ``as_of`` + 1 (the workbook's
    horizon length unless ``horizon_days``), opening stock as initial levels, the stone's
    CaCO3, firm orders, the month-to-date tonnes, and the histories extended (pure;
    returns a new Scenario)."""
    start = state.as_of + dt.timedelta(days=1)
    plant = dataclasses.replace(scenario.plant, start_date=start,
                                horizon_days=horizon_days or scenario.plant.horizon_days)
    end = start + dt.timedelta(days=plant.horizon_days - 1)
    storage = {k: Store(st.store, st.capacity_t, st.safety_t, state.opening[k].level_t if k in state.opening
                        else st.initial_t) for k, st in scenario.storage.items()}
    scrubber = scenario.scrubber
    if state.opening_caco3_pct is not None:
        scrubber = dataclasses.replace(scrubber, limestone_caco3_pct=state.opening_caco3_pct)
    gen = scenario.generation[scenario.generation["date"] >= pd.Timestamp(start)].reset_index(drop=True)
    return dataclasses.replace(
        scenario, plant=plant, storage=storage, scrubber=scrubber, generation=gen,
        coal_blend=_blend_from(scenario.coal_blend, start),
        firm_orders=tuple(o for o in state.firm_orders if o.date <= end),
        generation_history=state.generation_history, coal_quality_history=state.coal_quality_history,
        month_to_date=dict(state.month_to_date))
