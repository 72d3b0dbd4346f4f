"""What-if changes to a scenario: a pure function from one `Scenario` to another.

The dashboard's sliders (and anyone else) ask "what if the units ran harder, the coal
carried more sulfur, the absorbers removed less, or the main line were shut for a
fortnight?".  `apply_whatif` answers by returning a changed copy of the scenario
(``dataclasses.replace``); the original is never touched, and the changed one goes
through the same pipeline as any workbook.

- **load factor**: every ``generation`` row [MWh] times the factor, never above the
  unit's capacity × 24 h.  The ``generation_history`` is scaled the same way, so days
  that the forecast fills from history (and the futures' spread around the plan) move
  with it.  Days a unit is off (0 MWh) stay off.
- **sulfur**: each coal source's ``sulfur_pct`` and ``sulfur_sd_pct`` times the factor,
  and the lab results' ``sulfur_pct`` in ``coal_quality_history`` likewise (capped at
  the workbook's accepted ranges).
- **removal**: the scrubber's design ``removal_pct`` [%] (for a fluidised bed, the bed
  capture).  Dated ``period_settings`` rows for ``removal_pct`` still apply on their days.
- **rail outage**: a `LaneClosure` from the first to the last day (inclusive) for every
  supplier that has a rail lane.
- **removal range**: ``(lowest, highest)`` [%], the range within which the plan may
  choose the removal day by day (the scrubber's ``removal_min_pct`` and
  ``removal_max_pct``).  The setpoint (``removal_pct``, used by the reorder-point
  baseline and the plain balance) is the removal given with it, which must lie inside
  the range, else the scenario's setpoint clipped into the range.  A removal given
  alone must lie inside the scenario's own range, when it has one.
- **allowance price**: one price [money per tonne of SO2] at which SO2 allowances are
  both bought and sold, on every row of the ``allowances`` table; a scenario without one
  gets a one-row table from its start date with a holding of 0, no allocations and no
  monthly trading limit.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math

import numpy as np
import pandas as pd

from .scenario import LaneClosure, Scenario

#: Accepted range of the load-factor multiplier [-].
LOAD_FACTOR_RANGE = (0.0, 3.0)
#: Accepted range of the sulfur multiplier [-].
SULFUR_SCALE_RANGE = (0.0, 5.0)
#: Upper bounds of the workbook's columns (`reagentplan.schema`) [% S].
MAX_SULFUR_PCT = 100.0
MAX_SULFUR_SD_PCT = 10.0


def _as_date(value) -> dt.date:
    if isinstance(value, pd.Timestamp):
        return value.date()
    if isinstance(value, dt.datetime):
        return value.date()
    if isinstance(value, dt.date):
        return value
    if isinstance(value, str):
        try:
            return dt.date.fromisoformat(value.strip()[:10])
        except ValueError:
            raise ValueError(f"rail outage: '{value}' is not a date (YYYY-MM-DD)") from None
    raise ValueError(f"rail outage: {value!r} is not a date")


def _check_factor(name: str, value: float, lo: float, hi: float) -> float:
    x = float(value)
    if not math.isfinite(x) or not lo <= x <= hi:
        raise ValueError(f"{name} must be a number from {lo:g} to {hi:g}, got {value!r}")
    return x


def _scale_generation(frame: pd.DataFrame | None, factor: float, capacity_mwh: dict[str, float]
                      ) -> pd.DataFrame | None:
    """``mwh`` [MWh/d] times ``factor``, clipped at each unit's capacity × 24 h."""
    if frame is None or factor == 1.0:
        return frame
    out = frame.copy()
    cap = out["unit"].map(capacity_mwh).to_numpy(dtype=float)
    mwh = out["mwh"].to_numpy(dtype=float) * factor
    out["mwh"] = np.where(np.isfinite(cap), np.minimum(mwh, cap), mwh)
    return out


def _check_range(value) -> tuple[float, float]:
    try:
        lo, hi = (float(x) for x in value)
    except (TypeError, ValueError):
        raise ValueError(f"removal range must be two numbers (lowest, highest), got {value!r}") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and 0.0 <= lo <= hi <= 100.0):
        raise ValueError(f"removal range must be two removals from 0 to 100 %, the lowest first, "
                         f"got {lo:g} to {hi:g}")
    return lo, hi


def allowances_at_price(scenario: Scenario, price_per_t: float) -> pd.DataFrame:
    """The scenario's ``allowances`` table with one buy and sell price [money/t SO2] on
    every row; without a table, one row on the start date: holding 0, no allocation,
    no monthly trading limit."""
    if scenario.allowances is not None:
        table = scenario.allowances.copy()
    else:
        table = pd.DataFrame({"date": [pd.Timestamp(scenario.plant.start_date)],
                              "holding_t": [0.0], "allocated_t": [0.0],
                              "buy_price_per_t": [0.0], "sell_price_per_t": [0.0],
                              "max_trade_t_per_month": [np.nan]})
    table["buy_price_per_t"] = float(price_per_t)
    table["sell_price_per_t"] = float(price_per_t)
    return table


def apply_whatif(scenario: Scenario, load_factor: float = 1.0, sulfur_scale: float = 1.0,
                 removal_pct: float | None = None,
                 rail_outage: tuple | None = None,
                 removal_range: tuple[float, float] | None = None,
                 allowance_price: float | None = None) -> Scenario:
    """A changed copy of ``scenario``.

    Parameters
    ----------
    load_factor : multiplier on daily generation [-], 1 = as planned; clipped per unit at
        capacity [MW] × 24 h.
    sulfur_scale : multiplier on coal sulfur (content and its spread) [-], 1 = as given.
    removal_pct : the scrubber's SO2 removal [%]; ``None`` keeps the workbook's value.
    rail_outage : ``(first_day, last_day)`` [dates, inclusive] during which every rail
        supplier is closed; ``None`` for no outage.
    removal_range : ``(lowest, highest)`` removal [%] the plan may choose within;
        ``None`` keeps the workbook's range (or its fixed removal).
    allowance_price : one buy and sell price of SO2 allowances [money/t SO2]; ``None``
        keeps the workbook's ``allowances`` sheet (or its absence).

    Returns
    -------
    Scenario
        A new scenario; the one passed in is unchanged.

    Raises
    ------
    ValueError
        A factor out of range, a removal outside 0-100 % or outside the removal range, a
        range whose lowest is above its highest, a negative allowance price, or an
        outage whose last day is before its first.
    """
    load_factor = _check_factor("load_factor", load_factor, *LOAD_FACTOR_RANGE)
    sulfur_scale = _check_factor("sulfur_scale", sulfur_scale, *SULFUR_SCALE_RANGE)
    changes: dict = {}

    if load_factor != 1.0:
        capacity = {u.unit: u.capacity_mw * 24.0 for u in scenario.units}
        changes["generation"] = _scale_generation(scenario.generation, load_factor, capacity)
        changes["generation_history"] = _scale_generation(scenario.generation_history,
                                                          load_factor, capacity)

    if sulfur_scale != 1.0:
        changes["coal_sources"] = tuple(
            dataclasses.replace(s, sulfur_pct=min(s.sulfur_pct * sulfur_scale, MAX_SULFUR_PCT),
                                sulfur_sd_pct=min(s.sulfur_sd_pct * sulfur_scale, MAX_SULFUR_SD_PCT))
            for s in scenario.coal_sources)
        hist = scenario.coal_quality_history
        if hist is not None and "sulfur_pct" in hist:
            hist = hist.copy()
            hist["sulfur_pct"] = (hist["sulfur_pct"].astype(float) * sulfur_scale).clip(upper=MAX_SULFUR_PCT)
            changes["coal_quality_history"] = hist

    scrubber = scenario.scrubber
    removal = None if removal_pct is None else _check_factor("removal_pct", removal_pct, 0.0, 100.0)
    if removal_range is not None:
        lo, hi = _check_range(removal_range)
        if removal is not None and not lo <= removal <= hi:
            raise ValueError(f"the removal {removal:g} % is outside the removal range "
                             f"{lo:g} to {hi:g} %")
        setpoint = removal if removal is not None else min(max(scrubber.removal_pct, lo), hi)
        scrubber = dataclasses.replace(scrubber, removal_pct=setpoint, removal_min_pct=lo,
                                       removal_max_pct=hi)
    elif removal is not None:
        rng = scrubber.removal_range
        if rng is not None and not rng[0] <= removal <= rng[1]:
            raise ValueError(f"the removal {removal:g} % is outside the workbook's removal range "
                             f"{rng[0]:g} to {rng[1]:g} % (change the range too)")
        scrubber = dataclasses.replace(scrubber, removal_pct=removal)
    if scrubber is not scenario.scrubber:
        changes["scrubber"] = scrubber

    if allowance_price is not None:
        price = float(allowance_price)
        if not math.isfinite(price) or price < 0:
            raise ValueError(f"allowance price must be a number of at least 0, got {allowance_price!r}")
        changes["allowances"] = allowances_at_price(scenario, price)

    if rail_outage is not None:
        first, last = (_as_date(x) for x in rail_outage)
        if last < first:
            raise ValueError(f"rail outage: the last day {last:%Y-%m-%d} is before the first "
                             f"{first:%Y-%m-%d}")
        rail = dict.fromkeys(s.supplier for s in scenario.suppliers if s.mode == "rail")
        added = tuple(LaneClosure(party, "rail", first, last) for party in rail)
        if added:
            changes["lane_closures"] = tuple(scenario.lane_closures) + added

    return dataclasses.replace(scenario, **changes) if changes else scenario


def describe_whatif(load_factor: float = 1.0, sulfur_scale: float = 1.0,
                    removal_pct: float | None = None, rail_outage: tuple | None = None,
                    removal_range: tuple[float, float] | None = None,
                    allowance_price: float | None = None) -> str:
    """One line naming the changes, e.g. ``generation x1.10, rail closed 2027-03-01 to
    2027-03-14``; ``as the workbook says`` when there are none."""
    parts = []
    if load_factor != 1.0:
        parts.append(f"generation x{load_factor:.2f}")
    if sulfur_scale != 1.0:
        parts.append(f"coal sulfur x{sulfur_scale:.2f}")
    if removal_pct is not None:
        parts.append(f"SO2 removal {removal_pct:g} %")
    if rail_outage is not None:
        first, last = (_as_date(x) for x in rail_outage)
        parts.append(f"rail closed {first:%Y-%m-%d} to {last:%Y-%m-%d}")
    if removal_range is not None:
        lo, hi = (float(x) for x in removal_range)
        parts.append(f"SO2 removal chosen from {lo:g} to {hi:g} %")
    if allowance_price is not None:
        parts.append(f"SO2 allowances at {float(allowance_price):g} per t")
    return ", ".join(parts) if parts else "as the workbook says"


__all__ = ["apply_whatif", "describe_whatif", "allowances_at_price"]
