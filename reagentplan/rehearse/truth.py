"""The world a rehearsal plays against: one sampled future's daily limestone use and
byproduct production taken as the truth, and the disturbances of carrying a plan out
(a late train, a buyer taking part of a load, a survey that is off).

All functions are pure: the randomness comes from a `numpy.random.Generator` passed in,
so the same seed gives the same world and the same disturbances.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..schema import STORE_FLOW_COLUMN

#: Which balance quantity a store's true daily flow is [t/d].
TRUE_FLOWS = STORE_FLOW_COLUMN


@dataclass(frozen=True)
class Disturbances:
    """How the world departs from the plan (common practice, no source: values a
    coordinator would call ordinary).

    Attributes
    ----------
    late_chance : chance that a booked train (rail load) arrives late [-]
    late_max_days : a late train is 1 to this many days late, uniformly [d]
    partial_chance : chance that a buyer's planned day of loads is taken only in part [-]
    partial_share : share of the planned loads such a buyer takes [-]
    survey_sd : relative standard deviation of a pile survey [-]
    """

    late_chance: float = 0.3
    late_max_days: int = 2
    partial_chance: float = 0.1
    partial_share: float = 0.5
    survey_sd: float = 0.015

    def as_dict(self) -> dict:
        return {"late_chance": self.late_chance, "late_max_days": self.late_max_days,
                "partial_chance": self.partial_chance, "partial_share": self.partial_share,
                "survey_sd": self.survey_sd}


@dataclass(frozen=True)
class World:
    """One future taken as the truth: ``flows[store]`` is the store's true daily use
    (limestone) or production (byproducts) [t/d] on ``dates``."""

    index: int
    dates: pd.DatetimeIndex
    flows: dict[str, np.ndarray]

    def day(self, date: pd.Timestamp) -> int:
        return int(self.dates.get_loc(pd.Timestamp(date)))


def worlds_from_futures(futures, stores) -> list[World]:
    """One `World` per sampled future of a `reagentplan.forecast.Futures` [t/d]."""
    out = []
    for k in range(futures.n_futures):
        flows = {s: np.asarray(futures.flows[q][k], dtype=float) for s, q in TRUE_FLOWS.items()
                 if s in stores and q in futures.flows}
        out.append(World(k, futures.dates, flows))
    return out


def train_delay(rng: np.random.Generator, d: Disturbances) -> int:
    """Days a booked train arrives after its planned day [d]: 0, or 1 to
    ``late_max_days`` with chance ``late_chance``."""
    if d.late_max_days <= 0 or rng.random() >= d.late_chance:
        return 0
    return int(rng.integers(1, d.late_max_days + 1))


def partial_take(rng: np.random.Generator, loads: int, d: Disturbances) -> int:
    """Loads a buyer really takes of ``loads`` planned on a day [loads]."""
    if loads <= 0 or rng.random() >= d.partial_chance:
        return loads
    return int(np.floor(loads * d.partial_share))


def surveyed(rng: np.random.Generator, level_t: float, d: Disturbances) -> float:
    """A survey of a pile holding ``level_t`` [t]: off by a normal relative error of
    ``survey_sd``, never below zero, rounded to 10 t as a survey is [t]."""
    return float(round(max(level_t * (1.0 + rng.normal(0.0, d.survey_sd)), 0.0), -1))
