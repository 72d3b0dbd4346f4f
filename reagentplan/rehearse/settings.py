"""The disturbances of a rehearsal from the workbook's optional ``rehearsal`` sheet
(key, value) and the command's options (an option wins over the sheet)."""

from __future__ import annotations

import difflib
import math
from pathlib import Path

from ..errors import Problem, ScenarioError
from ..workbook import read_raw
from .truth import Disturbances

#: key -> (Disturbances field, factor from the sheet's value, lowest, highest, what it is)
KEYS = {
    "late_train_chance_pct": ("late_chance", 0.01, 0, 100, "chance a booked train is late [%]"),
    "late_train_max_days": ("late_max_days", 1, 0, 14, "a late train is 1 to this many days late [d]"),
    "partial_take_chance_pct": ("partial_chance", 0.01, 0, 100, "chance a buyer takes only part of a day's loads [%]"),
    "partial_take_share_pct": ("partial_share", 0.01, 0, 100, "share of the loads such a buyer takes [%]"),
    "survey_error_pct": ("survey_sd", 0.01, 0, 50, "standard deviation of a pile survey [%]"),
}


def sheet_disturbances(workbook: str | Path) -> dict:
    """Disturbances fields set by the workbook's ``rehearsal`` sheet (none when the
    sheet is absent).  Raises `ScenarioError` naming the sheet, Excel row and column."""
    raw = read_raw(workbook)
    sheet = next((v for k, v in raw.items() if k.strip().lower() == "rehearsal"), None)
    if sheet is None:
        return {}
    problems, out = [], {}
    if sheet.header[:2] != ["key", "value"]:
        raise ScenarioError([Problem(sheet.name, 1, None, f"the header {sheet.header_as_written[:2]}",
                                     "the columns 'key' and 'value'")], "The rehearsal sheet")
    for row, values in sheet.rows:
        key = str(values[0]).strip().lower() if values and values[0] is not None else ""
        value = values[1] if len(values) > 1 else None
        if key not in KEYS:
            near = difflib.get_close_matches(key, list(KEYS), n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else ""
            problems.append(Problem(sheet.name, row, "key", f"'{key}'{hint}", "one of " + ", ".join(KEYS)))
            continue
        name, factor, lo, hi, what = KEYS[key]
        try:
            x = float(value)
        except (TypeError, ValueError):
            x = math.nan
        if not (lo <= x <= hi) or (name == "late_max_days" and x != int(x)):
            problems.append(Problem(sheet.name, row, "value", f"{key} = {value!r}",
                                    f"a number from {lo} to {hi}: {what}"))
            continue
        out[name] = int(x) if name == "late_max_days" else x * factor
    if problems:
        raise ScenarioError(problems, "The rehearsal sheet")
    return out


def disturbances(workbook: str | Path, **options) -> Disturbances:
    """`Disturbances` from the sheet, overridden by the options not None (fields of
    `Disturbances`, in its units: shares, not percent)."""
    values = Disturbances().as_dict() | sheet_disturbances(workbook)
    values |= {k: v for k, v in options.items() if v is not None}
    return Disturbances(**values)
