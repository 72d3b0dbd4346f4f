"""Invented records with known factors, for the calibration tests.

The minimal station (helpers.minimal_sheets: Ca/S 1.03, 10 % cake moisture, 80 % fly
ash share in its workbook) really runs at `TRUE`: its stores move with the balance of
the true factors on the recorded generation (the package's own `past_balance`, the path
`plan --db` rolls stores with), the recorded trains and haul-outs are weighed exactly,
and every store is surveyed weekly with a relative error.
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pandas as pd

from reagentplan.record.asof import RecordFrames, past_balance
from reagentplan.scenario import Scenario
from reagentplan.schema import STORE_FLOW_COLUMN

from helpers import START

#: The factors the invented plant really runs at.
TRUE = {"ca_s_ratio": 1.09, "gypsum_moisture_pct": 12.0, "fly_ash_share_pct": 84.0}
#: Opening levels of the stores on the first survey day [t].
OPENING = {"limestone": 2500.0, "gypsum": 1000.0, "fly_ash": 600.0, "bottom_ash": 300.0}


def true_scenario(scenario: Scenario, true: dict = TRUE) -> Scenario:
    plant = {k: v for k, v in true.items() if hasattr(scenario.plant, k)}
    scrub = {k: v for k, v in true.items() if k not in plant}
    return dataclasses.replace(scenario, plant=dataclasses.replace(scenario.plant, **plant),
                               scrubber=dataclasses.replace(scenario.scrubber, **scrub))


def empty_frames() -> dict[str, pd.DataFrame]:
    return {
        "surveys": pd.DataFrame(columns=["date", "store", "level_t", "method", "note"]),
        "arrivals": pd.DataFrame(columns=["date", "supplier", "mode", "loads", "tonnes", "ticket", "caco3_pct"]),
        "shipments": pd.DataFrame(columns=["date", "party", "material", "mode", "loads", "tonnes", "ticket"]),
        "orders": pd.DataFrame(columns=["order_id", "date", "supplier", "mode", "loads", "tonnes", "status"]),
        "generation": pd.DataFrame(columns=["date", "unit", "mwh"]),
        "labs": pd.DataFrame(columns=["date", "source", "sulfur_pct", "ash_pct", "hhv_mj_per_kg"]),
    }


def movements(first: dt.date, days: int, caco3: bool = False, rng=None):
    """The recorded movements: a 1,000 t train every other Monday (optionally with a lab
    result), Board Co's four 25 t trucks of gypsum on weekdays and the landfill's
    Saturday gypsum, Sunday fly ash and bottom ash."""
    rng = rng or np.random.default_rng(0)
    arr, shp = [], []
    for i in range(days):
        d = pd.Timestamp(first + dt.timedelta(days=i))
        if d.day_of_week == 0 and (i // 7) % 2 == 0:
            arr.append({"date": d, "supplier": "Quarry Q", "mode": "rail", "loads": 1,
                        "tonnes": float(round(rng.uniform(960, 1040), 1)), "ticket": f"T-{i}",
                        "caco3_pct": float(round(rng.normal(92.0, 1.0), 2)) if caco3 else np.nan})
        if d.day_of_week < 5:
            shp.append({"date": d, "party": "Board Co", "material": "gypsum", "mode": "truck", "loads": 4,
                        "tonnes": 100.0, "ticket": f"B-{i}"})
        if d.day_of_week == 5:
            shp.append({"date": d, "party": "Cell 1", "material": "gypsum", "mode": None, "loads": None,
                        "tonnes": 300.0, "ticket": f"LG-{i}"})
        if d.day_of_week == 6:
            shp.append({"date": d, "party": "Cell 1", "material": "fly_ash", "mode": None, "loads": None,
                        "tonnes": 560.0, "ticket": f"LF-{i}"})
            shp.append({"date": d, "party": "Cell 1", "material": "bottom_ash", "mode": None, "loads": None,
                        "tonnes": 110.0, "ticket": f"LB-{i}"})
    a = pd.DataFrame(arr, columns=empty_frames()["arrivals"].columns)
    s = pd.DataFrame(shp, columns=empty_frames()["shipments"].columns)
    return a, s


def true_levels(scenario: Scenario, frames: RecordFrames, first: dt.date, days: int,
                true: dict = TRUE) -> pd.DataFrame:
    """Each store's true level at the end of every day, day 0 = ``first`` (the opening),
    with the truth's balance on the recorded generation and the recorded movements."""
    bal = past_balance(true_scenario(scenario, true), frames, first + dt.timedelta(days=1),
                       first + dt.timedelta(days=days))
    idx = pd.date_range(first, periods=days + 1, freq="D")
    out = {}
    for store, level0 in OPENING.items():
        flow = np.r_[0.0, bal[STORE_FLOW_COLUMN[store]].to_numpy(float)]
        if store == "limestone":
            moved = frames.arrivals.groupby("date")["tonnes"].sum().reindex(idx, fill_value=0.0).to_numpy(float)
            out[store] = level0 + np.cumsum(moved - flow)
        else:
            s = frames.shipments[frames.shipments["material"] == store]
            moved = s.groupby("date")["tonnes"].sum().reindex(idx, fill_value=0.0).to_numpy(float)
            out[store] = level0 + np.cumsum(flow - moved)
    return pd.DataFrame(out, index=idx)


def synthetic_record(scenario: Scenario, weeks: int = 10, survey_sd: float = 0.007, seed: int = 1,
                     caco3: bool = False, survey_every: int = 7, stores=tuple(OPENING),
                     true: dict = TRUE, last: dt.date | None = None) -> RecordFrames:
    """``weeks`` weeks of facts ending on ``last`` (default: the day before the
    workbook's start): daily generation near 2,500 MWh, the movements above, and every
    ``survey_every`` days a survey of each of ``stores`` off by a normal relative error
    of standard deviation ``survey_sd`` [-]."""
    rng = np.random.default_rng(seed)
    days = 7 * weeks
    last = last or START - dt.timedelta(days=1)
    first = last - dt.timedelta(days=days)
    idx = pd.date_range(first, last, freq="D")
    mwh = 2500 * (1 + 0.15 * np.sin(np.arange(len(idx)) / 5.0)) * rng.normal(1.0, 0.04, len(idx))
    gen = pd.DataFrame({"date": idx, "unit": "U1", "mwh": np.round(np.minimum(mwh, 4800), 1)})
    arr, shp = movements(first, days + 1, caco3=caco3, rng=rng)
    f = empty_frames()
    frames = RecordFrames(f["surveys"], arr, shp, f["orders"], gen, f["labs"])
    truth = true_levels(scenario, frames, first, days, true)
    rows = []
    for i in range(0, days + 1, survey_every):
        for store in stores:
            level = truth[store].iloc[i] * (1 + rng.normal(0.0, survey_sd))
            rows.append({"date": idx[i], "store": store, "level_t": float(round(level, 1)), "method": "survey",
                         "note": None})
    surveys = pd.DataFrame(rows, columns=f["surveys"].columns)
    return dataclasses.replace(frames, surveys=surveys)


def record_sheets_of(frames: RecordFrames) -> dict[str, pd.DataFrame]:
    """The frames as record sheets (for `write_record_workbook`)."""
    arr = frames.arrivals.copy()
    if arr["caco3_pct"].isna().all():
        arr = arr.drop(columns="caco3_pct")
    return {"stock_surveys": frames.surveys.drop(columns=["note"]), "arrivals": arr,
            "shipments": frames.shipments, "generation_history": frames.generation}
