"""Forecasts of generation and coal quality, and the sampled futures built from them.

- generation (`reagentplan.timeseries.generation`, re-exported here): per unit, yearly
  season + weekday pattern + persistent deviations from ``generation_history`` (or a
  named fallback when the history is short), around the dispatch plan where
  ``generation`` gives one.
- outages (`reagentplan.timeseries.outages`): forced outages, estimated from off-line
  runs and sampled as an alternating renewal process.
- `coal_quality`: per source, spread and day-to-day persistence of sulfur, ash and HHV
  from ``coal_quality_history`` (or ``sulfur_sd_pct``), mixed by the blend schedule.
- `futures`: `sample_futures` pushes N joint futures through the mass balance and
  returns `Futures`: per day and future, limestone, gypsum, fly ash and bottom ash
  [t], generation [MWh] and blended sulfur [%] as (futures, days) arrays.
- `output`: ``forecast.csv`` (`forecast_frame`) and its notes.
- `backtest`: hold back the last K days of history and score the forecast.

Typical use::

    from reagentplan.forecast import sample_futures, forecast_frame
    futures = sample_futures(scenario, n_futures=1000, seed=1)
    futures.flows["limestone_t"]   # (1000, days) [t]
    forecast_frame(futures)        # long table: date, quantity, p10, p50, p90, mean
"""

from ..timeseries.generation import (MODEL_NAMES, GenerationModel, UnitModel, fit_generation,
                                     fit_unit, median_generation)
from ..timeseries.outages import OutageModel, fit_outages
from .backtest import BacktestResult, backtest, describe_backtest
from .coal_quality import QualityModel, SourceModel, fit_quality
from .futures import FLOWS, ForecastModel, Futures, fit_forecast, sample_futures
from .output import (FORECAST_COLUMNS, FORECAST_QUANTITIES, describe_forecast, forecast_frame,
                     horizon_totals, notes_text)

__all__ = [
    "BacktestResult", "backtest", "describe_backtest",
    "QualityModel", "SourceModel", "fit_quality",
    "FLOWS", "ForecastModel", "Futures", "fit_forecast", "sample_futures",
    "MODEL_NAMES", "GenerationModel", "UnitModel", "fit_generation", "fit_unit",
    "median_generation",
    "OutageModel", "fit_outages",
    "FORECAST_COLUMNS", "FORECAST_QUANTITIES", "describe_forecast", "forecast_frame",
    "horizon_totals", "notes_text",
]
