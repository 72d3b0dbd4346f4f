"""Autoregressive noise: how long a day's deviation from the usual persists.

A zero-mean AR(p) process held in the state-space form of statsmodels' ``SARIMAX``:

    y[t] = Z a[t],    a[t+1] = T a[t] + R e[t],    e[t] ~ N(0, sigma^2)

It is fitted by exact maximum likelihood with the Kalman filter, which skips missing
days (outage days, days without a lab sample) instead of filling them, and it ends
with the distribution of the state on the first day after the data, so a forecast
carries on from the last deviation seen.  Sampling is a plain recursion over days,
vectorised over futures.

References
----------
Box, G. E. P., Jenkins, G. M., Reinsel, G. C. and Ljung, G. M. (2015), *Time Series
Analysis: Forecasting and Control*, 5th ed., Wiley: AR(p) models, order selection.
Durbin, J. and Koopman, S. J. (2012), *Time Series Analysis by State Space Methods*,
2nd ed., Oxford University Press: the Kalman filter with missing observations (§4.10)
and forecasting as prediction of the state.
Seabold, S. and Perktold, J. (2010), "statsmodels: Econometric and statistical modeling
with Python", Proc. 9th Python in Science Conf.; statsmodels documentation,
``statsmodels.tsa.statespace.sarimax.SARIMAX``.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace

import numpy as np
from scipy.linalg import solve_discrete_lyapunov

#: Fewest observed days needed per autoregressive coefficient, beyond a base of 10.
OBS_PER_COEFFICIENT = 10


@dataclass(frozen=True)
class ARNoise:
    """A fitted zero-mean AR(p) noise and its state on the first day after the data.

    Attributes
    ----------
    ar : tuple[float, ...]
        Autoregressive coefficients phi_1..phi_p [-]; empty for white noise.
    sigma : float
        Innovation standard deviation [unit of the series].
    design : np.ndarray (k,)
        Z, state to observation [-].
    transition : np.ndarray (k, k)
        T, state to next day's state [-].
    selection : np.ndarray (k,)
        R, innovation to state [-].
    start_mean, start_cov : np.ndarray (k,), (k, k)
        Distribution of the state on the first day after the data [unit, unit^2].
    """

    ar: tuple[float, ...]
    sigma: float
    design: np.ndarray
    transition: np.ndarray
    selection: np.ndarray
    start_mean: np.ndarray
    start_cov: np.ndarray

    @property
    def order(self) -> int:
        return len(self.ar)

    @property
    def stationary_cov(self) -> np.ndarray:
        """Unconditional covariance of the state [unit^2] (discrete Lyapunov equation)."""
        q = np.outer(self.selection, self.selection) * self.sigma**2
        return solve_discrete_lyapunov(self.transition, q)

    @property
    def stationary_sd(self) -> float:
        """Unconditional standard deviation of the series [unit]."""
        z = self.design
        return float(np.sqrt(max(z @ self.stationary_cov @ z, 0.0)))

    def memory_days(self, tol: float = 1e-3) -> int:
        """Days after which a deviation has faded below ``tol`` of itself [d] (from the
        spectral radius of the transition)."""
        radius = float(np.max(np.abs(np.linalg.eigvals(self.transition)))) if self.ar else 0.0
        if radius <= 0:
            return 1
        if radius >= 1:
            return 10**6
        return int(np.ceil(np.log(tol) / np.log(radius)))

    def forgotten(self) -> "ARNoise":
        """The same process started from its unconditional distribution (no memory)."""
        return replace(self, start_mean=np.zeros_like(self.start_mean),
                       start_cov=self.stationary_cov)

    def describe(self) -> str:
        if not self.ar:
            return "no persistence (independent days)"
        coefs = ", ".join(f"{a:.2f}" for a in self.ar)
        return f"AR({self.order}) phi = {coefs} per day"


def white_noise(sigma: float) -> ARNoise:
    """Independent daily deviations of standard deviation ``sigma`` [unit]."""
    one = np.ones(1)
    return ARNoise((), float(sigma), one, np.zeros((1, 1)), one.copy(), np.zeros(1),
                   np.full((1, 1), float(sigma) ** 2))


def stationary_ar1(phi: float, sd: float) -> ARNoise:
    """AR(1) of persistence ``phi`` [-/day] and unconditional sd ``sd`` [unit], started
    from its unconditional distribution (nothing known about the present)."""
    sigma = float(sd) * np.sqrt(1.0 - phi**2)
    noise = ARNoise((float(phi),), sigma, np.ones(1), np.full((1, 1), float(phi)), np.ones(1),
                    np.zeros(1), np.full((1, 1), float(sd) ** 2))
    return noise


def fit_ar_noise(series: np.ndarray, max_order: int = 3,
                 order: int | None = None) -> tuple[ARNoise, np.ndarray]:
    """Fit a zero-mean AR(p) to a daily series with missing days.

    Parameters
    ----------
    series : (n,) deviations from the usual value [unit], NaN where not observed.
    max_order : largest p tried; the order is chosen by AIC from 1..max_order.
    order : a fixed p instead of the AIC choice; 0 gives independent days (white noise).
        With too few observed days for the order asked, the noise is white as well.

    Returns
    -------
    (noise, innovations)
        The fitted `ARNoise` (its start state is the day after the last entry), and the
        standardised one-step forecast errors [-] per day, NaN where not observed; the
        latter give the correlation between series fitted separately.

    References
    ----------
    Akaike's information criterion for the order: Box et al. (2015) §6.2.
    statsmodels ``SARIMAX(order=(p, 0, 0), trend="n", concentrate_scale=True)``.
    """
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    y = np.asarray(series, dtype=float)
    observed = int(np.isfinite(y).sum())
    orders = [order] if order is not None else list(range(1, max_order + 1))
    orders = [p for p in orders if p > 0 and observed >= 10 + OBS_PER_COEFFICIENT * p]
    if not orders:
        sd = float(np.nanstd(y, ddof=1)) if observed > 1 else 0.0
        innov = y / sd if sd > 0 else np.where(np.isfinite(y), 0.0, np.nan)
        return white_noise(sd), innov
    best = None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for p in orders:
            model = SARIMAX(y, order=(p, 0, 0), trend="n", concentrate_scale=True)
            res = model.filter(model.fit(disp=False, return_params=True))  # no smoother needed
            if best is None or res.aic < best.aic:
                best = res
    fr = best.filter_results
    noise = ARNoise(
        ar=tuple(float(a) for a in best.arparams),
        sigma=float(np.sqrt(best.scale)),
        design=np.array(fr.design[0, :, 0], dtype=float),
        transition=np.array(fr.transition[:, :, 0], dtype=float),
        selection=np.array(fr.selection[:, 0, 0], dtype=float),
        start_mean=np.array(best.predicted_state[:, -1], dtype=float),
        start_cov=np.array(best.predicted_state_cov[:, :, -1], dtype=float),
    )
    innov = np.array(fr.standardized_forecasts_error[0], dtype=float)
    innov[np.asarray(fr.nmissing) > 0] = np.nan
    return noise, innov


def noise_mean_sd(noise: ARNoise, steps: int) -> tuple[np.ndarray, np.ndarray]:
    """Conditional mean and standard deviation of the noise on the next ``steps`` days
    [unit], given what the fit saw (the Kalman prediction step, repeated).

    References
    ----------
    Durbin and Koopman (2012) §4.11, forecasting.
    """
    a = np.array(noise.start_mean, dtype=float)
    cov = np.array(noise.start_cov, dtype=float)
    t, z = noise.transition, noise.design
    q = np.outer(noise.selection, noise.selection) * noise.sigma**2
    mean, sd = np.empty(steps), np.empty(steps)
    for k in range(steps):
        mean[k] = z @ a
        sd[k] = np.sqrt(max(z @ cov @ z, 0.0))
        a = t @ a
        cov = t @ cov @ t.T + q
    return mean, sd


def matrix_sqrt(cov: np.ndarray) -> np.ndarray:
    """L with L L' = cov for a symmetric positive semi-definite ``cov`` [unit^2]; L in
    [unit].  Eigenvalues below zero, from rounding, are set to zero."""
    w, v = np.linalg.eigh((np.asarray(cov, dtype=float) + np.asarray(cov, dtype=float).T) / 2)
    return v * np.sqrt(np.clip(w, 0.0, None))


def _cholesky(corr: np.ndarray) -> np.ndarray:
    """Lower Cholesky factor of a correlation matrix; one that is only semi-definite
    (two series moving as one) has its eigenvalues lifted to 1e-9 and its diagonal reset
    to 1 first."""
    k = len(corr)
    try:
        return np.linalg.cholesky(corr + 1e-12 * np.eye(k))
    except np.linalg.LinAlgError:
        w, v = np.linalg.eigh((corr + corr.T) / 2)
        fixed = (v * np.clip(w, 1e-9, None)) @ v.T
        d = np.sqrt(np.diag(fixed))
        return np.linalg.cholesky(fixed / np.outer(d, d))


def correlate(shocks: np.ndarray, corr: np.ndarray) -> np.ndarray:
    """Give independent standard normal series (k, ...) the correlation ``corr`` (k, k),
    in place: row i becomes sum over j <= i of L[i, j] × row j, with L L' = corr (Cholesky).
    """
    k = shocks.shape[0]
    if k < 2:
        return shocks
    chol = _cholesky(np.asarray(corr, dtype=float))
    kind = shocks.dtype.type
    for i in range(k - 1, 0, -1):  # from the last row, so the rows used are still original
        shocks[i] *= kind(chol[i, i])
        for j in range(i):
            if chol[i, j] != 0:
                shocks[i] += kind(chol[i, j]) * shocks[j]
    return shocks


def simulate_noise(noise: ARNoise, shocks: np.ndarray, start_shocks: np.ndarray,
                   overwrite: bool = False) -> np.ndarray:
    """Sample paths of the noise, time-major.

    Parameters
    ----------
    shocks : (n, F) standard normal innovations [-], one row per day (may be correlated
        with other series' shocks); the last row is not needed.
    start_shocks : (F, k) standard normals [-] for the state on the first day.
    overwrite : write the paths into ``shocks`` instead of a new array.

    Returns
    -------
    (n, F) paths [unit], in the dtype of ``shocks``: row 0 is the start state, row t the
    state after t innovations.
    """
    n, f = shocks.shape
    dtype = shocks.dtype.type
    state = noise.start_mean + start_shocks @ matrix_sqrt(noise.start_cov).T  # (F, k)
    if noise.order <= 1 and np.allclose(noise.selection, [1.0]):
        out = shocks if overwrite else np.empty_like(shocks)
        phi = dtype(noise.transition[0, 0])
        # innovation of day k-1 moves day k (numpy copes with the overlap in place)
        np.multiply(shocks[:-1], dtype(noise.sigma), out=out[1:])
        out[0] = state[:, 0]
        if phi != 0:
            buf = np.empty(f, dtype=dtype)
            for k in range(1, n):
                np.multiply(out[k - 1], phi, out=buf)
                out[k] += buf
        return out
    out = np.empty_like(shocks)
    t, z, r = noise.transition, noise.design, noise.selection
    state = state.astype(dtype)
    tt, zz, rr = t.T.astype(dtype), z.astype(dtype), (r * noise.sigma).astype(dtype)
    for k in range(n):
        out[k] = state @ zz
        state = state @ tt + shocks[k][:, None] * rr
    if overwrite:
        shocks[:] = out
        return shocks
    return out
