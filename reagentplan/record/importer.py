"""Recording a file of facts: read (.xlsx with any of the record's sheets, or a .csv
named after one), validate like the scenario workbook, compare with what is recorded,
and write whole or not at all.

- The same file twice changes nothing (counts of added and unchanged rows per sheet).
- A key already recorded with other values is a conflict: every one is named and
  nothing is written, unless ``replace``, which keeps the old values in
  ``replaced_values`` (which import replaced them, who, when, from which file).
- Names must be the scenario's when one is given, with "did you mean"; loads must match
  tonnes for the lane's load size; no fact may lie after ``today`` (orders are planned
  arrivals and may); a survey above the store's capacity is accepted and flagged.
"""

from __future__ import annotations

import csv
import dataclasses
import datetime as dt
import getpass
import hashlib
import io
import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import sqlalchemy as sa

from .. import schema
from ..errors import Problem
from ..scenario import Scenario
from ..scenario.tables import Collector, did_you_mean, read_table_into, show_value
from ..workbook import MAX_ROWS, RawSheet, read_raw
from .db import RecordError, require_current, write_transaction
from .models import FACT_TABLES, Import, ReplacedValue
from .sheets import LOAD_SHARE_MAX, LOAD_SHARE_MIN, RECORD_SHEETS, TEXT_COLUMNS, value_columns

ORDER = ("stock_surveys", "arrivals", "shipments", "orders", "generation_history",
         "coal_quality_history")


class RecordConflict(RecordError):
    """Keys already recorded with other values (nothing written); the HTTP interface
    answers 409 for it, 422 for any other `RecordError`."""


@dataclass
class SheetCount:
    added: int = 0
    unchanged: int = 0
    replaced: int = 0


@dataclass
class ImportResult:
    """What an import did: counts per sheet, warnings (accepted but flagged), and the
    import's id (None when nothing was new)."""

    counts: dict[str, SheetCount]
    warnings: list[str] = field(default_factory=list)
    import_id: int | None = None

    @property
    def changed(self) -> bool:
        return any(c.added or c.replaced for c in self.counts.values())


# --------------------------------------------------------------------------- reading


def _csv_sheet(data: bytes, label: str) -> RawSheet:
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise RecordError(Problem(label, None, None, "the file is not UTF-8 text",
                                  "a CSV file saved as UTF-8"), "The record file") from None
    reader = csv.reader(io.StringIO(text))
    header = next(reader, [])
    sheet = RawSheet(label, [h.strip().lower() or None for h in header], list(header))
    for i, values in enumerate(reader, start=2):
        if all(not v.strip() for v in values):
            continue
        if values and values[0].lstrip().startswith("#"):
            continue
        if len(sheet.rows) >= MAX_ROWS:
            raise RecordError(Problem(label, i, None, f"more than {MAX_ROWS} rows", f"at most {MAX_ROWS} rows"),
                              "The record file")
        sheet.rows.append((i, tuple(v if v.strip() else None for v in values)))
    return sheet


def read_record_file(path: str | Path | tuple[str, bytes]) -> tuple[dict[str, RawSheet], bytes]:
    """The record sheets of one file (a path, or ``(name, bytes)`` of an upload), keyed
    by sheet name, and the file's bytes.

    Raises `RecordError` for a missing file, an unknown sheet or CSV name."""
    names = list(RECORD_SHEETS)
    upload = isinstance(path, tuple)
    if upload:
        name, data = path
        path = Path(Path(name).name or "upload.xlsx")
    else:
        path = Path(path)
        if not path.is_file():
            raise RecordError(Problem(None, None, None, f"{path} does not exist",
                                      "an .xlsx with record sheets or a .csv named after one"),
                              "The record file")
        data = path.read_bytes()
    if path.suffix.lower() == ".csv":
        stem = path.stem.strip().lower()
        if stem not in RECORD_SHEETS:
            raise RecordError(Problem(path.name, None, None, f"a CSV named '{path.name}'{did_you_mean(stem, names)}",
                                      "a CSV named after a record sheet: " + ", ".join(f"{n}.csv" for n in names)),
                              "The record file")
        return {stem: _csv_sheet(data, path.name)}, data
    raw = read_raw(data if upload else path)
    out = Collector()
    sheets = {}
    for title, sheet in raw.items():
        key = title.strip().lower()
        if key in RECORD_SHEETS:
            sheets[key] = sheet
        elif not (key in schema.NOTE_SHEETS or key.startswith("notes")):
            out.add(title, None, None, f"unknown sheet{did_you_mean(key, names)}",
                    "one of " + ", ".join(names) + " (or a 'notes' sheet)")
    if not sheets and not out.problems:
        out.add(None, None, None, f"'{path.name}' has none of the record's sheets", "one of " + ", ".join(names))
    if out.problems:
        raise RecordError(out.problems, "The record file")
    return sheets, data


# --------------------------------------------------------------------------- validation


def parse_record(raws: list[tuple[str, dict[str, RawSheet]]], scenario: Scenario | None = None,
                 today: dt.date | None = None) -> tuple[dict[str, pd.DataFrame], list[str]]:
    """Parse and check the sheets of one or more files.

    Returns one frame per sheet (the sheet's fields, plus ``_row`` and ``_sheet``, where
    it was read) and the warnings.  Raises `RecordError` naming every problem.
    """
    today = today or dt.date.today()
    out = Collector()
    warnings: list[str] = []
    parts: dict[str, list[pd.DataFrame]] = {}
    for _file, sheets in raws:
        for name, raw in sheets.items():
            spec = dataclasses.replace(RECORD_SHEETS[name], name=raw.name)
            records = read_table_into(raw, spec, out)
            for col in TEXT_COLUMNS.get(name, ()):
                j = raw.header.index(col) if col in raw.header else None
                by_row = {r: (v[j] if j is not None and j < len(v) else None) for r, v in raw.rows}
                for rec in records:
                    v = by_row.get(rec["_row"])
                    rec[col] = None if v is None or not str(v).strip() else str(v).strip()
            cols = [f.name for f in spec.fields] + list(TEXT_COLUMNS.get(name, ())) + ["_row"]
            frame = pd.DataFrame(records, columns=cols)
            frame["_sheet"] = raw.name
            parts.setdefault(name, []).append(frame)
    frames = {k: pd.concat(v, ignore_index=True) for k, v in parts.items()}
    for name, frame in frames.items():
        _check_frame(name, frame, scenario, today, out, warnings)
    if out.problems:
        raise RecordError(out.problems, "The record file")
    # values possible but unusual (the loader's usual ranges, `reagentplan.schema.PLAUSIBLE`)
    warnings = [str(w) for w in out.warnings] + warnings
    return frames, warnings


#: First characters that make a spreadsheet read a cell as a formula (``=cmd|...``,
#: ``+``, ``-``, ``@``, and a tab or carriage return before one): text starting so is
#: refused, so that nothing recorded becomes a formula when a later file shows it (OWASP,
#: "CSV Injection").
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _check_text(name: str, frame: pd.DataFrame, out: Collector) -> None:
    spec = RECORD_SHEETS[name]
    cols = [f.name for f in spec.fields if f.kind == "text"] + list(TEXT_COLUMNS.get(name, ()))
    for col in cols:
        if col not in frame:
            continue
        values = frame[col]
        bad = values.map(lambda v: isinstance(v, str) and v.startswith(FORMULA_START))
        for _, r in frame[bad].iterrows():
            out.add(r["_sheet"], int(r["_row"]), col, f"'{str(r[col])[:40]}' starts with '{r[col][0]}'"
                    .replace("\t", "\\t").replace("\r", "\\r"),
                    "text that does not start with =, +, -, @, a tab or a return (a spreadsheet "
                    "would run it as a formula)")


def _check_frame(name: str, frame: pd.DataFrame, scenario: Scenario | None, today: dt.date,
                 out: Collector, warnings: list[str]) -> None:
    spec = RECORD_SHEETS[name]
    _check_text(name, frame, out)
    # the same key twice across files (within one sheet the reader already refused it)
    if len(frame) and frame["_sheet"].nunique() > 1:
        dup = frame[frame.duplicated(list(spec.key), keep=False)]
        for _, group in dup.groupby(list(spec.key), sort=False):
            first = group.iloc[0]
            for _, r in group.iloc[1:].iterrows():
                out.add(r["_sheet"], int(r["_row"]), ", ".join(spec.key),
                        f"the same {' and '.join(spec.key)} as {first['_sheet']} row {int(first['_row'])}",
                        "one row per " + " and ".join(spec.key))
    if name != "orders" and len(frame):
        late = frame[frame["date"] > today]
        for _, r in late.iterrows():
            out.add(r["_sheet"], int(r["_row"]), "date", f"the date {r['date']:%Y-%m-%d} is in the future",
                    f"a day on or before {today:%Y-%m-%d} (facts that have happened; plans go in orders)")
    if scenario is None:
        return
    if name == "stock_surveys":
        cap = frame["store"].map({k: st.capacity_t for k, st in scenario.storage.items()})
        for _, r in frame[cap.isna()].iterrows():
            out.add(r["_sheet"], int(r["_row"]), "store", f"the store '{r['store']}' is not in the scenario",
                    "a store of the scenario's storage sheet: " + ", ".join(scenario.storage))
        for _, r in frame[frame["level_t"] > cap].iterrows():
            warnings.append(f"{r['_sheet']} row {int(r['_row'])}: the {r['store']} survey of "
                            f"{r['date']:%Y-%m-%d} found {r['level_t']:g} t, above the capacity "
                            f"{cap[_]:g} t (recorded; check the survey or the capacity)")
    elif name in ("arrivals", "orders", "shipments"):
        _check_lanes(name, frame, scenario, out)
    elif name == "generation_history":
        caps = {u.unit: u.capacity_mw for u in scenario.units}
        cap = frame["unit"].map(caps)
        for _, r in frame[cap.isna()].iterrows():
            out.add(r["_sheet"], int(r["_row"]), "unit",
                    f"unknown unit '{r['unit']}'{did_you_mean(r['unit'], list(caps))}",
                    "a unit of the scenario's units sheet: " + ", ".join(caps))
        for i, r in frame[frame["mwh"] > cap * 24 * 1.0001].iterrows():
            out.add(r["_sheet"], int(r["_row"]), "mwh", f"found {r['mwh']:g} MWh for {r['unit']}",
                    f"at most {cap[i] * 24:g} MWh (capacity {cap[i]:g} MW x 24 h)")
    elif name == "coal_quality_history":
        sources = [s.source for s in scenario.coal_sources]
        bad = frame[~frame["source"].isin(sources)]
        for _, r in bad.iterrows():
            out.add(r["_sheet"], int(r["_row"]), "source",
                    f"unknown source '{r['source']}'{did_you_mean(r['source'], sources)}",
                    "a source of the scenario's coal_sources sheet: " + ", ".join(sources))


def _check_lanes(name: str, frame: pd.DataFrame, scenario: Scenario, out: Collector) -> None:
    """Each row's lane (resolved once per party, mode and month; row by row only where a
    party has several lanes that the load size must tell apart), and loads against
    tonnes for the lane's load size."""
    if frame.empty:
        return
    party = "party" if name == "shipments" else "supplier"
    month = pd.to_datetime(frame["date"]).dt.month
    mode = frame["mode"].where(frame["mode"].notna(), None)
    combos = pd.DataFrame({"p": frame[party], "m": mode.fillna(""), "mo": month,
                           "mat": frame["material"] if name == "shipments" else ""})
    load = np.full(len(frame), np.nan)
    lane_mode: list = [None] * len(frame)
    label: list = [""] * len(frame)
    for (p, m, mo, mat), idx in combos.groupby(["p", "m", "mo", "mat"], sort=False).indices.items():
        d = dt.date(2000, int(mo), 1)
        lane, problem = (resolve_out_lane(scenario, p, mat, m or None, d) if name == "shipments"
                         else resolve_supply_lane(scenario, p, m or None, d))
        if problem and problem[0] == "mode" and "several lanes" in problem[1]:
            rows = []
            for i in idx:
                r = frame.iloc[i]
                one, prob = (resolve_out_lane(scenario, p, mat, m or None, d, r["tonnes"], r["loads"])
                             if name == "shipments" else
                             resolve_supply_lane(scenario, p, m or None, d, r["tonnes"], r["loads"]))
                rows.append((i, one, prob))
        else:
            rows = [(i, lane, problem) for i in idx]
        for i, one, prob in rows:
            if prob:
                r = frame.iloc[i]
                out.add(r["_sheet"], int(r["_row"]), prob[0], prob[1], prob[2])
                continue
            lane_mode[i] = getattr(one, "mode", None)
            lt = getattr(one, "load_t", None)
            load[i] = np.nan if lt is None else lt
            label[i] = getattr(one, "lane", "")
    frame["mode"] = lane_mode
    has_load = ~np.isnan(load)
    tonnes = frame["tonnes"].to_numpy(float, na_value=np.nan)
    loads = frame["loads"].to_numpy(float, na_value=np.nan)
    if name == "orders":
        fill = np.isnan(tonnes) & has_load
        frame.loc[fill, "tonnes"] = loads[fill] * load[fill]
        tonnes = frame["tonnes"].to_numpy(float, na_value=np.nan)
        check = has_load & ~fill
    else:
        check = has_load
    if name == "shipments":
        for i in np.flatnonzero(has_load & np.isnan(loads)):
            r = frame.iloc[i]
            out.add(r["_sheet"], int(r["_row"]), "loads", "the cell is empty",
                    f"the loads shipped ({label[i]} moves loads of {load[i]:g} t)")
        check = check & ~np.isnan(loads)
    with np.errstate(divide="ignore", invalid="ignore"):
        per = tonnes / loads
    bad = check & ~((per >= LOAD_SHARE_MIN * load) & (per <= LOAD_SHARE_MAX * load))
    for i in np.flatnonzero(bad):
        r = frame.iloc[i]
        out.add(r["_sheet"], int(r["_row"]), "tonnes", _load_found(r, load[i]),
                _load_expected(r["loads"], load[i], label[i]))


def _load_ok(tonnes: float, loads: int, load_t: float) -> bool:
    per = tonnes / loads if loads else math.inf
    return LOAD_SHARE_MIN * load_t <= per <= LOAD_SHARE_MAX * load_t


def _load_found(r, load_t: float) -> str:
    return f"{r['tonnes']:g} t in {int(r['loads'])} load(s), {r['tonnes'] / max(int(r['loads']), 1):g} t per load"


def _load_expected(loads: int, load_t: float, lane: str) -> str:
    lo, hi = LOAD_SHARE_MIN * load_t * loads, LOAD_SHARE_MAX * load_t * loads
    return (f"{lo:g} to {hi:g} t for {int(loads)} load(s) of {load_t:g} t ({lane}; "
            f"{LOAD_SHARE_MIN:.0%} to {LOAD_SHARE_MAX:.0%} of a full load each)")


def resolve_supply_lane(scenario: Scenario, supplier: str, mode, date: dt.date, tonnes=None, loads=None):
    """The supplier row that a fact belongs to, or (None, (column, found, expected))."""
    names = sorted({s.supplier for s in scenario.suppliers})
    lanes = [s for s in scenario.suppliers if s.supplier == supplier]
    if not lanes:
        return None, ("supplier", f"unknown supplier '{supplier}'{did_you_mean(supplier, names)}",
                      "a supplier of the scenario's suppliers sheet: " + ", ".join(names))
    if mode is not None and not (isinstance(mode, float) and math.isnan(mode)):
        modes = sorted({s.mode for s in lanes})
        lanes = [s for s in lanes if s.mode == mode]
        if not lanes:
            return None, ("mode", f"'{supplier}' has no {mode} lane", "one of its modes: " + ", ".join(modes))
    in_month = [s for s in lanes if date.month - 1 in s.months] or lanes
    return _pick(in_month, supplier, tonnes, loads)


def resolve_out_lane(scenario: Scenario, party: str, material: str, mode, date: dt.date,
                     tonnes=None, loads=None):
    """The buyer row or disposal site of a shipment, or (None, (column, found, expected))."""
    buyers = [b for b in scenario.buyers if b.buyer == party and b.material == material]
    sites = [d for d in scenario.disposal if d.site == party and d.material == material]
    if not buyers and not sites:
        names = sorted({b.buyer for b in scenario.buyers if b.material == material}
                       | {d.site for d in scenario.disposal if d.material == material})
        return None, ("party", f"no {material} lane for '{party}'{did_you_mean(party, names)}",
                      f"a buyer or disposal site of the scenario for {material}: " + ", ".join(names))
    if sites and not buyers:
        return sites[0], None
    if mode is not None and not (isinstance(mode, float) and math.isnan(mode)):
        modes = sorted({b.mode for b in buyers})
        buyers = [b for b in buyers if b.mode == mode]
        if not buyers:
            return None, ("mode", f"'{party}' has no {material} {mode} lane", "one of its modes: " + ", ".join(modes))
    return _pick(buyers, party, tonnes, loads)


def _pick(lanes, party, tonnes, loads):
    if len({x.mode for x in lanes}) == 1:
        return lanes[0], None
    if tonnes is not None and loads and not pd.isna(loads):
        fit = [x for x in lanes if _load_ok(tonnes, loads, x.load_t)]
        if len({x.mode for x in fit}) == 1:
            return fit[0], None
    return None, ("mode", f"'{party}' has several lanes ({', '.join(sorted({x.mode for x in lanes}))})",
                  "the mode of the lane in a 'mode' column")


# --------------------------------------------------------------------------- writing


def _same(a: Any, b: Any) -> bool:
    a_none = a is None or (isinstance(a, float) and math.isnan(a))
    b_none = b is None or (isinstance(b, float) and math.isnan(b))
    if a_none or b_none:
        return a_none and b_none
    if isinstance(a, (int, float, np.number)) and isinstance(b, (int, float, np.number)):
        return math.isclose(float(a), float(b), rel_tol=1e-9, abs_tol=1e-9)
    return str(a) == str(b)


def _equal(a: pd.Series, b: pd.Series) -> np.ndarray:
    """Element-wise `_same` of two columns, vectorised where both are numbers."""
    try:
        x = pd.to_numeric(a, errors="raise").to_numpy(float)
        y = pd.to_numeric(b, errors="raise").to_numpy(float)
    except (ValueError, TypeError):
        return np.fromiter((_same(p, q) for p, q in zip(a.to_numpy(object), b.to_numpy(object))),
                           dtype=bool, count=len(a))
    both_nan = np.isnan(x) & np.isnan(y)
    with np.errstate(invalid="ignore"):
        close = np.isclose(x, y, rtol=1e-9, atol=1e-9)
    return both_nan | close


def _plain(v: Any) -> Any:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return None
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return float(v)
    if isinstance(v, pd.Timestamp):
        return v.date()
    return v


def _existing(conn, name: str, frame: pd.DataFrame) -> pd.DataFrame:
    table = FACT_TABLES[name]
    spec = RECORD_SHEETS[name]
    cols = list(spec.key) + value_columns(name)
    # dates come back as ISO text and are parsed once, vectorised, by pandas (SQLite's
    # per-row date conversion dominates a large comparison otherwise)
    sel = [sa.type_coerce(table.c[c], sa.String).label(c) if c == "date" else table.c[c] for c in cols]
    query = sa.select(table.c.id, table.c.import_id, *sel)
    if "date" in spec.key:
        query = query.where(table.c.date.between(min(frame["date"]), max(frame["date"])))
    else:
        party = spec.key[0]
        values = sorted(set(frame[party]))
        if len(values) <= 500:
            query = query.where(table.c[party].in_(values))
    rows = [tuple(r) for r in conn.execute(query)]  # plain tuples: pandas probes Row objects slowly
    old = pd.DataFrame.from_records(rows, columns=["id", "import_id"] + cols)
    if "date" in old:
        old["date"] = pd.to_datetime(old["date"].astype(str).str[:10], format="%Y-%m-%d")
    return old


def _compare(name: str, frame: pd.DataFrame, old: pd.DataFrame):
    """Split the file's rows into added, unchanged and changed (with their differences),
    comparing keys in pandas."""
    spec = RECORD_SHEETS[name]
    keys = list(spec.key)
    vals = value_columns(name)
    if old.empty:
        return frame, frame.iloc[0:0], []
    if "date" in frame:
        frame = frame.assign(date=pd.to_datetime(frame["date"]).astype("datetime64[ns]"))
        old = old.assign(date=old["date"].astype("datetime64[ns]"))
    merged = frame.merge(old, on=keys, how="left", suffixes=("", "_old"), indicator=True)
    added = merged[merged["_merge"] == "left_only"][frame.columns]
    matched = merged[merged["_merge"] == "both"]
    same = np.ones(len(matched), dtype=bool)
    diffs: list[tuple[pd.Series, list[str]]] = []
    cols_diff = {}
    for c in vals:
        eq = _equal(matched[c], matched[f"{c}_old"])
        cols_diff[c] = ~eq
        same &= eq
    unchanged = matched[same]
    for pos in np.flatnonzero(~same):
        row = matched.iloc[pos]
        diffs.append((row, [c for c in vals if cols_diff[c][pos]]))
    return added, unchanged, diffs


def _key_text(name: str, row) -> str:
    return ", ".join(f"{k} {show_value(_plain(row[k]))}" for k in RECORD_SHEETS[name].key)


def record_files(engine, paths: list[str | Path | tuple[str, bytes]], *, scenario: Scenario | None = None,
                 replace: bool = False, today: dt.date | None = None,
                 who: str | None = None) -> ImportResult:
    """Record one or more files in one transaction (all of them or nothing).

    ``paths`` are files, or ``(name, bytes)`` of uploads.  Raises `RecordError` for bad
    input or conflicts (nothing written)."""
    require_current(engine)
    raws, blobs = [], []
    names = [Path(p[0] if isinstance(p, tuple) else p).name for p in paths]
    for p, n in zip(paths, names):
        sheets, data = read_record_file(p)
        raws.append((n, sheets))
        blobs.append(data)
    frames, warnings = parse_record(raws, scenario, today)
    digest = hashlib.sha256(b"".join(blobs)).hexdigest()
    file_name = ", ".join(names)
    result = ImportResult({n: SheetCount() for n in ORDER if n in frames}, warnings)
    with write_transaction(engine) as conn:
        plans = {}
        conflicts: list[Problem] = []
        for name in ORDER:
            if name not in frames or frames[name].empty:
                continue
            frame = frames[name]
            old = _existing(conn, name, frame)
            added, unchanged, diffs = _compare(name, frame, old)
            plans[name] = (added, diffs)
            result.counts[name] = SheetCount(len(added), len(unchanged), len(diffs) if replace else 0)
            if not replace:
                for row, cols in diffs:
                    for c in cols:
                        conflicts.append(Problem(
                            row["_sheet"], int(row["_row"]), c,
                            f"{_key_text(name, row)} is already recorded with {c} = "
                            f"{show_value(_plain(row[c + '_old']))}; this file says {show_value(_plain(row[c]))}",
                            "the recorded value, or `record --replace` to replace it (the old value "
                            "is kept in the audit trail)"))
        if conflicts:
            raise RecordConflict(conflicts, "The record file conflicts with what is recorded: it")
        if not result.changed:
            return result
        n_added = sum(c.added for c in result.counts.values())
        n_replaced = sum(c.replaced for c in result.counts.values())
        import_id = conn.execute(sa.insert(Import.__table__).values(
            file_name=file_name[:500], file_sha256=digest,
            recorded_at=dt.datetime.now(dt.timezone.utc).replace(tzinfo=None),
            recorded_by=who or _user(), added=n_added, replaced=n_replaced)).inserted_primary_key[0]
        result.import_id = int(import_id)
        for name, (added, diffs) in plans.items():
            table = FACT_TABLES[name]
            cols = list(RECORD_SHEETS[name].key) + value_columns(name)
            if len(added):
                rows = [_typed({c: _plain(v) for c, v in zip(cols, t)}) | {"import_id": import_id}
                        for t in added[cols].itertuples(index=False, name=None)]
                bulk_insert(conn, table, rows)
            if replace and diffs:
                updates, audit = [], []
                for row, changed in diffs:
                    updates.append({"_id": int(row["id"]), "_import": import_id,
                                    **{f"_v_{c}": v for c, v in
                                       _typed({c: _plain(row[c]) for c in value_columns(name)}).items()}})
                    for c in changed:
                        audit.append({"import_id": import_id, "old_import_id": int(row["import_id"]),
                                      "sheet": name, "key": json.dumps({k: str(_plain(row[k])) for k in
                                                                        RECORD_SHEETS[name].key}),
                                      "column": c, "old_value": _text(row[c + "_old"]),
                                      "new_value": _text(row[c])})
                stmt = (sa.update(table).where(table.c.id == sa.bindparam("_id"))
                        .values(import_id=sa.bindparam("_import"),
                                **{c: sa.bindparam(f"_v_{c}") for c in value_columns(name)}))
                conn.execute(stmt, updates)
                conn.execute(sa.insert(ReplacedValue.__table__), audit)
    return result


def bulk_insert(conn, table: sa.Table, rows: list[dict]) -> None:
    """Insert many rows inside the open transaction: SQLAlchemy Core ``insert()`` with
    executemany on SQLite; PostgreSQL's COPY through psycopg on PostgreSQL (measured 3 x
    faster than executemany there, see bench/record.py)."""
    if not rows:
        return
    if conn.dialect.name != "postgresql":
        conn.execute(sa.insert(table), rows)
        return
    names = list(rows[0])
    cols = ", ".join(conn.dialect.identifier_preparer.quote(n) for n in names)
    cursor = conn.connection.dbapi_connection.cursor()
    try:
        with cursor.copy(f"COPY {conn.dialect.identifier_preparer.quote(table.name)} ({cols}) FROM STDIN") as copy:
            for r in rows:
                copy.write_row([r[n] for n in names])
    finally:
        cursor.close()


def _typed(row: dict) -> dict:
    """Whole-number columns as int (pandas holds them as float beside empty cells)."""
    if row.get("loads") is not None:
        row["loads"] = int(row["loads"])
    return row


def _text(v: Any) -> str | None:
    v = _plain(v)
    return None if v is None else show_value(v)


def _user() -> str:
    try:
        return getpass.getuser()
    except Exception:  # no user name in this environment
        return "unknown"


def describe_import(result: ImportResult) -> str:
    """The counts per sheet, in words."""
    lines = []
    for name, c in result.counts.items():
        parts = [f"{c.added} added", f"{c.unchanged} unchanged"]
        if c.replaced:
            parts.append(f"{c.replaced} replaced (old values kept in the audit trail)")
        lines.append(f"  {name}: " + ", ".join(parts))
    head = (f"Recorded as import {result.import_id}:" if result.changed
            else "Nothing new: every row is already recorded with the same values.")
    return "\n".join([head] + lines + [f"  warning: {w}" for w in result.warnings])
