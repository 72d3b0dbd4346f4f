"""The scenario: the typed input, and the one place where input is validated.

`load_scenario` reads a workbook, checks every cell against `reagentplan.schema`,
converts US customary columns to metric (`reagentplan.units`), checks what the sheets
say about each other, and returns a `Scenario`.  Every problem found is collected and
raised together as one `ScenarioError` naming sheet, Excel row and column.  Past this
boundary the rest of the library trusts the types.

Modules, leaf first:

- `tables`: the table reader, generic over `reagentplan.schema` sheets (cells, table
  and key/value sheets, `Collector`, `did_you_mean`); the record importer uses it too.
- `types`: the frozen dataclasses (`Plant`, `Scrubber`, ..., `Scenario`).
- `checks`: `build_scenario`, the cross-sheet checks (one ``_check_*`` per concern).
- `loader`: `load_scenario` and `scenario_from_raw`.
"""

from .checks import MIN_HISTORY_DAYS, SHARE_TOLERANCE_PCT, build_scenario
from .loader import load_scenario, scenario_from_raw
from .tables import (BOILER_WORDS, DAY_NAMES, MONTH_NAMES, CellError, Collector, did_you_mean,
                     names_label, plausibility_warning, read_keyvalue_into, read_table,
                     read_table_into, show_value)
from .types import (BuyerLane, CoalSource, DisposalSite, FirmOrder, LaneClosure, Plant, Scenario,
                    Scrubber, Store, SupplierLane, TrainSet, Unit)

__all__ = [
    "MIN_HISTORY_DAYS", "SHARE_TOLERANCE_PCT", "build_scenario",
    "load_scenario", "scenario_from_raw",
    "BOILER_WORDS", "DAY_NAMES", "MONTH_NAMES", "CellError", "Collector", "did_you_mean",
    "names_label", "plausibility_warning", "read_keyvalue_into", "read_table", "read_table_into",
    "show_value",
    "BuyerLane", "CoalSource", "DisposalSite", "FirmOrder", "LaneClosure", "Plant", "Scenario",
    "Scrubber", "Store", "SupplierLane", "TrainSet", "Unit",
]
