"""Rehearsing the weekly loop: a plan followed for a week, remade, followed again,
against sampled futures taken as the truth (`truth`), through the operations record
(`loop`), and priced by what really happened (`metrics`)."""

from .loop import PolicyRun, rehearse_policy
from .metrics import policy_figures
from .run import RehearsalResult, describe_rehearsal, rehearse
from .truth import Disturbances, World, worlds_from_futures

__all__ = ["Disturbances", "World", "worlds_from_futures", "PolicyRun", "rehearse_policy",
           "policy_figures", "RehearsalResult", "rehearse", "describe_rehearsal"]
