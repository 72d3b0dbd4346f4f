"""SO2 permit exceedances of a planned balance, as breaches the plan reports.

The balance's ``so2_over_limit`` flags the days on which the rolling average of SO2
emitted per unit of heat input [kg/GJ] over the permit's averaging period is above the
permit limit the user entered.  Each run of such days becomes one breach, named like
the store breaches (``store`` = ``so2_permit``), so that ``summary.json``, the console
and the exit code say so: a plan that keeps every store within its limits but cannot
keep the stack within its permit is not a sound plan.

References
----------
40 CFR Part 60, Subpart Da (SO2 compliance as a rolling average of the emission rate
over boiler operating days; from memory): the average is the emissions of the period
over its heat input, as `reagentplan.balance` computes it.  The station's own permit
governs its period and limit.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

#: The name permit breaches carry in the ``store`` field.
PERMIT = "so2_permit"


def runs(flags: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) index of each run of True in a boolean array [-]."""
    flags = np.asarray(flags, dtype=bool)
    if not flags.any():
        return []
    edges = np.diff(np.concatenate([[0], flags.astype(int), [0]]))
    return list(zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1))


def permit_breaches(balance: pd.DataFrame, removal_pct: float | None = None) -> list[dict]:
    """One breach per run of days over the SO2 permit's rolling limit.

    ``tonnes`` is the SO2 emitted above what the limit allows on those days [t]:
    sum of max(emitted − limit × heat input, 0), with the limit [kg/GJ] and heat input
    [GJ/d].  ``removal_pct`` [%] is named in the cause when given.
    """
    if "so2_over_limit" not in balance or not balance["so2_over_limit"].astype(bool).any():
        return []
    over = balance["so2_over_limit"].to_numpy(dtype=bool)
    limit = balance["so2_limit_kg_per_gj"].to_numpy(dtype=float)
    excess = np.clip(balance["so2_emitted_t"].to_numpy(dtype=float)
                     - limit * balance["heat_input_gj"].to_numpy(dtype=float) / 1000.0, 0, None)
    dates = pd.to_datetime(balance["date"])
    out = []
    for a, b in runs(over):
        peak = float(np.nanmax(balance["so2_rolling_kg_per_gj"].to_numpy(dtype=float)[a:b + 1]))
        removal = f" at {removal_pct:g} % removal" if removal_pct is not None else ""
        out.append({
            "store": PERMIT, "kind": "over the SO2 permit limit",
            "first_date": f"{dates.iloc[a]:%Y-%m-%d}", "last_date": f"{dates.iloc[b]:%Y-%m-%d}",
            "tonnes": round(float(excess[a:b + 1].sum()), 1),
            "cause": (f"the rolling SO2 average reaches {peak:.3g} kg/GJ against a limit of "
                      f"{float(limit[a]):.3g} kg/GJ: the scrubber{removal} leaves more SO2 than "
                      "the permit allows for this coal; raise the removal, burn lower-sulfur "
                      "coal, or ask the permit's engineer"),
        })
    return out


__all__ = ["PERMIT", "permit_breaches", "runs"]
