"""The cross-sheet checks: what the sheets say about each other, and the typed scenario.

`build_scenario` reads every sheet with the table reader (`reagentplan.scenario.tables`),
which checks each cell on its own, then checks the sheets against each other (unknown
units and sources, a blend summing to 100, firm orders on a known lane, mill rejects
the coal can carry, ...) with one ``_check_*`` function per concern, and builds the
`Scenario` (`reagentplan.scenario.types`).  Every problem is collected in one
`Collector` and raised together as one `ScenarioError` naming sheet, Excel row and
column.  A new check between sheets is a new ``_check_*`` function called from
`build_scenario`.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from dataclasses import fields
from typing import Any

import pandas as pd

from .. import schema
from ..chemistry import PYRITE_S_SHARE
from ..errors import InputWarning
from ..schema import Sheet
from ..workbook import RawSheet
from .tables import (CellError, Collector, did_you_mean, parse_cell, parse_number,
                     plausibility_warning, read_keyvalue_into, read_table_into)
from .types import (BuyerLane, CoalSource, DisposalSite, FirmOrder, LaneClosure, Plant, Scenario,
                    Scrubber, Store, SupplierLane, TrainSet, Unit)

SHARE_TOLERANCE_PCT = 0.01
#: Fewest days of ``generation_history`` a unit needs when the ``generation`` sheet
#: leaves some of its planned days to the forecast [d].
MIN_HISTORY_DAYS = 14
#: The problem of an empty ``coal_blend`` sheet: what was found, what was expected.
_NO_BLEND = ("the sheet has no rows", "at least one date with shares summing to 100")


def build_scenario(raw: dict[str, RawSheet], source_name: str) -> Scenario:
    out = Collector()
    by_name = {k.strip().lower(): v for k, v in raw.items()}
    names = [s.name for s in schema.SHEETS]
    for title in raw:
        key = title.strip().lower()
        if (key in schema.SHEETS_BY_NAME or key in schema.NOTE_SHEETS or key in schema.TOOL_SHEETS
                or key.startswith("notes")):
            continue
        out.add(title, None, None, f"unknown sheet{did_you_mean(key, names)}",
                "one of " + ", ".join(names) + " (or a 'notes' sheet for free notes)")
    for s in schema.SHEETS:
        if s.required and s.name not in by_name and not _left_to_forecast(s.name, by_name):
            out.add(s.name, None, None, "the sheet is missing", f"a sheet '{s.name}' ({s.note or 'see the template'})")
    out.fail()

    plant_kv = read_keyvalue_into(by_name["plant"], schema.PLANT, out)
    boiler = plant_kv.get("boiler") or schema.PLANT.field("boiler").default

    def table(sheet: Sheet) -> list[dict[str, Any]]:
        if sheet.name not in by_name:
            return []
        return read_table_into(by_name[sheet.name], sheet, out, boiler)

    scrub_rows: dict[str, int] = {}
    scrub_kv = read_keyvalue_into(by_name["scrubber"], schema.SCRUBBER, out, boiler, scrub_rows)
    recs = {s.name: table(s) for s in schema.SHEETS if not s.keyvalue}
    has_gen_history = "generation_history" in by_name
    has_quality_history = "coal_quality_history" in by_name
    if out.problems:
        # the cross-sheet checks below need clean cells; the tables left empty (a blank
        # template) are named now too, so one run lists every problem
        _check_tables_have_rows(recs, boiler, out)
    out.fail()
    _check_removal_range(scrub_kv, scrub_rows, out)

    plant = _make(Plant, plant_kv)
    if plant.fly_ash_share_pct is None:
        plant = dataclasses.replace(plant, fly_ash_share_pct=80.0 if plant.boiler == "pc" else 60.0)
    scrubber = _make(Scrubber, scrub_kv)
    units = tuple(_make(Unit, r) for r in recs["units"])
    sources = tuple(_make(CoalSource, r) for r in recs["coal_sources"])
    stores = {r["store"]: _make(Store, r) for r in recs["storage"]}
    suppliers = tuple(_make(SupplierLane, r) for r in recs["suppliers"])
    buyers = tuple(_make(BuyerLane, r) for r in recs["buyers"])
    disposal = tuple(_make(DisposalSite, r) for r in recs["disposal"])

    _check_plant(plant, scrubber, out)
    _check_tables_have_rows(recs, plant.boiler, out, blend=False)
    _check_storage(plant, recs["storage"], out)
    _check_monthly(recs["suppliers"], "suppliers", out)
    _check_monthly(recs["buyers"], "buyers", out)
    _check_quality_limits(recs["buyers"], out)

    unit_names = {u.unit: u for u in units}
    generation = _check_dated(recs["generation"], "generation", "unit", unit_names, plant, out,
                              inside_horizon=True)
    for r in recs["generation"]:
        u = unit_names.get(r["unit"])
        if u is not None and r["mwh"] > u.capacity_mw * 24 * 1.0001:
            out.add("generation", r["_row"], "mwh",
                    f"found {r['mwh']:g} MWh for {u.unit}",
                    f"at most {u.capacity_mw * 24:g} MWh (capacity {u.capacity_mw:g} MW x 24 h)")
    history = None
    if has_gen_history:
        history = _check_dated(recs["generation_history"], "generation_history", "unit", unit_names,
                               plant, out, inside_horizon=False)
        _check_history_days(recs["generation_history"], unit_names, out)
    if not has_gen_history and not out.problems:
        _check_generation_coverage(generation, units, plant, out)
    if has_gen_history and not out.problems:
        _check_history_covers_forecast(generation, history, units, plant, out)

    source_names = {s.source: s for s in sources}
    blend = _check_blend(recs["coal_blend"], source_names, plant, out)
    quality = None
    if has_quality_history:
        quality = _check_dated(recs["coal_quality_history"], "coal_quality_history", "source",
                               source_names, plant, out, inside_horizon=False)
    firm = _check_firm(recs["firm_orders"], plant, suppliers, buyers, disposal, out)
    closures = _check_closures(recs["lane_closures"], suppliers, buyers, disposal, out)
    periods = _check_periods(recs["period_settings"], plant, out)
    _check_period_removal(recs["period_settings"], scrubber, out)
    _check_rejects(plant, recs["coal_sources"], recs["disposal"], out)
    train_sets = _check_train_sets(recs["train_sets"], recs["suppliers"], out)
    _warn_stone_settings_unused(recs["period_settings"], suppliers, out)
    allowances = _check_allowances(recs["allowances"], plant, out)
    out.fail()
    return Scenario(plant, scrubber, units, generation, sources, blend, stores, suppliers, buyers,
                    disposal, firm, history, quality, source_name, closures, periods,
                    warnings=tuple(out.warnings), train_sets=train_sets, allowances=allowances)


def _check_removal_range(kv: dict[str, Any], rows: dict[str, int], out: Collector) -> None:
    """``removal_min_pct`` and ``removal_max_pct`` together, min <= max, and a written
    ``removal_pct`` inside them.  With a range and no written ``removal_pct``, the
    setpoint becomes the default clipped into the range (``kv`` is changed in place).
    Each bound's hard range (that of ``removal_pct``) is checked with its cell."""
    lo, hi = kv.get("removal_min_pct"), kv.get("removal_max_pct")
    if lo is None and hi is None:
        return
    if lo is None or hi is None:
        given, missing = ("removal_min_pct", "removal_max_pct") if hi is None else (
            "removal_max_pct", "removal_min_pct")
        out.add("scrubber", rows.get(given), f"value ({given})",
                f"{given} = {kv[given]:g} without {missing}",
                f"both removal_min_pct and removal_max_pct (the range the plan may choose "
                f"the removal in), or neither (removal_pct fixed)")
        return
    if lo > hi:
        out.add("scrubber", rows.get("removal_min_pct"), "value (removal_min_pct)",
                f"removal_min_pct = {lo:g} is above removal_max_pct = {hi:g}",
                "a lowest removal no higher than the highest (equal plans a fixed removal)")
        return
    if "removal_pct" in rows:
        x = kv["removal_pct"]
        if not lo <= x <= hi:
            out.add("scrubber", rows["removal_pct"], "value (removal_pct)",
                    f"removal_pct = {x:g} is outside the removal range {lo:g} to {hi:g} %",
                    f"a removal_pct from {lo:g} to {hi:g} (the setpoint of the hand baseline "
                    f"and of 'reagentplan balance'), or the cell left empty to use "
                    f"{min(max(schema.SCRUBBER.field('removal_pct').default, lo), hi):g}")
    else:
        default = schema.SCRUBBER.field("removal_pct").default
        kv["removal_pct"] = float(min(max(default, lo), hi))


def _check_period_removal(records, scrubber: Scrubber, out: Collector) -> None:
    """A ``period_settings`` row for ``removal_pct`` outside the scrubber's removal range:
    a warning (it fixes the setpoint on its days; the range still bounds the plan)."""
    rng = scrubber.removal_range
    if rng is None:
        return
    lo, hi = rng
    for r in records:
        if r["key"] != "removal_pct":
            continue
        try:
            x = parse_number(r["value"])
        except CellError:
            continue  # reported by _check_periods
        if not lo <= x <= hi:
            out.warnings.append(InputWarning(
                "period_settings", r["_row"], "value", f"{x:g} % for removal_pct",
                f"{lo:g} to {hi:g} % (the scrubber sheet's removal range)",
                "the scrubber sheet: the setpoint of these days is outside the range the "
                "plan chooses the removal in, which still applies on them",
                "narrow or widen removal_min_pct / removal_max_pct, or change this value"))


def _check_allowances(records, plant: Plant, out: Collector) -> pd.DataFrame | None:
    """The ``allowances`` sheet: the first row on or before the start date with the
    holding, later rows without one, and a sell price at most the buy price.  A sheet
    with no rows (the template's, left as it came) is no allowance market: ``None``."""
    cols = ["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
            "max_trade_t_per_month"]
    if not records:
        return None  # the template's sheet left as it came: no allowance market
    first = records[0]
    if first["date"] > plant.start_date:
        out.add("allowances", first["_row"], "date",
                f"the first row is dated {first['date']:%Y-%m-%d}, after the start date "
                f"{plant.start_date:%Y-%m-%d}",
                "a first row dated on or before the start date (the holding and prices in "
                "force on the first planned day)")
    if first["holding_t"] is None:
        out.add("allowances", first["_row"], "holding_t", "the cell is empty",
                "the allowances held on the first row's date [t SO2] (0 if none) on the "
                "first row")
    for r in records[1:]:
        if r["holding_t"] is not None:
            out.add("allowances", r["_row"], "holding_t",
                    f"a holding of {r['holding_t']:g} t on a later row (the first row is "
                    f"row {first['_row']})",
                    "the holding on the first row only; later additions go in allocated_t")
    for r in records:
        if r["sell_price_per_t"] > r["buy_price_per_t"]:
            out.add("allowances", r["_row"], "sell_price_per_t",
                    f"a sell price of {r['sell_price_per_t']:g} above the buy price "
                    f"{r['buy_price_per_t']:g}",
                    "a sell price at most the buy price (per tonne of SO2)")
    frame = pd.DataFrame([{c: r[c] for c in cols} for r in records], columns=cols)
    frame["date"] = pd.to_datetime(frame["date"])
    frame["allocated_t"] = frame["allocated_t"].fillna(0.0)
    for c in cols[1:]:
        frame[c] = frame[c].astype(float)
    return frame.sort_values("date", kind="stable").reset_index(drop=True)


def _check_train_sets(records, suppliers, out: Collector) -> tuple[TrainSet, ...]:
    """Train sets, each named by at least one rail supplier row and every supplier's
    ``train_set`` known; a stone's CaCO3 + MgCO3 at most 100 %."""
    sets = tuple(_make(TrainSet, r) for r in records)
    names = [t.train_set for t in sets]
    for r in suppliers:
        if r.get("train_set") is not None:
            if r["train_set"] not in names:
                out.add("suppliers", r["_row"], "train_set", f"found '{r['train_set']}'",
                        "a train_set named on the train_sets sheet" + did_you_mean(r["train_set"], names))
            elif r["mode"] != "rail":
                out.add("suppliers", r["_row"], "train_set", f"found a train set on a {r['mode']} lane",
                        "a train set only on rail lanes")
        if (r.get("caco3_pct") or 0) + (r.get("mgco3_pct") or 0) > 100:
            out.add("suppliers", r["_row"], "mgco3_pct",
                    f"found CaCO3 {r.get('caco3_pct')} + MgCO3 {r.get('mgco3_pct')} > 100 %",
                    "CaCO3 + MgCO3 of at most 100 %")
        if (r.get("tier_loads_per_month") is None) != (r.get("tier_freight_per_load") is None):
            out.add("suppliers", r["_row"], "tier_freight_per_load", "found only one of the two tier columns",
                    "tier_loads_per_month and tier_freight_per_load together")
    return sets


def _check_rejects(plant: Plant, sources: list[dict[str, Any]], disposal: list[dict[str, Any]],
                   out: Collector) -> None:
    """Mill rejects that the coal can carry and that a site takes away.

    Per coal source: no rejects for a fluidised bed (it has crushers, not pulverisers);
    the rejects' sulfur at most what pyrite FeS2 carries (53.4 % S, IUPAC weights via
    `reagentplan.chemistry`); the rejects' mineral part (less their sulfur) at most the
    coal's ash, since it is taken out of the ash reaching the boiler
    (`reagentplan.balance.boiler_ash_t`).  Coal with rejects needs a ``disposal`` row
    for ``mill_rejects``.
    """
    rejecting = []
    for r in sources:
        rej = r.get("mill_rejects_pct") or 0.0
        share = r.get("rejects_sulfur_share_pct") or 0.0
        s_rej = r["sulfur_pct"] * share / 100  # [% of the coal fed]
        if rej > 0:
            rejecting.append(r)
        if rej > 0 and plant.boiler == "cfb":
            out.add("coal_sources", r["_row"], "mill_rejects_pct",
                    f"found {rej:g} % with boiler = cfb",
                    "0 or empty for a fluidised bed (it crushes its coal; it has no pulverisers "
                    "and no mill rejects)")
        if s_rej > rej * PYRITE_S_SHARE + 1e-9:
            out.add("coal_sources", r["_row"], "rejects_sulfur_share_pct",
                    f"found {share:g} % of {r['sulfur_pct']:g} % S, i.e. {s_rej:.3g} % of the coal "
                    f"fed, in rejects of {rej:g} %",
                    f"rejects carrying at most {100 * PYRITE_S_SHARE:.1f} % sulfur (pure pyrite "
                    f"FeS2): a share of at most {_share_cap(rej, r['sulfur_pct']):.3g} % here, or "
                    "more mill_rejects_pct")
        elif rej - s_rej > r["ash_pct"] + 1e-9:
            out.add("coal_sources", r["_row"], "mill_rejects_pct",
                    f"found rejects of {rej:g} % with {rej - s_rej:.3g} % of mineral matter besides "
                    f"their sulfur, above the coal's ash of {r['ash_pct']:g} %",
                    "rejects whose mineral matter (rejects less their sulfur) is at most the "
                    "coal's ash_pct")
    if rejecting and not any(d["material"] == schema.MILL_REJECTS for d in disposal):
        rows = ", ".join(str(r["_row"]) for r in rejecting)
        out.add("disposal", None, "material",
                f"no row for '{schema.MILL_REJECTS}', while coal_sources row(s) {rows} give "
                "mill_rejects_pct above 0",
                f"a row with material '{schema.MILL_REJECTS}' (site, cost_per_t, and optionally "
                "max_t_per_day and airspace_t) for the sites that take the mill rejects, or "
                "mill_rejects_pct empty")


def _share_cap(rejects_pct: float, sulfur_pct: float) -> float:
    """Largest share of the coal's sulfur [%] that rejects of ``rejects_pct`` [% of the
    coal fed] can carry as pyrite."""
    return min(100.0, 100 * rejects_pct * PYRITE_S_SHARE / sulfur_pct) if sulfur_pct > 0 else 100.0


def _make(cls, record: dict[str, Any]):
    return cls(**{f.name: record.get(f.name) for f in fields(cls)})


def _check_plant(plant: Plant, scrubber: Scrubber, out: Collector) -> None:
    if plant.boiler == "cfb" and scrubber.injection_removal_pct > 0:
        out.add("scrubber", None, "value (injection_removal_pct)",
                f"found {scrubber.injection_removal_pct:g} with boiler = cfb",
                "0 for a fluidised bed (its sorbent goes into the bed: use removal_pct)")


def _left_to_forecast(sheet_name: str, by_name: dict[str, RawSheet]) -> bool:
    """True for a missing ``generation`` sheet when ``generation_history`` is given: the
    forecast then makes every planned day (`_check_history_covers_forecast` asks for
    enough history), as an empty ``generation`` sheet would leave it to."""
    return sheet_name == "generation" and "generation_history" in by_name


def _check_tables_have_rows(recs: dict[str, list[dict[str, Any]]], boiler: str, out: Collector,
                            blend: bool = True) -> None:
    """The tables a plan cannot do without, each with at least one row, and the storage
    sheet with a row per store (no gypsum store for a fluidised bed).  ``blend``: the
    ``coal_blend`` sheet too (else `_check_blend` says it).  A sheet with problems of
    its own is left alone: its rows with a bad cell are not in ``recs``."""
    bad = {p.sheet for p in out.problems}
    for sheet_name in ("units", "coal_sources", "suppliers"):
        if not recs[sheet_name] and sheet_name not in bad:
            out.add(sheet_name, None, None, "the sheet has no rows", "at least one row")
    have = {r["store"] for r in recs["storage"]}
    needed = [s for s in schema.STORES if not (s == "gypsum" and boiler == "cfb")]
    for s in needed:
        if s not in have and "storage" not in bad:
            out.add("storage", None, "store", f"no row for the store '{s}'",
                    "one row for each of " + ", ".join(needed))
    if blend and not recs["coal_blend"] and "coal_blend" not in bad:
        out.add("coal_blend", None, None, *_NO_BLEND)


def _check_storage(plant: Plant, records: list[dict[str, Any]], out: Collector) -> None:
    """Safety stock and initial level within each store's capacity (`_check_tables_have_rows`
    checks that every store has its row)."""
    for r in records:
        if r["safety_t"] > r["capacity_t"]:
            out.add("storage", r["_row"], "safety_t",
                    f"safety stock {r['safety_t']:g} t is above capacity {r['capacity_t']:g} t",
                    "a safety stock no larger than the capacity")
        if r["initial_t"] > r["capacity_t"]:
            out.add("storage", r["_row"], "initial_t",
                    f"initial level {r['initial_t']:g} t is above capacity {r['capacity_t']:g} t",
                    "an initial level no larger than the capacity")


def _check_monthly(records: list[dict[str, Any]], sheet: str, out: Collector) -> None:
    for r in records:
        lo, hi = r.get("min_t_per_month"), r.get("max_t_per_month")
        if lo is not None and hi is not None and lo > hi:
            out.add(sheet, r["_row"], "min_t_per_month",
                    f"the monthly minimum {lo:g} t is above the maximum {hi:g} t",
                    "a minimum no larger than the maximum")


def _check_quality_limits(records: list[dict[str, Any]], out: Collector) -> None:
    gypsum_only = ("min_purity_pct", "max_moisture_pct", "max_chloride_ppm")
    ash_only = ("max_loi_pct", "max_so3_pct")
    for r in records:
        wrong = ash_only if r["material"] == "gypsum" else gypsum_only if r["material"] == "fly_ash" else ()
        for col in wrong:
            if r.get(col) is not None:
                out.add("buyers", r["_row"], col, f"a limit for {r['material']}",
                        f"this column empty for {r['material']} (it applies to "
                        f"{'fly ash' if col in ash_only else 'gypsum'})")


def _check_dated(records: list[dict[str, Any]], sheet: str, ref_col: str, known: dict,
                 plant: Plant, out: Collector, inside_horizon: bool) -> pd.DataFrame:
    """Check a dated table's references and dates.  Its rows come sorted by the sheet's
    ``sort_by`` (`read_table_into`), so the order they were typed or pasted in is free."""
    ref_sheet = "units" if ref_col == "unit" else "coal_sources"
    for r in records:
        d = r["date"]
        if r[ref_col] not in known:
            out.add(sheet, r["_row"], ref_col, f"unknown {ref_col} '{r[ref_col]}'"
                    f"{did_you_mean(r[ref_col], list(known))}",
                    f"a {ref_col} listed in the '{ref_sheet}' sheet: " + ", ".join(known))
        if inside_horizon and not plant.start_date <= d <= plant.end_date:
            out.add(sheet, r["_row"], "date", f"the date {d:%Y-%m-%d} is outside the horizon",
                    f"a date from {plant.start_date:%Y-%m-%d} to {plant.end_date:%Y-%m-%d}"
                    " (plant start_date and horizon_days)")
        if not inside_horizon and d >= plant.start_date:
            out.add(sheet, r["_row"], "date", f"the date {d:%Y-%m-%d} is not in the past",
                    f"history before the start date {plant.start_date:%Y-%m-%d}")
    cols = [f.name for f in schema.SHEETS_BY_NAME[sheet].fields]
    frame = pd.DataFrame([{c: r[c] for c in cols} for r in records], columns=cols)
    frame["date"] = pd.to_datetime(frame["date"])
    for c in cols:
        if c not in ("date", ref_col):
            frame[c] = frame[c].astype(float)
    return frame


def _check_generation_coverage(generation: pd.DataFrame, units: tuple[Unit, ...], plant: Plant,
                               out: Collector) -> None:
    dates = plant.dates
    for u in units:
        have = pd.DatetimeIndex(generation.loc[generation["unit"] == u.unit, "date"])
        missing = dates.difference(have)
        if len(missing):
            out.add("generation", None, "date",
                    f"{u.unit} has no generation on {len(missing)} of {len(dates)} planned days "
                    f"(first {missing[0]:%Y-%m-%d})",
                    "a row for every unit and day of the horizon, or a 'generation_history' "
                    "sheet to forecast the days not given")


def _check_history_days(records: list[dict[str, Any]], units: dict, out: Collector) -> None:
    """Each unit's history: one row per day from its first to its last (no gaps), and no
    day above capacity x 24 h."""
    last: dict[str, dt.date] = {}
    for r in records:
        u = units.get(r["unit"])
        if u is None:
            continue
        if r["mwh"] > u.capacity_mw * 24 * 1.0001:
            out.add("generation_history", r["_row"], "mwh", f"found {r['mwh']:g} MWh for {u.unit}",
                    f"at most {u.capacity_mw * 24:g} MWh (capacity {u.capacity_mw:g} MW x 24 h)")
        before = last.get(u.unit)
        if before is not None and (r["date"] - before).days > 1:
            first_missing = before + dt.timedelta(days=1)
            n = (r["date"] - before).days - 1
            out.add("generation_history", r["_row"], "date",
                    f"{u.unit} has no rows for the {n} day(s) from {first_missing:%Y-%m-%d} to "
                    f"{r['date'] - dt.timedelta(days=1):%Y-%m-%d}, before this row",
                    "one row per unit and day with no gaps (0 MWh for days the unit was off)")
        if before is None or r["date"] > before:
            last[u.unit] = r["date"]


def _check_history_covers_forecast(generation: pd.DataFrame, history: pd.DataFrame,
                                   units: tuple[Unit, ...], plant: Plant, out: Collector) -> None:
    """A unit whose planned days the ``generation`` sheet leaves open needs history."""
    dates = plant.dates
    for u in units:
        have = pd.DatetimeIndex(generation.loc[generation["unit"] == u.unit, "date"])
        missing = dates.difference(have)
        if not len(missing):
            continue
        n = int((history["unit"] == u.unit).sum())
        if n < MIN_HISTORY_DAYS:
            out.add("generation_history", None, "unit",
                    f"{u.unit} has {n} day(s) of history and no generation on {len(missing)} of "
                    f"{len(dates)} planned days (first {missing[0]:%Y-%m-%d})",
                    f"at least {MIN_HISTORY_DAYS} days of history for {u.unit} to forecast "
                    "from, or rows in the 'generation' sheet for every planned day")


def _check_blend(records: list[dict[str, Any]], sources: dict, plant: Plant,
                 out: Collector) -> pd.DataFrame:
    totals: dict[dt.date, list] = {}
    for r in records:
        if r["source"] not in sources:
            out.add("coal_blend", r["_row"], "source", f"unknown source '{r['source']}'"
                    f"{did_you_mean(r['source'], list(sources))}",
                    "a source listed in the 'coal_sources' sheet: " + ", ".join(sources))
        if r["date"] > plant.end_date:
            out.add("coal_blend", r["_row"], "date",
                    f"the date {r['date']:%Y-%m-%d} is after the horizon's last day "
                    f"{plant.end_date:%Y-%m-%d}", "a date inside the horizon")
        totals.setdefault(r["date"], []).append(r)
    if not records:
        out.add("coal_blend", None, None, *_NO_BLEND)
    elif min(totals) > plant.start_date:
        out.add("coal_blend", records[0]["_row"], "date",
                f"the first blend starts {min(totals):%Y-%m-%d}, after the start date "
                f"{plant.start_date:%Y-%m-%d}", "a blend in force on the first planned day")
    for d, rows in totals.items():
        total = sum(r["share_pct"] for r in rows)
        if abs(total - 100.0) > SHARE_TOLERANCE_PCT:
            out.add("coal_blend", rows[0]["_row"], "share_pct",
                    f"the shares of {d:%Y-%m-%d} sum to {total:g} % (rows "
                    f"{', '.join(str(r['_row']) for r in rows)})", "shares of one date summing to 100")
    frame = pd.DataFrame([{k: r[k] for k in ("date", "source", "share_pct")} for r in records],
                         columns=["date", "source", "share_pct"])
    frame["date"] = pd.to_datetime(frame["date"])
    frame["share_pct"] = frame["share_pct"].astype(float)
    # keep only the blend in force at the start and later ones
    if len(frame):
        first = frame.loc[frame["date"] <= pd.Timestamp(plant.start_date), "date"].max()
        if pd.notna(first):
            frame = frame[frame["date"] >= first].reset_index(drop=True)
    return frame


def _check_firm(records: list[dict[str, Any]], plant: Plant, suppliers, buyers, disposal,
                out: Collector) -> tuple[FirmOrder, ...]:
    orders = []
    for r in records:
        if not plant.start_date <= r["date"] <= plant.end_date:
            out.add("firm_orders", r["_row"], "date", f"the date {r['date']:%Y-%m-%d} is outside the horizon",
                    f"a date from {plant.start_date:%Y-%m-%d} to {plant.end_date:%Y-%m-%d}")
            continue
        if r["material"] == "limestone":
            lanes = [s for s in suppliers if s.supplier == r["party"]]
            sheet, names = "suppliers", sorted({s.supplier for s in suppliers})
        else:
            lanes = [b for b in buyers if b.buyer == r["party"] and b.material == r["material"]]
            lanes += [d for d in disposal if d.site == r["party"] and d.material == r["material"]]
            sheet = "buyers' or 'disposal"
            names = sorted({b.buyer for b in buyers if b.material == r["material"]}
                           | {d.site for d in disposal if d.material == r["material"]})
        if r["mode"] is not None:
            lanes = [x for x in lanes if getattr(x, "mode", r["mode"]) == r["mode"]]
        lanes = [x for x in lanes if r["date"].month - 1 in getattr(x, "months", range(12))]
        if not lanes:
            out.add("firm_orders", r["_row"], "party",
                    f"no {r['material']} lane for '{r['party']}'"
                    + (f" by {r['mode']}" if r["mode"] else "") + did_you_mean(r["party"], names),
                    f"a party of the '{sheet}' sheet for {r['material']}: " + ", ".join(names))
            continue
        if len(lanes) > 1:
            out.add("firm_orders", r["_row"], "mode", f"'{r['party']}' has several lanes",
                    "the mode of the lane (" + ", ".join(sorted({getattr(x, 'mode', '') for x in lanes})) + ")")
            continue
        lane = lanes[0]
        load = getattr(lane, "load_t", None)
        tonnes = r["tonnes"] if r["tonnes"] is not None else (r["loads"] * load if load else None)
        if tonnes is None:
            out.add("firm_orders", r["_row"], "tonnes", "the cell is empty", "the tonnes booked")
            continue
        orders.append(FirmOrder(r["date"], r["material"], r["party"], getattr(lane, "mode", None),
                                r["loads"], float(tonnes)))
    return tuple(orders)


def _check_closures(records, suppliers, buyers, disposal, out: Collector) -> tuple[LaneClosure, ...]:
    parties: dict[str, set] = {}
    for x in suppliers:
        parties.setdefault(x.supplier, set()).add(x.mode)
    for x in buyers:
        parties.setdefault(x.buyer, set()).add(x.mode)
    for x in disposal:
        parties.setdefault(x.site, set()).add(None)
    closures = []
    for r in records:
        if r["party"] not in parties:
            out.add("lane_closures", r["_row"], "party", f"unknown party '{r['party']}'"
                    f"{did_you_mean(r['party'], list(parties))}",
                    "a supplier, buyer or disposal site: " + ", ".join(parties))
            continue
        if r["mode"] is not None and r["mode"] not in parties[r["party"]]:
            out.add("lane_closures", r["_row"], "mode", f"'{r['party']}' has no {r['mode']} lane",
                    "one of its modes: " + ", ".join(sorted(m for m in parties[r["party"]] if m)))
            continue
        if r["last_date"] < r["first_date"]:
            out.add("lane_closures", r["_row"], "last_date",
                    f"the last day {r['last_date']:%Y-%m-%d} is before the first {r['first_date']:%Y-%m-%d}",
                    "a last day on or after the first day")
            continue
        closures.append(LaneClosure(r["party"], r["mode"], r["first_date"], r["last_date"]))
    return tuple(closures)


def _warn_stone_settings_unused(records, suppliers, out: Collector) -> None:
    """A `period_settings` row for ``limestone_caco3_pct`` does nothing once quarries give
    their own CaCO3 (the silo's mix of their stone is what the scrubber is fed): say so."""
    if not any(s.caco3_pct is not None for s in suppliers):
        return
    for r in records or []:
        if r["key"] == "limestone_caco3_pct":
            out.warnings.append(InputWarning(
                "period_settings", r["_row"], "key", "limestone_caco3_pct for a span of days",
                "of settings the plan uses (quarries give their own CaCO3 on the suppliers sheet, so "
                "the scrubber is fed the silo's mix of the stone delivered)",
                "DEVELOPERS.md, stone quality in the plan",
                "this row is not used: set the stone's CaCO3 on the suppliers sheet, or leave "
                "caco3_pct empty there to plan with this setting"))


def _check_periods(records, plant: Plant, out: Collector) -> pd.DataFrame | None:
    if not records:
        return None
    spans: dict[str, list] = {}
    for r in records:
        f = (schema.SCRUBBER.field(r["key"]) if r["key"] in {x.name for x in schema.SCRUBBER.fields}
             else schema.PLANT.field(r["key"]))
        try:
            x = parse_cell(f, r["value"])
            w = plausibility_warning(f, x, sheet="period_settings", row=r["_row"], column="value",
                                     boiler=plant.boiler)
            if w is not None:
                out.warnings.append(dataclasses.replace(w, found=f"{w.found} for {r['key']}"))
        except CellError as e:
            out.add("period_settings", r["_row"], "value", f"{e.found} for {r['key']}", f.expected())
        if r["last_date"] < r["first_date"]:
            out.add("period_settings", r["_row"], "last_date",
                    f"the last day {r['last_date']:%Y-%m-%d} is before the first {r['first_date']:%Y-%m-%d}",
                    "a last day on or after the first day")
        if r["last_date"] < plant.start_date or r["first_date"] > plant.end_date:
            out.add("period_settings", r["_row"], "first_date", "the span is outside the horizon",
                    f"days from {plant.start_date:%Y-%m-%d} to {plant.end_date:%Y-%m-%d}")
        for other in spans.get(r["key"], []):
            if r["first_date"] <= other["last_date"] and other["first_date"] <= r["last_date"]:
                out.add("period_settings", r["_row"], "first_date",
                        f"the span overlaps row {other['_row']} for {r['key']}",
                        "spans of one key that do not overlap")
        spans.setdefault(r["key"], []).append(r)
    frame = pd.DataFrame([{k: r[k] for k in ("first_date", "last_date", "key", "value")} for r in records])
    frame["first_date"] = pd.to_datetime(frame["first_date"])
    frame["last_date"] = pd.to_datetime(frame["last_date"])
    return frame
