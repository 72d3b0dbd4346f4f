"""The scrubber's SO2 removal as a decision of the plan, the permit's rolling average and
SO2 emission allowances.

When the scrubber sheet gives a range (``removal_min_pct`` < ``removal_max_pct``) the plan
chooses the removal r of each period within it.  Everything the balance makes of the SO2
that reaches the scrubber is affine in r at a given stone and coal: the SO2 removed is the
SO2 reaching the scrubber × r, and the limestone (its CaCO3), the gypsum and the SO2
emitted follow it linearly (the stoichiometry of `reagentplan.balance`).  So
`reagentplan.balance.removal_response` (two balances) gives each day's quantity as
``intercept + slope × r`` exactly, and the model stays mixed-integer linear.  Gypsum purity is a ratio and is not affine; the
plan judges it at the setpoint and the byproducts are re-planned at the chosen removal
(exact), as they are at the chosen stone.

The permit: for every day d, the SO2 emitted over the averaging period ending on d must
not exceed the limit × the heat input of those days (the rolling average of
`reagentplan.balance`, fewer days at the start of the horizon).  A tonne-day over it is
priced at `PERMIT_PENALTY_FACTOR` × the workbook's shortage penalty, so the plan breaks
the permit only where nothing else can keep it; each run of days over it is still a
breach (`permit.py`).

Allowances (optional sheet ``allowances``): every tonne emitted uses one allowance; the
holding (opening + allocations + bought − sold − emitted) may not go below zero (a tonne-day
short is priced at `ALLOWANCE_SHORT_PENALTY_FACTOR` × the shortage penalty and reported);
buying and selling are at the sheet's prices within its monthly limits; allowances left at
the end are valued at the last sell price, so holding and selling compare fairly, and a
shortfall left at the end is bought at the last buy price (`terms.allowance_end_value`,
the model and the evaluation alike).

References
----------
40 CFR Part 60, Subpart Da: SO2 limits as a rolling average of the emission rate over
the averaging period (from memory); the station's own permit governs.
40 CFR Part 73 (the SO2 allowance system: one allowance authorises one ton of SO2
emitted; from memory).
Srivastava, R. K. and Jozewicz, W. (2001), "Flue gas desulfurization: the state of the
art", J. Air & Waste Manage. Assoc. 51:1676-1688 (removal of wet limestone scrubbers).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..scenario import Scenario
from .evaluate import store_levels
from .penalties import ALLOWANCE_SHORT_PENALTY_FACTOR, PERMIT_PENALTY_FACTOR
from .terms import AllowanceTerms, allowance_costs, allowance_holding_t, permit_excess_t

#: Columns of the balance that the plan follows with the removal.
AFFINE_COLUMNS = ("limestone_t", "caco3_need_t", "limestone_scrubber_t", "limestone_hcl_t",
                  "gypsum_wet_t", "gypsum_dry_t", "gypsum_inerts_t", "fly_ash_t", "bottom_ash_t",
                  "so2_emitted_t", "so2_removed_t")


def removal_setpoint(scenario: Scenario) -> np.ndarray:
    """The fixed removal of each horizon day [%]: the scrubber sheet's ``removal_pct`` with
    its period settings (what the hand policy and ``reagentplan balance`` use)."""
    return np.asarray(scenario.daily_setting("removal_pct"), dtype=float)


@dataclass
class RemovalLever:
    """Per day, each balance column as ``intercept + slope × removal`` [t/d, slope t/d per
    %-point], the range [%], the setpoint [%], and the permit's terms.

    lo, hi : the range the plan may choose within [%]
    setpoint : the fixed removal per day [%]
    intercept, slope : per column of `AFFINE_COLUMNS`, arrays (days,)
    heat_gj : heat input per day [GJ]
    limit_kg_per_gj : the permit limit [kg/GJ] or None
    avg_days : its averaging period [d]
    """

    lo: float
    hi: float
    setpoint: np.ndarray
    intercept: dict[str, np.ndarray]
    slope: dict[str, np.ndarray]
    heat_gj: np.ndarray
    limit_kg_per_gj: float | None
    avg_days: int
    caco3: np.ndarray | None = None
    cfb: bool = False

    @classmethod
    def from_scenario(cls, scenario: Scenario, caco3_pct=None) -> "RemovalLever | None":
        """The lever of a scenario with a removal range of some width, else None (a range
        of one value plans exactly as a fixed removal)."""
        from ..balance import removal_response

        rng = scenario.scrubber.removal_range
        if rng is None or rng[1] - rng[0] < 1e-9:
            return None
        lo, hi = float(rng[0]), float(rng[1])
        resp = removal_response(scenario, AFFINE_COLUMNS + ("heat_input_gj", "limestone_caco3_pct"),
                                caco3_pct=caco3_pct)
        setpoint = resp["removal_pct"].to_numpy(float)
        slope = {c: resp[f"{c}_per_pct"].to_numpy(float) for c in AFFINE_COLUMNS}
        icpt = {c: resp[c].to_numpy(float) - slope[c] * setpoint for c in AFFINE_COLUMNS}
        p = scenario.plant
        return cls(lo, hi, setpoint, icpt, slope, resp["heat_input_gj"].to_numpy(float),
                   p.so2_limit_kg_per_gj, int(p.so2_limit_avg_days),
                   resp["limestone_caco3_pct"].to_numpy(float) / 100, p.boiler == "cfb")

    def chem_affine(self, name: str, chem) -> tuple[np.ndarray, np.ndarray]:
        """(intercept, slope per %-point) per day of a quantity of the silo's chemistry
        (`quality.SiloChemistry`) [t/d]: ``need`` (CaCO3 needed), ``need_gypsum`` (its part
        whose stone inerts report to the gypsum) or ``cake_base_wet`` (wet cake without the
        stone's inerts)."""
        ic, sl = self.intercept, self.slope
        if name == "need":
            return ic["caco3_need_t"], sl["caco3_need_t"]
        if name == "need_gypsum":
            if self.cfb:
                return np.zeros_like(self.heat_gj), np.zeros_like(self.heat_gj)
            return ((ic["limestone_scrubber_t"] + ic["limestone_hcl_t"]) * self.caco3,
                    (sl["limestone_scrubber_t"] + sl["limestone_hcl_t"]) * self.caco3)
        if name == "cake_base_wet":
            return ((ic["gypsum_dry_t"] - ic["gypsum_inerts_t"]) * chem.wet_factor,
                    (sl["gypsum_dry_t"] - sl["gypsum_inerts_t"]) * chem.wet_factor)
        raise KeyError(name)

    def at(self, column: str, removal) -> np.ndarray:
        """The column's value per day at a removal per day [%]."""
        return self.intercept[column] + self.slope[column] * np.asarray(removal, dtype=float)

    def permit_excess_t(self, emitted_t) -> np.ndarray:
        """Per day, SO2 over the permit's rolling limit [t]: emitted over the averaging
        period ending that day less limit × heat input of those days, never below 0."""
        return permit_excess_t(emitted_t, self.heat_gj, self.limit_kg_per_gj, self.avg_days)


# --------------------------------------------------------------------------- allowances


def baseline_trades(terms: AllowanceTerms, emitted_t, month_index: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The careful hand rule: never sell; buy, on the day the holding would go below zero,
    just what keeps it at zero, within the monthly purchase limit in force that day (the
    month's purchases so far at most that day's limit, as the model holds them).
    Returns (bought, sold) per day [t]."""
    e = np.asarray(emitted_t, float)
    n = len(e)
    bought = np.zeros(n)
    bought_in_month: dict[int, float] = {}
    holding = terms.opening_t
    for d in range(n):
        holding += terms.allocated_t[d] - e[d]
        if holding < 0:
            m = int(month_index[d])
            cap = terms.max_trade_t_per_month[d]
            so_far = bought_in_month.get(m, 0.0)
            room = np.inf if np.isnan(cap) else max(float(cap) - so_far, 0.0)
            buy = min(-holding, room)
            bought[d] = buy
            bought_in_month[m] = so_far + buy
            holding += buy
    return bought, np.zeros(n)


def allowance_frame(scenario: Scenario, terms: AllowanceTerms, emitted_t, bought_t, sold_t) -> pd.DataFrame:
    """Per calendar month: emitted, allocated, bought, sold [t SO2], the holding at the
    month's end [t] and the money traded."""
    dates = scenario.dates
    holding = allowance_holding_t(terms, emitted_t, bought_t, sold_t)
    frame = pd.DataFrame({"month": dates.to_period("M").astype(str), "emitted_t": emitted_t,
                          "allocated_t": terms.allocated_t, "bought_t": bought_t, "sold_t": sold_t,
                          "cost": np.asarray(bought_t) * terms.buy_price - np.asarray(sold_t) * terms.sell_price,
                          "holding_end_t": holding})
    agg = frame.groupby("month", sort=False).agg(
        emitted_t=("emitted_t", "sum"), allocated_t=("allocated_t", "sum"), bought_t=("bought_t", "sum"),
        sold_t=("sold_t", "sum"), cost=("cost", "sum"), holding_end_t=("holding_end_t", "last"))
    return agg.reset_index().round(2)


def removal_dips(scenario: Scenario, lanes, plan, balance_of, lever: RemovalLever | None,
                 late_days: int = 0) -> list[dict]:
    """Each run of days the plan runs the scrubber below its setpoint, with the lowest
    removal [%] and the cause in words: where the plan's own deliveries, at the setpoint,
    would take the limestone below safety stock within the run or the three days after
    it or before the next delivery (and three days after), the dip rides out low limestone
    (a late or missing train); where only a train of
    the last ``late_days`` days coming late would take it there, the dip holds stock
    against a late train; otherwise running lower is simply cheaper than the stone (and
    allowances) it saves, inside the permit.

    ``balance_of`` gives the balance of a plan (its silo's stone and its removal)."""
    from dataclasses import replace as dc_replace

    from .permit import runs

    if plan.removal is None or lever is None:
        return []
    setpoint = removal_setpoint(scenario)
    low = plan.removal < setpoint - 0.01
    if not low.any():
        return []
    at_setpoint = dc_replace(plan, removal=None)
    levels, unmet = store_levels(scenario, balance_of(at_setpoint), lanes, at_setpoint)
    lime = levels["limestone"]
    safety = scenario.storage["limestone"].safety_t
    rail = sum((at_setpoint.tonnes(l) for l in lanes if l.kind == "supply" and l.mode == "rail"),
               np.zeros(len(lime)))
    if late_days > 0:
        from ..balance import trailing_sum

        without_late = lime - trailing_sum(rail, late_days)
    else:
        without_late = lime
    dates = scenario.dates
    out = []
    arrivals = np.flatnonzero(sum((at_setpoint.tonnes(l) for l in lanes if l.kind == "supply"),
                                  np.zeros(len(lime))) > 0)
    for a, b in runs(low):
        # the stone saved counts until the next delivery comes (and three days after)
        nxt = arrivals[arrivals > b]
        end = min(max(b, int(nxt[0]) if len(nxt) else b) + 3, len(lime) - 1)
        worst = int(a + np.argmin(lime[a:end + 1]))
        short = lime[worst] < safety - 1e-6 or unmet[a:end + 1].sum() > 1e-6
        if short:
            cause = (f"low limestone: with these deliveries the silo would fall to {lime[worst]:,.0f} t "
                     f"on {dates[worst]:%Y-%m-%d} at the {setpoint[a]:g} % setpoint (safety stock "
                     f"{safety:,.0f} t); the lower removal rides it out inside the permit, cheaper "
                     "than extra trucks or an earlier train")
        elif (without_late[a:end + 1] < safety - 1e-6).any():
            cause = (f"a late train: were a train of the last {late_days} days late, the silo would fall under "
                     f"its safety stock of {safety:,.0f} t; the lower removal holds stock against it inside the "
                     "permit")
        else:
            cause = ("cheaper: running lower saves stone worth more than the allowances the extra SO2 "
                     "uses, and the permit's rolling average holds" if AllowanceTerms.from_scenario(scenario)
                     else "cheaper: running lower saves stone, and the permit's rolling average holds")
        out.append({"first_date": f"{dates[a]:%Y-%m-%d}", "last_date": f"{dates[b]:%Y-%m-%d}",
                    "lowest_pct": round(float(plan.removal[a:b + 1].min()), 3),
                    "setpoint_pct": round(float(setpoint[a]), 3), "cause": cause,
                    **_saving_keys(setpoint_saving(scenario, lanes, plan, balance_of, setpoint, slice(a, b + 1))),
                    "kind": "low limestone" if short else ("late train" if "late train" in cause
                                                            else "cheaper")})
    return out


def setpoint_saving(scenario: Scenario, lanes, plan, balance_of, setpoint: np.ndarray, days) -> tuple[float, float]:
    """What running away from the setpoint on ``days`` (a slice or a mask) saves [money], as
    (cash, penalty weights): the plan priced by `evaluate` with the removal at the setpoint
    on those days, less the plan as it is (the same deliveries and shipments, the SO2
    emitted more or less covered by allowances bought or sold that day).  The penalty
    weights are the limits the setpoint would break (the permit, the allowance holding,
    the silo) at the workbook's prices on them."""
    from dataclasses import replace as dc_replace

    from .evaluate import evaluate
    from .penalties import PENALTY_LINES

    removal = plan.removal.copy()
    removal[days] = setpoint[days]
    other = dc_replace(plan, removal=removal)
    bal, bal_other = balance_of(plan), balance_of(other)
    if plan.bought_t is not None:
        # the SO2 the setpoint emits more (or less) is covered by allowances bought (or
        # sold) that day, at the sheet's prices
        extra = bal_other["so2_emitted_t"].to_numpy(float) - bal["so2_emitted_t"].to_numpy(float)
        other = dc_replace(other, bought_t=plan.bought_t + np.clip(extra, 0, None),
                           sold_t=plan.sold_t + np.clip(-extra, 0, None))
    a = evaluate(scenario, bal_other, lanes, other).costs
    b = evaluate(scenario, bal, lanes, plan).costs
    diff = {k: a.get(k, 0.0) - b.get(k, 0.0) for k in set(a) | set(b)}
    penalties = sum(v for k, v in diff.items() if k in PENALTY_LINES)
    return float(sum(diff.values()) - penalties), float(penalties)


def _saving_keys(saving: tuple[float, float]) -> dict:
    """``saves`` (cash [money]) and ``setpoint_penalty_weights`` (the penalty weights the
    setpoint would have cost: the limits it would break) of `setpoint_saving`."""
    return {"saves": round(saving[0], 2), "setpoint_penalty_weights": round(saving[1], 2)}


def lever_days(result) -> pd.DataFrame | None:
    """Per horizon day, what the scrubber and the permit look like in a plan (a
    `PlanResult`), or ``None`` when the plan neither chose the removal nor the station
    holds allowances.

    Columns: ``date``; ``removal_pct`` (the removal the plan's balance uses [%]: chosen
    where the plan chooses it, else the fixed removal); ``removal_min_pct`` and
    ``removal_max_pct`` (the range, only where the plan chooses the removal); ``setpoint_pct``
    (the fixed removal with its period settings [%]); ``so2_emitted_t`` [t];
    ``so2_rolling_kg_per_gj`` (the permit's rolling average [kg/GJ]);
    ``so2_limit_kg_per_gj`` (NaN without a limit); ``so2_margin_line_kg_per_gj`` (the limit
    less the compliance margin, ``so2_limit_margin_pct``).  Straight from the plan's balance."""
    scn = result.scenario
    chosen = result.plan.removal is not None
    if not chosen and scn.allowance_days() is None:
        return None
    bal = result.balance
    out = pd.DataFrame({"date": pd.to_datetime(bal["date"]).to_numpy(),
                        "removal_pct": bal["removal_pct"].to_numpy(float)})
    if chosen:
        lo, hi = scn.scrubber.removal_range
        out["removal_min_pct"] = float(lo)
        out["removal_max_pct"] = float(hi)
    out["setpoint_pct"] = removal_setpoint(scn)
    for col in ("so2_emitted_t", "so2_rolling_kg_per_gj", "so2_limit_kg_per_gj"):
        out[col] = bal[col].to_numpy(float)
    out["so2_margin_line_kg_per_gj"] = out["so2_limit_kg_per_gj"] * (1 - scn.plant.so2_limit_margin_pct / 100)
    return out


__all__ = ["lever_days", "removal_dips", "RemovalLever", "AllowanceTerms", "PERMIT_PENALTY_FACTOR", "ALLOWANCE_SHORT_PENALTY_FACTOR",
           "removal_setpoint", "permit_excess_t", "allowance_holding_t", "allowance_costs",
           "baseline_trades", "allowance_frame"]
