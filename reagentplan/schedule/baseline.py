"""The reorder-point policy a coordinator runs by hand today, as the yardstick.

Limestone: each day, for each lane from the cheapest delivered cost up, look at the
projected level on the day an order placed today would arrive; if it is below the
trigger (safety stock + `TRIGGER_DAYS` of the coming average use + the use until that
lane's next possible arrival, so weekends and closures are covered), book a load there
(within the lane's calendar, loads per day and monthly maximum) and look again.  Near
the end of a month, top a lane up to its monthly minimum.

Byproducts: each day ship to the buyers in order of net price, as much as the stock
above safety, the loads per day and the monthly maximum allow, on days the product
meets their limits, pacing a monthly maximum over the month's remaining open days while
the store is below the landfill mark; when the store passes `LANDFILL_MARK` of its capacity, landfill
down to the mark within the site's daily limit and airspace.

The policy is careful, not naive: it uses the same calendars, lead times, quality
limits and contracts as the optimiser.  Its triggers are common practice, no source.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..scenario import Scenario
from .evaluate import PRODUCTION, DailyPlan, off_spec_days
from .lanes import LANDFILL, SALE, SUPPLY, Lane, horizon_months, train_set_room

#: Days of average use kept above safety stock at the arrival of an order.
TRIGGER_DAYS = 5.0
#: Days of use averaged for the trigger.
USE_WINDOW_DAYS = 14
#: Share of a byproduct store's capacity above which the rest is landfilled.
LANDFILL_MARK = 0.75


def _forward_mean(x: np.ndarray, window: int) -> np.ndarray:
    c = np.r_[0.0, np.cumsum(x)]
    n = len(x)
    end = np.minimum(np.arange(n) + window, n)
    return (c[end] - c[np.arange(n)]) / (end - np.arange(n))


def baseline_plan(scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane],
                  firm: dict[str, tuple[np.ndarray, np.ndarray]], chem=None) -> DailyPlan:
    """The reorder-point plan: loads per supply and sale lane, tonnes per landfill lane.

    With stone of several qualities (``chem``, `quality.SiloChemistry`) the limestone
    rule is `_limestone_by_quality` and the byproducts are shipped against the balance at
    the silo's replayed mix, on the days that mix meets each buyer's limits."""
    n = len(balance)
    month_index, months, _ = horizon_months(scenario.dates)
    qty = {lane.name: np.zeros(n, dtype=int if lane.load_t else float) for lane in lanes}
    booked = {}
    for name, (loads, _t) in firm.items():
        qty[name] = qty[name] + loads
        booked[name] = loads.copy()
    supply = [l for l in lanes if l.kind == SUPPLY]
    if chem is None:
        _limestone(scenario, balance, supply, qty, month_index, firm)
    else:
        _limestone_by_quality(scenario, lanes, supply, qty, month_index, chem)
        balance = chem.plan_balance(scenario, lanes, DailyPlan(qty, booked))
    for store in ("gypsum", "fly_ash", "bottom_ash"):
        if store in scenario.storage:
            _byproduct(scenario, balance, store, [l for l in lanes if l.material == store and l.kind != SUPPLY],
                       qty, month_index)
    return DailyPlan(qty, booked)


#: Points of purity [%-points] the coordinator keeps above a buyer's limit.
QUALITY_MARGIN_PCT = 0.3


def _limestone_by_quality(scenario, lanes, supply, qty, month_index, chem) -> None:
    """The reorder-point rule with stone of several qualities.

    Same triggers as `_limestone`, with the use in tonnes of stone at the silo's
    projected mix (the silo replayed with every load booked so far).  The lanes are tried
    from the cheapest delivered cost per tonne of CaCO3 up.  A lane is passed over when
    its load would bring the silo's mix, on any day from its arrival until the silo has
    turned over once (days of stock at the coming use), below the CaCO3 that keeps the
    gypsum at the purity limit (+ `QUALITY_MARGIN_PCT`) of every gypsum buyer taking
    gypsum that day.  Days no stone can save (an oxidation upset) are not counted.  When
    no lane that can deliver now keeps the mix, the coordinator waits for one, unless the
    silo would fall below safety stock (+ the use until the next arrival): then the best
    stone that can be booked is taken.
    """
    st = scenario.storage["limestone"]
    all_lanes = lanes
    n = len(chem.need)
    lanes_c = sorted(supply, key=lambda l: (l.cost_per_t + l.cost_per_load / l.load_t) / chem.lane_caco3[l.name])
    buyers = [l for l in lanes if l.kind == SALE and getattr(l.source, "min_purity_pct", None) is not None]
    best = max(chem.lane_caco3.values())
    # the lowest CaCO3 fraction the silo may hold on a day to keep every buyer taking gypsum
    c_min = np.zeros(n)
    for b in buyers:
        u_max = chem.u_max(b.source.min_purity_pct + QUALITY_MARGIN_PCT - 0.03)
        need_c = np.where(u_max > 0, 1 / np.where(u_max > 0, u_max, 1), np.inf)
        need_c = np.where(need_c > best, 0.0, need_c)  # no stone helps: not the stone's fault
        c_min = np.maximum(c_min, np.where(b.open, need_c, 0.0))
    plan = DailyPlan(qty, {})
    state = {}

    def refresh():
        r = chem.replay(lanes, plan)
        state["level"], state["use"], state["frac"] = r["level_t"], r["stone_t"], r["frac"][:, 0]
        state["trigger"] = st.safety_t + TRIGGER_DAYS * _forward_mean(r["stone_t"], USE_WINDOW_DAYS)
        state["cum"] = np.r_[0.0, np.cumsum(r["stone_t"])]

    refresh()

    def can_book(lane: Lane, day: int) -> bool:
        if day >= n or not lane.open[day] or qty[lane.name][day] >= lane.max_per_day:
            return False
        if not train_set_room(scenario, all_lanes, qty, lane, day):
            return False
        k = month_index[day]
        cap = lane.month_max_t[k]
        return np.isnan(cap) or _month_used(qty[lane.name], lane.load_t, month_index, k) + lane.load_t <= cap + 1e-6

    def cover(lane: Lane, day: int) -> float:
        later = np.flatnonzero(lane.open[day + 1:])
        nxt = day + 1 + later[0] if len(later) else n - 1
        return state["cum"][nxt + 1] - state["cum"][day + 1]

    def keeps_quality(lane: Lane, day: int) -> bool:
        turnover = int(np.ceil(state["level"][day] / max(np.mean(state["use"][day:day + 28]), 1e-9)))
        window = slice(day, min(n, day + turnover + 1))
        if not (c_min[window] > 0).any() or chem.lane_caco3[lane.name] >= c_min[window].max():
            return True
        qty[lane.name][day] += 1
        frac = chem.replay(lanes, plan)["frac"][window, 0]
        qty[lane.name][day] -= 1
        return bool((frac >= c_min[window] - 1e-9).all())

    for order_day in range(n):
        while True:
            due = [(l, order_day + l.lead_days) for l in lanes_c]
            due = [(l, d) for l, d in due if can_book(l, d) and state["level"][d] < state["trigger"][d] + cover(l, d)]
            if not due:
                break
            pick = next(((l, d) for l, d in due if keeps_quality(l, d)), None)
            if pick is None:
                # no stone that keeps the gypsum can come now: buy the best stone only if
                # the silo would otherwise fall below safety stock (+ cover), else wait
                urgent = [(l, d) for l, d in due if state["level"][d] < st.safety_t + cover(l, d)]
                if not urgent:
                    break
                pick = max(urgent, key=lambda ld: chem.lane_caco3[ld[0].name])
            lane, day = pick
            qty[lane.name][day] += 1
            refresh()
        for lane in lanes_c:
            day = order_day + lane.lead_days
            if day >= n or not lane.open[day]:
                continue
            k = month_index[day]
            later = [d for d in range(day + 1, n) if month_index[d] == k and lane.open[d]]
            if later or np.isnan(lane.month_min_t[k]):
                continue
            while (_month_used(qty[lane.name], lane.load_t, month_index, k) < lane.month_min_t[k] - 1e-6
                   and can_book(lane, day) and state["level"][day] + lane.load_t <= st.capacity_t):
                qty[lane.name][day] += 1
                refresh()


def _month_used(qty: np.ndarray, load: float, month_index: np.ndarray, k: int) -> float:
    return float(qty[month_index == k].sum() * load)


def _limestone(scenario, balance, lanes, qty, month_index, firm) -> None:
    st = scenario.storage["limestone"]
    all_lanes = lanes
    use = balance["limestone_t"].to_numpy(float)
    n = len(use)
    trigger = st.safety_t + TRIGGER_DAYS * _forward_mean(use, USE_WINDOW_DAYS)
    lanes = sorted(lanes, key=lambda l: l.cost_per_t + l.cost_per_load / l.load_t)
    firm_t = sum((t for name, (_l, t) in firm.items() if any(x.name == name for x in lanes)), np.zeros(n))
    arrivals = firm_t.copy()

    def projected(day: int) -> float:
        return st.initial_t + arrivals[: day + 1].sum() - use[: day + 1].sum()

    def can_book(lane: Lane, day: int) -> bool:
        if day >= n or not lane.open[day] or qty[lane.name][day] >= lane.max_per_day:
            return False
        if not train_set_room(scenario, all_lanes, qty, lane, day):
            return False
        k = month_index[day]
        cap = lane.month_max_t[k]
        return np.isnan(cap) or _month_used(qty[lane.name], lane.load_t, month_index, k) + lane.load_t <= cap + 1e-6

    cum_use = np.r_[0.0, np.cumsum(use)]

    def cover(lane: Lane, day: int) -> float:
        """Use from the day after an arrival to the lane's next possible arrival [t]."""
        later = np.flatnonzero(lane.open[day + 1:])
        nxt = day + 1 + later[0] if len(later) else n - 1
        return cum_use[nxt + 1] - cum_use[day + 1]

    for order_day in range(n):
        for lane in lanes:
            day = order_day + lane.lead_days
            while can_book(lane, day) and projected(day) < trigger[day] + cover(lane, day):
                qty[lane.name][day] += 1
                arrivals[day] += lane.load_t
        # top up monthly minimums at the last arrival day of the month an order can still reach
        for lane in lanes:
            day = order_day + lane.lead_days
            if day >= n or not lane.open[day]:
                continue
            k = month_index[day]
            later = [d for d in range(day + 1, n) if month_index[d] == k and lane.open[d]]
            if later or np.isnan(lane.month_min_t[k]):
                continue
            while (_month_used(qty[lane.name], lane.load_t, month_index, k) < lane.month_min_t[k] - 1e-6
                   and can_book(lane, day) and projected(day) + lane.load_t <= st.capacity_t):
                qty[lane.name][day] += 1
                arrivals[day] += lane.load_t


def _byproduct(scenario, balance, store, lanes, qty, month_index) -> None:
    st = scenario.storage[store]
    prod = balance[PRODUCTION[store]].to_numpy(float)
    sales = sorted([l for l in lanes if l.kind == SALE], key=lambda l: l.cost_per_t)
    sites = sorted([l for l in lanes if l.kind == LANDFILL], key=lambda l: l.cost_per_t)
    used_air = {l.name: 0.0 for l in sites}
    off_spec = {l.name: off_spec_days(l, balance) for l in sales}
    level = st.initial_t
    for d in range(len(prod)):
        level += prod[d]
        # firm departures already in qty
        for lane in lanes:
            if lane.kind == SALE:
                level -= qty[lane.name][d] * lane.load_t
            else:
                level -= qty[lane.name][d]
        mark = LANDFILL_MARK * st.capacity_t
        for lane in sales:
            if not lane.open[d] or off_spec[lane.name][d]:
                continue
            k = month_index[d]
            room = lane.month_max_t[k] - _month_used(qty[lane.name], lane.load_t, month_index, k)
            room = np.inf if np.isnan(room) else room
            pace = lane.max_per_day
            if np.isfinite(room) and level <= mark:
                # pace the contract over the month's remaining open days
                left_days = int(sum(1 for e in range(d, len(prod)) if month_index[e] == k and lane.open[e]))
                pace = int(np.ceil(room / lane.load_t / max(left_days, 1)))
            loads = int(min(lane.max_per_day - qty[lane.name][d], pace,
                            np.floor(max(level - st.safety_t, 0) / lane.load_t + 1e-9),
                            np.floor(max(room, 0) / lane.load_t + 1e-9)))
            if loads > 0:
                qty[lane.name][d] += loads
                level -= loads * lane.load_t
        for lane in sites:
            if level <= mark or not lane.open[d]:
                continue
            t = min(level - mark, lane.max_per_day - qty[lane.name][d], lane.airspace_t - used_air[lane.name])
            if t > 0:
                qty[lane.name][d] += t
                used_air[lane.name] += t
                level -= t
