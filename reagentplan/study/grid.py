"""The grid of a study: ``--vary`` specs, the variants they make, and their validation.

A spec names one workbook value and the values to try::

    scrubber.removal_pct=96,98                      # a key/value sheet: sheet.key
    suppliers[Greyfell Quarry].max_t_per_month=19200,28800
    storage[gypsum].capacity_t=18000,24000          # a table: sheet[row].column
    suppliers[Greyfell Quarry/rail].lead_days=10,12 # a row named by more of its key

Several specs make the full grid (every combination).  A variant is made by writing
the values into the cells of the workbook as it was read (`reagentplan.workbook.read_raw`)
and loading it again through the normal loader, so each value is checked exactly as if
it had been typed into the workbook, with the loader's own messages (sheet, Excel row,
column, found, expected).

Rows of a table are named by the sheet's key columns in order (`reagentplan.schema`:
``suppliers`` by supplier / mode / months, ``buyers`` by buyer / material / mode,
``disposal`` by site / material, ``storage`` by store, ``units`` by unit,
``coal_sources`` by source), separated by ``/``; parts left out match any value.  A
name that matches several *lanes* (a quarry with a rail and a truck row) is refused
with the choices named (``[Greyfell Quarry/rail]`` picks one).  Rows that differ only
in ``months`` (one lane's seasonal terms, e.g. a winter freight tariff) are one lane
and are changed together; name the months to change one (``[Greyfell Quarry/rail/Dec-Feb]``).

Values are separated by ``,``; the word ``none`` stands for an empty cell (the column's
default, or no limit).  Lists inside a value (weekdays, months) use ``;`` or a range:
``Mon;Wed;Fri``, ``Mon-Thu``.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import difflib
import itertools
import math
import re
from dataclasses import dataclass
from typing import Any

from .. import schema
from ..errors import Problem, ScenarioError
from ..scenario import Scenario, scenario_from_raw
from ..settings import MAX_CASES  # most cases a study accepts unless told otherwise
from ..units import BY_US_NAME, VARIANTS
from ..workbook import RawSheet

#: The option name used in messages.
OPTION = "--vary"
#: A key column that distinguishes seasonal terms of one lane, not different lanes.
SEASON_COLUMNS = ("months",)
#: Sheets and plant keys the sampled drivers (generation, coal quality) depend on: a
#: variant of any of them has its futures sampled again (same seed) instead of sharing.
DRIVER_SHEETS = ("units", "generation", "generation_history", "coal_sources", "coal_blend",
                 "coal_quality_history")
DRIVER_PLANT_KEYS = ("start_date", "horizon_days")

SPEC_RE = re.compile(r"^\s*(?P<sheet>[A-Za-z_][A-Za-z0-9_ ]*?)\s*(?:\[(?P<row>[^\]]*)\])?\s*\.\s*"
                     r"(?P<column>[A-Za-z_][A-Za-z0-9_]*)\s*=(?P<values>.*)$", re.S)
SYNTAX = ("sheet.key=V1,V2,... for a key/value sheet (scrubber.removal_pct=96,98) or "
          "sheet[row name].column=V1,V2,... for a table "
          "(suppliers[Greyfell Quarry].max_t_per_month=19200,28800)")


@dataclass(frozen=True)
class VarySpec:
    """One ``--vary``: a workbook value and the values to try.

    Attributes
    ----------
    text : the spec as given.
    sheet : canonical sheet name (``scrubber``, ``suppliers`` ...).
    row : the row's name parts (``("Greyfell Quarry", "rail")``), ``None`` for a
        key/value sheet.
    column : the key (key/value sheet) or the column, as written in the workbook.
    values : the values, as text (``None`` for an empty cell).
    """

    text: str
    sheet: str
    row: tuple[str, ...] | None
    column: str
    values: tuple[str | None, ...]

    @property
    def target(self) -> str:
        """The spec without its values: the name of its column in ``study.csv``."""
        if self.row is None:
            return f"{self.sheet}.{self.column}"
        return f"{self.sheet}[{'/'.join(self.row)}].{self.column}"

    @property
    def touches_drivers(self) -> bool:
        """Whether the sampled drivers (generation, coal quality) depend on this value."""
        return self.sheet in DRIVER_SHEETS or (self.sheet == "plant"
                                               and self.column in DRIVER_PLANT_KEYS)


@dataclass(frozen=True)
class Case:
    """One variant: its number (from 1), the value of each spec, and its scenario."""

    case: int
    values: tuple[str | None, ...]
    scenario: Scenario
    resample: bool = False  # its futures are sampled again (a driver input changed)

    def label(self, specs: tuple[VarySpec, ...]) -> str:
        return case_label(specs, self.values)


@dataclass(frozen=True)
class Grid:
    """The specs, the base scenario (the workbook as it is) and every case."""

    specs: tuple[VarySpec, ...]
    base: Scenario
    cases: tuple[Case, ...]

    @property
    def targets(self) -> list[str]:
        return [s.target for s in self.specs]


# --------------------------------------------------------------------------- parsing


def _problem(found: str, expected: str, sheet=None, row=None, column=OPTION) -> Problem:
    return Problem(sheet, row, column, found, expected)


def _did_you_mean(name: str, options) -> str:
    close = difflib.get_close_matches(name, list(options), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def show_value(value) -> str:
    """A spec's value as the study names it (``none`` for an empty cell)."""
    return "none" if value is None else str(value)


def case_label(specs, values) -> str:
    """A case's values as ``target=value, ...`` (its label on the console and in
    messages); ``specs`` are any specs with a ``target`` (a `VarySpec`, a fleet's spec)."""
    return ", ".join(f"{s.target}={show_value(v)}" for s, v in zip(specs, values))


def parse_vary(text: str) -> VarySpec:
    """Parse one ``--vary`` (syntax only; `build_grid` checks the names against the
    workbook).

    Raises
    ------
    ScenarioError
        The spec does not follow the syntax, names a sheet the workbook contract does
        not have, or gives no value, an empty value or one value twice.
    """
    m = SPEC_RE.match(text or "")
    if not m:
        raise ScenarioError(_problem(f"'{text}' is not a {OPTION} spec", SYNTAX))
    sheet = m["sheet"].strip().lower()
    if sheet not in schema.SHEETS_BY_NAME:
        raise ScenarioError(_problem(
            f"'{text}' names the sheet '{m['sheet'].strip()}', which the workbook has no "
            f"place for{_did_you_mean(sheet, schema.SHEETS_BY_NAME)}",
            "one of " + ", ".join(schema.SHEETS_BY_NAME)))
    kv = schema.SHEETS_BY_NAME[sheet].keyvalue
    row = None
    if m["row"] is not None:
        if kv:
            raise ScenarioError(_problem(
                f"'{text}' names a row of '{sheet}', a key/value sheet",
                f"{sheet}.KEY=V1,V2 (e.g. {sheet}.{schema.SHEETS_BY_NAME[sheet].fields[0].name}=...)"))
        row = tuple(p.strip() for p in m["row"].split("/"))
        if not row[0]:
            raise ScenarioError(_problem(f"'{text}' gives an empty row name", SYNTAX))
    elif not kv:
        key = schema.SHEETS_BY_NAME[sheet].key
        raise ScenarioError(_problem(
            f"'{text}' names no row of the table '{sheet}'",
            f"{sheet}[{' / '.join(key) or 'row'}].{m['column']}=V1,V2 (a row named by its "
            f"{key[0] if key else 'first column'})"))
    raw_values = m["values"].split(",")
    values: list[str | None] = []
    for v in raw_values:
        v = v.strip()
        if not v:
            raise ScenarioError(_problem(
                f"'{text}' has an empty value", "values separated by commas; write 'none' for "
                "an empty cell, and ';' inside a list of weekdays or months"))
        values.append(None if v.lower() == "none" else v)
    seen = set()
    for v in values:
        if v in seen:
            raise ScenarioError(_problem(f"'{text}' gives the value {show_value(v)} twice",
                                         "each value once"))
        seen.add(v)
    return VarySpec(text.strip(), sheet, row, m["column"].strip().lower(), tuple(values))


# --------------------------------------------------------------------------- cells


def _norm(value: Any) -> str:
    """A cell as text for matching row names: stripped, lower case, dates as ISO."""
    if value is None:
        return ""
    if isinstance(value, dt.datetime):
        value = value.date() if value.time() == dt.time(0) else value
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    return " ".join(str(value).split()).lower()


def _match_part(part: str, cell: Any, field: schema.Field | None) -> bool:
    want = " ".join(part.split()).lower()
    have = _norm(cell)
    if field is not None and field.kind == "code":
        return want.replace(" ", "_") == have.replace(" ", "_")
    if field is not None and field.kind in ("weekdays", "months"):
        return want.replace(" ", "").replace(";", ",") == have.replace(" ", "").replace(";", ",")
    return want == have


def _sheet_of(raw: dict[str, RawSheet], name: str) -> RawSheet | None:
    for title, sheet in raw.items():
        if title.strip().lower() == name:
            return sheet
    return None


def _accepted(sheet: schema.Sheet) -> list[str]:
    names = [f.name for f in sheet.fields]
    return sorted(set(names) | {VARIANTS[n].us for n in names if n in VARIANTS})


def _canonical(name: str) -> str:
    return BY_US_NAME[name].metric if name in BY_US_NAME else name


def _other_variant(name: str) -> str | None:
    canon = _canonical(name)
    if canon != name:
        return canon
    return VARIANTS[name].us if name in VARIANTS else None


@dataclass(frozen=True)
class CellTarget:
    """Where a spec writes: the sheet as written, the column index (``None``: a key
    row to add / a column to add), and the data rows (indices into ``rows``)."""

    title: str
    column: int | None
    rows: tuple[int, ...]


def locate(raw: dict[str, RawSheet], spec: VarySpec) -> CellTarget:
    """Find the cells a spec writes in ``raw`` (a workbook as `read_raw` read it), for
    `apply_variant`.

    Raises
    ------
    ScenarioError
        The workbook has no such sheet, key, column or row, or the row name matches
        several lanes (the message names the choices).
    """
    sheet = schema.SHEETS_BY_NAME[spec.sheet]
    found = _sheet_of(raw, spec.sheet)
    accepted = _accepted(sheet)
    if spec.column not in accepted:
        what = "key" if sheet.keyvalue else "column"
        raise ScenarioError(_problem(
            f"'{spec.text}': '{spec.column}' is not a {what} of '{spec.sheet}'"
            f"{_did_you_mean(spec.column, accepted)}", "one of " + ", ".join(accepted),
            sheet=spec.sheet))
    if found is None:
        raise ScenarioError(_problem(
            f"'{spec.text}': the workbook has no sheet '{spec.sheet}'",
            "a sheet the workbook has: " + ", ".join(raw), sheet=spec.sheet))
    other = _other_variant(spec.column)
    if sheet.keyvalue:
        jk, jv = found.header.index("key"), found.header.index("value")
        idx = [i for i, (_, r) in enumerate(found.rows) if jk < len(r) and _norm(r[jk]) == spec.column]
        if other and any(jk < len(r) and _norm(r[jk]) == other for _, r in found.rows):
            raise ScenarioError(_problem(
                f"'{spec.text}': the workbook gives this value as '{other}'",
                f"{spec.sheet}.{other}=... (values in that key's unit)", sheet=spec.sheet))
        return CellTarget(found.name, jv, tuple(idx))
    header = found.header
    if other and other in header:
        raise ScenarioError(_problem(
            f"'{spec.text}': the workbook has this column as '{other}'",
            f"{spec.sheet}[...].{other}=... (values in that column's unit)", sheet=spec.sheet,
            row=1, column=other))
    keys = sheet.key
    if not keys:
        raise ScenarioError(_problem(
            f"'{spec.text}': the rows of '{spec.sheet}' have no name to pick one by",
            "a sheet whose rows are named: " + ", ".join(
                s.name for s in schema.SHEETS if s.key and not s.keyvalue), sheet=spec.sheet))
    if len(spec.row) > len(keys):
        raise ScenarioError(_problem(
            f"'{spec.text}': the row name has {len(spec.row)} parts",
            f"at most {len(keys)}: " + " / ".join(keys), sheet=spec.sheet))
    cols = []
    for k in keys:
        j = header.index(k) if k in header else None
        cols.append(j)
    matched = []
    for i, (_, values) in enumerate(found.rows):
        ok = True
        for part, k, j in zip(spec.row, keys, cols):
            cell = values[j] if j is not None and j < len(values) else None
            if not _match_part(part, cell, sheet.field(k)):
                ok = False
                break
        if ok:
            matched.append(i)

    def name_of(i: int, upto: int) -> str:
        values = found.rows[i][1]
        parts = []
        for k, j in list(zip(keys, cols))[:upto]:
            cell = values[j] if j is not None and j < len(values) else None
            parts.append(_show_cell(cell))
        while parts and parts[-1] == "":
            parts.pop()
        return "[" + "/".join(parts) + "]"

    if not matched:
        first = cols[0]
        names = sorted({_show_cell(r[first]) for _, r in found.rows if first is not None
                        and first < len(r) and r[first] is not None})
        raise ScenarioError(_problem(
            f"'{spec.text}': no row of '{spec.sheet}' is named [{'/'.join(spec.row)}]"
            f"{_did_you_mean(spec.row[0], names)}",
            f"a {keys[0]} of the sheet: " + ", ".join(names), sheet=spec.sheet,
            column=keys[0]))
    lane_keys = [k for k in keys if k not in SEASON_COLUMNS]
    lanes = {name_of(i, len(lane_keys)) for i in matched}
    if len(lanes) > 1:
        rows = ", ".join(str(found.rows[i][0]) for i in matched)
        raise ScenarioError(_problem(
            f"'{spec.text}': [{'/'.join(spec.row)}] matches {len(matched)} rows of "
            f"'{spec.sheet}' (rows {rows}) that are different lanes",
            "one of " + ", ".join(f"{spec.sheet}{n}.{spec.column}" for n in sorted(lanes)),
            sheet=spec.sheet, column=keys[0]))
    j = header.index(spec.column) if spec.column in header else None
    return CellTarget(found.name, j, tuple(matched))


def _show_cell(cell: Any) -> str:
    if cell is None:
        return ""
    if isinstance(cell, dt.datetime) and cell.time() == dt.time(0):
        cell = cell.date()
    if isinstance(cell, dt.date):
        return cell.isoformat()
    if isinstance(cell, float) and cell.is_integer():
        return str(int(cell))
    return str(cell).strip()


def cell_value(text: str | None) -> Any:
    """A spec value as a cell: a number when it reads as one, else the text."""
    if text is None:
        return None
    try:
        x = float(text)
    except ValueError:
        return text
    if not math.isfinite(x):
        return text
    return int(x) if x.is_integer() and "." not in text and "e" not in text.lower() else x


def apply_variant(raw: dict[str, RawSheet], specs: tuple[VarySpec, ...],
                  targets: tuple[CellTarget, ...], values: tuple[str | None, ...]
                  ) -> dict[str, RawSheet]:
    """A copy of ``raw`` with each spec's cells set to its value (the sheets not
    touched are shared, not copied)."""
    out = dict(raw)
    added: dict[tuple[str, str], int] = {}
    for spec, target, value in zip(specs, targets, values):
        sheet = out[target.title]
        if sheet is raw[target.title]:
            sheet = RawSheet(sheet.name, list(sheet.header), list(sheet.header_as_written),
                             list(sheet.rows))
            out[target.title] = sheet
        cell = cell_value(value)
        j = target.column
        if schema.SHEETS_BY_NAME[spec.sheet].keyvalue:
            jk = sheet.header.index("key")
            if target.rows:
                for i in target.rows:
                    sheet.rows[i] = (sheet.rows[i][0], set_cell(sheet.rows[i][1], j, cell))
            else:  # the key is not in the workbook (it takes its default): add its row
                last = max((r for r, _ in sheet.rows), default=1)
                row = [None] * max(len(sheet.header), j + 1, jk + 1)
                row[jk], row[j] = spec.column, cell
                sheet.rows.append((last + 1, tuple(row)))
            continue
        if j is None:  # the column is not in the workbook: add it (empty in other rows)
            j = added.get((target.title, spec.column))
            if j is None:
                j = len(sheet.header)
                sheet.header.append(spec.column)
                sheet.header_as_written.append(spec.column)
                added[(target.title, spec.column)] = j
        for i in target.rows:
            sheet.rows[i] = (sheet.rows[i][0], set_cell(sheet.rows[i][1], j, cell))
    return out


def set_cell(values: tuple, j: int, cell: Any) -> tuple:
    """A row's values with column ``j`` set to ``cell`` (padded with empty cells)."""
    row = list(values) + [None] * max(0, j + 1 - len(values))
    row[j] = cell
    return tuple(row)


# --------------------------------------------------------------------------- the grid


def with_case(exc: ScenarioError, label: str) -> list[Problem]:
    """The problems of ``exc``, each found text ending ``(with LABEL)`` (the case or
    value that made them)."""
    return [dataclasses.replace(p, found=f"{p.found} (with {label})") for p in exc.problems]


def build_grid(raw: dict[str, RawSheet], specs: list[str] | tuple[str, ...] | list[VarySpec],
               *, source_name: str = "", max_cases: int = MAX_CASES) -> Grid:
    """Parse and check every spec against the workbook, then make and validate every
    case of the full grid.

    Each value is first loaded on its own (the other specs at the workbook's values),
    so a bad value is reported once, against its spec; then every combination is
    loaded, so values that only clash together (a minimum above a maximum) are found
    too.  Nothing runs before the whole grid is sound.

    Raises
    ------
    ScenarioError
        A spec that does not parse or names no sheet, key, row or column; a value the
        loader refuses (its message, with the spec named); a grid of more than
        ``max_cases`` cases; or the workbook itself is bad.
    """
    parsed = [s if isinstance(s, VarySpec) else parse_vary(s) for s in specs]
    if not parsed:
        raise ScenarioError(_problem("no --vary given", "at least one " + SYNTAX))
    seen: dict[tuple, str] = {}
    for s in parsed:
        key = (s.sheet, tuple(p.lower() for p in s.row) if s.row else None, _canonical(s.column))
        if key in seen:
            raise ScenarioError(_problem(f"'{s.text}' varies the same value as '{seen[key]}'",
                                         "each value varied by one --vary (list all its values there)"))
        seen[key] = s.text
    n = math.prod(len(s.values) for s in parsed)
    if n > max_cases:
        sizes = " x ".join(str(len(s.values)) for s in parsed)
        raise ScenarioError(_problem(
            f"the grid has {n:,} cases ({sizes} values)",
            f"at most {max_cases:,} cases (fewer values per --vary, or --max-cases to allow "
            "more if you mean it: each case is a full plan)"))

    base = scenario_from_raw(raw, source_name)
    specs_t = tuple(parsed)
    targets = []
    problems: list[Problem] = []
    for s in specs_t:
        try:
            targets.append(locate(raw, s))
        except ScenarioError as exc:
            problems += exc.problems
    if problems:
        raise ScenarioError(problems)
    targets_t = tuple(targets)

    # each value on its own
    for k, s in enumerate(specs_t):
        for v in s.values:
            try:
                scenario_from_raw(apply_variant(raw, (s,), (targets_t[k],), (v,)), source_name)
            except ScenarioError as exc:
                problems += with_case(exc, f"{OPTION} {s.target}={show_value(v)}")
    if problems:
        raise ScenarioError(problems)

    cases = []
    for i, values in enumerate(itertools.product(*(s.values for s in specs_t)), start=1):
        label = case_label(specs_t, values)
        try:
            scn = scenario_from_raw(apply_variant(raw, specs_t, targets_t, values), source_name)
        except ScenarioError as exc:
            problems += with_case(exc, f"case {i}: {label}")
            continue
        resample = any(s.touches_drivers for s in specs_t)
        cases.append(Case(i, tuple(values), scn, resample))
    if problems:
        raise ScenarioError(problems)
    return Grid(specs_t, base, tuple(cases))


__all__ = ["VarySpec", "Case", "Grid", "CellTarget", "parse_vary", "build_grid", "locate", "apply_variant",
           "cell_value", "set_cell", "show_value", "case_label", "with_case", "MAX_CASES", "DRIVER_SHEETS"]
