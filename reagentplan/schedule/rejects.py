"""Mill rejects: hauled each day straight from the pulverisers to the sites that take them.

The rejects fall into the mills' reject bins and are hauled from there, each day as
much as the ``disposal`` rows of material ``mill_rejects`` take, cheapest first, each
within its ``max_t_per_day``, its remaining ``airspace_t`` and its open days
(`lane_closures`).  What the sites cannot take on a day waits in the bins for the next
open day, up to `REJECTS_BIN_DAYS` days of the horizon's mean rejects; only what
overflows the bins is reported as a breach, the way a store's breaches are.  So a site
closed on Sundays takes Sunday's rejects on Monday, and no breach is made of it.  The
rejects still in the bins at the end are charged at the cheapest site's cost, as a
store's byproducts are.

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

#: The mills' reject bins hold this many days of the horizon's mean rejects [d]: what the
#: sites cannot take on a day (a Sunday, a closure, a full site) waits there for the next
#: open day.  Common practice, no source (reject hoppers and skips at the pulverisers are
#: sized for a weekend or a day or two of a haul that does not come).
REJECTS_BIN_DAYS = 2.0


@dataclass(frozen=True)
class RejectsHaul:
    """The daily haul of the mill rejects.

    Attributes
    ----------
    sites : the ``mill_rejects`` disposal rows, cheapest first
    hauled_t : per site name, tonnes hauled per day [t/d]
    unhauled_t : rejects no site could take and the bins could not hold, per day [t/d]
    cost : per day, the money paid for the haul [money/d]
    why : per day with rejects left over, what stopped each site ('' otherwise)
    waiting_t : rejects in the bins at each day's end, to be hauled later [t]
    bin_t : what the bins hold [t]
    """

    sites: tuple[DisposalSite, ...]
    hauled_t: dict[str, np.ndarray]
    unhauled_t: np.ndarray
    cost: np.ndarray
    why: tuple[str, ...]
    waiting_t: np.ndarray | None = None
    bin_t: float = 0.0

    @property
    def total_hauled_t(self) -> np.ndarray:
        """Tonnes hauled per day over all sites [t/d]."""
        return sum(self.hauled_t.values(), np.zeros(len(self.unhauled_t)))


def rejects_sites(scenario: Scenario) -> tuple[DisposalSite, ...]:
    """The disposal rows that take mill rejects, cheapest first (ties in sheet order)."""
    sites = [d for d in scenario.disposal if d.material == MILL_REJECTS]
    return tuple(sorted(sites, key=lambda d: d.cost_per_t))


def haul_rejects(scenario: Scenario, rejects_t) -> RejectsHaul:
    """Haul each day's mill rejects [t/d], with those waiting in the bins, to the cheapest
    open sites with room.

    Each site takes at most its ``max_t_per_day`` [t/d] on a day it is open and, over the
    horizon, at most its remaining ``airspace_t`` [t]; the cost is ``cost_per_t``
    [money/t] of each tonne hauled.  What is left waits in the bins, which hold
    B = `REJECTS_BIN_DAYS` × the mean rejects per day [t]; what is beyond B is not hauled
    (a breach): w_d = min(w_{d−1} + made_d − hauled_d, B).
    """
    rejects_t = np.asarray(rejects_t, dtype=float)
    n = len(rejects_t)
    sites = rejects_sites(scenario)
    hauled = {d.site: np.zeros(n) for d in sites}
    open_ = {d.site: scenario.lane_open(d) for d in sites}
    room = {d.site: np.inf if d.airspace_t is None else float(d.airspace_t) for d in sites}
    bin_t = REJECTS_BIN_DAYS * float(rejects_t.mean()) if n else 0.0
    unhauled, waiting = np.zeros(n), np.zeros(n)
    cost = np.zeros(n)
    why: list[str] = [""] * n
    left = 0.0
    for day in range(n):
        left += rejects_t[day]
        for d in sites:
            if left <= 0 or not open_[d.site][day]:
                continue
            cap = np.inf if d.max_t_per_day is None else float(d.max_t_per_day)
            take = min(left, cap, room[d.site])
            hauled[d.site][day] = take
            room[d.site] -= take
            left -= take
            cost[day] += take * d.cost_per_t
        if left > bin_t + 1e-9:
            unhauled[day] = left - bin_t
            left = bin_t
            why[day] = _why_full(sites, open_, hauled, room, day) + f"; the reject bins full ({bin_t:,.0f} t)"
        if left <= 1e-9:
            left = 0.0
        waiting[day] = left
    return RejectsHaul(sites, hauled, unhauled, cost, tuple(why), waiting, bin_t)


def waiting_end_cost(haul: RejectsHaul) -> float:
    """The rejects still in the bins at the end, at the cheapest site's cost [money]
    (0 without sites or rejects waiting)."""
    if haul.waiting_t is None or not len(haul.waiting_t) or not haul.sites:
        return 0.0
    return float(haul.waiting_t[-1] * min(d.cost_per_t for d in haul.sites))


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
    if haul.waiting_t is not None:
        out["waiting_t"] = haul.waiting_t
    out["cost"] = haul.cost
    return out


def has_rejects(scenario: Scenario) -> bool:
    """True when some coal source has mill rejects or a site takes them."""
    return bool(rejects_sites(scenario)) or any(s.mill_rejects_pct > 0 for s in scenario.coal_sources)


__all__ = ["NOT_HAULED", "REJECTS_BIN_DAYS", "RejectsHaul", "haul_frame", "haul_rejects", "has_rejects",
           "rejects_breaches", "rejects_sites", "waiting_end_cost"]
