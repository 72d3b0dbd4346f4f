"""The blank, annotated scenario workbook (`reagentplan template PATH`).

Drawn entirely from `reagentplan.schema`: headers with the canonical metric names, a
note per column (as a cell comment and in the ``notes`` sheet), drop-down validation for
codes, and on each table sheet one example row, greyed and starting with ``#`` so the
loader skips it.
"""

from __future__ import annotations

from pathlib import Path

from openpyxl import Workbook
from openpyxl.comments import Comment
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.datavalidation import DataValidation

from . import CAUTION, schema
from .output.files import save_workbook
from .units import VARIANTS

HEADER_FILL = PatternFill("solid", fgColor="DCE6D2")
EXAMPLE_FONT = Font(italic=True, color="808080")
BOLD = Font(bold=True)
VALIDATION_ROWS = 5000


def _describe(f: schema.Field) -> str:
    unit = f" [{f.unit}]" if f.unit else ""
    parts = [f"{f.note}{unit}."]
    if f.kind == "code":
        parts.append("Codes: " + ", ".join(f.choices) + ".")
    if f.name in VARIANTS:
        parts.append(f"US customary alternative: {VARIANTS[f.name].us}.")
    if f.plausible is not None and f.plausible.usual != f.plausible.hard:
        lo, hi = f.plausible.usual
        parts.append(f"Usual {lo:g} to {hi:g}; outside it the run warns.")
    parts.append("Required." if f.required else
                 f"Optional; default {f.default:g}." if isinstance(f.default, (int, float))
                 and not isinstance(f.default, bool) else "Optional.")
    return " ".join(parts)


def _example(f: schema.Field, first: bool):
    value = f.example  # dates stay as text so the row is plainly an example
    if first:
        return f"# example: {value if value is not None else ''}".rstrip()
    return value


def write_template(path: str | Path) -> Path:
    """Write the blank scenario workbook to ``path`` (via a temporary name)."""
    path = Path(path)
    wb = Workbook()
    wb.remove(wb.active)
    notes = wb.create_sheet("notes")
    notes.append(["sheet", "column or key", "meaning"])
    for cell in notes[1]:
        cell.font = BOLD
    for s in schema.SHEETS:
        ws = wb.create_sheet(s.name)
        if s.keyvalue:
            _keyvalue_sheet(ws, s)
        else:
            _table_sheet(ws, s)
        for f in s.fields:
            notes.append([s.name, f.name, _describe(f)])
    notes.append([])
    notes.append(["about", "", "Sheets marked optional may be deleted. Rows starting with # are "
                  "ignored. Percentages are written as percent (95, not 0.95). Dates are Excel dates "
                  "or YYYY-MM-DD text. Weekdays: Mon-Fri or Mon,Wed,Fri; months: Mar-Nov."])
    notes.append(["caution", "", CAUTION])
    notes.column_dimensions["A"].width = 22
    notes.column_dimensions["B"].width = 28
    notes.column_dimensions["C"].width = 110
    wb.move_sheet("notes", offset=len(wb.sheetnames))
    return save_workbook(wb, path)


def _header(ws, names: list[str]) -> None:
    ws.append(names)
    for cell in ws[1]:
        cell.font = BOLD
        cell.fill = HEADER_FILL
        cell.alignment = Alignment(horizontal="center")
    ws.freeze_panes = "A2"


def _keyvalue_sheet(ws, s: schema.Sheet) -> None:
    _header(ws, ["key", "value", "note"])
    for f in s.fields:
        default = f.default
        ws.append([f.name, default, _describe(f)])
        if f.kind == "date":
            ws.cell(ws.max_row, 2).number_format = "yyyy-mm-dd"
        if f.kind == "code":
            dv = DataValidation(type="list", formula1='"' + ",".join(f.choices) + '"', allow_blank=True)
            ws.add_data_validation(dv)
            dv.add(ws.cell(ws.max_row, 2))
    ws.column_dimensions["A"].width = 28
    ws.column_dimensions["B"].width = 16
    ws.column_dimensions["C"].width = 90
    ws.cell(1, 1).comment = Comment(s.note or "Key/value sheet", "reagentplan")


def _table_sheet(ws, s: schema.Sheet) -> None:
    _header(ws, [f.name for f in s.fields])
    example = [_example(f, i == 0) for i, f in enumerate(s.fields)]
    ws.append(example)
    for j, f in enumerate(s.fields, start=1):
        ws.cell(2, j).font = EXAMPLE_FONT
        ws.cell(1, j).comment = Comment(_describe(f), "reagentplan")
        letter = get_column_letter(j)
        ws.column_dimensions[letter].width = max(12, len(f.name) + 3)
        rng = f"{letter}3:{letter}{VALIDATION_ROWS}"
        if f.kind == "code":
            dv = DataValidation(type="list", formula1='"' + ",".join(f.choices) + '"', allow_blank=True,
                                showErrorMessage=True, error="Pick one of: " + ", ".join(f.choices))
            ws.add_data_validation(dv)
            dv.add(rng)
        elif f.kind == "date":
            dv = DataValidation(type="date", operator="greaterThan", formula1="DATE(1990,1,1)",
                                allow_blank=True, showErrorMessage=True,
                                error="A date (or YYYY-MM-DD text) is expected.")
            ws.add_data_validation(dv)
            dv.add(rng)
        elif f.kind in ("number", "integer") and f.bounds()[0] is not None:
            dv = DataValidation(type="decimal" if f.kind == "number" else "whole",
                                operator="greaterThanOrEqual", formula1=str(f.bounds()[0]),
                                allow_blank=True,
                                showErrorMessage=True, error=f"Expected {f.expected()}.")
            ws.add_data_validation(dv)
            dv.add(rng)
    # drop-downs that refer to names on other sheets
    ref = {"unit": "units!$A$3:$A$200", "source": "coal_sources!$A$3:$A$200"}
    for j, f in enumerate(s.fields, start=1):
        if f.name in ref and s.name != ("units" if f.name == "unit" else "coal_sources"):
            dv = DataValidation(type="list", formula1=ref[f.name], allow_blank=True)
            ws.add_data_validation(dv)
            dv.add(f"{get_column_letter(j)}3:{get_column_letter(j)}{VALIDATION_ROWS}")
    ws.cell(2, 1).comment = Comment("Example row: it starts with # and is ignored. Type your own "
                                    "rows from row 3 (or overwrite this one).", "reagentplan")
