"""Sampled futures: joint generation × coal-quality futures pushed through the balance.

`sample_futures` is the interface the scheduler and the risk replay use::

    futures = sample_futures(scenario, n_futures=1000, seed=7)
    futures.dates                      # DatetimeIndex of the D planned days
    futures.flows["limestone_t"]       # (F, D) array: limestone demand per future and day [t]
    futures["gypsum_wet_t"]            # the same, by item access
    futures.quantile(0.9)              # DataFrame (date x quantity) of the P90 per day
    futures.samples("fly_ash_t")       # DataFrame (future x date) of every sample
    futures.notes                      # which model (and which fallback) made them

Every array in ``flows`` has shape (futures, days), in ``dtype`` (float32 by default):

| key | meaning |
| --- | --- |
| ``generation_mwh`` | plant net generation [MWh/d] |
| ``sulfur_pct`` | blended coal sulfur, as received [%] |
| ``limestone_t`` | limestone used: scrubber, HCl and sorbent injection [t/d, dry] |
| ``gypsum_wet_t`` | wet gypsum cake made [t/d] |
| ``fly_ash_t`` | fly ash collected [t/d] |
| ``bottom_ash_t`` | bottom ash made [t/d] |
| ``coal_t`` | coal burned [t/d] |
| ``so2_rolling_kg_per_gj`` | SO2 rate averaged over the permit's period [kg/GJ] |

Other outputs of ``mass_balance`` (``so2_emitted_t``, ``heat_input_gj``, ...) are kept
when named in ``keep``.

The same seed gives the same futures.  With no spread in the inputs (no history, no
``sulfur_sd_pct``, a dispatch plan for every day) every future equals the deterministic
``balance_frame``.

References
----------
Glasserman, P. (2003), *Monte Carlo Methods in Financial Engineering*, Springer, ch. 1-2:
sampling paths of stochastic processes and estimating quantiles from the samples.
Hyndman, R. J. and Fan, Y. (1996), "Sample quantiles in statistical packages", The
American Statistician 50(4):361-365: the quantile definition (their type 7, numpy's
default "linear").
"""

from __future__ import annotations

import dataclasses

import os
import sys
from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor, as_completed
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..balance import BalanceParams, Drivers, mass_balance, rejects_sulfur_share_blend
from ..errors import Problem, ScenarioError
from ..scenario import Scenario
from ..timeseries import streams
from ..timeseries.generation import (GenerationModel, GenerationSampler, fit_scenario_generation,
                                     generation_sampler, plan_basis, sample_generation)
from .coal_quality import PROPERTIES, QualityModel, blend, fit_quality, simulate_source

#: Quantities kept per future and day, in this order.
FLOWS = ("generation_mwh", "sulfur_pct", "limestone_t", "gypsum_wet_t", "fly_ash_t",
         "bottom_ash_t", "coal_t", "so2_rolling_kg_per_gj")
#: Futures drawn together from one set of random streams.
BLOCK_FUTURES = 2048
#: Futures per call of the mass balance: small enough to stay in cache.
CHUNK_FUTURES = 512
MAX_FUTURES = 1_000_000


@dataclass(frozen=True)
class ForecastModel:
    """Everything fitted from the histories: generation per unit [load factor, -] and coal
    quality per source [%, MJ/kg].  Fit once with `fit_forecast`, sample as often as
    needed."""

    generation: GenerationModel
    quality: QualityModel

    def notes(self, scenario: Scenario) -> list[str]:
        """Plain-words lines: which model (or fallback) drives each unit and source."""
        plan = scenario.generation_matrix()
        lines = []
        for u in scenario.units:
            planned = int(plan[u.unit].notna().sum())
            n = len(plan)
            m = self.generation.units.get(u.unit)
            if planned == n:
                head = f"generation {u.unit}: dispatch plan on all {n} days (the median)"
            else:
                head = (f"generation {u.unit}: forecast on {n - planned} of {n} days"
                        + (f", dispatch plan on {planned}" if planned else ""))
            if m is None:
                lines.append(f"{head}; no history, so no spread")
            else:
                lines.append(f"{head}; from history: {m.describe()}")
        corr = self.generation.describe_correlation()
        if corr:
            lines.append(corr)
        for s in scenario.coal_sources:
            lines.append(f"coal {s.source}: {self.quality.sources[s.source].describe()}")
        lines += [f"warning: {w}" for w in self.warnings(scenario)]
        return lines

    def warnings(self, scenario: Scenario) -> list[str]:
        """Sheet values of the sources burned in the horizon that disagree with their lab
        results (`reagentplan.forecast.coal_quality.SourceModel.warnings`)."""
        burned = np.nan_to_num(scenario.blend_matrix().to_numpy(dtype=float)).any(axis=0)
        out = []
        for i, s in enumerate(scenario.coal_sources):
            if burned[i]:
                out += self.quality.sources[s.source].warnings()
        return out


def fit_forecast(scenario: Scenario, progress=None, cache: bool = True) -> ForecastModel:
    """Fit the generation [MWh] and coal-quality [%, MJ/kg] models of a scenario.

    ``progress`` is an optional tqdm bar, advanced once per unit and per source.  A fit
    is remembered for as long as the scenario object lives (``cache=False`` refits).
    """
    if not cache:
        return ForecastModel(fit_scenario_generation.uncached(scenario, progress),
                             fit_quality.uncached(scenario, progress))
    return ForecastModel(fit_scenario_generation(scenario, progress),
                         fit_quality(scenario, progress))


@dataclass(frozen=True)
class Futures:
    """Sampled daily futures of a scenario (see the module docstring for the keys).

    Attributes
    ----------
    dates : pd.DatetimeIndex
        The D planned days.
    flows : dict[str, np.ndarray]
        Quantity -> (F, D) array [unit of the quantity], F futures × D days.
    seed : int
        Entropy of the random streams: ``sample_futures(..., seed=futures.seed)``
        reproduces them exactly.
    basis : np.ndarray (D,)
        Per day: ``plan``, ``forecast`` or ``plan+forecast`` (the source of generation).
    notes : tuple[str, ...]
        Which model (and which fallback) made each unit's and source's futures.
    model : ForecastModel
        The fitted models.
    """

    dates: pd.DatetimeIndex
    flows: dict[str, np.ndarray]
    seed: int
    basis: np.ndarray
    notes: tuple[str, ...]
    model: ForecastModel = field(repr=False)

    @property
    def n_futures(self) -> int:
        return next(iter(self.flows.values())).shape[0]

    @property
    def warnings(self) -> tuple[str, ...]:
        """The notes that are warnings (a sheet value that disagrees with the lab)."""
        return tuple(n[len("warning: "):] for n in self.notes if n.startswith("warning: "))

    @property
    def n_days(self) -> int:
        return len(self.dates)

    def __getitem__(self, quantity: str) -> np.ndarray:
        """``futures["limestone_t"]`` is ``futures.flows["limestone_t"]``, (F, D)."""
        return self.flows[quantity]

    def quantile(self, q: float | Sequence[float],
                 quantities: Sequence[str] | None = None) -> pd.DataFrame:
        """Quantile(s) across futures, per day [unit of each quantity]; NaN samples (a
        rolling SO2 rate with no heat input in its window) are left out.

        ``q`` a number in [0, 1]: a DataFrame indexed by date, one column per quantity.
        ``q`` a sequence: the same, with a (quantile, date) row index.
        """
        names = list(quantities or self.flows)
        qs = np.atleast_1d(np.asarray(q, dtype=float))
        values = {n: _quantile(self.flows[n], qs) for n in names}  # (Q, D)
        if np.ndim(q) == 0:
            return pd.DataFrame({n: v[0] for n, v in values.items()}, index=self.dates)
        index = pd.MultiIndex.from_product([qs, self.dates], names=["quantile", "date"])
        return pd.DataFrame({n: v.reshape(-1) for n, v in values.items()}, index=index)

    def mean(self, quantities: Sequence[str] | None = None) -> pd.DataFrame:
        """Mean across futures per day [unit], a DataFrame indexed by date (NaN samples
        left out)."""
        names = list(quantities or self.flows)
        return pd.DataFrame({n: np.nanmean(self.flows[n], axis=0, dtype=np.float64)
                             for n in names}, index=self.dates)

    def window(self, dates: pd.DatetimeIndex, scale: dict[str, np.ndarray] | None = None) -> "Futures":
        """The futures cut to ``dates`` (a run of consecutive days they hold), each
        quantity named in ``scale`` multiplied day by day by its (len(dates),) factor [-]
        (a balance of another stone or opening state, say).  Raises `KeyError` for a
        day they do not hold."""
        idx = self.dates.get_indexer(pd.DatetimeIndex(dates))
        if len(idx) == 0 or (idx < 0).any():
            raise KeyError(f"the futures cover {self.dates[0]:%Y-%m-%d} to {self.dates[-1]:%Y-%m-%d}, "
                           f"not every day of {pd.Timestamp(dates[0]):%Y-%m-%d} to {pd.Timestamp(dates[-1]):%Y-%m-%d}")
        scale = scale or {}
        flows = {}
        for name, x in self.flows.items():
            cut = x[:, idx]
            if name in scale:
                cut = (cut * np.asarray(scale[name], dtype=cut.dtype)[None, :]).astype(cut.dtype)
            flows[name] = cut
        return dataclasses.replace(self, dates=self.dates[idx], flows=flows, basis=self.basis[idx])

    def samples(self, quantity: str) -> pd.DataFrame:
        """Every sample of one quantity [its unit]: rows are futures, columns are dates."""
        return pd.DataFrame(self.flows[quantity], columns=self.dates)


def _quantile(x: np.ndarray, qs: np.ndarray) -> np.ndarray:
    """Quantiles across futures (axis 0); futures without a value (NaN: e.g. a rolling
    SO2 rate with no heat input in its window) are left out."""
    out = np.quantile(x, qs, axis=0)
    if np.isnan(out).any():
        out = np.nanquantile(x, qs, axis=0)
    return out


def _check_request(n_futures: int, seed) -> None:
    problems = []
    if isinstance(n_futures, bool) or int(n_futures) != n_futures or not 1 <= n_futures <= MAX_FUTURES:
        problems.append(Problem(None, None, "futures", f"found {n_futures!r}",
                                f"a whole number of futures from 1 to {MAX_FUTURES:,}"))
    if seed is not None and (isinstance(seed, bool) or int(seed) != seed or seed < 0):
        problems.append(Problem(None, None, "seed", f"found {seed!r}",
                                "a whole number of at least 0"))
    if problems:
        raise ScenarioError(problems)


@dataclass(frozen=True)
class _Prepared:
    """What every block of futures shares: computed once per call."""

    scenario: Scenario
    model: ForecastModel
    generation: GenerationSampler
    shares: np.ndarray          # (days, sources) blend [-]
    chlorine: np.ndarray        # (days,) blended chlorine [%]
    params: BalanceParams
    mill_rejects: np.ndarray    # (days,) blended mill rejects [% of coal fed]
    rejects_sulfur: np.ndarray  # (days,) blended share of sulfur in the rejects [%]


def _prepare(scenario: Scenario, model: ForecastModel) -> _Prepared:
    """The shared part of every block.  Mill rejects and their share of sulfur do not vary
    between futures: they blend as `reagentplan.balance.scenario_drivers` blends them
    (the sulfur share weighted by each source's sheet sulfur)."""
    shares = scenario.blend_matrix().to_numpy(dtype=float)
    return _Prepared(
        scenario, model,
        generation_sampler(model.generation, scenario.dates, scenario.generation_matrix()),
        shares, shares @ np.array([s.chlorine_pct for s in scenario.coal_sources]),
        BalanceParams.from_scenario(scenario), *_rejects_blend(scenario, shares))


def _rejects_blend(scenario: Scenario, shares: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per day (days,): the blend's mill rejects [% of coal fed] and the share of its
    sulfur in them [%], as `reagentplan.balance.scenario_drivers` blends them."""
    sources = scenario.coal_sources
    return (shares @ np.array([s.mill_rejects_pct for s in sources], dtype=float),
            rejects_sulfur_share_blend(shares, [s.sulfur_pct for s in sources],
                                       [s.rejects_sulfur_share_pct for s in sources]))


def _block_drivers(prep: _Prepared, n: int, root: np.random.SeedSequence, block: int,
                   dtype) -> dict[str, np.ndarray]:
    """The balance's drivers for one block of ``n`` futures, each (days, n), or (days,)
    when it does not vary."""
    scenario = prep.scenario
    gen = sample_generation(prep.generation, n, root, block, dtype)
    fixed = np.zeros((3, len(scenario.dates)))
    total = heat = coal_heat = None
    buf = None
    for u in scenario.units:
        hr, coal_frac = u.heat_rate_gj_per_mwh, 1 - u.gas_heat_share_pct / 100
        if u.unit in prep.generation.fixed:
            fixed += np.outer([1.0, hr, hr * coal_frac], prep.generation.fixed[u.unit])
            continue
        g = gen.pop(u.unit)
        if total is None:
            total, heat, coal_heat = g.copy(), g * dtype(hr), g * dtype(hr * coal_frac)
            buf = np.empty_like(g)
            continue
        total += g
        heat += np.multiply(g, dtype(hr), out=buf)
        coal_heat += np.multiply(g, dtype(hr * coal_frac), out=buf)
    out: dict[str, np.ndarray] = {}
    for name, acc, k in (("generation_mwh", total, 0), ("heat_input_gj", heat, 1),
                         ("coal_heat_gj", coal_heat, 2)):
        if acc is None:
            out[name] = fixed[k]
        else:
            acc += fixed[k][:, None].astype(dtype)
            out[name] = acc

    per_source = []
    for i, s in enumerate(scenario.coal_sources):
        src = prep.model.quality.sources[s.source]
        if np.any(prep.shares[:, i]) and src.varies:
            per_source.append(simulate_source(src, scenario.dates, n, root, i, block, dtype))
        else:
            per_source.append({p.name: p.center for p in src.properties})
    for name in PROPERTIES:
        out[name] = blend([v[name] for v in per_source], prep.shares, dtype)
    out["chlorine_pct"] = prep.chlorine
    # in the sampled type, so that coal without rejects gives the futures it gave before
    out["mill_rejects_pct"] = prep.mill_rejects.astype(dtype)
    out["rejects_sulfur_share_pct"] = prep.rejects_sulfur.astype(dtype)
    return out


def _chunk(x: np.ndarray, lo: int, hi: int) -> np.ndarray:
    """Futures lo:hi of a time-major driver as a (futures, days) array."""
    if x.ndim == 1:
        return x[None, :]
    return np.ascontiguousarray(x[:, lo:hi].T)


def _run_block(prep: _Prepared, flows: dict[str, np.ndarray], lo: int, hi: int,
               root: np.random.SeedSequence, block: int, dtype) -> None:
    """Sample futures lo:hi (block ``block``), run them through the balance in chunks,
    and write the kept quantities into ``flows``."""
    drivers = _block_drivers(prep, hi - lo, root, block, dtype)
    if all(x.ndim == 1 for x in drivers.values()):
        res = _balance(Drivers(**{k: v[None, :] for k, v in drivers.items()}), prep.params, flows)
        for k, arr in flows.items():
            arr[lo:hi] = res[k]
        return
    for a in range(0, hi - lo, CHUNK_FUTURES):
        b = min(a + CHUNK_FUTURES, hi - lo)
        res = _balance(Drivers(**{k: _chunk(v, a, b) for k, v in drivers.items()}), prep.params,
                       flows)
        for k, arr in flows.items():
            arr[lo + a:lo + b] = res[k]


def _balance(drivers: Drivers, params: BalanceParams, flows: dict) -> dict[str, np.ndarray]:
    res = mass_balance(drivers, params)
    unknown = [k for k in flows if k not in res]
    if unknown:
        raise ValueError(f"keep names {unknown}, which mass_balance does not give; it gives "
                         + ", ".join(res))
    return res


def sample_futures(scenario: Scenario, n_futures: int = 1000, seed: int | None = 0,
                   progress: bool | None = False, model: ForecastModel | None = None,
                   dtype=np.float32, keep: Sequence[str] = FLOWS,
                   workers: int | None = None) -> Futures:
    """Sample joint generation × coal-quality futures and run each through the balance.

    Parameters
    ----------
    scenario : the loaded scenario.
    n_futures : F, futures to sample (1 to 1,000,000).
    seed : the same seed (and F) gives the same futures; None draws fresh entropy (kept
        in ``Futures.seed``).
    progress : show a tqdm bar on stderr (None: only on a terminal).
    model : a `fit_forecast` result to reuse; fitted here when None.
    dtype : storage (and arithmetic) type of the sampled arrays.
    keep : quantities of the balance to keep (see `FLOWS`; any output of
        ``mass_balance`` may be named).
    workers : threads sampling blocks at once (None: one per CPU, at most 4).  The
        futures do not depend on it: each block has its own random streams.

    Returns
    -------
    Futures
        ``flows[name]`` of shape (F, D) [unit of the quantity].

    Raises
    ------
    ScenarioError
        For a number of futures or a seed that is not a whole number in range.

    Notes
    -----
    Futures are drawn in blocks of `BLOCK_FUTURES`, each from its own random streams,
    held time-major (days, futures) and pushed through ``mass_balance``
    `CHUNK_FUTURES` at a time; only ``keep`` is stored, so memory stays near
    F × D × 4 bytes per kept quantity plus one block's work.
    """
    from tqdm import tqdm

    _check_request(n_futures, seed)
    dtype = np.dtype(dtype).type
    n_futures = int(n_futures)
    root = streams.root_sequence(seed)
    blocks = [(b, lo, min(lo + BLOCK_FUTURES, n_futures))
              for b, lo in enumerate(range(0, n_futures, BLOCK_FUTURES))]
    fit_steps = 0 if model is not None else len(scenario.units) + len(scenario.coal_sources)
    if workers is None:
        workers = min(4, os.cpu_count() or 1)
    with tqdm(total=fit_steps + len(blocks), desc="forecast", unit="step", file=sys.stderr,
              disable=(None if progress is None else not progress), leave=False,
              delay=0.5) as bar:
        if model is None:
            model = fit_forecast(scenario, bar)
        prep = _prepare(scenario, model)
        flows = {k: np.empty((n_futures, scenario.plant.horizon_days), dtype=dtype) for k in keep}

        if workers > 1 and len(blocks) > 1:
            with ThreadPoolExecutor(max_workers=workers) as pool:
                done = [pool.submit(_run_block, prep, flows, lo, hi, root, b, dtype)
                        for b, lo, hi in blocks]
                for job in as_completed(done):
                    job.result()
                    bar.update(1)
        else:
            for b, lo, hi in blocks:
                _run_block(prep, flows, lo, hi, root, b, dtype)
                bar.update(1)
    return Futures(scenario.dates, flows, int(root.entropy), plan_basis(scenario),
                   tuple(model.notes(scenario)), model)


# --------------------------------------------------------------------------- shared drivers


#: The balance's drivers (`reagentplan.balance.Drivers`), in their order.
DRIVER_NAMES = ("generation_mwh", "heat_input_gj", "coal_heat_gj", "sulfur_pct", "ash_pct",
                "hhv_mj_per_kg", "chlorine_pct", "mill_rejects_pct", "rejects_sulfur_share_pct")


@dataclass(frozen=True)
class DriverSamples:
    """Sampled futures of the balance's *drivers* (generation, heat input, coal quality),
    before the balance: what several variants of one scenario can share (common random
    numbers) while each runs its own balance (`futures_from_drivers`).

    Attributes
    ----------
    dates : the D planned days.
    drivers : name -> (F, D) array, or (1, D) for a driver that does not vary between
        futures [MWh/d, GJ/d, %, MJ/kg], names as `DRIVER_NAMES`.
    n_futures : F.
    seed : entropy of the random streams (as `Futures.seed`).
    basis, notes : as `Futures`.
    """

    dates: pd.DatetimeIndex
    drivers: dict[str, np.ndarray]
    n_futures: int
    seed: int
    basis: np.ndarray
    notes: tuple[str, ...]

    @property
    def nbytes(self) -> int:
        return int(sum(a.nbytes for a in self.drivers.values()))


def sample_drivers(scenario: Scenario, n_futures: int = 1000, seed: int | None = 0,
                   model: ForecastModel | None = None, dtype=np.float32) -> DriverSamples:
    """The drivers of `sample_futures`' futures: the same random streams, blocks and
    values, stopped before the balance.

    ``futures_from_drivers(sample_drivers(s, n, seed), s)`` equals
    ``sample_futures(s, n, seed)`` (tested).  Units as `reagentplan.balance.Drivers`
    [MWh/d, GJ/d, %, MJ/kg].
    """
    _check_request(n_futures, seed)
    dtype = np.dtype(dtype).type
    n_futures = int(n_futures)
    root = streams.root_sequence(seed)
    if model is None:
        model = fit_forecast(scenario)
    prep = _prepare(scenario, model)
    days = scenario.plant.horizon_days
    parts: dict[str, list[np.ndarray]] = {name: [] for name in DRIVER_NAMES}
    spans = []
    for b, lo in enumerate(range(0, n_futures, BLOCK_FUTURES)):
        hi = min(lo + BLOCK_FUTURES, n_futures)
        block = _block_drivers(prep, hi - lo, root, b, dtype)
        spans.append((lo, hi))
        for name in DRIVER_NAMES:
            parts[name].append(np.asarray(block[name]))
    out: dict[str, np.ndarray] = {}
    for name, blocks in parts.items():
        if all(x.ndim == 1 for x in blocks):
            # the same in every future (a dispatch plan, a source without spread): kept
            # as one row, in the type the balance sees it in `sample_futures`
            out[name] = blocks[0][None, :]
            continue
        full = np.empty((n_futures, days), dtype=dtype)
        for (lo, hi), x in zip(spans, blocks):
            full[lo:hi] = x.T if x.ndim == 2 else x[None, :]
        out[name] = full
    return DriverSamples(scenario.dates, out, n_futures, int(root.entropy), plan_basis(scenario),
                         tuple(model.notes(scenario)))


def futures_from_drivers(samples: DriverSamples, scenario: Scenario,
                         keep: Sequence[str] = FLOWS, dtype=np.float32) -> Futures:
    """Run sampled drivers through ``scenario``'s balance (its plant and scrubber
    settings, `BalanceParams.from_scenario`): the `Futures` of that scenario under the
    same sampled generation and coal quality [t/d, MWh/d, %].

    ``scenario`` must plan the same days as the scenario the drivers were sampled from.
    The mill rejects are taken from ``scenario`` (they are not sampled).
    ``Futures.model`` is ``None`` (the drivers carry no fitted model).
    """
    if len(scenario.dates) != len(samples.dates) or not (scenario.dates == samples.dates).all():
        raise ValueError("the drivers were sampled for other days than the scenario plans")
    params = BalanceParams.from_scenario(scenario)
    n, days = samples.n_futures, len(samples.dates)
    flows = {k: np.empty((n, days), dtype=dtype) for k in keep}
    d = dict(samples.drivers)
    # the mill rejects are the scenario's own (they are not sampled): a variant that
    # changes them gets its rejects under the shared generation and coal quality
    rejects = _rejects_blend(scenario, scenario.blend_matrix().to_numpy(dtype=float))
    for name, x in zip(("mill_rejects_pct", "rejects_sulfur_share_pct"), rejects):
        d[name] = x[None, :].astype(d[name].dtype)
    for a in range(0, n, CHUNK_FUTURES):
        b = min(a + CHUNK_FUTURES, n)
        part = Drivers(**{k: (v if v.shape[0] == 1 else v[a:b]) for k, v in d.items()})
        res = _balance(part, params, flows)
        for k, arr in flows.items():
            arr[a:b] = res[k]
    return Futures(samples.dates, flows, samples.seed, samples.basis, samples.notes, None)
