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
        where = []
        if self.sheet:
            where.append(f"sheet '{self.sheet}'")
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column:
            where.append(f"column '{self.column}'")
        loc = ", ".join(where) if where else "workbook"
        return f"{loc}: {self.found}; expected {self.expected}"


class ScenarioError(Exception):
    """The scenario workbook cannot be used as it is; ``problems`` says why and where."""

    MAX_SHOWN = 40

    def __init__(self, problems: list[Problem] | Problem):
        if isinstance(problems, Problem):
            problems = [problems]
        self.problems = list(problems)
        super().__init__(self.report())

    def report(self) -> str:
        n = len(self.problems)
        lines = [f"The workbook has {n} problem{'s' if n != 1 else ''}:"]
        lines += [f"  - {p}" for p in self.problems[: self.MAX_SHOWN]]
        if n > self.MAX_SHOWN:
            lines.append(f"  ... and {n - self.MAX_SHOWN} more")
        return "\n".join(lines)
