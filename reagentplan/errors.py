"""The project's own error for bad input: every problem names where it is."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Problem:
    """One thing wrong with the input, located as Excel shows it.

    ``row`` is the Excel row number (the header is row 1), ``None`` for a whole sheet or
    column; ``column`` is the column's name as written in the header (or the key of a
    key/value sheet).
    """

    sheet: str | None
    row: int | None
    column: str | None
    found: str
    expected: str

    def __str__(self) -> str:
        return f"{location(self.sheet, self.row, self.column)}: {self.found}; expected {self.expected}"


def location(sheet: str | None, row: int | None, column: str | None) -> str:
    """``sheet 'x', row 5, column 'y'`` as Excel shows it (``workbook`` for none)."""
    if not sheet and row is None and column and column.startswith("--"):
        return f"option '{column}'"
    where = []
    if sheet:
        where.append(f"sheet '{sheet}'")
    if row is not None:
        where.append(f"row {row}")
    if column:
        where.append(f"column '{column}'")
    return ", ".join(where) if where else "workbook"


@dataclass(frozen=True)
class InputWarning:
    """A value that is possible but unusual: the run goes on and says so (on the
    console, in ``summary.json`` under ``warnings``, in the plan workbook's Assumptions).

    Located like `Problem`; ``found`` is the value with its unit, ``usual`` the usual
    range in words, ``source`` where that range comes from, ``hint`` a guess at what
    was meant ("did you mean 97 %?") or empty.
    """

    sheet: str | None
    row: int | None
    column: str | None
    found: str
    usual: str
    source: str
    hint: str = ""

    def __str__(self) -> str:
        text = (f"{location(self.sheet, self.row, self.column)}: {self.found} is outside the "
                f"usual range {self.usual}")
        if self.hint:
            text += f"; {self.hint}"
        return f"{text} [range: {self.source}]"

    def as_dict(self) -> dict:
        return {"sheet": self.sheet, "row": self.row, "column": self.column, "found": self.found,
                "usual": self.usual, "hint": self.hint, "source": self.source, "message": str(self)}


class ScenarioError(Exception):
    """The scenario workbook cannot be used as it is; ``problems`` says why and where."""

    MAX_SHOWN = 40

    def __init__(self, problems: list[Problem] | Problem, title: str | None = None):
        if isinstance(problems, Problem):
            problems = [problems]
        self.problems = list(problems)
        if title is None:
            title = "The command line" if self.options_only else "The workbook"
        self.title = title
        super().__init__(self.report())

    @property
    def options_only(self) -> bool:
        """Every problem is one of a command-line option (``column`` = ``--name``)."""
        return bool(self.problems) and all(
            not p.sheet and p.row is None and (p.column or "").startswith("--")
            for p in self.problems)

    def fix_hint(self) -> str:
        """The closing line the command prints under the report."""
        what = "options" if self.options_only else "cells"
        return f"Nothing was written. Fix the {what} named above and run again."

    def report(self) -> str:
        n = len(self.problems)
        lines = [f"{self.title} has {n} problem{'s' if n != 1 else ''}:"]
        lines += [f"  - {p}" for p in self.problems[: self.MAX_SHOWN]]
        if n > self.MAX_SHOWN:
            lines.append(f"  ... and {n - self.MAX_SHOWN} more")
        return "\n".join(lines)
