"""The sheets of a record file (OPERATIONS.md), declared with the workbook's own
`reagentplan.schema.Field`, so the same cell parsing, unit conversion (``_t`` or ``_st``)
and messages apply.  Kept apart from ``schema.py``: these are facts, not the scenario.
"""

from __future__ import annotations

from ..schema import BUYER_MODES, BYPRODUCTS, STORES, SUPPLIER_MODES, Field, Sheet, pct

SURVEY_METHODS = ("survey", "gauge", "estimate")
ORDER_STATUSES = ("booked", "cancelled")

#: A load's mean tonnes must lie within these shares of the lane's load size [-]: a
#: part-loaded train or truck is normal, a load heavier than 110 % of its size is not
#: (common practice, no source: weighbridge tickets vs nominal car and truck payloads).
LOAD_SHARE_MIN, LOAD_SHARE_MAX = 0.5, 1.10

_date = Field("date", "date", note="day it happened")
_mode_in = Field("mode", "code", False, None, choices=SUPPLIER_MODES,
                 note="lane mode; needed only when the supplier has several")

STOCK_SURVEYS = Sheet(
    "stock_surveys", key=("date", "store"),
    fields=(
        Field("date", "date", note="day of the survey; the level is taken as the end of that day"),
        Field("store", "code", choices=STORES, note="store surveyed"),
        Field("level_t", "number", True, None, 0, None, unit="t", note="level found"),
        Field("method", "code", False, None, choices=SURVEY_METHODS, note="how it was measured"),
    ),
)

ARRIVALS = Sheet(
    "arrivals", key=("supplier", "ticket"),
    fields=(
        _date,
        Field("supplier", "text", note="supplier from the scenario's suppliers sheet"),
        _mode_in,
        Field("loads", "integer", True, None, 1, 10000, unit="loads", note="loads (trains, trucks)"),
        Field("tonnes", "number", True, None, 0.001, None, unit="t", note="weighed tonnes"),
        Field("ticket", "text", note="weighbridge or waybill number"),
        Field("caco3_pct", "number", False, None, 50, 100, unit="%",
              note="the delivery's CaCO3 (lab result)"),
    ),
)

SHIPMENTS = Sheet(
    "shipments", key=("party", "ticket"),
    fields=(
        _date,
        Field("party", "text", note="buyer or landfill site"),
        Field("material", "code", choices=BYPRODUCTS, note="material shipped"),
        Field("mode", "code", False, None, choices=BUYER_MODES,
              note="lane mode; needed only when the buyer has several"),
        Field("loads", "integer", False, None, 0, 10000, unit="loads", note="loads"),
        Field("tonnes", "number", True, None, 0.001, None, unit="t", note="weighed tonnes"),
        Field("ticket", "text", note="weighbridge or waybill number"),
    ),
)

ORDERS = Sheet(
    "orders", key=("order_id",),
    fields=(
        Field("order_id", "text", note="the order's number"),
        Field("date", "date", note="planned arrival"),
        Field("supplier", "text", note="supplier from the scenario's suppliers sheet"),
        _mode_in,
        Field("loads", "integer", True, None, 1, 10000, unit="loads", note="loads ordered"),
        Field("tonnes", "number", False, None, 0.001, None, unit="t",
              note="tonnes ordered; empty = loads x load size"),
        Field("status", "code", choices=ORDER_STATUSES, note="booked or cancelled"),
    ),
)

GENERATION_HISTORY = Sheet(
    "generation_history", key=("date", "unit"),
    fields=(
        _date,
        Field("unit", "text", note="unit from the scenario's units sheet"),
        Field("mwh", "number", True, None, 0, None, unit="MWh", note="net generation of the day"),
    ),
)

COAL_QUALITY_HISTORY = Sheet(
    "coal_quality_history", key=("date", "source"),
    fields=(
        Field("date", "date", note="sample date"),
        Field("source", "text", note="source from the scenario's coal_sources sheet"),
        pct("sulfur_pct", "sulfur, as received", required=True),
        pct("ash_pct", "ash, as received", None),
        Field("hhv_mj_per_kg", "number", False, None, 5, 40, unit="MJ/kg",
              note="higher heating value, as received"),
    ),
)

RECORD_SHEETS: dict[str, Sheet] = {s.name: s for s in (
    STOCK_SURVEYS, ARRIVALS, SHIPMENTS, ORDERS, GENERATION_HISTORY, COAL_QUALITY_HISTORY)}

#: Extra columns stored but not parsed through a Field (free text kept with the fact).
TEXT_COLUMNS = {"stock_surveys": ("note",)}

#: Columns that carry the fact's value (compared on a re-import), per sheet.
def value_columns(sheet: str) -> list[str]:
    s = RECORD_SHEETS[sheet]
    return [f.name for f in s.fields if f.name not in s.key] + list(TEXT_COLUMNS.get(sheet, ()))
