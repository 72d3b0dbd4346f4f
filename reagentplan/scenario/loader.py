"""Loading a scenario: read the workbook, then check and type it.

`load_scenario` reads a workbook (`reagentplan.workbook.read_raw`) and hands its sheets
to `reagentplan.scenario.checks.build_scenario`, which reads every sheet with the table
reader (`reagentplan.scenario.tables`), checks what the sheets say about each other and
returns the typed `Scenario` (`reagentplan.scenario.types`), or raises one
`ScenarioError` listing every problem.
"""

from __future__ import annotations

import os
from typing import BinaryIO

from ..workbook import RawSheet, read_raw
from .checks import build_scenario
from .types import Scenario


def load_scenario(source: str | os.PathLike | BinaryIO | bytes) -> Scenario:
    """Read and validate a scenario workbook.

    Parameters
    ----------
    source : path, binary file or bytes of an .xlsx workbook.

    Returns
    -------
    Scenario
        All quantities metric: tonnes [t], energy [MWh, GJ], heating value [MJ/kg],
        shares and contents in percent [%].

    Raises
    ------
    ScenarioError
        Listing every problem with its sheet, Excel row and column.
    """
    raw = read_raw(source)
    name = os.fspath(source) if isinstance(source, (str, os.PathLike)) else "upload"
    return build_scenario(raw, os.path.basename(name))


def scenario_from_raw(raw: dict[str, RawSheet], source_name: str = "") -> Scenario:
    """Validate sheets already read by `reagentplan.workbook.read_raw` (or changed from
    them, as a study's variants are) into a `Scenario`, exactly as `load_scenario` does.

    Raises
    ------
    ScenarioError
        As `load_scenario`.
    """
    return build_scenario(raw, source_name)
