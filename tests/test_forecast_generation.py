"""The generation forecast on histories drawn in the test from a known process
(`helpers.synthetic_load_factor`: yearly season + weekend dip + AR(1) + forced outages).

The statistical checks use fixed seeds, so they are repeatable; their bands are wide
enough to hold for any seed (see each comment), not tuned to the one used.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from helpers import START, minimal_sheets, synthetic_history, workbook_bytes
from reagentplan.forecast import backtest, fit_generation, fit_unit, median_generation
from reagentplan.scenario import Unit, load_scenario
from reagentplan.timeseries.generation import (MODEL_NAMES, SEASON_MIN_DAYS, WEEKLY_MIN_DAYS,
                                               simulate_generation)
from reagentplan.timeseries.noise import fit_ar_noise, noise_mean_sd, simulate_noise
from reagentplan.timeseries.outages import (OutageModel, fit_outages, off_line_probability,
                                            simulate_outages)

UNITS = tuple(Unit(f"U{k}", 200.0, 10.0, 0.0) for k in range(1, 5))
CAP = 200.0 * 24


@pytest.fixture(scope="module")
def base():
    return load_scenario(workbook_bytes(minimal_sheets()))


def scenario_with(base, history, units=UNITS, plan=None):
    """The minimal scenario with other units, a history, and no dispatch plan."""
    gen = base.generation.iloc[0:0] if plan is None else plan
    return dataclasses.replace(base, units=units, generation=gen, generation_history=history)


def one_unit(days, seed=0, **process):
    h = synthetic_history({"U1": 200.0}, days, seed=seed, **process)
    return pd.Series(h["mwh"].to_numpy(), index=pd.DatetimeIndex(h["date"]))


# --------------------------------------------------------------------------- backtest


@pytest.fixture(scope="module")
def three_years_backtest(base):
    """Four independent units, three years of history, the last 120 days held back."""
    hist = synthetic_history({u.unit: 200.0 for u in UNITS}, 3 * 365, seed=0)
    return backtest(scenario_with(base, hist), 120, n_futures=400, seed=1)


def test_p10_p90_covers_about_80_percent_of_held_back_days(three_years_backtest):
    # Pooled over 4 units x 120 days.  Each unit's days are autocorrelated (phi 0.8),
    # so the pool holds only about 4 x 120 x (1 - 0.8) / (1 + 0.8) = 53 independent
    # days: the sampling sd of the coverage is about sqrt(0.8 x 0.2 / 53) = 0.055.
    # Fitted (not true) parameters and forced-outage days (about 3 % of days, at 0 MWh,
    # below P10) pull it a little under 0.8.  0.65-0.93 is about -2.5 to +2.4 sd.
    s = three_years_backtest.summary
    units = s[s["series"].isin([u.unit for u in UNITS])]
    pooled = float(np.average(units["coverage_p10_p90"], weights=units["days"]))
    assert 0.65 <= pooled <= 0.93, units


def test_median_beats_seasonal_naive(three_years_backtest):
    # The model knows the season and the weekday and carries the last deviation; the
    # same weekday 52 weeks earlier carries a whole independent deviation of its own
    # (error sd about sqrt(2) x that of the model a few days out).
    s = three_years_backtest.summary
    for r in s.itertuples():
        assert r.mae_median < r.mae_seasonal_naive, r
    assert s["mae_median"].sum() < 0.85 * s["mae_seasonal_naive"].sum()


def test_backtest_reports_every_series_and_day(three_years_backtest):
    r = three_years_backtest
    assert list(r.summary["series"]) == ["U1", "U2", "U3", "U4", "plant"]
    assert (r.summary["days"] == 120).all()
    d = r.daily
    assert len(d) == 5 * 120
    assert (d["p10"] <= d["p50"]).all() and (d["p50"] <= d["p90"]).all()
    assert set(r.summary["model"][:4]) == {MODEL_NAMES["seasonal"]}


def test_backtest_leaving_too_little_history_is_bad_input(base):
    from reagentplan.errors import ScenarioError

    hist = synthetic_history({"U1": 200.0}, 40, seed=1)
    with pytest.raises(ScenarioError) as info:
        backtest(scenario_with(base, hist, UNITS[:1]), 30)
    msg = str(info.value.problems[0])
    assert "generation_history" in msg and "U1 would keep 10 day(s)" in msg


# --------------------------------------------------------------------------- models


def test_fit_recovers_the_known_process():
    m = fit_unit(one_unit(3 * 365, seed=3, sd=0.05, phi=0.8), "U1", 200.0)
    assert m.kind == "seasonal"
    assert m.noise.ar[0] == pytest.approx(0.8, abs=0.08)
    assert m.noise.stationary_sd == pytest.approx(0.05, rel=0.2)
    # weekday levels: Sunday dips 1.3 x the Saturday dip of 0.07 below the weekdays
    mon = m.params[0]
    assert mon - m.params[5] == pytest.approx(0.07, abs=0.02)
    assert mon - m.params[6] == pytest.approx(0.091, abs=0.02)
    assert m.outages.failure_prob * 365 == pytest.approx(3.0, rel=0.6)
    assert set(m.outages.lengths) <= {2, 3, 4, 5}


@pytest.mark.parametrize("days, kind, words", [
    (SEASON_MIN_DAYS, "seasonal", "yearly season"),
    (SEASON_MIN_DAYS - 1, "weekly", "fallback: less than two years"),
    (WEEKLY_MIN_DAYS, "weekly", "fallback: less than two years"),
    (WEEKLY_MIN_DAYS - 1, "level", "fallback: less than eight weeks"),
    (20, "level", "fallback: less than eight weeks"),
])
def test_short_history_falls_back_to_a_named_model(days, kind, words):
    m = fit_unit(one_unit(days, seed=5, outages_per_year=0), "U1", 200.0)
    assert m.kind == kind
    assert words in m.describe()


def test_unit_off_line_through_its_history_is_forecast_at_zero(base):
    hist = synthetic_history({"U1": 200.0}, 60, seed=1)
    hist["mwh"] = 0.0
    scn = scenario_with(base, hist, UNITS[:1])
    m = fit_generation(hist, scn.units)
    assert m.units["U1"].kind == "off" and "fallback" in m.units["U1"].describe()
    assert (median_generation(scn, m)["U1"] == 0).all()


def test_samples_stay_within_zero_and_capacity(base):
    # a unit running near full load: the noise must be cut at capacity x 24 h
    hist = synthetic_history({"U1": 200.0}, 400, seed=2, level=0.95, sd=0.08)
    scn = scenario_with(base, hist, UNITS[:1])
    m = fit_generation(hist, scn.units)
    plan = pd.DataFrame(np.nan, index=scn.dates, columns=["U1"])
    g = simulate_generation(m, scn.dates, plan, 3000, np.random.SeedSequence(4))["U1"]
    assert g.min() >= 0 and g.max() <= CAP * (1 + 1e-6)
    assert (g == 0).any()  # forced outages
    assert np.isclose(g, CAP, rtol=1e-6).any()  # the cut at capacity


def test_dispatch_plan_is_the_median_and_history_gives_the_spread(base):
    hist = synthetic_history({"U1": 200.0}, 400, seed=6, outages_per_year=0)
    scn = scenario_with(base, hist, UNITS[:1])
    m = fit_generation(hist, scn.units)
    plan_mwh = np.linspace(2000, 3500, len(scn.dates))
    plan_mwh[3] = 0.0  # a planned outage day stays at 0
    plan = pd.DataFrame({"U1": plan_mwh}, index=scn.dates)
    g = simulate_generation(m, scn.dates, plan, 20000, np.random.SeedSequence(2))["U1"]
    med = np.median(g, axis=1)
    on = plan_mwh > 0
    assert np.allclose(med[on], plan_mwh[on], atol=0.01 * CAP)
    assert (g[3] == 0).all()
    # the spread is the noise's, conditional on the last history days (normal: P90 - P10
    # = 2 x 1.2816 sd)
    _, sd = noise_mean_sd(m.units["U1"].noise, len(scn.dates))
    spread = np.percentile(g[-1], 90) - np.percentile(g[-1], 10)
    assert spread == pytest.approx(2 * 1.2816 * sd[-1] * CAP, rel=0.1)


def test_correlated_units_are_sampled_jointly(base):
    # two units sharing an AR(1) component of sd 0.04 next to their own 0.04: the
    # correlation of their deviations is 0.5 (0.04^2 / (0.04^2 + 0.04^2))
    hist = synthetic_history({"U1": 200.0, "U2": 200.0}, 900, seed=8, sd=0.04, shared_sd=0.04,
                             outages_per_year=0)
    scn = scenario_with(base, hist, UNITS[:2])
    m = fit_generation(hist, scn.units)
    assert m.correlation[0, 1] == pytest.approx(0.5, abs=0.12)
    plan = pd.DataFrame(np.nan, index=scn.dates, columns=["U1", "U2"])
    g = simulate_generation(m, scn.dates, plan, 4000, np.random.SeedSequence(1))
    r = np.corrcoef(g["U1"][-1], g["U2"][-1])[0, 1]
    assert r == pytest.approx(m.correlation[0, 1], abs=0.06)


def test_median_generation_fills_only_the_days_not_planned(base):
    hist = synthetic_history({"U1": 200.0}, 400, seed=9, outages_per_year=0)
    days = base.dates
    plan = pd.DataFrame({"date": days[:4], "unit": "U1", "mwh": 1234.0})
    scn = scenario_with(base, hist, UNITS[:1], plan=plan)
    med = median_generation(scn)["U1"]
    assert (med.iloc[:4] == 1234.0).all()
    assert med.iloc[4:].between(0.3 * CAP, CAP).all()
    assert median_generation(scn).equals(median_generation(scn))  # deterministic


# --------------------------------------------------------------------------- pieces


@pytest.mark.parametrize("model", [
    OutageModel(0.05, (1, 2, 5)), OutageModel(0.3, (1,)), OutageModel(0.01, (3, 9), (2, 7), 4),
    OutageModel(0.0, (), (), 3), OutageModel(0.02, (2, 3, 10), (1, 4), 6)])
@pytest.mark.parametrize("start_off", [True, False])
def test_outage_sampler_draws_the_process_off_line_probability_describes(model, start_off):
    # off_line_probability steps the exact state distribution of the process day by day;
    # with 20,000 futures the sampled share has an sd below 0.0036, so 0.015 is > 4 sd
    off, restart = simulate_outages(model, np.random.default_rng(0), 120, 20000, start_off)
    exact = off_line_probability(model, 120, start_off)
    assert np.allclose(off.mean(axis=1), exact, atol=0.015)
    # a restart day is exactly the first day on line after a day off line
    assert np.array_equal(restart[1:], off[:-1] & ~off[1:])
    assert (restart[0] == (start_off and model.off_at_end > 0) & ~off[0]).all()


def test_off_line_probability_of_an_outage_running_at_the_start():
    exact = off_line_probability(OutageModel(0.02, (2, 3, 10), (1, 4), 6), 120)
    # half the futures start with 1 day still to run, half with 4
    assert exact[0] == 1.0 and exact[3] == pytest.approx(0.5, abs=0.03) and exact[4] < 0.1
    # in the long run: mean length / (mean days on line between outages + mean length),
    # the days on line being geometric less the day it fails: 1 / 0.02 - 1 = 49
    assert exact[-1] == pytest.approx(5.0 / (49 + 5.0), abs=0.005)


def test_outage_runs_from_a_history():
    lf = np.full(100, 0.8)
    lf[10:13] = 0.0     # forced, 3 days
    lf[40:41] = 0.01    # near zero counts as off line: forced, 1 day
    lf[60:80] = 0.0     # 20 days: planned
    lf[97:] = 0.0       # running at the end
    m = fit_outages(lf)
    assert m.lengths == (3, 1) and m.planned_runs == 1 and m.off_at_end == 3
    # starts of forced runs / days at risk (73 days on line + the 3 days outages began)
    assert m.failure_prob == pytest.approx(3 / 76)
    assert m.remaining == (17,)  # only the 20-day run lasted longer than 3 days


def test_ar_noise_with_missing_days():
    # AR(1) phi 0.7, sd 1, a third of the days missing: the Kalman filter skips them
    rng = np.random.default_rng(11)
    n, phi = 3000, 0.7
    x = np.empty(n)
    v = 0.0
    for t in range(n):
        v = phi * v + rng.normal(0, np.sqrt(1 - phi**2))
        x[t] = v
    x[rng.random(n) < 0.33] = np.nan
    noise, innov = fit_ar_noise(x, max_order=2)
    assert noise.ar[0] == pytest.approx(phi, abs=0.06)
    assert noise.stationary_sd == pytest.approx(1.0, rel=0.1)
    assert np.isnan(innov[np.isnan(x)]).all()
    mean, sd = noise_mean_sd(noise, 60)
    assert sd[0] < sd[-1] and sd[-1] == pytest.approx(noise.stationary_sd, rel=0.02)
    paths = simulate_noise(noise, rng.standard_normal((60, 20000)), rng.standard_normal((20000, noise.order)))
    assert np.allclose(paths.mean(axis=1), mean, atol=0.03)
    assert np.allclose(paths.std(axis=1), sd, rtol=0.05)


@pytest.mark.parametrize("gap_days, persists", [(0, True), (800, False)])
def test_the_last_deviation_persists_unless_the_history_is_old(base, gap_days, persists):
    end = START - pd.Timedelta(days=1 + gap_days)
    hist = synthetic_history({"U1": 200.0}, 3 * 365, seed=4, end=end, outages_per_year=0)
    scn = scenario_with(base, hist, UNITS[:1])
    m = fit_generation(hist, scn.units)
    usual = m.units["U1"]
    hist.loc[hist.index[-5:], "mwh"] *= 1.25  # the last days run well above the usual
    m = fit_generation(hist, scn.units)
    plan = pd.DataFrame(np.nan, index=scn.dates, columns=["U1"])
    g = simulate_generation(m, scn.dates, plan, 4000, np.random.SeedSequence(3))["U1"]
    from reagentplan.timeseries.generation import expected_load_factor

    lift = np.median(g[0]) / CAP - expected_load_factor(usual, scn.dates[:1])[0]
    if persists:
        assert lift > 0.05
    else:
        assert abs(lift) < 0.02
