"""The scheduler: optimised deliveries, store levels and haul-outs, and the
reorder-point baseline they are compared with."""

from .plan import PlanResult, guard_margins, make_plan

__all__ = ["PlanResult", "guard_margins", "make_plan"]
