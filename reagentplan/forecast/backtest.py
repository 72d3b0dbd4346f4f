"""Backtest on the user's own history: hold back the last K days, fit on the rest,
forecast the held-back days, and score the forecast.

Scores per series (each unit's generation, the plant total, each coal source's lab
sulfur):

- **coverage**: share of held-back days whose actual value lies in the P10-P90 interval
  [-]; about 0.8 for a calibrated forecast (less over a short window, whose days are
  correlated with one another).
- **MAE** of the median against the actual [MWh/d, %], next to two simple forecasts:
  *seasonal naive* (the same weekday 52 weeks = 364 days earlier, so the weekday
  pattern lines up) and *trailing mean* (mean of the last `TRAILING_DAYS` days before the
  held-back window).  Lab sulfur has no seasonal-naive figure (no yearly season).

References
----------
Hyndman, R. J. and Koehler, A. B. (2006), "Another look at measures of forecast
accuracy", International Journal of Forecasting 22(4):679-688: MAE and the
seasonal-naive benchmark.
Gneiting, T., Balabdaoui, F. and Raftery, A. E. (2007), "Probabilistic forecasts,
calibration and sharpness", J. R. Statist. Soc. B 69(2):243-268: interval coverage.
Tashman, L. J. (2000), "Out-of-sample tests of forecasting accuracy: an analysis and
review", International Journal of Forecasting 16(4):437-450: hold-out evaluation.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import Problem, ScenarioError
from ..scenario import MIN_HISTORY_DAYS, Scenario
from ..timeseries import streams
from ..timeseries.generation import MODEL_NAMES, fit_generation, simulate_generation
from .coal_quality import MIN_SAMPLES, daily_lab_means, fit_source, simulate_source

TRAILING_DAYS = 28
SEASONAL_LAG_DAYS = 364
SUMMARY_COLUMNS = ("series", "quantity", "days", "coverage_p10_p90", "mae_median",
                   "mae_seasonal_naive", "mae_trailing_mean", "model")
DAILY_COLUMNS = ("date", "series", "quantity", "actual", "p10", "p50", "p90",
                 "seasonal_naive", "trailing_mean")


@dataclass(frozen=True)
class BacktestResult:
    """What the backtest found.

    Attributes
    ----------
    holdout_days : int
        K, days held back [d].
    fit_end : pd.Timestamp
        Last generation-history day used for fitting.
    summary : pd.DataFrame
        One row per series, columns `SUMMARY_COLUMNS` (coverage [-], MAE [MWh/d or %]).
    daily : pd.DataFrame
        One row per series and held-back day, columns `DAILY_COLUMNS`.
    """

    holdout_days: int
    fit_end: pd.Timestamp
    summary: pd.DataFrame
    daily: pd.DataFrame


def interval_coverage(actual: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> float:
    """Share [-] of observed ``actual`` values inside [lo, hi]; NaN actuals are skipped."""
    a = np.asarray(actual, dtype=float)
    ok = np.isfinite(a)
    if not ok.any():
        return float("nan")
    return float(np.mean((a[ok] >= lo[ok]) & (a[ok] <= hi[ok])))


def mean_absolute_error(actual: np.ndarray, forecast: np.ndarray) -> float:
    """Mean of |actual − forecast| [unit] over days where both are known."""
    a, f = np.asarray(actual, dtype=float), np.asarray(forecast, dtype=float)
    ok = np.isfinite(a) & np.isfinite(f)
    return float(np.mean(np.abs(a[ok] - f[ok]))) if ok.any() else float("nan")


def seasonal_naive(series: pd.Series, dates: pd.DatetimeIndex, fit_end: pd.Timestamp,
                   lag_days: int = SEASONAL_LAG_DAYS) -> np.ndarray:
    """The value ``lag_days`` before each date [unit], NaN where that day is not in the
    fitting part of ``series``."""
    earlier = dates - pd.Timedelta(days=lag_days)
    known = series[series.index <= fit_end]
    return known.reindex(earlier).to_numpy(dtype=float)


def trailing_mean(series: pd.Series, fit_end: pd.Timestamp, days: int = TRAILING_DAYS) -> float:
    """Mean of ``series`` over the ``days`` days ending at ``fit_end`` [unit]."""
    window = series[(series.index > fit_end - pd.Timedelta(days=days)) & (series.index <= fit_end)]
    return float(window.mean()) if window.notna().any() else float("nan")


def _score(name: str, quantity: str, dates, actual, samples, naive, trail, model: str):
    q = np.quantile(samples, [0.1, 0.5, 0.9], axis=1)
    trail_arr = np.full(len(dates), trail)
    ok = np.isfinite(actual)
    row = {
        "series": name, "quantity": quantity, "days": int(ok.sum()),
        "coverage_p10_p90": interval_coverage(actual, q[0], q[2]),
        "mae_median": mean_absolute_error(actual, q[1]),
        "mae_seasonal_naive": mean_absolute_error(actual, naive),
        "mae_trailing_mean": mean_absolute_error(actual, trail_arr),
        "model": model,
    }
    daily = pd.DataFrame({"date": dates, "series": name, "quantity": quantity, "actual": actual,
                          "p10": q[0], "p50": q[1], "p90": q[2], "seasonal_naive": naive,
                          "trailing_mean": trail_arr})[ok]
    return row, daily


def _check_holdout(scenario: Scenario, k: int) -> pd.DataFrame:
    hist = scenario.generation_history
    if isinstance(k, bool) or int(k) != k or k < 1:
        raise ScenarioError(Problem(None, None, "backtest", f"found {k!r}",
                                    "a whole number of days of at least 1"))
    if hist is None or hist.empty:
        raise ScenarioError(Problem("generation_history", None, None,
                                    "no generation history to hold days back from",
                                    "a 'generation_history' sheet for the backtest"))
    fit_end = hist["date"].max() - pd.Timedelta(days=int(k))
    short = []
    for unit, rows in hist.groupby("unit", sort=False):
        n = int((rows["date"] <= fit_end).sum())
        if n < MIN_HISTORY_DAYS:
            short.append(Problem("generation_history", None, "date",
                                 f"{unit} would keep {n} day(s) to fit on after holding back "
                                 f"{k} day(s)",
                                 f"at least {MIN_HISTORY_DAYS} days left to fit on "
                                 f"(a smaller --backtest, or more history)"))
    if short:
        raise ScenarioError(short)
    return hist


def backtest(scenario: Scenario, holdout_days: int, n_futures: int = 1000, seed: int = 0,
             progress: bool | None = False) -> BacktestResult:
    """Hold back the last ``holdout_days`` [d] of the histories and score their forecast
    (generation [MWh/d] per unit and for the plant, lab sulfur [%] per source).

    ``n_futures`` futures are sampled for the held-back days; ``seed`` as in
    `sample_futures`.

    Generation: every unit's history ends K days earlier; the units are forecast for the
    held-back days with no dispatch plan, jointly, as `sample_futures` does.  Coal
    quality: each source's lab results of the last K days before the latest result are
    held back, and its sulfur forecast is compared with them.

    Raises
    ------
    ScenarioError
        Without generation history, or when K leaves fewer than `MIN_HISTORY_DAYS` days
        to fit on.
    """
    from tqdm import tqdm

    hist = _check_holdout(scenario, holdout_days)
    k = int(holdout_days)
    root = streams.root_sequence(seed)
    last = hist["date"].max()
    fit_end = last - pd.Timedelta(days=k)
    window = pd.date_range(fit_end + pd.Timedelta(days=1), last, freq="D")
    rows, daily = [], []
    units = [u for u in scenario.units if (hist["unit"] == u.unit).any()]
    with tqdm(total=len(units) + len(scenario.coal_sources), desc="backtest", file=sys.stderr,
              disable=(None if progress is None else not progress), leave=False,
              delay=0.5) as bar:
        model = fit_generation(hist[hist["date"] <= fit_end], units, bar)
        plan = pd.DataFrame(np.nan, index=window, columns=[u.unit for u in units])
        sims = simulate_generation(model, window, plan, n_futures, root, np.float64)
        actual = hist.pivot(index="date", columns="unit", values="mwh")
        total_sim = np.zeros((len(window), n_futures))
        for u in units:
            series = actual[u.unit].dropna()
            a = series.reindex(window).to_numpy(dtype=float)
            sim = np.broadcast_to(sims[u.unit], (len(window), n_futures))
            total_sim += sim
            row, day = _score(u.unit, "generation_mwh", window, a, sim,
                              seasonal_naive(series, window, fit_end),
                              trailing_mean(series, fit_end), MODEL_NAMES[model.units[u.unit].kind])
            rows.append(row)
            daily.append(day)
        if len(units) > 1:
            table = actual[[u.unit for u in units]]
            total = table.sum(axis=1, min_count=len(units))
            a = total.reindex(window).to_numpy(dtype=float)
            kinds = {model.units[u.unit].kind for u in units}
            row, day = _score("plant", "generation_mwh", window, a, total_sim,
                              seasonal_naive(total.dropna(), window, fit_end),
                              trailing_mean(total.dropna(), fit_end),
                              "sum of the units" + ("" if kinds == {"seasonal"} else
                                                    " (on fallback models)" if "seasonal" not in kinds
                                                    else " (some on a fallback model)"))
            rows.append(row)
            daily.append(day)
        labs = scenario.coal_quality_history
        for i, s in enumerate(scenario.coal_sources):
            bar.update(1)
            samples = labs[labs["source"] == s.source] if labs is not None else None
            if samples is None or samples["sulfur_pct"].notna().sum() == 0:
                continue
            q_end = samples["date"].max() - pd.Timedelta(days=k)
            before = samples[samples["date"] <= q_end]
            if before["sulfur_pct"].notna().sum() < MIN_SAMPLES:
                continue
            src = fit_source(s, before)
            q_window = pd.date_range(q_end + pd.Timedelta(days=1), samples["date"].max(), freq="D")
            sim = simulate_source(src, q_window, n_futures, root, i, dtype=np.float64)["sulfur_pct"]
            sim = np.broadcast_to(sim, (len(q_window), n_futures))
            lab = daily_lab_means(samples)["sulfur_pct"]
            a = lab.reindex(q_window).to_numpy(dtype=float)
            row, day = _score(f"sulfur {s.source}", "sulfur_pct", q_window, a, sim,
                              np.full(len(q_window), np.nan), trailing_mean(lab, q_end),
                              "lab results, AR(1) around their recent level")
            rows.append(row)
            daily.append(day)
    summary = pd.DataFrame(rows, columns=list(SUMMARY_COLUMNS))
    days = (pd.concat(daily, ignore_index=True) if daily
            else pd.DataFrame(columns=list(DAILY_COLUMNS)))
    return BacktestResult(k, fit_end, summary, days[list(DAILY_COLUMNS)])


def describe_backtest(result: BacktestResult) -> str:
    """The terminal summary of a backtest: coverage [%] and MAE [MWh/d, % S] per series."""
    lines = [f"Backtest: the last {result.holdout_days} day(s) held back (fitted on history to "
             f"{result.fit_end:%Y-%m-%d}); P10-P90 should cover about 80 % of days.",
             f"  {'series':40} {'days':>5} {'P10-P90':>8} {'MAE median':>12} "
             f"{'seas. naive':>12} {'trail. mean':>12}"]
    for r in result.summary.itertuples():
        fmt = "{:>12.3f}" if r.quantity == "sulfur_pct" else "{:>12,.0f}"

        def show(v):
            return f"{'n/a':>12}" if not np.isfinite(v) else fmt.format(v)

        cov = "n/a" if not np.isfinite(r.coverage_p10_p90) else f"{100 * r.coverage_p10_p90:.0f} %"
        lines.append(f"  {r.series[:40]:40} {r.days:>5} {cov:>8} {show(r.mae_median)} "
                     f"{show(r.mae_seasonal_naive)} {show(r.mae_trailing_mean)}")
    fallbacks = sorted({r.model for r in result.summary.itertuples() if "fallback" in r.model})
    for f in fallbacks:
        lines.append(f"  model used: {f}")
    return "\n".join(lines)
