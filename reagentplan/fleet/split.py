"""A station's scenario as the fleet plans it, and as the desk splits it by hand.

- `open_scenario`: the station's own monthly minimum, maximum and shortfall price of
  every row a pooled contract covers give way (the pooled rows of the joint model hold
  instead), and so do its own rows of a shared train set.
- `hand_scenario`: the desk's hand split.  Every pooled limit is split between the
  stations in proportion to their expected use (`expected_use`: the deterministic
  balance's limestone use for a supplier, production of the material for a buyer, over
  the horizon); a station's share goes to its rows of that party evenly.  A shared train
  set of K trains in W days becomes, at a station with share s of its stations' stone,
  floor(sK) trains in W days, or where sK < 1 one train in ceil(W / (sK)) days: a whole
  number of trains, as a desk would write it.  Each station then runs its own
  reorder-point rule on its share (the baseline).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pandas as pd

from ..scenario import Scenario
from ..scenario.types import TrainSet
from ..schedule.evaluate import PRODUCTION
from .workbook import SharedContract, SharedTrainSet


def covers(contract: SharedContract, row) -> bool:
    """True when a supplier or buyer row is under ``contract``."""
    if contract.material == "limestone":
        return getattr(row, "supplier", None) == contract.party
    return getattr(row, "buyer", None) == contract.party and row.material == contract.material


def has_party(scn: Scenario, contract: SharedContract) -> bool:
    return any(covers(contract, r) for r in (*scn.suppliers, *scn.buyers))


def uses_set(scn: Scenario, ts: SharedTrainSet) -> bool:
    return any(s.train_set == ts.train_set for s in scn.suppliers)


def expected_use(scn: Scenario, balance: pd.DataFrame, material: str) -> float:
    """Expected use [t] over the horizon: limestone burned, or the byproduct made."""
    column = "limestone_t" if material == "limestone" else PRODUCTION[material]
    return float(balance[column].to_numpy(float).sum())


def shares(uses: dict[str, float]) -> dict[str, float]:
    """Each station's share [-] in proportion to its use (evenly when none has any)."""
    total = sum(uses.values())
    if total <= 0:
        return {k: 1.0 / len(uses) for k in uses}
    return {k: v / total for k, v in uses.items()}


def open_scenario(scn: Scenario, contracts, sets) -> Scenario:
    """The station with its rows of pooled contracts and shared train sets giving way."""
    def free(row):
        if any(covers(c, row) for c in contracts):
            return replace(row, min_t_per_month=None, max_t_per_month=None, shortfall_per_t=None)
        return row

    names = {t.train_set for t in sets}
    return replace(scn, suppliers=tuple(free(s) for s in scn.suppliers), buyers=tuple(free(b) for b in scn.buyers),
                   train_sets=tuple(t for t in scn.train_sets if t.train_set not in names))


def split_train_set(ts: SharedTrainSet, share: float) -> TrainSet:
    """A station's hand share of a shared train set (whole trains, see the module)."""
    per = share * ts.max_trains
    if per >= 1:
        return TrainSet(ts.train_set, int(math.floor(per + 1e-9)), ts.window_days)
    return TrainSet(ts.train_set, 1, int(math.ceil(ts.window_days / max(per, 1e-9))))


def hand_scenario(scn: Scenario, contracts, contract_share: dict[str, float], sets,
                  set_share: dict[str, float]) -> Scenario:
    """The station under the desk's hand split: its share of each pooled limit
    (``contract_share`` per contract name) and of each shared train set."""
    def split(row):
        for c in contracts:
            if covers(c, row):
                n_rows = sum(covers(c, r) for r in (*scn.suppliers, *scn.buyers))
                s = contract_share.get(c.contract, 0.0) / max(n_rows, 1)
                return replace(row, min_t_per_month=None if c.min_t_per_month is None else s * c.min_t_per_month,
                               max_t_per_month=None if c.max_t_per_month is None else s * c.max_t_per_month,
                               shortfall_per_t=c.shortfall_per_t)
        return row

    names = {t.train_set: t for t in sets}
    own = [t for t in scn.train_sets if t.train_set not in names]
    own += [split_train_set(t, set_share[t.train_set]) for t in sets if t.train_set in set_share]
    return replace(scn, suppliers=tuple(split(s) for s in scn.suppliers), buyers=tuple(split(b) for b in scn.buyers),
                   train_sets=tuple(own))


def month_limits(dates: pd.DatetimeIndex, contract: SharedContract,
                 used_t: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """The pooled minimum and maximum [t] of each horizon month as they apply to its
    planned days (a part month as a station's own contract is cut, `lanes._monthly`):
    ``used_t`` [t], the first month's tonnes already moved at all the stations (their
    records' month-to-date), else the contract's even pace before the first day."""
    from ..schedule.lanes import _monthly, horizon_months, month_span

    _, months, share = horizon_months(dates)
    span = month_span(dates)
    lo = _monthly(contract.min_t_per_month, share, months, bound="min", span=span, used_t=used_t)
    hi = _monthly(contract.max_t_per_month, share, months, bound="max", span=span, used_t=used_t)
    return lo, hi


def pool_month_to_date(scenarios: list[Scenario], contract: SharedContract) -> float | None:
    """The tonnes of the first planned month already moved under ``contract`` at all its
    stations [t] (each scenario's ``month_to_date`` per lane, from its record), or None
    when a station of the contract has no record (the even pace is assumed then)."""
    total = 0.0
    for scn in scenarios:
        rows = [r for r in (*scn.suppliers, *scn.buyers) if covers(contract, r)]
        if not rows:
            continue
        if scn.month_to_date is None:
            return None
        total += sum(float(scn.month_to_date.get(r.lane, 0.0)) for r in rows)
    return total
