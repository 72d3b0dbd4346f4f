"""What the record teaches the balance: the plant's factors fitted to the surveys.

``review`` measures how far the book drifts from the surveys; this module says why.
Between two surveys of a store, the change of its level less what was recorded in and
out is what the plant really used (limestone) or made (gypsum, fly ash, bottom ash).
The balance recomputed on the recorded generation and lab results predicts the same
tonnes from the workbook's factors.  The factors the record can see (`FACTORS`) are
fitted so that the prediction matches the surveys, each with a 90 % interval.

The model (stated in DEVELOPERS.md, "Calibration")
---------------------------------------------------
For store s and its consecutive surveys at the end of days t(j-1) and t(j), levels
S(j-1) and S(j) [t]:

    y(j) = S(j-1) + A(j) - S(j)          limestone: stone used [t]
    y(j) = S(j) - S(j-1) + H(j)          a byproduct: tonnes made [t]
    y(j) = sum over days t(j-1) < d <= t(j) of f_s(d; theta + delta) + e(j)

A(j), H(j) are the recorded arrivals and shipments of the interval, f_s the balance's
daily flow of the store (`schema.STORE_FLOW_COLUMN`) on the recorded generation and lab
results, theta the workbook's factors and delta their shifts [workbook units].  A
factor changed for some days by ``period_settings`` keeps its pattern; the shift is
added to every day.  The noise is the surveys' own: each survey is off by eta(j), with
standard deviation sigma x max(S(j), 0.5 % of the store's capacity) (a relative survey
error; sigma is common to all stores and estimated from the residuals), independent
between surveys and stores.  So e(j) = eta(j-1) - eta(j): consecutive intervals of a
store share a survey, and their errors are negatively correlated (covariance
-var eta(j)).  Recorded arrivals and shipments are taken as exact, and nothing moves
in or out unrecorded: an unrecorded movement biases the fit (it looks like the plant
using or making more).

The balance is nearly linear in each factor (the wet cake's 1 / (1 - moisture) is
not), so delta is found by Gauss-Newton steps on the generalised least-squares
problem, with the sensitivities by finite differences of the balance itself; the last
step is fitted with `statsmodels` GLS (the survey covariance above, its scale
estimated), whose t-based 90 % intervals are reported.  A factor no surveyed store
responds to, or one whose effect on the surveyed stores cannot be told from an
earlier factor's (whitened sensitivities nearly parallel), is held at the workbook's
value and marked not estimable.

References
----------
Seber, G. A. F. and Wild, C. J. (1989), *Nonlinear Regression*, Wiley: Gauss-Newton
and the linearised (Wald) intervals of nonlinear least squares.
Aitken, A. C. (1935), "On least squares and linear combination of observations",
Proc. R. Soc. Edinburgh 55:42-48: generalised least squares with a known covariance
shape.
Srivastava, R. K. and Jozewicz, W. (2001), "Flue gas desulfurization: the state of the
art", J. Air & Waste Manage. Assoc. 51:1676-1688: the stoichiometry the balance uses.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..balance import BalanceParams, mass_balance, scenario_drivers
from ..errors import Problem
from ..scenario import Scenario
from ..schema import PLAUSIBLE, STORE_FLOW_COLUMN
from .asof import RecordFrames, _blend_from, past_generation
from .db import RecordError

#: ``calibration.csv`` (OPERATIONS.md).
CALIBRATION_COLUMNS = ["key", "sheet", "workbook_value", "fitted_value", "low", "high", "days_used", "note"]
#: The drift per store before and after the fitted values (``calibration_drift.csv``).
DRIFT_COLUMNS = ["store", "surveys", "intervals", "days", "flow_t", "drift_before_t", "drift_after_t",
                 "drift_before_t_per_day", "drift_after_t_per_day", "drift_before_pct_of_flow",
                 "drift_after_pct_of_flow"]

#: The interval reported [-].
LEVEL = 0.90
#: A survey's error is taken relative to max(level, this share of the store's capacity)
#: [-]: a nearly empty pile is not measured to the kilogram (common practice, no source).
SURVEY_FLOOR_SHARE = 0.005
#: Whitened sensitivities of two factors more nearly parallel than this (cosine) cannot
#: be told apart by the record [-].
COLLINEAR_COS = 0.995
#: Gauss-Newton steps at most, and the step (in units of each factor's finite-difference
#: step) below which the fit has converged [-].
MAX_STEPS, CONVERGED = 12, 1e-6


@dataclass(frozen=True)
class Factor:
    """A workbook value the record can see.

    ``key``/``sheet`` name it in the workbook; ``param`` is its `BalanceParams` field,
    ``scale`` converts the workbook's unit to the param's (% -> fraction: 0.01); ``step``
    is the finite-difference step [workbook unit]; ``stores`` are the stores it mainly
    moves (without two surveys of one of them the factor is not estimated, even where
    another store responds to it weakly); ``confounded`` says what the record cannot tell
    it from."""

    key: str
    sheet: str
    param: str
    scale: float
    step: float
    unit: str
    stores: tuple[str, ...]
    confounded: str


FACTORS: tuple[Factor, ...] = (
    Factor("ca_s_ratio", "scrubber", "ca_s_ratio", 1.0, 0.01, "mol/mol", ("limestone",),
           "only the stone used per SO2 removed is seen, i.e. Ca/S over the stone's CaCO3"),
    Factor("gypsum_moisture_pct", "scrubber", "gypsum_moisture", 0.01, 1.0, "%", ("gypsum",),
           "the wet cake's tonnes are seen; other dry solids (oxidation, inerts, fly ash slip) would look alike"),
    Factor("fly_ash_share_pct", "plant", "fly_ash_share", 0.01, 1.0, "%", ("fly_ash", "bottom_ash"),
           "the collected fly ash is seen; its LOI and the precipitator's capture would look alike"),
)


# --------------------------------------------------------------------------- the balance as a function of the factors


@dataclass(frozen=True)
class BalanceModel:
    """The deterministic balance of past days ``days`` (drivers and constants fixed),
    as a function of shifts of `FACTORS`.  ``caco3`` is the stone fed per day [-] when
    the deliveries carry lab results, else ``None`` (the workbook's)."""

    days: pd.DatetimeIndex
    drivers: object
    params: BalanceParams
    factors: tuple[Factor, ...] = FACTORS

    def flows(self, shifts) -> dict[str, np.ndarray]:
        """Each store's daily flow [t/d], shape (n, days), for ``shifts`` (n, factors)
        [workbook units]; row i is the balance at the workbook's values plus shifts[i]."""
        shifts = np.atleast_2d(np.asarray(shifts, dtype=float))
        changes = {}
        for j, f in enumerate(self.factors):
            base = np.asarray(getattr(self.params, f.param), dtype=float)
            changes[f.param] = base + shifts[:, j:j + 1] * f.scale
        res = mass_balance(self.drivers, dataclasses.replace(self.params, **changes))
        n = shifts.shape[0]
        return {store: np.broadcast_to(res[col], (n, len(self.days))) for store, col in STORE_FLOW_COLUMN.items()}

    def workbook_value(self, factor: Factor, scenario: Scenario) -> float:
        src = scenario.scrubber if hasattr(scenario.scrubber, factor.key) else scenario.plant
        return float(getattr(src, factor.key))


def balance_model(scenario: Scenario, record: RecordFrames, first: dt.date, last: dt.date,
                  caco3_pct=None) -> BalanceModel:
    """The balance of days ``first``..``last`` on the recorded generation (else the
    workbook's history, else its dispatch plan; `asof.past_generation`) and the coal
    blend, with ``caco3_pct`` [%] per day as the stone fed when given."""
    n = (last - first).days + 1
    plant = dataclasses.replace(scenario.plant, start_date=first, horizon_days=n)
    past = dataclasses.replace(scenario, plant=plant, generation=past_generation(scenario, record, first, last),
                               coal_blend=_blend_from(scenario.coal_blend, first), generation_history=None,
                               firm_orders=(), month_to_date=None)
    params = BalanceParams.from_scenario(past)
    if caco3_pct is not None:
        params = dataclasses.replace(params, caco3=np.asarray(caco3_pct, dtype=float)[None, :] / 100)
    return BalanceModel(pd.DatetimeIndex(past.dates), scenario_drivers(past), params)


def stone_caco3_by_day(level0_t: float, caco3_0_pct: float, use_t, arrivals_t, arrivals_caco3_t) -> np.ndarray:
    """CaCO3 of the stone fed each day [%] in a well-mixed limestone store.

    The store starts at ``level0_t`` [t] of ``caco3_0_pct`` [%]; each day the day's use
    ``use_t`` [t] leaves at the store's content, then the day's arrivals ``arrivals_t``
    [t] carrying ``arrivals_caco3_t`` [t CaCO3] mix in (tonnage-weighted).

    References
    ----------
    Haverly, C. A. (1978), "Studies of the behavior of recursion for the pooling
    problem", ACM SIGMAP Bulletin 25:19-28: a pool whose outflow has the quality of its
    mixed contents.
    """
    use, arr, qt = (np.asarray(x, dtype=float) for x in (use_t, arrivals_t, arrivals_caco3_t))
    out = np.empty(len(use))
    level, q = float(level0_t), float(caco3_0_pct)
    for k in range(len(use)):
        out[k] = q
        kept = max(level - use[k], 0.0)
        total = kept + arr[k]
        q = (kept * q + 100 * qt[k]) / total if total > 0 else q
        level = total
    return out


# --------------------------------------------------------------------------- survey intervals


@dataclass(frozen=True)
class Intervals:
    """Survey-to-survey observations of every store, in model-day indices.

    ``store`` [name], ``a``/``b``: the interval covers model days a..b-1 (``cum[b] -
    cum[a]`` of the daily flow with a leading 0), ``observed_t``: tonnes used or made
    [t], ``level0_t``/``level1_t``: the surveys at either end [t], ``floor_t``: the
    store's survey floor [t]; all arrays of one length."""

    store: np.ndarray
    a: np.ndarray
    b: np.ndarray
    observed_t: np.ndarray
    level0_t: np.ndarray
    level1_t: np.ndarray
    floor_t: np.ndarray

    def __len__(self) -> int:
        return len(self.a)

    def covariance(self) -> np.ndarray:
        """The shape of the errors' covariance (sigma = 1): var eta(j) = max(S(j),
        floor)^2 per survey; e(j) = eta(j-1) - eta(j) within a store."""
        n = len(self)
        w0 = np.maximum(self.level0_t, self.floor_t) ** 2
        w1 = np.maximum(self.level1_t, self.floor_t) ** 2
        cov = np.diag(w0 + w1)
        for j in range(1, n):
            if self.store[j] == self.store[j - 1] and self.a[j] == self.b[j - 1]:
                cov[j, j - 1] = cov[j - 1, j] = -w1[j - 1]
        return cov

    def totals(self, flows: dict[str, np.ndarray]) -> np.ndarray:
        """Each interval's flow [t], shape (n_rows_of_flows, intervals)."""
        out = None
        for store in np.unique(self.store):
            f = flows[store]
            cum = np.concatenate([np.zeros((f.shape[0], 1)), np.cumsum(f, axis=1)], axis=1)
            m = self.store == store
            part = cum[:, self.b[m]] - cum[:, self.a[m]]
            if out is None:
                out = np.zeros((f.shape[0], len(self)))
            out[:, m] = part
        return out if out is not None else np.zeros((1, 0))


def survey_intervals(scenario: Scenario, record: RecordFrames, first_day: pd.Timestamp,
                     surveys: pd.DataFrame) -> Intervals:
    """The observations from ``surveys`` (date, store, level_t; one a day per store,
    sorted): consecutive pairs of each store with the arrivals and shipments between
    them.  Model day 0 is ``first_day``."""
    rows = []
    for store, g in surveys.groupby("store", sort=True):
        if len(g) < 2:
            continue
        dates = g["date"].to_numpy()
        levels = g["level_t"].to_numpy(float)
        if store == "limestone":
            moved = record.arrivals
        else:
            moved = record.shipments[record.shipments["material"] == store]
        daily = moved.groupby("date")["tonnes"].sum().sort_index()
        when = daily.index.to_numpy()
        cum = np.concatenate([[0.0], np.cumsum(daily.to_numpy(float))])

        def upto(t):  # tonnes moved on or before day t [t]
            return float(cum[np.searchsorted(when, np.datetime64(t), side="right")])

        floor = max(SURVEY_FLOOR_SHARE * scenario.storage[store].capacity_t, 1.0)
        for j in range(1, len(g)):
            t0, t1 = pd.Timestamp(dates[j - 1]), pd.Timestamp(dates[j])
            moved_t = upto(t1) - upto(t0)
            obs = (levels[j - 1] + moved_t - levels[j]) if store == "limestone" else (levels[j] - levels[j - 1] + moved_t)
            rows.append((store, (t0 - first_day).days, (t1 - first_day).days, obs,
                         levels[j - 1], levels[j], floor))
    if not rows:
        return Intervals(*(np.array([]) for _ in range(7)))
    cols = list(zip(*rows))
    return Intervals(np.array(cols[0], dtype=object), np.array(cols[1], dtype=int), np.array(cols[2], dtype=int),
                     *(np.array(c, dtype=float) for c in cols[3:]))


# --------------------------------------------------------------------------- the fit


@dataclass(frozen=True)
class Fit:
    """The fitted shifts [workbook units] of the estimable factors (``used``: mask over
    the model's factors), their 90 % bounds, the residual degrees of freedom, the
    estimated survey error (sigma, relative) and why a factor was left out."""

    shift: np.ndarray
    low: np.ndarray
    high: np.ndarray
    used: np.ndarray
    df_resid: float
    sigma: float
    reasons: dict[int, str]
    steps: int


def _whitener(cov: np.ndarray) -> np.ndarray:
    """W with W cov W' = I (the inverse of cov's Cholesky factor)."""
    from scipy.linalg import cholesky, solve_triangular

    chol = cholesky(cov, lower=True)
    return solve_triangular(chol, np.eye(len(cov)), lower=True)


def _sensitivity(model: BalanceModel, iv: Intervals, shift: np.ndarray):
    """Interval totals at ``shift`` and their finite-difference derivatives, one column
    per factor [t per workbook unit]."""
    k = len(model.factors)
    steps = np.array([f.step for f in model.factors])
    rows = np.vstack([shift, shift + np.diag(steps)])
    tot = iv.totals(model.flows(rows))
    return tot[0], ((tot[1:] - tot[0]) / steps[:, None]).T if k else np.zeros((len(iv), 0))


def fit_factors(model: BalanceModel, iv: Intervals, level: float = LEVEL,
                hold: dict[int, str] | None = None) -> Fit:
    """Fit the factors' shifts to the survey intervals (generalised least squares,
    Gauss-Newton; the module's docstring gives the model).  Factors in ``hold`` (index
    -> reason) stay at the workbook's value.  Raises `RecordError` when the intervals
    are too few for the factors the record can see."""
    import statsmodels.api as sm

    k = len(model.factors)
    cov = iv.covariance()
    white = _whitener(cov)
    shift = np.zeros(k)
    pred, jac = _sensitivity(model, iv, shift)
    jw = white @ jac
    norms = np.linalg.norm(jw, axis=0)
    total = np.linalg.norm(white @ pred) if len(pred) else 0.0
    reasons: dict[int, str] = dict(hold or {})
    used = np.zeros(k, dtype=bool)
    for j in range(k):
        if j in reasons:
            continue
        if norms[j] <= 1e-9 * max(total, 1e-300):
            reasons[j] = "no surveyed store responds to it"
            continue
        for i in np.flatnonzero(used):
            cos = abs(jw[:, i] @ jw[:, j]) / (norms[i] * norms[j])
            if cos > COLLINEAR_COS:
                reasons[j] = (f"the surveys cannot tell it from {model.factors[i].key} (both move the same "
                              "stores in the same proportion)")
                break
        else:
            used[j] = True
    m = int(used.sum())
    if m == 0:
        return Fit(shift, np.full(k, np.nan), np.full(k, np.nan), used, 0.0, np.nan, reasons, 0)
    if len(iv) < m + 1:
        raise RecordError(Problem("stock_surveys", None, "date",
                                  f"{len(iv)} survey-to-survey interval(s) for {m} factor(s)",
                                  f"at least {m + 1} intervals (best: weekly surveys of each store over 8 "
                                  "weeks or more)"), "The record")
    steps_taken = 0
    yw = white @ iv.observed_t
    for steps_taken in range(1, MAX_STEPS + 1):
        jw = white @ jac[:, used]
        rw = yw - white @ pred
        delta, *_ = np.linalg.lstsq(jw, rw, rcond=None)
        shift[used] += delta
        pred, jac = _sensitivity(model, iv, shift)
        if np.all(np.abs(delta) <= CONVERGED * np.array([f.step for f in model.factors])[used]):
            break
    # the last, linearised step through statsmodels: y - f(shift) + J shift = J shift' + e
    x = jac[:, used]
    res = sm.GLS(iv.observed_t - pred + x @ shift[used], x, sigma=cov).fit()
    low, high = np.full(k, np.nan), np.full(k, np.nan)
    shift[used] = res.params
    if res.df_resid >= 1:
        ci = np.asarray(res.conf_int(alpha=1 - level))
        low[used], high[used] = ci[:, 0], ci[:, 1]
    else:
        low[used], high[used] = -np.inf, np.inf
    return Fit(shift, low, high, used, float(res.df_resid), float(np.sqrt(res.scale)), reasons, steps_taken)


# --------------------------------------------------------------------------- the calibration of a record


@dataclass(frozen=True)
class Calibration:
    """A calibration: ``table`` (``calibration.csv``), ``drift`` per store before and
    after, the window of surveys, the values applied by ``plan --calibrated`` and the
    survey error the residuals imply [% of the level]."""

    table: pd.DataFrame
    drift: pd.DataFrame
    first: dt.date
    last: dt.date
    applied: dict[str, float]
    survey_error_pct: float

    def misses(self) -> pd.DataFrame:
        """Rows whose interval leaves out the workbook's value."""
        t = self.table
        ok = t["low"].notna() & t["high"].notna()
        return t[ok & ((t["workbook_value"] < t["low"]) | (t["workbook_value"] > t["high"]))]

    def view(self) -> pd.DataFrame:
        """The factors as the dashboard shows them: key, sheet, workbook_value,
        fitted_value, low, high and ``status`` (``contradicts the workbook``, ``agrees
        with the workbook``, ``not estimable``)."""
        t = self.table[["key", "sheet", "workbook_value", "fitted_value", "low", "high"]].copy()
        missed = set(self.misses()["key"])
        t["status"] = ["not estimable" if k not in self.applied else
                       "contradicts the workbook" if k in missed else "agrees with the workbook"
                       for k in t["key"]]
        return t

    def summary(self) -> dict:
        """What a plan version records of the calibration it was planned with."""
        rows = {}
        for r in self.table.itertuples(index=False):
            rows[r.key] = {"workbook_value": r.workbook_value,
                           "fitted_value": None if pd.isna(r.fitted_value) else round(float(r.fitted_value), 6),
                           "low": None if pd.isna(r.low) else round(float(r.low), 6),
                           "high": None if pd.isna(r.high) else round(float(r.high), 6),
                           "applied": r.key in self.applied}
        return {"from": f"{self.first:%Y-%m-%d}", "to": f"{self.last:%Y-%m-%d}",
                "applied": {k: round(v, 6) for k, v in self.applied.items()}, "factors": rows}


def _window_surveys(scenario: Scenario, record: RecordFrames, first: dt.date | None,
                    last: dt.date | None) -> pd.DataFrame:
    s = record.surveys[["date", "store", "level_t"]]
    s = s[s["store"].isin(list(scenario.storage))]
    if first is not None:
        s = s[s["date"] >= pd.Timestamp(first)]
    if last is not None:
        s = s[s["date"] <= pd.Timestamp(last)]
    return s.sort_values(["store", "date"]).drop_duplicates(["store", "date"], keep="last").reset_index(drop=True)


def _stone_caco3(scenario: Scenario, record: RecordFrames, model: BalanceModel,
                 surveys: pd.DataFrame) -> np.ndarray | None:
    """The stone fed per day [%] from the deliveries' lab results (None without any in
    the record up to the window's end)."""
    arr = record.arrivals[record.arrivals["date"] <= model.days[-1]]
    if arr.empty or arr["caco3_pct"].notna().sum() == 0:
        return None
    default = scenario.scrubber.limestone_caco3_pct
    by_supplier = {s.supplier: s.caco3_pct for s in scenario.suppliers if s.caco3_pct is not None}
    q = arr["caco3_pct"].astype(float).fillna(arr["supplier"].map(by_supplier)).fillna(default)
    # the store before the window: the latest deliveries adding up to its first survey
    lime = surveys[surveys["store"] == "limestone"]
    t0 = model.days[0] - pd.Timedelta(days=1)
    level0 = float(lime["level_t"].iloc[0]) if len(lime) else scenario.storage["limestone"].initial_t
    before = arr[arr["date"] <= t0].assign(q=q[arr["date"] <= t0]).sort_values("date", ascending=False)
    tonnes = before["tonnes"].to_numpy(float)
    take = np.minimum(tonnes, np.clip(level0 - np.concatenate([[0.0], np.cumsum(tonnes)[:-1]]), 0, None))
    q0 = ((take * before["q"].to_numpy()).sum() + max(level0 - take.sum(), 0.0) * default) / level0 \
        if level0 > 0 else default
    inside = arr[arr["date"] >= model.days[0]].assign(q=q[arr["date"] >= model.days[0]])
    t = inside.groupby("date")["tonnes"].sum().reindex(model.days, fill_value=0.0).to_numpy(float)
    qt = (inside["tonnes"] * inside["q"] / 100).groupby(inside["date"]).sum().reindex(model.days, fill_value=0.0)
    use = model.flows(np.zeros((1, len(model.factors))))["limestone"][0]
    return stone_caco3_by_day(level0, q0, use, t, qt.to_numpy(float))


def _usual_width(key: str) -> float:
    r = PLAUSIBLE.get(key)
    return float(r.usual[1] - r.usual[0]) if r is not None and r.usual is not None else np.inf


def _fmt(v: float, key: str) -> str:
    return f"{v:.3f}" if key == "ca_s_ratio" else f"{v:.1f}"


def calibrate(scenario: Scenario, record: RecordFrames, first: dt.date | None = None,
              last: dt.date | None = None) -> Calibration:
    """Fit `FACTORS` to the record's surveys dated ``first``..``last`` (default: all of
    them), with the balance recomputed on the recorded generation and lab results.

    Raises `RecordError` (exit 2) when no store has two surveys in the window, or the
    intervals are fewer than the factors the record can see plus one; a factor no
    surveyed store responds to, or whose interval is wider than its usual range, is a
    row marked not estimable and is not applied."""
    surveys = _window_surveys(scenario, record, first, last)
    counts = surveys.groupby("store").size() if len(surveys) else pd.Series(dtype=int)
    window = f"{first or 'the first survey'} to {last or 'the last'}"
    if len(counts) == 0 or counts.max() < 2:
        found = ", ".join(f"{s} {n}" for s, n in counts.items()) or "none"
        raise RecordError(Problem("stock_surveys", None, "date",
                                  f"surveys per store from {window}: {found}",
                                  "at least two surveys of a store in the window (best: weekly surveys "
                                  "of each store over 8 weeks or more)"), "The record")
    usable = surveys[surveys["store"].isin(counts[counts >= 2].index)]
    d0 = usable["date"].min()
    d1 = usable["date"].max()
    model = balance_model(scenario, record, (d0 + pd.Timedelta(days=1)).date(), d1.date())
    caco3 = _stone_caco3(scenario, record, model, usable)
    labs = caco3 is not None
    if labs:
        model = dataclasses.replace(model, params=dataclasses.replace(model.params, caco3=caco3[None, :] / 100))
    iv = survey_intervals(scenario, record, d0, usable)
    have = set(iv.store)
    hold = {j: "no store it mainly moves (" + ", ".join(f.stores) + ") has two surveys in the window"
            for j, f in enumerate(model.factors) if not have.intersection(f.stores)}
    fit = fit_factors(model, iv, hold=hold)

    # which stores respond to each factor (over the whole window)
    steps = np.array([f.step for f in model.factors])
    probe = model.flows(np.vstack([np.zeros(len(steps)), np.diag(steps)]))
    responds = {j: [s for s in scenario.storage if s in probe and
                    np.abs(probe[s][j + 1] - probe[s][0]).sum() > 1e-9 * max(np.abs(probe[s][0]).sum(), 1e-9)]
                for j in range(len(steps))}
    rows, applied = [], {}
    for j, f in enumerate(model.factors):
        wb = model.workbook_value(f, scenario)
        stores = responds[j]
        surveyed = [s for s in stores if counts.get(s, 0) >= 2]
        m = np.isin(iv.store, surveyed)
        days_used = int(len(np.unique(np.concatenate([np.arange(a, b) for a, b in zip(iv.a[m], iv.b[m])]))) if m.any() else 0)
        notes = []
        fitted = low = high = np.nan
        if not fit.used[j]:
            if not stores:
                why = "the balance does not use it for this station"
            elif j in hold:
                why = hold[j] + " (" + ", ".join(f"{s}: {int(counts.get(s, 0))}" for s in f.stores) + ")"
            elif not surveyed:
                why = "no store it moves (" + ", ".join(stores) + ") has two surveys in the window " + \
                      "(" + ", ".join(f"{s}: {int(counts.get(s, 0))}" for s in stores) + ")"
            else:
                why = fit.reasons.get(j, "not identifiable from the surveys")
            notes.append(f"not estimable: {why}; the workbook's value stands")
        else:
            fitted, low, high = wb + fit.shift[j], wb + fit.low[j], wb + fit.high[j]
            width = high - low
            if not np.isfinite(width) or width > _usual_width(f.key):
                notes.append(f"not estimable: the 90 % interval {_fmt(low, f.key)}-{_fmt(high, f.key)} is wider "
                             f"than the usual range of {f.key}; survey more often or over more weeks; not applied")
            else:
                applied[f.key] = float(fitted)
                if low > wb or high < wb:
                    notes.append(f"the record contradicts the workbook: {_fmt(fitted, f.key)} "
                                 f"({_fmt(low, f.key)}-{_fmt(high, f.key)}) against {_fmt(wb, f.key)}")
                else:
                    notes.append("the workbook's value lies within the interval")
            notes.append("from " + ", ".join(f"{s} ({int((iv.store == s).sum())} intervals)" for s in surveyed))
            held = [g.key for i, g in enumerate(model.factors)
                    if not fit.used[i] and set(responds[i]).intersection(surveyed)]
            if held:
                notes.append("taken with " + ", ".join(held) + " at the workbook's value")
        if f.key == "ca_s_ratio":
            if labs:
                notes.append("at the deliveries' lab results (caco3_pct, well-mixed store)")
            else:
                notes.append(f"at the workbook's limestone_caco3_pct {scenario.scrubber.limestone_caco3_pct:g} %: "
                             "no delivery carries a lab result, so the record cannot tell the Ca/S from the "
                             "stone's CaCO3 (only the stone used per SO2 removed)")
        else:
            notes.append(f"the record cannot tell it apart where {f.confounded}")
        if scenario.period_settings is not None and f.key in set(scenario.period_settings["key"]):
            notes.append("period_settings change it for some days; the fit shifts every day alike")
        rows.append({"key": f.key, "sheet": f.sheet, "workbook_value": wb, "fitted_value": fitted,
                     "low": low, "high": high, "days_used": days_used, "note": "; ".join(notes)})
    table = pd.DataFrame(rows, columns=CALIBRATION_COLUMNS)

    # drift per store (book - survey, as `review`) before and after the applied values
    after_shift = np.array([applied[f.key] - model.workbook_value(f, scenario) if f.key in applied else 0.0
                            for f in model.factors])
    tot = iv.totals(model.flows(np.vstack([np.zeros(len(steps)), after_shift])))
    sign = np.where(iv.store == "limestone", 1.0, -1.0)
    drift_before = sign * (iv.observed_t - tot[0])
    drift_after = sign * (iv.observed_t - tot[1])
    drows = []
    for s in sorted(set(iv.store), key=list(scenario.storage).index):
        m = iv.store == s
        days = int((iv.b[m] - iv.a[m]).sum())
        flow = float(tot[0][m].sum())
        drows.append({"store": s, "surveys": int(counts[s]), "intervals": int(m.sum()), "days": days,
                      "flow_t": flow, "drift_before_t": float(drift_before[m].sum()),
                      "drift_after_t": float(drift_after[m].sum()),
                      "drift_before_t_per_day": float(drift_before[m].sum()) / days,
                      "drift_after_t_per_day": float(drift_after[m].sum()) / days,
                      "drift_before_pct_of_flow": 100 * float(drift_before[m].sum()) / flow if flow > 0 else np.nan,
                      "drift_after_pct_of_flow": 100 * float(drift_after[m].sum()) / flow if flow > 0 else np.nan})
    drift = pd.DataFrame(drows, columns=DRIFT_COLUMNS)
    return Calibration(table, drift, d0.date(), d1.date(), applied, 100 * fit.sigma)


def apply_calibration(scenario: Scenario, cal: Calibration) -> Scenario:
    """The scenario with the calibration's applied values in place of the workbook's
    (pure; the workbook file is not touched).  ``period_settings`` of those keys stay."""
    plant = {k: v for k, v in cal.applied.items() if hasattr(scenario.plant, k)}
    scrub = {k: v for k, v in cal.applied.items() if k not in plant and hasattr(scenario.scrubber, k)}
    return dataclasses.replace(scenario, plant=dataclasses.replace(scenario.plant, **plant),
                               scrubber=dataclasses.replace(scenario.scrubber, **scrub))


def describe_calibration(cal: Calibration) -> str:
    """The console summary: the factors whose interval misses the workbook's value, each
    factor's fit, and the survey drift per store before and after."""
    lines = [f"Calibrated on the surveys from {cal.first:%Y-%m-%d} to {cal.last:%Y-%m-%d} "
             f"(survey error implied by the residuals: {cal.survey_error_pct:.2f} % of the level)."]
    miss = cal.misses()
    if len(miss):
        lines.append("The record contradicts the workbook (90 % interval leaves out its value):")
        for r in miss.itertuples(index=False):
            lines.append(f"  {r.sheet}.{r.key}: workbook {_fmt(r.workbook_value, r.key)}, fitted "
                         f"{_fmt(r.fitted_value, r.key)} ({_fmt(r.low, r.key)} to {_fmt(r.high, r.key)})"
                         + ("" if r.key in cal.applied else " - interval too wide, not applied"))
    else:
        lines.append("No factor's 90 % interval leaves out the workbook's value.")
    lines.append("Factors:")
    for r in cal.table.itertuples(index=False):
        if pd.isna(r.fitted_value):
            lines.append(f"  {r.key:<22} workbook {_fmt(r.workbook_value, r.key)}: not estimable")
        else:
            lines.append(f"  {r.key:<22} workbook {_fmt(r.workbook_value, r.key)}, fitted "
                         f"{_fmt(r.fitted_value, r.key)} [{_fmt(r.low, r.key)}, {_fmt(r.high, r.key)}] "
                         f"over {r.days_used} days" + ("" if r.key in cal.applied else " (not applied)"))
    lines.append("Survey drift (book - survey) per store, before -> after the fitted values:")
    for r in cal.drift.itertuples(index=False):
        lines.append(f"  {r.store:<10} {r.intervals} interval(s): {r.drift_before_pct_of_flow:+.1f} % -> "
                     f"{r.drift_after_pct_of_flow:+.1f} % of the tonnes used or made "
                     f"({r.drift_before_t_per_day:+,.1f} -> {r.drift_after_t_per_day:+,.1f} t/day)")
    return "\n".join(lines)


def describe_applied(calibration: dict | None) -> str:
    """One line saying what a plan's stored calibration (`Calibration.summary`, the
    ``calibration`` key of its ``summary.json``) changed; "" for a plan without one."""
    if not calibration:
        return ""
    factors = calibration.get("factors", {})
    parts = [f"{k} {_fmt(factors.get(k, {}).get('workbook_value', float('nan')), k)} -> {_fmt(v, k)}"
             for k, v in calibration.get("applied", {}).items()]
    what = ", ".join(parts) if parts else "no factor (none estimable)"
    return (f"calibrated: {what} (fitted to the surveys from {calibration.get('from')} to "
            f"{calibration.get('to')})")
