"""Coal-quality futures per source: sulfur, ash and heating value as received.

Where a source has lab results in ``coal_quality_history`` (at least `MIN_SAMPLES`),
each property varies as an AR(1) deviation per day around the lab's recent level: the
mean of the results of the last `RECENT_DAYS` before the latest one.  Its spread and
day-to-day persistence are fitted on the same results (several samples on one day are
averaged; days without a sample are missing, not filled), and the three properties'
innovations are correlated as the lab results are (ash up, heating value down).  The
forecast carries on from the last result's deviation from that level, so it starts
where the lab stands and returns to the level as fast as the lab's persistence says.
The ``coal_sources`` sheet's single value is then only compared with the lab: where the
two differ by more than `DISAGREE_SDS` standard deviations of the lab results, the
source's model carries a warning (the deterministic balance still uses the sheet).

Without lab results, sulfur takes the sheet's ``sulfur_sd_pct`` as its spread with the
stated persistence `DEFAULT_PERSISTENCE`, started from no knowledge of the present;
ash and heating value stay at the sheet's values.  The blend schedule then mixes the
sources by mass (shares are of as-received tonnes).

References
----------
Box, G. E. P., Jenkins, G. M., Reinsel, G. C. and Ljung, G. M. (2015), *Time Series
Analysis: Forecasting and Control*, 5th ed., Wiley: the AR(1) model.
Durbin, J. and Koopman, S. J. (2012), *Time Series Analysis by State Space Methods*,
2nd ed., OUP: irregular sampling as missing observations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..scenario import CoalSource, Scenario
from ..timeseries import streams
from ..timeseries.memo import per_scenario
from ..timeseries.noise import ARNoise, correlate, fit_ar_noise, simulate_noise, stationary_ar1

PROPERTIES = ("sulfur_pct", "ash_pct", "hhv_mj_per_kg")
#: Physical bounds of each property [its unit] (the workbook's accepted ranges).
BOUNDS = {"sulfur_pct": (0.0, 100.0), "ash_pct": (0.0, 100.0), "hhv_mj_per_kg": (5.0, 40.0)}
#: Day-to-day persistence of sulfur without lab results [-/day]: a stated assumption
#: (a deviation fades to a fifth in a week); no published source.
DEFAULT_PERSISTENCE = 0.8
#: Lab results needed to fit a property's spread and persistence.
MIN_SAMPLES = 10
#: As `reagentplan.timeseries.generation.MAX_LEAD_DAYS`: older results are forgotten [d].
MAX_LEAD_DAYS = 366
#: Lab results of this many days up to the latest one set the level and the fit [d]
#: (a stated choice: a year holds every season of a mine's seams; no published source).
RECENT_DAYS = 366
#: The sheet and the lab disagree beyond this many lab standard deviations [-]
#: (a stated threshold: about 5 % of results lie further out for a normal spread).
DISAGREE_SDS = 2.0


@dataclass(frozen=True)
class PropertyModel:
    """One property of one source.

    Attributes
    ----------
    name : str
        ``sulfur_pct`` [%], ``ash_pct`` [%] or ``hhv_mj_per_kg`` [MJ/kg].
    center : float
        The level the deviations are added to [unit]: the lab's recent mean where the
        property is fitted from lab results, else the sheet's value.
    noise : ARNoise | None
        Daily deviation [unit]; None = no spread.
    basis : str
        ``lab`` (fitted), ``sheet`` (sulfur_sd_pct, default persistence) or ``fixed``.
    samples : int
        Lab results used.
    sheet_value : float | None
        The ``coal_sources`` sheet's value [unit] (None when it is the center).
    lab_sd : float
        Standard deviation of the lab results used [unit] (0 without a fit).
    """

    name: str
    center: float
    noise: ARNoise | None
    basis: str
    samples: int = 0
    sheet_value: float | None = None
    lab_sd: float = 0.0

    @property
    def disagrees(self) -> bool:
        """The sheet's value lies more than `DISAGREE_SDS` lab standard deviations from
        the lab's level."""
        return (self.sheet_value is not None
                and abs(self.sheet_value - self.center) > DISAGREE_SDS * self.lab_sd)

    def describe(self) -> str:
        label = {"sulfur_pct": "sulfur", "ash_pct": "ash", "hhv_mj_per_kg": "HHV"}[self.name]
        unit = "MJ/kg" if self.name == "hhv_mj_per_kg" else "%"
        if self.noise is None:
            if self.basis == "lab":
                return f"{label} fixed at {self.center:g} {unit}, as all {self.samples} lab results"
            return f"{label} fixed at {self.center:g} {unit}"
        spread = f"sd {self.noise.stationary_sd:.3g} {unit}, {self.noise.describe()}"
        if self.basis == "lab":
            return (f"{label} from {self.samples} lab results, around their recent level "
                    f"{self.center:.3g} {unit}: {spread}")
        return (f"{label}: sd {self.noise.stationary_sd:.3g} {unit} from sulfur_sd_pct with "
                f"an assumed persistence of {DEFAULT_PERSISTENCE:g} per day (fallback: "
                f"fewer than {MIN_SAMPLES} lab results)")


@dataclass(frozen=True)
class SourceModel:
    """The quality model of one coal source.

    Attributes
    ----------
    source : str
    properties : tuple[PropertyModel, ...]
        In `PROPERTIES` order.
    correlation : np.ndarray (3, 3)
        Correlation of the properties' daily innovations [-].
    last_day : pd.Timestamp | None
        Last lab result; the deviations' start state is the day after.
    """

    source: str
    properties: tuple[PropertyModel, ...]
    correlation: np.ndarray
    last_day: pd.Timestamp | None

    @property
    def varies(self) -> bool:
        return any(p.noise is not None for p in self.properties)

    def describe(self) -> str:
        return "; ".join(p.describe() for p in self.properties)

    def warnings(self) -> list[str]:
        """One line per property whose sheet value disagrees with the lab."""
        out = []
        for p in self.properties:
            if p.disagrees:
                unit = "MJ/kg" if p.name == "hhv_mj_per_kg" else "%"
                out.append(
                    f"coal_sources: {self.source} {p.name} is {p.sheet_value:g} {unit} on the "
                    f"sheet, but its {p.samples} recent lab results average {p.center:.3g} {unit} "
                    f"(sd {p.lab_sd:.3g}): more than {DISAGREE_SDS:g} sd apart. The futures follow "
                    f"the lab; the deterministic balance uses the sheet. Check the sheet value.")
        return out


@dataclass(frozen=True)
class QualityModel:
    """Quality models of every coal source, by name (sulfur and ash [%], HHV [MJ/kg])."""

    sources: dict[str, SourceModel]

    def warnings(self) -> list[str]:
        """Sheet values that disagree with the lab, one line each."""
        return [w for m in self.sources.values() for w in m.warnings()]


def daily_lab_means(samples: pd.DataFrame) -> pd.DataFrame:
    """Lab results of one source on a daily grid from its first to its last result:
    the day's mean of each property [its unit], NaN on days without a result."""
    by_day = samples.groupby("date")[list(PROPERTIES)].mean()
    grid = pd.date_range(by_day.index.min(), by_day.index.max(), freq="D")
    return by_day.reindex(grid)


def recent_results(daily: pd.DataFrame, days: int = RECENT_DAYS) -> pd.DataFrame:
    """The daily lab means [unit] of the last ``days`` [d] up to the latest result."""
    return daily[daily.index > daily.index[-1] - pd.Timedelta(days=days)]


def fit_source(source: CoalSource, samples: pd.DataFrame | None) -> SourceModel:
    """Fit one source from its lab results (date, sulfur_pct [%], ash_pct [%],
    hhv_mj_per_kg [MJ/kg]), or fall back to the sheet's ``sulfur_sd_pct`` [% S].

    A property with at least `MIN_SAMPLES` results in the last `RECENT_DAYS` is centred
    on their mean (the lab's recent level) and its deviations from that level are fitted
    as AR(1); the sheet's value is kept for comparison (`PropertyModel.disagrees`).

    References
    ----------
    statsmodels ``SARIMAX(order=(1, 0, 0))`` via `reagentplan.timeseries.noise.fit_ar_noise`.
    """
    daily = daily_lab_means(samples) if samples is not None and len(samples) else None
    if daily is not None:
        daily = recent_results(daily)
    props: list[PropertyModel] = []
    innovations: dict[str, np.ndarray] = {}
    for name in PROPERTIES:
        center = float(getattr(source, name))
        values = daily[name].to_numpy(dtype=float) if daily is not None else np.array([])
        n = int(np.isfinite(values).sum())
        if n >= MIN_SAMPLES and np.nanstd(values) > 0:
            level, sd = float(np.nanmean(values)), float(np.nanstd(values))
            noise, innov = fit_ar_noise(values - level, order=1)
            props.append(PropertyModel(name, level, noise, "lab", n, center, sd))
            innovations[name] = innov
        elif n >= MIN_SAMPLES:  # the lab shows one value every time: no spread, its level
            level = float(np.nanmean(values))
            props.append(PropertyModel(name, level, None, "lab", n, center, 0.0))
        elif name == "sulfur_pct" and source.sulfur_sd_pct > 0:
            props.append(PropertyModel(name, center,
                                       stationary_ar1(DEFAULT_PERSISTENCE, source.sulfur_sd_pct),
                                       "sheet", n))
        else:
            props.append(PropertyModel(name, center, None, "fixed", n))
    corr = np.eye(len(PROPERTIES))
    fitted = [k for k, name in enumerate(PROPERTIES) if name in innovations]
    if len(fitted) > 1:
        table = np.column_stack([innovations[PROPERTIES[k]] for k in fitted])
        table = table[np.isfinite(table).all(axis=1)]
        if len(table) >= MIN_SAMPLES:
            corr[np.ix_(fitted, fitted)] = np.corrcoef(table.T)
    last = daily.index[-1] if daily is not None and innovations else None
    return SourceModel(source.source, tuple(props), corr, last)


@per_scenario(lambda scenario: len(scenario.coal_sources))
def fit_quality(scenario: Scenario, progress=None) -> QualityModel:
    """Fit every coal source of a scenario (sulfur, ash [%], HHV [MJ/kg]); remembered per
    scenario; ``progress`` (tqdm) advances per source."""
    hist = scenario.coal_quality_history
    models = {}
    for s in scenario.coal_sources:
        rows = hist[hist["source"] == s.source] if hist is not None else None
        models[s.source] = fit_source(s, rows)
        if progress is not None:
            progress.update(1)
    return QualityModel(models)


def simulate_source(model: SourceModel, dates: pd.DatetimeIndex, n_futures: int,
                    root: np.random.SeedSequence, index: int, block: int = 0,
                    dtype=np.float32) -> dict[str, np.ndarray | float]:
    """Sampled quality of one source on ``dates``, time-major.

    ``index`` (the source's row) and ``block`` name the random streams.

    Returns
    -------
    dict property -> (days, futures) array [unit], or the fixed value (float).
    """
    dtype = np.dtype(dtype).type
    out: dict[str, np.ndarray | float] = {}
    varying = [k for k, p in enumerate(model.properties) if p.noise is not None]
    for p in model.properties:
        if p.noise is None:
            out[p.name] = p.center
    if not varying:
        return out
    lead = 0
    if model.last_day is not None:
        lead = (pd.Timestamp(dates[0]) - model.last_day).days - 1
    memory = max(model.properties[k].noise.memory_days() for k in varying)
    forget = lead > min(MAX_LEAD_DAYS, memory) or lead < 0  # the last result no longer counts
    lead = 0 if forget else lead
    n = lead + len(dates)
    z = streams.standard_normal(streams.stream(root, streams.QUALITY_SHOCKS, index, block),
                                (len(varying), n, n_futures), dtype)
    correlate(z, model.correlation[np.ix_(varying, varying)])
    start = streams.stream(root, streams.QUALITY_START, index, block)
    for row, k in enumerate(varying):
        p = model.properties[k]
        noise = p.noise.forgotten() if forget else p.noise
        e = simulate_noise(noise, z[row], start.standard_normal((n_futures, noise.start_mean.size)),
                           overwrite=True)
        values = e[lead:]
        values += dtype(p.center)
        lo, hi = BOUNDS[p.name]
        np.clip(values, lo, hi, out=values)
        out[p.name] = values
    return out


def blend(values: list[np.ndarray | float], shares: np.ndarray, dtype=np.float32
          ) -> np.ndarray:
    """Blended property per day [unit]: sum over sources of share [fraction] × value.

    Parameters
    ----------
    values : per source, a (days, futures) array or a fixed value.  The arrays are
        used as scratch space (overwritten).
    shares : (days, sources) blend shares [-] (as-received tonnes, so every property,
        HHV per kg included, mixes by mass).

    Returns
    -------
    (days, futures) array, or (days,) float64 when every source is fixed.
    """
    dtype = np.dtype(dtype).type
    fixed = np.zeros(shares.shape[0])
    varying = None
    for s, v in enumerate(values):
        w = shares[:, s]
        if not np.any(w):
            continue
        if np.ndim(v) == 0:
            fixed = fixed + w * float(v)
            continue
        v *= w[:, None].astype(dtype)
        if varying is None:
            varying = v
        else:
            varying += v
    if varying is None:
        return fixed
    varying += fixed[:, None].astype(dtype)
    return varying
