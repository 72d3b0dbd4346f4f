"""The forecast as tables and text: ``forecast.csv`` (DESIGN §6) and its notes.

References
----------
Hyndman, R. J. and Fan, Y. (1996), "Sample quantiles in statistical packages", The
American Statistician 50(4):361-365: quantiles are their type 7 (numpy's "linear").
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .futures import Futures

#: Quantities of ``forecast.csv``, plant totals (sulfur: the blend of the day).
FORECAST_QUANTITIES = ("generation_mwh", "sulfur_pct", "limestone_t", "gypsum_wet_t",
                       "fly_ash_t", "bottom_ash_t")
#: Columns of ``forecast.csv``: the contract's, then ``basis`` (where generation comes
#: from that day: ``plan``, ``forecast`` or ``plan+forecast``).
FORECAST_COLUMNS = ("date", "quantity", "p10", "p50", "p90", "mean", "basis")

_UNITS = {"generation_mwh": "MWh", "sulfur_pct": "%", "limestone_t": "t", "gypsum_wet_t": "t",
          "fly_ash_t": "t", "bottom_ash_t": "t"}
_LABELS = {"generation_mwh": "generation", "sulfur_pct": "coal sulfur (blend)",
           "limestone_t": "limestone used", "gypsum_wet_t": "gypsum made (wet)",
           "fly_ash_t": "fly ash collected", "bottom_ash_t": "bottom ash"}


def forecast_frame(futures: Futures) -> pd.DataFrame:
    """``forecast.csv``: one row per (date, quantity), with P10, P50, P90 and the mean
    across futures [MWh/d, %, t/d].

    Rows are in date order, and within a date in `FORECAST_QUANTITIES` order.
    """
    parts = []
    for k, name in enumerate(FORECAST_QUANTITIES):
        x = futures.flows[name]
        q = np.quantile(x, [0.1, 0.5, 0.9], axis=0)
        parts.append(pd.DataFrame({
            "date": futures.dates, "quantity": name, "p10": q[0], "p50": q[1], "p90": q[2],
            "mean": x.mean(axis=0, dtype=np.float64), "basis": futures.basis, "_k": k}))
    frame = pd.concat(parts, ignore_index=True).sort_values(["date", "_k"], kind="stable")
    return frame.drop(columns="_k").reset_index(drop=True)[list(FORECAST_COLUMNS)]


def horizon_totals(futures: Futures) -> pd.DataFrame:
    """Per quantity: P10, P50, P90 across futures of the horizon total [MWh, t] (for
    sulfur, of the horizon's mean blend [%])."""
    rows = []
    for name in FORECAST_QUANTITIES:
        x = futures.flows[name].astype(np.float64)
        per_future = x.mean(axis=1) if name == "sulfur_pct" else x.sum(axis=1)
        q = np.quantile(per_future, [0.1, 0.5, 0.9])
        rows.append({"quantity": name, "p10": q[0], "p50": q[1], "p90": q[2]})
    return pd.DataFrame(rows)


def describe_forecast(futures: Futures) -> str:
    """The terminal summary: the models used, then the horizon totals [MWh, t] and mean
    blended sulfur [%]."""
    d = futures.dates
    lines = [f"Forecast: {futures.n_futures:,} futures x {futures.n_days} days "
             f"({d[0]:%Y-%m-%d} to {d[-1]:%Y-%m-%d}), seed {futures.seed}.", "Models:"]
    lines += [f"  - {n}" for n in futures.notes]
    lines.append(f"  {'horizon':24} {'P10':>14} {'P50':>14} {'P90':>14}")
    for r in horizon_totals(futures).itertuples():
        unit = _UNITS[r.quantity]
        label = _LABELS[r.quantity] + (" (mean)" if r.quantity == "sulfur_pct" else "")
        fmt = "{:>14.3f}" if r.quantity == "sulfur_pct" else "{:>14,.0f}"
        lines.append(f"  {label:24} " + " ".join(fmt.format(v) for v in (r.p10, r.p50, r.p90))
                     + f" {unit}")
    return "\n".join(lines)


def notes_text(futures: Futures, extra: list[str] | None = None) -> str:
    """``forecast_notes.txt``: the models behind ``forecast.csv`` (its units: MWh/d, %,
    t/d) and how to read it; ``extra`` lines (the backtest) go at the end."""
    lines = [
        "reagentplan forecast: models and fallbacks",
        "",
        f"futures: {futures.n_futures}; seed: {futures.seed} (the same seed gives the same futures)",
        f"days: {futures.n_days}, {futures.dates[0]:%Y-%m-%d} to {futures.dates[-1]:%Y-%m-%d}",
        "",
        *[f"- {n}" for n in futures.notes],
        "",
        "forecast.csv: p10, p50, p90 and mean across the futures of each day's plant total;",
        "basis says where that day's generation comes from (plan = the generation sheet,",
        "forecast = fitted from generation_history). Totals of p50 over days are not the",
        "p50 of the total.",
    ]
    if extra:
        lines += ["", *extra]
    return "\n".join(lines) + "\n"
