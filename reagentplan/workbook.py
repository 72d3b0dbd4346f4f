"""Reading the scenario workbook into raw rows (with their Excel row numbers).

Only the file-level checks happen here (is it a workbook, is it too big, are the
headers there); what the cells mean is checked by `reagentplan.scenario`.
The blank annotated template is written by `reagentplan.template`.

A workbook may come from anyone (the dashboard takes uploads), so the file is treated
as hostile until read:

- its XML is parsed with entity expansion refused: openpyxl parses through
  `defusedxml` when it is installed, and `read_raw` refuses to run if it is not;
- the sizes of its members are added up before anything is decompressed, and a file
  that would unpack to more than `MAX_UNCOMPRESSED_BYTES` is refused (a zip bomb);
- at most `MAX_ROWS` rows and `MAX_COLUMNS` columns of a sheet are read, and the
  sheet's own claim of its size (the ``dimension`` tag) is ignored;
- a formula whose result was never calculated (a file written by a program that does
  not calculate) is kept as `Uncalculated`, so the loader names the cell instead of
  taking it as empty;
- every failure of the file itself becomes a `ScenarioError` ("this file is not a
  workbook reagentplan can read: ..."), which the command line turns into exit code 2.
"""

from __future__ import annotations

import io
import os
import zipfile
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, BinaryIO

from .errors import Problem, ScenarioError

#: Largest workbook accepted [bytes].  A year of daily rows for a dozen units is < 2 MB.
MAX_FILE_BYTES = 25 * 1024 * 1024
#: Largest total of the workbook's members once unpacked [bytes]: 8 x the file limit,
#: far above any workbook of the template's sheets (a zip bomb unpacks to gigabytes).
MAX_UNCOMPRESSED_BYTES = 200 * 1024 * 1024
#: Most members (parts) a workbook may have: a workbook of the template has about 30.
MAX_MEMBERS = 5_000
#: Most rows read from one sheet, blank ones included (the last Excel row number read).
MAX_ROWS = 200_000
#: Most columns read from one sheet.  The widest sheet of the template has 16.
MAX_COLUMNS = 200

#: How every failure of the file itself begins.
UNREADABLE = "this file is not a workbook reagentplan can read"
_SAVE_AS = ("an .xlsx workbook saved by Excel or LibreOffice (File > Save As > Excel "
            "Workbook), such as the one `reagentplan template` writes")


@dataclass(frozen=True)
class Uncalculated:
    """A formula cell with no calculated value stored in the file."""

    formula: str

    def __str__(self) -> str:
        return self.formula


@dataclass
class RawSheet:
    """A sheet as written: normalised header names and the non-empty rows."""

    name: str
    header: list[str | None]
    header_as_written: list[Any]
    rows: list[tuple[int, tuple[Any, ...]]] = field(default_factory=list)


def _normalise(name: Any) -> str | None:
    if name is None or isinstance(name, Uncalculated):
        return None
    text = str(name).strip().lower()
    return text or None


def unreadable(label: str, reason: str, expected: str = _SAVE_AS) -> ScenarioError:
    """The error for a file that cannot be read as a workbook at all."""
    return ScenarioError(Problem(None, None, None, f"{UNREADABLE}: {label} {reason}", expected))


def _require_defusedxml() -> None:
    import openpyxl

    if not getattr(openpyxl, "DEFUSEDXML", False):
        raise RuntimeError(
            "reagentplan reads workbooks only with XML entity expansion refused: install "
            "the 'defusedxml' package and leave OPENPYXL_DEFUSEDXML unset")


def read_raw(source: str | os.PathLike | BinaryIO | bytes) -> dict[str, RawSheet]:
    """Read every sheet of an .xlsx workbook into `RawSheet` objects.

    ``source`` is a path, an open binary file or the file's bytes (the dashboard's
    upload is parsed in memory).  Raises `ScenarioError` for a file that is missing,
    empty, too big, damaged, hostile, or not an .xlsx workbook.
    """
    _require_defusedxml()
    label = "the file"
    if isinstance(source, (bytes, bytearray)):
        data = bytes(source)
    elif isinstance(source, (str, os.PathLike)):
        path = Path(source)
        label = f"'{path.name}'"
        if not path.is_file():
            raise ScenarioError(Problem(None, None, None, f"{path} does not exist",
                                        "the path of an .xlsx workbook"))
        size = path.stat().st_size
        _check_size(label, size)
        with open(path, "rb") as fh:
            data = fh.read(MAX_FILE_BYTES + 1)
    else:
        source.seek(0)
        data = source.read(MAX_FILE_BYTES + 1)
    _check_size(label, len(data))
    if data[:8] == b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1":  # an OLE2 compound file
        raise unreadable(label, "is an old-style .xls workbook or a password-protected one",
                         "an unprotected .xlsx workbook (open it in Excel or LibreOffice, remove "
                         "the password, and save it as Excel Workbook .xlsx)")
    if data[:4] != b"PK\x03\x04":
        raise unreadable(label, "is not an .xlsx workbook (it does not start as one; save .xls "
                                "or .csv files as .xlsx first)")
    _check_archive(label, data)
    try:
        return _read_sheets(data)
    except ScenarioError:
        raise
    except MemoryError:
        raise unreadable(label, "needs more memory to read than this machine has") from None
    except Exception as exc:  # openpyxl and its parsers raise many kinds on a bad file
        raise unreadable(label, _reason(exc)) from None


def _check_size(label: str, size: int) -> None:
    if size == 0:
        raise unreadable(label, "is empty (0 bytes)", "an .xlsx workbook made with the template")
    if size > MAX_FILE_BYTES:
        raise unreadable(
            label, f"is {size / 2**20:.1f} MB",
            f"a workbook of at most {MAX_FILE_BYTES // 2**20} MB (daily rows for a few years "
            "are far smaller; remove pictures or unrelated sheets)")


def _check_archive(label: str, data: bytes) -> None:
    """Refuse a damaged or truncated zip, and one that would unpack too large, before
    any member is decompressed.  Python's zipfile never returns more bytes of a member
    than its directory entry declares, so the declared sizes are a true bound."""
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as zf:
            infos = zf.infolist()
    except (zipfile.BadZipFile, zipfile.LargeZipFile, ValueError, OSError, EOFError):
        raise unreadable(label, "could not be opened as a workbook: it is damaged or cut short "
                                "(was it copied or downloaded completely?)") from None
    if len(infos) > MAX_MEMBERS:
        raise unreadable(label, f"has {len(infos)} parts inside", f"a workbook of at most "
                         f"{MAX_MEMBERS} parts (a workbook of the template has about 30)")
    total = sum(i.file_size for i in infos)
    if total > MAX_UNCOMPRESSED_BYTES:
        raise unreadable(
            label, f"would unpack to {total / 2**20:,.0f} MB from {len(data) / 2**20:.1f} MB",
            f"a workbook that unpacks to at most {MAX_UNCOMPRESSED_BYTES // 2**20} MB (this "
            "one is made to exhaust memory, or is damaged)")
    names = {i.filename for i in infos}
    if "xl/workbook.xml" not in names and not any(n.endswith("workbook.xml") for n in names):
        raise unreadable(label, "is a zip archive but not a workbook (it has no workbook part)")


def _reason(exc: Exception) -> str:
    """A coordinator's words for why a workbook could not be parsed."""
    try:
        from defusedxml import DefusedXmlException
    except ImportError:  # pragma: no cover - read_raw requires defusedxml
        DefusedXmlException = ()  # type: ignore[assignment]
    chain, seen = [], exc
    while seen is not None and len(chain) < 10:  # openpyxl wraps the parser's error
        chain.append(seen)
        seen = seen.__cause__ or seen.__context__
    if any(isinstance(e, DefusedXmlException) for e in chain):
        return ("declares XML entities or a document type, which reagentplan refuses to "
                "expand (a file made to exhaust memory, or one not written by a spreadsheet "
                "program)")
    if any(isinstance(e, (zipfile.BadZipFile, EOFError, zlib.error))
           or "CRC" in str(e) for e in chain):
        return "could not be opened as a workbook: a part of it is damaged or cut short"
    return f"could not be opened as a workbook ({type(exc).__name__}: it is damaged or not a workbook)"


def _is_formula(value: Any) -> bool:
    if isinstance(value, str):
        return value.startswith("=")
    return type(value).__name__ in ("ArrayFormula", "DataTableFormula")


def _read_sheets(data: bytes) -> dict[str, RawSheet]:
    """Two passes only when needed: formulas as written first; where a sheet has any,
    its calculated values are read in a second pass."""
    import openpyxl

    wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=False)
    try:
        grids = {ws.title: _read_grid(ws) for ws in wb.worksheets}
    finally:
        wb.close()
    with_formulas = [t for t, g in grids.items() if any(_is_formula(v) for _, row in g for v in row)]
    if with_formulas:
        wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
        try:
            for title in with_formulas:
                grids[title] = _merge(grids[title], _read_grid(wb[title]))
        finally:
            wb.close()
    return {title: _raw_sheet(title, grid) for title, grid in grids.items()}


def _read_grid(ws) -> list[tuple[int, tuple[Any, ...]]]:
    """(Excel row, values) of the rows with any value, trailing empties trimmed."""
    ws.reset_dimensions()  # never trust the file's own claim of its size
    grid = []
    for i, values in enumerate(ws.iter_rows(max_col=MAX_COLUMNS + 1, values_only=True), start=1):
        if i > MAX_ROWS:
            raise ScenarioError(Problem(
                ws.title, i, None, f"the sheet has more than {MAX_ROWS:,} rows",
                f"at most {MAX_ROWS:,} rows (delete the unused rows below the data)"))
        if len(values) > MAX_COLUMNS and values[MAX_COLUMNS] is not None:
            raise ScenarioError(Problem(
                ws.title, i, f"column {MAX_COLUMNS + 1}", f"the sheet has more than {MAX_COLUMNS} columns",
                f"at most {MAX_COLUMNS} columns (the template's sheets have at most 16)"))
        values = values[:MAX_COLUMNS]
        n = len(values)
        while n and (values[n - 1] is None):
            n -= 1
        if n:
            grid.append((i, tuple(values[:n])))
    return grid


def _merge(formulas, calculated) -> list[tuple[int, tuple[Any, ...]]]:
    """Formula cells take their calculated value, or `Uncalculated` when there is none."""
    values = {i: row for i, row in calculated}
    merged = []
    for i, row in formulas:
        other = values.get(i, ())
        cells = []
        for j, v in enumerate(row):
            if _is_formula(v):
                got = other[j] if j < len(other) else None
                v = Uncalculated(str(getattr(v, "text", v))) if got is None else got
            cells.append(v)
        merged.append((i, tuple(cells)))
    return merged


def _raw_sheet(title: str, grid) -> RawSheet:
    header_as_written: list[Any] = list(grid[0][1]) if grid and grid[0][0] == 1 else []
    width = max([len(r) for _, r in grid] + [len(header_as_written)])
    header_as_written += [None] * (width - len(header_as_written))
    sheet = RawSheet(title, [_normalise(h) for h in header_as_written], header_as_written)
    for i, values in grid:
        if i == 1:
            continue
        if all(v is None or (isinstance(v, str) and not v.strip()) for v in values):
            continue
        first_value = next((v for v in values if v is not None), None)
        if isinstance(first_value, str) and first_value.lstrip().startswith("#"):
            continue  # a comment row, like the template's example row
        sheet.rows.append((i, values))
    return sheet
