"""Generation forecast per unit, from the ``generation_history`` sheet.

Daily energy is modelled as a load factor (MWh / (capacity × 24 h)) [-]:

    on line:  lf[t] = weekday[t] + season[t] + e[t],    e = AR(p) noise
    off line: 0, in forced outages sampled as in `reagentplan.timeseries.outages`

- **season**: Fourier terms of the calendar year (order 1-4, chosen by BIC), and
  **weekday**: one level per day of the week; together a linear regression (OLS) on the
  days on line, built with statsmodels' deterministic terms.
- **e**: the regression's residual, an AR(p) (p = 1-3 by AIC) fitted with the Kalman
  filter over the on-line days (outage days are missing, not filled), so the forecast
  carries the latest deviation forward and lets it fade.
- The first day back after an outage runs at the history's median restart share.

The model steps down when the history is short, and says so in its note:

| history | model |
| --- | --- |
| >= 2 years (>= 365 days on line) | yearly season + weekday + AR |
| >= 8 weeks (>= 28 days on line) | weekday + AR, no yearly season (fallback) |
| >= 14 days (>= 7 on line) | level and spread only (fallback) |
| fewer than 7 days on line | 0 MWh (the unit was off line) |

Where the ``generation`` sheet gives a dispatch plan, the plan is the median on-line
output and the history supplies the spread (the same AR noise, centred on the plan) and
the forced outages.  Output never exceeds capacity × 24 h, nor goes below zero.

References
----------
Hyndman, R. J. and Athanasopoulos, G. (2021), *Forecasting: Principles and Practice*,
3rd ed., OTexts, §10.5 "Dynamic harmonic regression" (Fourier terms with ARMA errors)
and §7.4 (seasonal dummy variables).
Box, G. E. P., Jenkins, G. M., Reinsel, G. C. and Ljung, G. M. (2015), *Time Series
Analysis: Forecasting and Control*, 5th ed., Wiley: AR models.
Schwarz, G. (1978), "Estimating the dimension of a model", Ann. Statist. 6:461-464 (BIC).
statsmodels documentation: ``statsmodels.tsa.deterministic.CalendarFourier``,
``CalendarSeasonality``; ``statsmodels.regression.linear_model.OLS``.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..scenario import Scenario, Unit
from . import streams
from .memo import per_scenario
from .noise import (ARNoise, correlate, fit_ar_noise, noise_mean_sd, simulate_noise,
                    white_noise)
from .outages import (NO_OUTAGES, OFF_LINE_LOAD_FACTOR, OutageModel, fit_outages,
                      off_line_probability, simulate_outages)

#: History needed for a yearly season [d]: two cycles, so season and level separate.
SEASON_MIN_DAYS = 730
#: History needed for a weekday pattern with persistence [d]: eight weeks.
WEEKLY_MIN_DAYS = 56
#: Days on line needed by each model [d].
MIN_ON_LINE = {"seasonal": 365, "weekly": 28, "level": 7}
MAX_FOURIER_ORDER = 4
MAX_AR_ORDER = 3
#: A history ending longer ago than this before the start has no say on the first days
#: (its last deviation and outage state are forgotten) [d].
MAX_LEAD_DAYS = 366
#: Complete days of innovations needed to estimate the correlation between units.
MIN_CORRELATION_DAYS = 30

MODEL_NAMES = {
    "seasonal": "yearly season + weekday pattern + persistence",
    "weekly": "weekday profile + persistence, no yearly season "
              "(fallback: less than two years of history)",
    "level": "mean level and day-to-day spread only "
             "(fallback: less than eight weeks of history)",
    "off": "0 MWh (fallback: the unit was off line for nearly all of its history)",
}


@dataclass(frozen=True)
class UnitModel:
    """The fitted generation model of one unit.

    Attributes
    ----------
    unit : str
    capacity_mwh : float
        Capacity × 24 h [MWh/d].
    kind : str
        ``seasonal``, ``weekly``, ``level`` or ``off`` (see `MODEL_NAMES`).
    fourier_order : int
        Harmonics of the year in the season (0 without a season).
    params : np.ndarray
        Regression coefficients on `design_terms` [-, load factor].
    noise : ARNoise
        Deviation from the regression [-, load factor]; its start state is the day after
        the last history day.
    outages : OutageModel
    restart_share : float
        Output of the first day back on line, as a share of the usual [-].
    first_day, last_day : pd.Timestamp
        The history used.
    days_on_line : int
        Days that entered the regression [d].
    innovations : pd.Series
        Standardised one-step errors of the noise fit [-], by date (for correlations).
    """

    unit: str
    capacity_mwh: float
    kind: str
    fourier_order: int
    params: np.ndarray
    noise: ARNoise
    outages: OutageModel
    restart_share: float
    first_day: pd.Timestamp
    last_day: pd.Timestamp
    days_on_line: int
    innovations: pd.Series

    @property
    def history_days(self) -> int:
        return (self.last_day - self.first_day).days + 1

    @property
    def name(self) -> str:
        return MODEL_NAMES[self.kind]

    @property
    def fallback(self) -> bool:
        return self.kind != "seasonal"

    def describe(self) -> str:
        """One line for the notes: model, persistence, spread, outages."""
        text = f"{self.name}; {self.history_days} days of history to {self.last_day:%Y-%m-%d}"
        if self.kind == "off":
            return text
        if self.kind == "seasonal":
            text += f"; season with {self.fourier_order} harmonic(s) of the year"
        text += (f"; {self.noise.describe()}, day-to-day spread "
                 f"{100 * self.noise.stationary_sd:.1f} % of capacity")
        text += f"; {self.outages.describe()}"
        if self.restart_share < 0.995:
            text += f"; first day back at {100 * self.restart_share:.0f} % of the usual"
        return text


@dataclass(frozen=True)
class GenerationModel:
    """Fitted models of the units that have history, and the correlation of their
    day-to-day deviations.

    Attributes
    ----------
    units : dict[str, UnitModel]
    correlation : np.ndarray (k, k)
        Correlation of the innovations [-] of the units in ``correlated`` order.
    correlated : tuple[str, ...]
        Units whose deviations are sampled jointly (those with a non-zero spread).
    """

    units: dict[str, UnitModel]
    correlation: np.ndarray
    correlated: tuple[str, ...]

    def describe_correlation(self) -> str | None:
        k = len(self.correlated)
        if k < 2:
            return None
        pairs = [f"{self.correlated[i]}/{self.correlated[j]} {self.correlation[i, j]:+.2f}"
                 for i in range(k) for j in range(i + 1, k)]
        return "correlation of the units' day-to-day deviations: " + ", ".join(pairs)


# --------------------------------------------------------------------------- terms


def design_terms(dates: pd.DatetimeIndex, kind: str, fourier_order: int = 0) -> np.ndarray:
    """Regression terms for ``dates`` [-]: weekday dummies (7 columns) and, for the
    ``seasonal`` kind, sine/cosine pairs of the calendar year; a constant for ``level``.

    The terms depend on the calendar date only, so the same call serves the history and
    any future days.

    References
    ----------
    statsmodels deterministic terms ``CalendarSeasonality("D", "W")`` and
    ``CalendarFourier("YE", order)``; Hyndman and Athanasopoulos (2021) §7.4, §10.5.
    """
    from statsmodels.tsa.deterministic import CalendarFourier, CalendarSeasonality

    index = pd.DatetimeIndex(dates)
    if kind in ("level", "off"):
        return np.ones((len(index), 1))
    terms = [CalendarSeasonality("D", "W")]
    if kind == "seasonal" and fourier_order > 0:
        terms.append(CalendarFourier("YE", fourier_order))
    # each term on its own: a DeterministicProcess would drop the weekday columns a
    # short span of dates happens not to contain
    return np.hstack([t.in_sample(index).to_numpy(dtype=float) for t in terms])


def expected_load_factor(model: UnitModel, dates: pd.DatetimeIndex) -> np.ndarray:
    """Usual on-line load factor on ``dates`` [-] (regression part, no deviation)."""
    if model.kind == "off":
        return np.zeros(len(dates))
    return design_terms(dates, model.kind, model.fourier_order) @ model.params


# --------------------------------------------------------------------------- fit


def _choose_kind(history_days: int, fit_days: int) -> str:
    if history_days >= SEASON_MIN_DAYS and fit_days >= MIN_ON_LINE["seasonal"]:
        return "seasonal"
    if history_days >= WEEKLY_MIN_DAYS and fit_days >= MIN_ON_LINE["weekly"]:
        return "weekly"
    if fit_days >= MIN_ON_LINE["level"]:
        return "level"
    return "off"


def fit_unit(mwh: pd.Series, unit: str, capacity_mw: float) -> UnitModel:
    """Fit one unit's model.

    Parameters
    ----------
    mwh : daily net generation [MWh], indexed by consecutive dates (the loader rejects
        gaps, duplicates and negative values).
    capacity_mw : net capacity [MW].

    Returns
    -------
    UnitModel
    """
    import statsmodels.api as sm

    mwh = mwh.sort_index()
    dates = pd.DatetimeIndex(mwh.index)
    cap = float(capacity_mw) * 24.0
    lf = np.clip(mwh.to_numpy(dtype=float) / cap, 0.0, 1.0)
    n = len(lf)
    off = lf < OFF_LINE_LOAD_FACTOR
    restart = np.zeros(n, dtype=bool)
    restart[1:] = off[:-1] & ~off[1:]
    fit = ~off & ~restart
    kind = _choose_kind(n, int(fit.sum()))
    if kind == "off":
        return UnitModel(unit, cap, "off", 0, np.zeros(1), white_noise(0.0), NO_OUTAGES, 1.0,
                         dates[0], dates[-1], int(fit.sum()), pd.Series(dtype=float))

    orders = range(1, MAX_FOURIER_ORDER + 1) if kind == "seasonal" else [0]
    best = None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for k in orders:
            x = design_terms(dates, kind, k)
            res = sm.OLS(lf[fit], x[fit]).fit()
            if best is None or res.bic < best[1].bic:
                best = (k, res, x)
    order, ols, x = best
    fitted = x @ ols.params
    resid = np.where(fit, lf - fitted, np.nan)
    if kind == "level":
        noise, innov = fit_ar_noise(resid, order=0)
    else:
        noise, innov = fit_ar_noise(resid, max_order=MAX_AR_ORDER)
    back = np.flatnonzero(restart)
    shares = lf[back] / np.where(fitted[back] > 0, fitted[back], np.nan)
    shares = shares[np.isfinite(shares)]
    share = float(np.clip(np.median(shares), 0.0, 1.0)) if len(shares) >= 2 else 1.0
    return UnitModel(unit, cap, kind, order, np.asarray(ols.params, dtype=float), noise,
                     fit_outages(lf), share, dates[0], dates[-1], int(fit.sum()),
                     pd.Series(innov, index=dates))


def fit_generation(history: pd.DataFrame | None, units: Sequence[Unit],
                   progress=None) -> GenerationModel:
    """Fit every unit that has rows in ``history`` (date, unit, mwh [MWh]).

    ``progress`` is an optional tqdm bar, advanced once per unit.
    """
    models: dict[str, UnitModel] = {}
    if history is not None and len(history):
        for u in units:
            rows = history[history["unit"] == u.unit]
            if len(rows):
                series = pd.Series(rows["mwh"].to_numpy(dtype=float),
                                   index=pd.DatetimeIndex(rows["date"]))
                models[u.unit] = fit_unit(series, u.unit, u.capacity_mw)
            if progress is not None:
                progress.update(1)
    correlated = tuple(name for name, m in models.items() if m.noise.sigma > 0)
    corr = np.eye(len(correlated))
    if len(correlated) > 1:
        table = pd.concat([models[n].innovations.rename(n) for n in correlated], axis=1).dropna()
        if len(table) >= MIN_CORRELATION_DAYS:
            corr = np.corrcoef(table.to_numpy().T)
    return GenerationModel(models, corr, correlated)


@per_scenario(lambda scenario: len(scenario.units))
def fit_scenario_generation(scenario: Scenario, progress=None) -> GenerationModel:
    """`fit_generation` on the scenario's history [MWh] and units (remembered per
    scenario)."""
    return fit_generation(scenario.generation_history, scenario.units, progress)


# --------------------------------------------------------------------------- horizon


@dataclass(frozen=True)
class _Timing:
    lead: int          # history days simulated before the start (0 when forgotten)
    noise: ARNoise     # start state at the first simulated day
    start_off: bool    # an outage running at the end of the history carries on


def _timing(model: UnitModel, start: pd.Timestamp, first_day_planned: bool) -> _Timing:
    gap = (start - model.last_day).days - 1
    if gap > MAX_LEAD_DAYS:
        return _Timing(0, model.noise.forgotten(), False)
    return _Timing(gap, model.noise, not first_day_planned)


def median_generation(scenario: Scenario, model: GenerationModel | None = None) -> pd.DataFrame:
    """Generation [MWh] per (date × unit) for every horizon day: the dispatch plan where
    the ``generation`` sheet gives it, else the forecast's median.

    The median of a forecast day is the usual on-line output plus the expected remains
    of the last deviation, clipped to [0, capacity × 24 h]; it is 0 on days the unit is
    more likely off line than on (an outage running at the end of the history).  No
    model is fitted when the plan covers every day.
    """
    table = scenario.generation_matrix()
    if not table.isna().to_numpy().any():
        return table
    if model is None:
        model = fit_scenario_generation(scenario)
    dates = scenario.dates
    for u in table.columns:
        gaps = table[u].isna().to_numpy()
        if not gaps.any():
            continue
        m = model.units.get(u)
        if m is None:  # the loader demands history for every unit the plan leaves open
            table[u] = table[u].fillna(0.0)
            continue
        timing = _timing(m, dates[0], not gaps[0])
        n = timing.lead + len(dates)
        mean, _ = noise_mean_sd(timing.noise, n)
        p_off = off_line_probability(m.outages, n, timing.start_off)[timing.lead:]
        lf = np.clip(expected_load_factor(m, dates) + mean[timing.lead:], 0.0, 1.0)
        median = np.where(p_off >= 0.5, 0.0, lf) * m.capacity_mwh
        table.loc[gaps, u] = median[gaps]
    return table


def plan_basis(scenario: Scenario) -> np.ndarray:
    """Per horizon day [-]: ``plan`` (every unit's generation [MWh] given), ``forecast``
    (none given) or ``plan+forecast``."""
    given = scenario.generation_matrix().notna().to_numpy()
    return np.where(given.all(axis=1), "plan", np.where(given.any(axis=1), "plan+forecast",
                                                         "forecast"))


@dataclass(frozen=True)
class _UnitPlan:
    """What sampling one unit on given days needs, computed once for all blocks."""

    unit: str
    index: int            # the unit's column in the plan (names its random streams)
    model: UnitModel
    timing: _Timing
    offset: np.ndarray    # (days,) on-line median load factor less the noise's mean [-]
    zero: np.ndarray      # (days,) bool: forced to 0 (planned off, or an 'off' unit)


@dataclass(frozen=True)
class GenerationSampler:
    """Sampling of every unit's generation on ``dates``: `generation_sampler` prepares
    it once, `sample_generation` draws blocks of futures from it.

    Attributes
    ----------
    dates : pd.DatetimeIndex
    fixed : dict[str, np.ndarray]
        Units without a model: their dispatch plan, (days,) [MWh].
    units : tuple[_UnitPlan, ...]
    joint : tuple[str, ...]
        Units whose innovations are drawn together, correlated by ``correlation``.
    correlation : np.ndarray
    grid_lead : int
        Days before the start on the common calendar grid of the joint innovations [d].
    """

    dates: pd.DatetimeIndex
    fixed: dict[str, np.ndarray]
    units: tuple[_UnitPlan, ...]
    joint: tuple[str, ...]
    correlation: np.ndarray
    grid_lead: int


def generation_sampler(model: GenerationModel, dates: pd.DatetimeIndex,
                       plan: pd.DataFrame) -> GenerationSampler:
    """Prepare the sampling of generation on ``dates``.

    Parameters
    ----------
    plan : (date × unit) dispatch plan [MWh], NaN on days to forecast; its columns are
        the units.  Units without a model must be fully planned: they are held at the
        plan.
    """
    start = pd.Timestamp(dates[0])
    plan_np = plan.reindex(index=dates).to_numpy(dtype=float)
    fixed: dict[str, np.ndarray] = {}
    units: list[_UnitPlan] = []
    for j, u in enumerate(plan.columns):
        m = model.units.get(u)
        col = plan_np[:, j]
        planned = ~np.isnan(col)
        if m is None or (m.kind == "off" and planned.all()):
            fixed[u] = np.nan_to_num(col, nan=0.0)
            continue
        timing = _timing(m, start, bool(planned[0]))
        mean, _ = noise_mean_sd(timing.noise, timing.lead + len(dates))
        mean = mean[timing.lead:]
        offset = np.where(planned, col / m.capacity_mwh - mean, expected_load_factor(m, dates))
        zero = (planned & (col == 0)) | (~planned if m.kind == "off" else np.zeros_like(planned))
        units.append(_UnitPlan(u, j, m, timing, offset, zero))
    names = {p.unit for p in units}
    joint = tuple(u for u in model.correlated if u in names)
    idx = [model.correlated.index(u) for u in joint]
    corr = model.correlation[np.ix_(idx, idx)]
    lead = max([p.timing.lead for p in units if p.unit in joint], default=0)
    return GenerationSampler(pd.DatetimeIndex(dates), fixed, tuple(units), joint, corr, lead)


def sample_generation(sampler: GenerationSampler, n_futures: int, root: np.random.SeedSequence,
                      block: int = 0, dtype=np.float32) -> dict[str, np.ndarray]:
    """Draw one block of sampled generation per modelled unit [MWh], time-major.

    ``block`` names the block's random streams: the same (root, block, n_futures) always
    gives the same draws.  Units without a model are in ``sampler.fixed``.

    Returns
    -------
    dict unit -> (days, futures) array [MWh].
    """
    dtype = np.dtype(dtype).type
    n_days = len(sampler.dates)
    shocks = None
    if sampler.joint:
        shocks = streams.standard_normal(
            streams.stream(root, streams.GENERATION_SHOCKS, 0, block),
            (len(sampler.joint), sampler.grid_lead + n_days, n_futures), dtype)
        correlate(shocks, sampler.correlation)
    out: dict[str, np.ndarray] = {}
    for p in sampler.units:
        m, timing = p.model, p.timing
        n = timing.lead + n_days
        if p.unit in sampler.joint:
            k = sampler.joint.index(p.unit)
            start = streams.stream(root, streams.GENERATION_START, p.index, block)
            e = simulate_noise(timing.noise, shocks[k, sampler.grid_lead - timing.lead:],
                               start.standard_normal((n_futures, timing.noise.start_mean.size)),
                               overwrite=True)
        else:
            e = np.zeros((n, n_futures), dtype=dtype)
        lf = e[timing.lead:]
        lf += p.offset[:, None].astype(dtype)
        np.clip(lf, 0.0, 1.0, out=lf)
        if m.outages.failure_prob > 0 or m.outages.off_at_end:
            rng = streams.stream(root, streams.OUTAGES, p.index, block)
            off, restart = simulate_outages(m.outages, rng, n, n_futures, timing.start_off)
            off, restart = off[timing.lead:], restart[timing.lead:]
            if m.restart_share < 1:
                hit = np.nonzero(restart)
                lf[hit] *= dtype(m.restart_share)
            np.copyto(lf, 0.0, where=off)
        lf[p.zero] = 0.0
        lf *= dtype(m.capacity_mwh)
        out[p.unit] = lf
    return out


def simulate_generation(model: GenerationModel, dates: pd.DatetimeIndex, plan: pd.DataFrame,
                        n_futures: int, root: np.random.SeedSequence,
                        dtype=np.float32) -> dict[str, np.ndarray]:
    """Sampled generation per unit [MWh], time-major, in one block.

    Returns
    -------
    dict unit -> (days, futures) array, or (days, 1) for a unit held at its plan.
    """
    sampler = generation_sampler(model, dates, plan)
    out = sample_generation(sampler, n_futures, root, 0, dtype)
    out.update({u: g[:, None] for u, g in sampler.fixed.items()})
    return out
