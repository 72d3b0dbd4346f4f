"""reagentplan: scrubber reagent and byproduct logistics planning.

Forecasts of generation and coal quality drive a mass balance of limestone use and
gypsum / fly-ash / bottom-ash production; the scheduler plans deliveries and haul-outs
around it.  This is a planning aid: permits, local codes and licensed engineers decide.
"""

__version__ = "0.1.0"

CAUTION = (
    "Planning aid only. Check stock levels physically before acting; the station's "
    "permits, local codes and licensed engineers decide on emissions, storage, haul "
    "roads and landfill use."
)
