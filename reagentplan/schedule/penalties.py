"""The penalty factors and planning margins of the schedule, in one table.

Every number here is a choice of the tool, not a price of the station: the workbook
gives the prices (``shortage_penalty_per_t``, ``overflow_penalty_per_t``, freight, ...)
and these factors say how hard the plan and its evaluation lean on each kind of trouble.
The model (`model.py`), the evaluation (`evaluate.py`), the removal lever (`lever.py`)
and the rehearsal's metrics read them from here; the old names in those modules are
kept as aliases.

References
----------
Common practice, no source: each factor's meaning is stated beside it; none is taken
from a published table.
"""

from __future__ import annotations

from dataclasses import dataclass

#: A tonne of limestone the scrubber needed and the silo did not have costs this many
#: times the workbook's shortage penalty per tonne [-]: an empty silo stops the scrubber,
#: far worse than a silo below safety stock.
EMPTY_PENALTY_FACTOR = 5.0

#: A tonne below a contract's monthly minimum, where the contract names no
#: ``shortfall_per_t`` (take-or-pay) [money/t].
CONTRACT_PENALTY_PER_T = 25.0

#: A tonne-day of SO2 over the permit's rolling limit costs this many times the shortage
#: penalty per tonne [-]: a permit breach is worse than a silo below safety, as bad as an
#: empty one.
PERMIT_PENALTY_FACTOR = 5.0

#: A tonne-day of SO2 inside the permit's compliance margin (over limit × (1 − margin), not
#: over the limit), in the plan's own case or its guarded worse futures, costs this many
#: times the shortage penalty per tonne [-]: far above what a point of removal costs in
#: stone, so the plan leaves the margin only where no removal the scrubber can run keeps it.
PERMIT_MARGIN_FACTOR = 1.0

#: Share of the stone a point of removal costs that moving the removal a point away from
#: its setpoint for a day costs in the model [-] (not a cost of the plan: `evaluate` leaves
#: it out): the operators' setpoint is the default, and the plan leaves it only where that
#: saves more than a quarter of the stone of every point moved, a saving worth naming; a
#: near tie between stone and allowances keeps the setpoint.
SETPOINT_MOVE_SHARE = 0.25

#: A tonne of SO2 emitted without an allowance (a tonne-day of negative holding) costs
#: this many times the shortage penalty per tonne [-].
ALLOWANCE_SHORT_PENALTY_FACTOR = 5.0

#: Weight of a guarded (worse-future) shortfall or overflow, and of the late-train margin,
#: against a planned one [-]: the plan first keeps its own median levels inside the
#: limits, then buys what protection it can.
GUARD_WEIGHT = 0.25

#: Share of the limestone safety stock the quality-coupled model keeps above it, and of
#: the silo's capacity it keeps below it [-]: room for the fixed ratio of inerts drawn, as
#: the replayed silo may draw a little more (or less) stone than the linearised model did.
SILO_SAFETY_MARGIN = 0.03

#: Money per load the plan gives up by moving or cancelling a load that the previous plan
#: held inside the firm window (a train re-booked, a buyer told of a new day) [money/load]:
#: the price of nervousness, so the coordinator is not asked to re-book for pennies.
#: Not a cost of the plan: `evaluate` leaves it out; `make_plan(change_cost_per_load=...)`
#: sets it.
CHANGE_COST_PER_LOAD = 250.0

#: Days a train may come late that the plan holds stock against in its firm window [d]:
#: on each day, the silo less the rail deliveries of the last this-many days (any of which
#: may not have come yet) is kept above safety stock, at the guard's weight.  Unit trains
#: a day or two late are routine; the reorder-point rule keeps five days of use at each
#: arrival.
LATE_TRAIN_DAYS = 2


#: The cost lines of `evaluate` that are penalty weights (the workbook's or these factors'
#: price on a broken limit), not cash.
PENALTY_LINES = ("shortage_penalty", "overflow_penalty", "empty_penalty", "quality_penalty", "permit_penalty",
                 "allowance_penalty")


@dataclass(frozen=True)
class Penalty:
    """One row of the table: the constant's name, its value, its unit and what it means."""

    name: str
    value: float
    unit: str
    meaning: str


#: The table, for the contributor guide and the summary's readers.
TABLE: tuple[Penalty, ...] = (
    Penalty("EMPTY_PENALTY_FACTOR", EMPTY_PENALTY_FACTOR, "x shortage penalty per t",
            "limestone the scrubber needed and the silo did not have"),
    Penalty("CONTRACT_PENALTY_PER_T", CONTRACT_PENALTY_PER_T, "money/t",
            "below a contract's monthly minimum, when it names no shortfall_per_t"),
    Penalty("PERMIT_PENALTY_FACTOR", PERMIT_PENALTY_FACTOR, "x shortage penalty per t-day",
            "SO2 over the permit's rolling limit"),
    Penalty("PERMIT_MARGIN_FACTOR", PERMIT_MARGIN_FACTOR, "x shortage penalty per t-day",
            "SO2 inside the compliance margin (plan or guarded futures)"),
    Penalty("SETPOINT_MOVE_SHARE", SETPOINT_MOVE_SHARE, "x stone cost of a point",
            "moving the removal a point away from its setpoint for a day"),
    Penalty("ALLOWANCE_SHORT_PENALTY_FACTOR", ALLOWANCE_SHORT_PENALTY_FACTOR, "x shortage penalty per t-day",
            "SO2 emitted without an allowance"),
    Penalty("GUARD_WEIGHT", GUARD_WEIGHT, "x shortage/overflow penalty",
            "a guarded (worse-future) or late-train shortfall against a planned one"),
    Penalty("SILO_SAFETY_MARGIN", SILO_SAFETY_MARGIN, "x safety stock",
            "room kept inside the silo's safety stock and capacity when its mix is modelled"),
    Penalty("CHANGE_COST_PER_LOAD", CHANGE_COST_PER_LOAD, "money/load",
            "moving or cancelling a load the previous plan held in the firm window"),
    Penalty("LATE_TRAIN_DAYS", LATE_TRAIN_DAYS, "d",
            "days a train may come late that the firm window holds stock against"),
)
