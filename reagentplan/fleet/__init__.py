"""A fleet of stations planned together (``../shared/FLEET.md``): the fleet workbook
(`workbook`), the hand split and the stations' open scenarios (`split`), the joint
model (`solve`) and the fleet's plan and accounts (`plan`)."""

from .plan import FleetResult, fleet_frames, fleet_summary, plan_fleet, room_went
from .workbook import Fleet, is_fleet_workbook, load_fleet

__all__ = ["Fleet", "FleetResult", "fleet_frames", "fleet_summary", "is_fleet_workbook", "load_fleet",
           "plan_fleet", "room_went"]
