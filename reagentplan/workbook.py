"""Reading the scenario workbook into raw rows (with their Excel row numbers).

Only the file-level checks happen here (is it a workbook, is it too big, are the
headers there); what the cells mean is checked by `reagentplan.scenario`.
The blank annotated template is written by `reagentplan.template`.
"""

from __future__ import annotations

import os
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, BinaryIO

from .errors import Problem, ScenarioError

#: Largest workbook accepted [bytes].  A year of daily rows for a dozen units is < 2 MB.
MAX_FILE_BYTES = 25 * 1024 * 1024
#: Largest number of rows accepted in one sheet.
MAX_ROWS = 200_000


@dataclass
class RawSheet:
    """A sheet as written: normalised header names and the non-empty rows."""

    name: str
    header: list[str | None]
    header_as_written: list[Any]
    rows: list[tuple[int, tuple[Any, ...]]] = field(default_factory=list)


def _normalise(name: Any) -> str | None:
    if name is None:
        return None
    text = str(name).strip().lower()
    return text or None


def read_raw(source: str | os.PathLike | BinaryIO | bytes) -> dict[str, RawSheet]:
    """Read every sheet of an .xlsx workbook into `RawSheet` objects.

    ``source`` is a path, an open binary file or the file's bytes (the dashboard's
    upload is parsed in memory).  Raises `ScenarioError` for a file that is missing,
    empty, too big, or not an .xlsx workbook.
    """
    import io

    import openpyxl

    label = "the file"
    if isinstance(source, (bytes, bytearray)):
        data = bytes(source)
        stream: BinaryIO = io.BytesIO(data)
        size = len(data)
    elif isinstance(source, (str, os.PathLike)):
        path = Path(source)
        label = f"'{path.name}'"
        if not path.is_file():
            raise ScenarioError(Problem(None, None, None, f"{path} does not exist",
                                        "the path of an .xlsx workbook"))
        size = path.stat().st_size
        stream = None  # type: ignore[assignment]
    else:
        stream = source
        stream.seek(0, os.SEEK_END)
        size = stream.tell()
        stream.seek(0)
    if size == 0:
        raise ScenarioError(Problem(None, None, None, f"{label} is empty (0 bytes)",
                                    "an .xlsx workbook made with the template"))
    if size > MAX_FILE_BYTES:
        raise ScenarioError(Problem(
            None, None, None, f"{label} is {size / 2**20:.1f} MB",
            f"a workbook of at most {MAX_FILE_BYTES // 2**20} MB (daily rows for a few years "
            "are far smaller; remove pictures or unrelated sheets)"))
    if stream is None:
        stream = open(path, "rb")  # noqa: SIM115 - closed below
    try:
        head = stream.read(4)
        stream.seek(0)
        if head != b"PK\x03\x04":
            raise ScenarioError(Problem(
                None, None, None, f"{label} is not an .xlsx workbook",
                "an Excel .xlsx workbook (save .xls or .csv files as .xlsx first)"))
        try:
            wb = openpyxl.load_workbook(stream, read_only=True, data_only=True)
        except ScenarioError:
            raise
        except (zipfile.BadZipFile, KeyError, ValueError, OSError, TypeError, IndexError) as exc:
            raise ScenarioError(Problem(
                None, None, None, f"{label} could not be opened as a workbook ({type(exc).__name__})",
                "an Excel .xlsx workbook")) from None
        except Exception as exc:  # openpyxl raises many kinds on a damaged file
            raise ScenarioError(Problem(
                None, None, None, f"{label} could not be opened as a workbook ({type(exc).__name__})",
                "an Excel .xlsx workbook")) from None
        try:
            return {ws.title: _read_sheet(ws) for ws in wb.worksheets}
        finally:
            wb.close()
    finally:
        if isinstance(source, (str, os.PathLike)):
            stream.close()


def _read_sheet(ws) -> RawSheet:
    rows_iter = ws.iter_rows(values_only=True)
    header_as_written: list[Any] = []
    for first in rows_iter:
        header_as_written = list(first)
        break
    sheet = RawSheet(ws.title, [_normalise(h) for h in header_as_written], header_as_written)
    for i, values in enumerate(rows_iter, start=2):
        if all(v is None or (isinstance(v, str) and not v.strip()) for v in values):
            continue
        first_value = next((v for v in values if v is not None), None)
        if isinstance(first_value, str) and first_value.lstrip().startswith("#"):
            continue  # a comment row, like the template's example row
        if len(sheet.rows) >= MAX_ROWS:
            raise ScenarioError(Problem(ws.title, i, None, f"the sheet has more than {MAX_ROWS} rows",
                                        f"at most {MAX_ROWS} rows"))
        sheet.rows.append((i, tuple(values)))
    return sheet
