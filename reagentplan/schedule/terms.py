"""Terms the model, its evaluation and the removal lever share: the permit's rolling excess,
the allowance account and the value of the CaCO3 left in the silo.

A leaf of `reagentplan.schedule`: it imports nothing from the schedule package, so
`model` → `lever` → `evaluate` → `terms` (and `penalties`) run one way.

References
----------
40 CFR Part 60, Subpart Da: SO2 limits as a rolling average of the emission rate over
the averaging period (from memory); the station's own permit governs.
40 CFR Part 73 (the SO2 allowance system: one allowance authorises one ton of SO2
emitted; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..scenario import Scenario


def permit_excess_t(emitted_t, heat_gj, limit_kg_per_gj, avg_days: int) -> np.ndarray:
    """Per day, the SO2 [t] emitted over the ``avg_days`` days ending that day (fewer at the
    start) above ``limit_kg_per_gj`` [kg/GJ] × their heat input [GJ] / 1000; zeros when
    there is no limit."""
    from ..balance import trailing_sum

    e = np.asarray(emitted_t, dtype=float)
    if limit_kg_per_gj is None:
        return np.zeros_like(e)
    allowed = limit_kg_per_gj * trailing_sum(np.asarray(heat_gj, dtype=float), avg_days) / 1000.0
    return np.clip(trailing_sum(e, avg_days) - allowed, 0, None)


@dataclass
class AllowanceTerms:
    """The allowance sheet per horizon day: opening holding [t SO2], allocations [t/d],
    buy and sell prices [money/t], the most bought (and, apart, sold) per month [t]."""

    opening_t: float
    allocated_t: np.ndarray
    buy_price: np.ndarray
    sell_price: np.ndarray
    max_trade_t_per_month: np.ndarray

    @classmethod
    def from_scenario(cls, scenario: Scenario) -> "AllowanceTerms | None":
        days = scenario.allowance_days()
        if days is None:
            return None
        return cls(float(scenario.allowance_opening_t or 0.0), days["allocated_t"].to_numpy(float),
                   days["buy_price_per_t"].to_numpy(float), days["sell_price_per_t"].to_numpy(float),
                   days["max_trade_t_per_month"].to_numpy(float))


def allowance_holding_t(terms: AllowanceTerms, emitted_t, bought_t, sold_t) -> np.ndarray:
    """End-of-day allowance holding [t SO2]: opening + allocations + bought − sold − emitted,
    cumulated."""
    flow = (terms.allocated_t + np.asarray(bought_t, float) - np.asarray(sold_t, float)
            - np.asarray(emitted_t, float))
    return terms.opening_t + np.cumsum(flow)


def allowance_costs(terms: AllowanceTerms, emitted_t, bought_t, sold_t) -> dict[str, float]:
    """Money of the allowance account: ``trade`` (bought × buy price − sold × sell price),
    ``end_value`` (the holding left at the end, `allowance_end_value`) and ``short_t``
    (the most the holding went below zero, tonnes of SO2 emitted without an allowance)."""
    bought_t, sold_t = np.asarray(bought_t, float), np.asarray(sold_t, float)
    holding = allowance_holding_t(terms, emitted_t, bought_t, sold_t)
    trade = float((bought_t * terms.buy_price).sum() - (sold_t * terms.sell_price).sum())
    end_value = allowance_end_value(terms, float(holding[-1]))
    return {"trade": trade, "end_value": end_value, "short_t": float(max(-holding.min(initial=0.0), 0.0))}


def allowance_end_value(terms: AllowanceTerms, holding_end_t: float) -> float:
    """The holding left at the end as a cost line [money] (negative: a credit): allowances
    held are credited at the last sell price, a shortfall (a negative holding) is bought
    at the last buy price, as the station must surrender one allowance per tonne emitted:
    −s_K max(h, 0) + b_K max(−h, 0).  The model prices it the same way
    (`model._allowances`); b_K ≥ s_K (the loader refuses a sell price above the buy
    price), so the two-sided price is convex."""
    return float(-terms.sell_price[-1] * max(holding_end_t, 0.0) + terms.buy_price[-1] * max(-holding_end_t, 0.0))


def end_caco3_value(scenario: Scenario, chem=None) -> float:
    """Money per tonne of CaCO3 left in the silo at the end [money/t]: the cheapest
    delivered cost of a tonne of CaCO3 over the supply lanes (``chem`` is not used)."""
    return min(s.delivered_cost_per_t / (scenario.stone_caco3_pct(s) / 100) for s in scenario.suppliers)
