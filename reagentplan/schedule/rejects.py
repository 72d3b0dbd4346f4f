"""Mill rejects: hauled each day straight from the pulverisers to the sites that take them.

The rejects have no store: what the mills reject on a day leaves that day, to the
``disposal`` rows of material ``mill_rejects``, cheapest first, each within its
``max_t_per_day``, its remaining ``airspace_t`` and its open days (`lane_closures`).
What no site can take is reported as a breach, the way a store's breaches are.

The haul is not a decision of the optimiser: the plan and the reorder-point baseline
burn the same coal, so they make and haul the same rejects and pay the same for them.
Hence `reagentplan.schedule.lanes.build_lanes` makes no lane of these rows.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..scenario import DisposalSite, Scenario
from ..schema import MILL_REJECTS

#: What a rejects breach says it is, beside the store breaches' kinds.
NOT_HAULED = "not hauled away"


@dataclass(frozen=True)
class RejectsHaul:
    """The daily haul of the mill rejects.

    Attributes
    ----------
    sites : the ``mill_rejects`` disposal rows, cheapest first
    hauled_t : per site name, tonnes hauled per day [t/d]
    unhauled_t : rejects no site could take, per day [t/d]
    cost : per day, the money paid for the haul [money/d]
    why : per day with rejects left over, what stopped each site ('' otherwise)
    """

    sites: tuple[DisposalSite, ...]
    hauled_t: dict[str, np.ndarray]
    unhauled_t: np.ndarray
    cost: np.ndarray
    why: tuple[str, ...]

    @property
    def total_hauled_t(self) -> np.ndarray:
        """Tonnes hauled per day over all sites [t/d]."""
        return sum(self.hauled_t.values(), np.zeros(len(self.unhauled_t)))


def rejects_sites(scenario: Scenario) -> tuple[DisposalSite, ...]:
    """The disposal rows that take mill rejects, cheapest first (ties in sheet order)."""
    sites = [d for d in scenario.disposal if d.material == MILL_REJECTS]
    return tuple(sorted(sites, key=lambda d: d.cost_per_t))


def haul_rejects(scenario: Scenario, rejects_t) -> RejectsHaul:
    """Haul each day's mill rejects [t/d] to the cheapest open sites with room.

    Each site takes at most its ``max_t_per_day`` [t/d] on a day it is open and, over the
    horizon, at most its remaining ``airspace_t`` [t]; the cost is ``cost_per_t``
    [money/t] of each tonne hauled.
    """
    rejects_t = np.asarray(rejects_t, dtype=float)
    n = len(rejects_t)
    sites = rejects_sites(scenario)
    hauled = {d.site: np.zeros(n) for d in sites}
    open_ = {d.site: scenario.lane_open(d) for d in sites}
    room = {d.site: np.inf if d.airspace_t is None else float(d.airspace_t) for d in sites}
    left = rejects_t.copy()
    cost = np.zeros(n)
    why: list[str] = [""] * n
    for day in range(n):
        for d in sites:
            if left[day] <= 0 or not open_[d.site][day]:
                continue
            cap = np.inf if d.max_t_per_day is None else float(d.max_t_per_day)
            take = min(left[day], cap, room[d.site])
            hauled[d.site][day] = take
            room[d.site] -= take
            left[day] -= take
            cost[day] += take * d.cost_per_t
        if left[day] > 1e-9:
            why[day] = _why_full(sites, open_, hauled, room, day)
        else:
            left[day] = 0.0
    return RejectsHaul(sites, hauled, left, cost, tuple(why))


def _why_full(sites, open_, hauled, room, day) -> str:
    """In words, why the sites took no more rejects on ``day``."""
    if not sites:
        return f"no disposal site takes {MILL_REJECTS}"
    reasons = []
    for d in sites:
        if not open_[d.site][day]:
            reasons.append(f"{d.site} closed")
        elif room[d.site] <= 1e-9:
            reasons.append(f"airspace used up at {d.site}")
        else:
            reasons.append(f"{d.site} at its daily limit of {d.max_t_per_day:g} t")
    return "; ".join(reasons)


def rejects_breaches(haul: RejectsHaul, dates: pd.DatetimeIndex) -> list[dict]:
    """One breach per run of days with rejects no site took, named like the store
    breaches (``store`` = ``mill_rejects``), its ``tonnes`` the rejects left over in the
    run [t] and its ``cause`` the sites' limits in words."""
    from .permit import runs

    out = []
    for a, b in runs(haul.unhauled_t > 1e-6):
        causes = []
        for w in haul.why[a:b + 1]:
            for part in w.split("; "):
                if part and part not in causes:
                    causes.append(part)
        out.append({"store": MILL_REJECTS, "kind": NOT_HAULED,
                    "first_date": f"{dates[a]:%Y-%m-%d}", "last_date": f"{dates[b]:%Y-%m-%d}",
                    "tonnes": round(float(haul.unhauled_t[a:b + 1].sum()), 1),
                    "cause": ("the mills reject more than the mill-reject sites take: "
                              + "; ".join(causes)
                              + "; add a site, raise its daily limit, or burn coal with fewer rejects"),
                    "_first": int(a), "_last": int(b)})
    return out


def haul_frame(haul: RejectsHaul, rejects_t, dates: pd.DatetimeIndex) -> pd.DataFrame:
    """The haul day by day, wide: date, rejects made [t], tonnes to each site [t], tonnes
    not hauled [t] and the day's cost [money]."""
    out = pd.DataFrame({"date": dates, "made_t": np.asarray(rejects_t, dtype=float)})
    for d in haul.sites:
        out[f"to {d.site}_t"] = haul.hauled_t[d.site]
    out["not_hauled_t"] = haul.unhauled_t
    out["cost"] = haul.cost
    return out


def has_rejects(scenario: Scenario) -> bool:
    """True when some coal source has mill rejects or a site takes them."""
    return bool(rejects_sites(scenario)) or any(s.mill_rejects_pct > 0 for s in scenario.coal_sources)


__all__ = ["NOT_HAULED", "RejectsHaul", "haul_frame", "haul_rejects", "has_rejects",
           "rejects_breaches", "rejects_sites"]
