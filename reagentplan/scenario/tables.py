"""The table reader: cells and sheets of `reagentplan.schema` fields, parsed and checked.

Generic over the workbook's sheets: the scenario loader reads its sheets with it, the
operations record's importer (`reagentplan.record.importer`) reads the record's.  Each
function checks a cell or a sheet against its `Field` (kind, hard range, usual range)
and reports what it found to a `Collector`, which gathers every problem (with sheet,
Excel row and column) and warning, and raises them together.

- cells: `parse_cell` (and `parse_number`, `parse_date`, `parse_names`) raise
  `CellError` with what was found; `plausibility_warning` for values outside the usual
  range; `names_label` writes weekday and month sets back as ``Mon-Fri``.
- sheets: `read_table_into` / `read_table` for table sheets (unit variants, duplicates
  of the sheet's key, sorted rows), `read_keyvalue_into` for key/value sheets.
- messages: `did_you_mean`, `show_value`.
"""

from __future__ import annotations

import datetime as dt
import difflib
import math
from typing import Any

from .. import schema
from ..errors import InputWarning, Problem, ScenarioError
from ..schema import Field, Sheet
from ..units import BY_US_NAME, VARIANTS
from ..workbook import RawSheet, Uncalculated

DAY_NAMES = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
MONTH_NAMES = ("jan", "feb", "mar", "apr", "may", "jun", "jul", "aug", "sep", "oct", "nov", "dec")


class CellError(Exception):
    def __init__(self, found: str, expected: str | None = None):
        self.found, self.expected = found, expected


def describe(value: Any) -> str:
    if isinstance(value, str):
        return f"'{value}'"
    if isinstance(value, (dt.datetime, dt.date)):
        return f"the date {value:%Y-%m-%d}"
    return f"{value!r}"


def _refuse_uncalculated(value: Any) -> None:
    if isinstance(value, Uncalculated):
        raise CellError(f"found the formula '{value}' with no calculated value",
                         "a value: the file was saved without calculating its formulas (open it "
                         "in Excel or LibreOffice and save it again, or type the value)")


def parse_number(value: Any) -> float:
    _refuse_uncalculated(value)
    if isinstance(value, bool):
        raise CellError(f"found {value}")
    if isinstance(value, (int, float)):
        x = float(value)
    elif isinstance(value, str):
        text = value.strip().replace(",", "")
        try:
            x = float(text)
        except ValueError:
            raise CellError(f"found {describe(value)}") from None
    elif isinstance(value, (dt.date, dt.datetime)):
        raise CellError(f"found {describe(value)}")
    else:
        raise CellError(f"found {describe(value)}")
    if not math.isfinite(x):
        raise CellError(f"found {describe(value)}")
    return x


def parse_date(value: Any) -> dt.date:
    if isinstance(value, dt.datetime):
        if value.time() != dt.time(0):
            raise CellError(f"found {value:%Y-%m-%d %H:%M} (a time of day)", "a whole day, no time")
        return value.date()
    if isinstance(value, dt.date):
        return value
    if isinstance(value, str):
        try:
            return dt.date.fromisoformat(value.strip())
        except ValueError:
            raise CellError(f"found {describe(value)}") from None
    raise CellError(f"found {describe(value)}")


def parse_names(value: Any, names: tuple[str, ...], what: str) -> frozenset[int]:
    """Parse ``Mon-Fri``, ``Mon,Wed,Fri``, ``Nov-Mar`` (wrapping) into indices."""
    if value is None or (isinstance(value, str) and not value.strip()):
        return frozenset(range(len(names)))
    if not isinstance(value, str):
        raise CellError(f"found {describe(value)}")
    chosen: set[int] = set()
    n = len(names)
    for part in value.replace(";", ",").split(","):
        part = part.strip().lower()
        if not part:
            continue
        ends = [p.strip()[:3] for p in part.split("-")]
        if len(ends) > 2 or any(e not in names for e in ends):
            raise CellError(f"found {describe(value)} ('{part}' is not a {what} or range)")
        a = names.index(ends[0])
        b = names.index(ends[-1])
        k = a
        while True:
            chosen.add(k)
            if k == b:
                break
            k = (k + 1) % n
    if not chosen:
        raise CellError(f"found {describe(value)}")
    return frozenset(chosen)


def names_label(chosen: frozenset[int], names: tuple[str, ...]) -> str:
    """``Mar-Nov`` style label of a set of weekday or month indices."""
    idx = sorted(chosen)
    runs, start = [], None
    for k in idx + [None]:
        if start is None:
            start = prev = k
        elif k is not None and k == prev + 1:
            prev = k
        else:
            runs.append((start, prev))
            start = prev = k
    parts = [names[a].title() if a == b else f"{names[a].title()}-{names[b].title()}" for a, b in runs
             if a is not None]
    return ",".join(parts)


def parse_cell(f: Field, value: Any) -> Any:
    """Parse one non-empty cell; raise `CellError` with what was found."""
    _refuse_uncalculated(value)
    if f.kind == "text":
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        if isinstance(value, (dt.date, dt.datetime, bool)):
            raise CellError(f"found {describe(value)}")
        return str(value).strip()
    if f.kind == "code":
        text = str(value).strip().lower().replace(" ", "_")
        if text not in f.choices:
            raise CellError(f"found {describe(value)}{did_you_mean(text, list(f.choices))}")
        return text
    if f.kind == "date":
        return parse_date(value)
    if f.kind == "weekdays":
        return parse_names(value, DAY_NAMES, "weekday")
    if f.kind == "months":
        return parse_names(value, MONTH_NAMES, "month")
    x = parse_number(value)
    if f.kind == "integer":
        if not float(x).is_integer():
            raise CellError(f"found {describe(value)}")
        x = int(x)
    lo, hi = f.bounds()
    if (lo is not None and x < lo) or (hi is not None and x > hi):
        raise CellError(f"found {describe(value)}")
    return x


BOILER_WORDS = {"pc": "a pulverised-coal boiler with a wet scrubber", "cfb": "a fluidised bed"}


def plausibility_warning(f: Field, value: Any, *, sheet: str | None, row: int | None,
                         column: str | None, boiler: str | None = None) -> InputWarning | None:
    """The warning for a parsed value outside its field's usual range, or ``None``.

    The one check every table of `Field` goes through (the scenario's sheets here, the
    operations record's sheets too): the range is the field's row of
    `reagentplan.schema.PLAUSIBLE` (by name, or by its ``range_key``); ``boiler`` picks
    the boiler's usual range where it has one (``None``: the table's default).  A
    percentage of at most 1 where the usual range starts above 1 looks like a
    fraction, and the warning asks whether 100 times it was meant.
    """
    rng = f.plausible
    if rng is None or value is None or isinstance(value, bool):
        return None
    x = float(value)
    lo, hi = rng.usual_for(boiler)
    if lo <= x <= hi:
        return None
    unit = f" {f.unit}" if f.unit else ""
    what = rng.what or f.name
    if rng.by_boiler and boiler:
        what += f" for {BOILER_WORDS.get(boiler, boiler)}"
    found = f"{x:g}{unit}"
    usual = f"{lo:g} to {hi:g}{unit} ({what})"
    hint = ""
    if f.unit == "%" and 0 < x <= 1 and lo > 1:
        hint = (f"did you mean {x * 100:g} %? (percentages are written as percent: {x * 100:g}, "
                f"not {x:g})")
    return InputWarning(sheet, row, column, found, usual, rng.source, hint)


def is_empty(value: Any) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())


# --------------------------------------------------------------------------- sheets


class Collector:
    """Gathers problems; `fail` raises them all at once."""

    def __init__(self) -> None:
        self.problems: list[Problem] = []
        self.warnings: list[InputWarning] = []

    def check_usual(self, f: Field, value: Any, sheet: str | None, row: int | None,
                    column: str | None, boiler: str | None = None) -> None:
        w = plausibility_warning(f, value, sheet=sheet, row=row, column=column, boiler=boiler)
        if w is not None:
            self.warnings.append(w)

    def add(self, sheet: str | None, row: int | None, column: str | None, found: str,
            expected: str) -> None:
        self.problems.append(Problem(sheet, row, column, found, expected))

    def fail(self) -> None:
        if self.problems:
            raise ScenarioError(self.problems)


def did_you_mean(name: str, options: list[str]) -> str:
    close = difflib.get_close_matches(name, options, n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def resolve_columns(raw: RawSheet, sheet: Sheet, out: Collector) -> dict[str, tuple[int, float]]:
    """Map each canonical field to (column index, factor to metric); check the header."""
    known = {f.name for f in sheet.fields}
    accepted = sorted(known | {VARIANTS[n].us for n in known if n in VARIANTS})
    found: dict[str, tuple[int, float]] = {}
    written_as: dict[str, str] = {}
    for j, name in enumerate(raw.header):
        if name is None:
            if any(r[1][j] is not None for r in raw.rows if j < len(r[1])):
                out.add(sheet.name, 1, f"column {j + 1}", "a column with values but no header",
                        "a header naming the column, one of " + ", ".join(accepted))
            continue
        if name in schema.NOTE_COLUMNS:
            continue
        if name in known:
            canonical, factor = name, 1.0
        elif name in BY_US_NAME and BY_US_NAME[name].metric in known:
            canonical, factor = BY_US_NAME[name].metric, BY_US_NAME[name].factor
        else:
            out.add(sheet.name, 1, str(raw.header_as_written[j]),
                    f"unknown column{did_you_mean(name, accepted)}",
                    "one of " + ", ".join(accepted) + " (or a 'note' column)")
            continue
        if canonical in found:
            other = written_as[canonical]
            what = ("both unit variants" if other != name else "the same column twice")
            out.add(sheet.name, 1, name, f"{what} of one column ('{other}' and '{name}')",
                    "only one of them")
            continue
        found[canonical] = (j, factor)
        written_as[canonical] = name
    for f in sheet.fields:
        if f.required and f.name not in found:
            alt = f" or '{VARIANTS[f.name].us}'" if f.name in VARIANTS else ""
            out.add(sheet.name, 1, f.name, "the column is missing",
                    f"a column '{f.name}'{alt}: {f.note}")
    return found


def read_table_into(raw: RawSheet, sheet: Sheet, out: Collector,
                boiler: str | None = None) -> list[dict[str, Any]]:
    """Parse a table sheet into records (with ``_row``, the Excel row): every cell
    checked against its field (hard range: a problem) and its usual range (a warning)."""
    cols = resolve_columns(raw, sheet, out)
    records: list[dict[str, Any]] = []
    seen: dict[tuple, int] = {}
    for excel_row, values in raw.rows:
        rec: dict[str, Any] = {"_row": excel_row}
        ok = True
        for f in sheet.fields:
            if f.name not in cols:
                rec[f.name] = f.default if f.kind not in ("weekdays", "months") else parse_cell(f, None)
                continue
            j, factor = cols[f.name]
            value = values[j] if j < len(values) else None
            header = raw.header[j] or f.name
            if is_empty(value):
                if f.required:
                    out.add(sheet.name, excel_row, header, "the cell is empty", f.expected())
                    ok = False
                rec[f.name] = (f.default if f.kind not in ("weekdays", "months")
                               else parse_cell(f, None))
                continue
            try:
                if factor != 1.0:
                    x = parse_number(value) * factor
                    rec[f.name] = parse_cell(f, x)
                else:
                    rec[f.name] = parse_cell(f, value)
                out.check_usual(f, rec[f.name], sheet.name, excel_row, header, boiler)
            except CellError as e:
                found = e.found
                expected = e.expected or f.expected()
                if factor != 1.0 and f.kind == "number":
                    expected += " (after conversion to metric)"
                out.add(sheet.name, excel_row, header, found, expected)
                ok = False
        if not ok:
            continue
        if sheet.key:
            key = tuple(rec.get(k) for k in sheet.key)
            if key in seen:
                out.add(sheet.name, excel_row, ", ".join(sheet.key),
                        f"a duplicate of row {seen[key]} ({', '.join(map(show_value, key))})",
                        "one row per " + " and ".join(sheet.key))
                continue
            seen[key] = excel_row
        records.append(rec)
    if sheet.sort_by:
        # order-free: rows pasted unit by unit or source by source are sorted (stable, so
        # rows of one key keep the order they were written in)
        records.sort(key=lambda r: tuple(r[k] for k in sheet.sort_by))
    return records


def read_table(raw: RawSheet, sheet: Sheet, boiler: str | None = None
               ) -> tuple[list[dict[str, Any]], list[Problem], list[InputWarning]]:
    """Parse any table sheet of `Field`s (the scenario's, the operations record's) with
    the loader's own checks: ``(records, problems, warnings)``.

    Each record maps field names to parsed values (metric) plus ``_row``, the Excel row;
    rows come sorted by ``sheet.sort_by``; duplicates of ``sheet.key`` are problems naming
    both rows; hard ranges (`Field.bounds`) give problems, usual ranges
    (`reagentplan.schema.PLAUSIBLE`) warnings.
    """
    out = Collector()
    records = read_table_into(raw, sheet, out, boiler)
    return records, out.problems, out.warnings


def show_value(v: Any) -> str:
    if isinstance(v, dt.date):
        return f"{v:%Y-%m-%d}"
    return "(empty)" if v is None else str(v)


def read_keyvalue_into(raw: RawSheet, sheet: Sheet, out: Collector,
                   boiler: str | None = None,
                   written_rows: dict[str, int] | None = None) -> dict[str, Any]:
    """Parse a key/value sheet.  Usual ranges are checked once every key is read, with
    the sheet's own ``boiler`` if it has one (``plant``), else the one given.

    ``written_rows``, when given, is filled with the Excel row of each key whose value
    was written (and parsed), by canonical name: a default is not written."""
    header = raw.header
    if "key" not in header or "value" not in header:
        out.add(sheet.name, 1, "key" if "key" not in header else "value", "the column is missing",
                "columns 'key' and 'value' (and optionally 'note')")
        return {}
    for j, h in enumerate(header):
        if h is not None and h not in ("key", "value") and h not in schema.NOTE_COLUMNS:
            out.add(sheet.name, 1, str(raw.header_as_written[j]), "unknown column",
                    "only key, value and note")
    jk, jv = header.index("key"), header.index("value")
    known = [f.name for f in sheet.fields]
    accepted = sorted(set(known) | {VARIANTS[n].us for n in known if n in VARIANTS})
    values: dict[str, Any] = {}
    rows: dict[str, int] = {}
    bad: set[str] = set()
    written: dict[str, str] = {}
    parsed: list[tuple[Field, int, str]] = []
    for excel_row, row in raw.rows:
        key = normalise_key(row[jk] if jk < len(row) else None)
        value = row[jv] if jv < len(row) else None
        if key is None:
            out.add(sheet.name, excel_row, "key", "a value with no key", "a key, one of " + ", ".join(known))
            continue
        factor = 1.0
        if key in BY_US_NAME and BY_US_NAME[key].metric in known:
            canonical, factor = BY_US_NAME[key].metric, BY_US_NAME[key].factor
        elif key in known:
            canonical = key
        else:
            out.add(sheet.name, excel_row, "key", f"unknown key '{key}'{did_you_mean(key, accepted)}",
                    "one of " + ", ".join(accepted))
            continue
        if canonical in rows:
            first, r0 = written.get(canonical), rows[canonical]
            found = (f"both unit variants of one key ('{first}' in row {r0} and '{key}')"
                     if first != key else f"'{key}' is given again (first in row {r0})")
            out.add(sheet.name, excel_row, "key", found, "each key once, in one unit only")
            continue
        rows[canonical] = excel_row
        written[canonical] = key
        f = sheet.field(canonical)
        if is_empty(value):
            continue
        try:
            values[canonical] = parse_cell(f, parse_number(value) * factor if factor != 1.0 else value)
            parsed.append((f, excel_row, key))
            if written_rows is not None:
                written_rows[canonical] = excel_row
        except CellError as e:
            bad.add(canonical)
            out.add(sheet.name, excel_row, f"value ({key})", e.found, e.expected or f.expected())
    for f in sheet.fields:
        if f.name not in values:
            if f.required and f.name not in bad:
                where = rows.get(f.name)
                out.add(sheet.name, where, f"value ({f.name})",
                        "no value" if where else f"the key '{f.name}' is missing",
                        f.expected() + f": {f.note}")
            values.setdefault(f.name, f.default)
    boiler = values.get("boiler") or boiler
    for f, excel_row, key in parsed:
        out.check_usual(f, values[f.name], sheet.name, excel_row, f"value ({key})", boiler)
    return values


def normalise_key(value: Any) -> str | None:
    if is_empty(value):
        return None
    return str(value).strip().lower()
