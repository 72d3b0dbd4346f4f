"""Futures that guard a rehearsal's weekly plans, sampled once.

In real operation each weekly ``plan --db`` samples its own futures from the record's
histories.  A rehearsal makes hundreds of weekly plans, and sampling anew each week
(fitting the forecast to a history one week longer) added about 1.2 s to each weekly
plan, whose solves take 5-7 s.  So the rehearsal samples the guard futures once, over the whole workbook, from
a seed of their own (never the truth's futures), and cuts them to each week's days.
Each store's flow is scaled day by day by the week's deterministic balance over the
workbook's, so a week that opens on another stone in the silo is guarded at that stone.

What this leaves out, stated: the weekly plans' futures do not learn from the weeks
already played (a forecast refitted each week would, a little), so their spread is that
of the rehearsal's start, on the cautious side.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..balance import balance_frame
from ..scenario import Scenario

#: Added to the rehearsal's seed for the guard futures, so they are never the truth's.
GUARD_SEED_OFFSET = 1_000_003


@dataclass(frozen=True)
class GuardFutures:
    """Futures sampled once (``futures``) and the deterministic balance of the scenario
    they were sampled from (``reference``, one row per day, indexed by date) [t/d].
    Calling it with a weekly scenario gives that week's futures."""

    futures: object  # reagentplan.forecast.Futures
    reference: pd.DataFrame

    @classmethod
    def sample(cls, scenario: Scenario, n_futures: int, seed: int) -> "GuardFutures | None":
        """``n_futures`` futures of ``scenario`` from ``seed + GUARD_SEED_OFFSET``, or None
        for none."""
        if n_futures <= 0:
            return None
        from ..forecast import sample_futures
        from ..pipeline import FUTURE_FLOWS

        fut = sample_futures(scenario, n_futures, seed=seed + GUARD_SEED_OFFSET, keep=FUTURE_FLOWS)
        return cls(fut, balance_frame(scenario).set_index("date"))

    def __call__(self, scenario: Scenario):
        """The futures on ``scenario``'s days, each store's flow scaled by the ratio of its
        deterministic balance to the reference's that day [t/d]."""
        from ..pipeline import STORE_FLOWS

        dates = pd.DatetimeIndex(scenario.dates)
        week = balance_frame(scenario).set_index("date")
        ref = self.reference.reindex(dates)
        scale = {}
        for q in STORE_FLOWS.values():
            if q in self.futures.flows and q in week.columns:
                a, b = week[q].to_numpy(float), ref[q].to_numpy(float)
                scale[q] = np.divide(a, b, out=np.ones(len(dates)), where=np.isfinite(b) & (b > 0))
        return self.futures.window(dates, scale)


__all__ = ["GuardFutures", "GUARD_SEED_OFFSET"]
