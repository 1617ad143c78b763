"""Invented demonstration scenarios, generated in code with fixed seeds.

Nothing here is real data: each function simulates a plausible situation so that
the demo, the example notebooks and the tutorials have something to diagnose.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["clinic_visits", "grid_peak_load", "store_sales", "water_demand"]


def water_demand(n_days: int = 730, *, rho: float = 0.6, seed: int = 20240101) -> pd.DataFrame:
    """Daily treated-water demand of an invented municipal utility.

    Demand (megalitres) rises with temperature, falls with rainfall and on
    weekends; the unexplained part follows an AR(1) process with coefficient
    ``rho``, so an OLS fit on temperature, rainfall and a weekend flag leaves
    positively autocorrelated residuals.

    Returns a DataFrame indexed by date with columns demand_ml, temp_c, rain_mm
    and weekend.
    """
    rng = np.random.default_rng(seed)
    dates = pd.date_range("2023-01-01", periods=n_days, freq="D")
    doy = dates.day_of_year.to_numpy()
    temp = 16 + 9 * np.sin(2 * np.pi * (doy - 105) / 365.25) + rng.normal(0, 2.5, n_days)
    wet = rng.random(n_days) < 0.3
    rain = np.where(wet, rng.gamma(1.4, 6.0, n_days), 0.0)
    weekend = (dates.day_of_week >= 5).astype(int)
    noise = np.empty(n_days)
    shocks = rng.normal(0, 4.0, n_days)
    noise[0] = shocks[0] / np.sqrt(1 - rho**2)
    for t in range(1, n_days):
        noise[t] = rho * noise[t - 1] + shocks[t]
    demand = 210 + 3.2 * temp - 0.9 * rain - 14 * weekend + noise
    return pd.DataFrame(
        {"demand_ml": demand.round(2), "temp_c": temp.round(1), "rain_mm": rain.round(1), "weekend": weekend},
        index=pd.Index(dates, name="date"),
    )


def _ar_noise(rng, n, coefs: dict, scale: float) -> np.ndarray:
    """u_t = sum_lag coefs[lag] * u_{t-lag} + eps_t, started from zeros after a burn-in."""
    burn = 200 + max(coefs, default=0)
    total = n + burn
    u = np.zeros(total)
    eps = rng.normal(0.0, scale, total)
    for t in range(total):
        u[t] = eps[t] + sum(c * u[t - lag] for lag, c in coefs.items() if t >= lag)
    return u[burn:]


def grid_peak_load(n_days: int = 540, *, rho: float = 0.45, seed: int = 7) -> pd.DataFrame:
    """Daily peak electricity load (MW) of an invented regional grid, with yesterday's load as a regressor.

    Load responds to cooling and heating degrees and follows its own past (a
    partial-adjustment model); the errors are AR(1) with coefficient ``rho``.
    Returns columns load_mw, load_lag, cdd, hdd indexed by date (the first day is
    used up by the lag).
    """
    rng = np.random.default_rng(seed)
    n = n_days + 1
    dates = pd.date_range("2022-03-01", periods=n, freq="D")
    temp = 14 + 11 * np.sin(2 * np.pi * (dates.day_of_year.to_numpy() - 110) / 365.25) + rng.normal(0, 3, n)
    cdd = np.clip(temp - 18, 0, None)
    hdd = np.clip(15 - temp, 0, None)
    u = _ar_noise(rng, n, {1: rho}, 25.0)
    load = np.empty(n)
    load[0] = 2400.0
    for t in range(1, n):
        load[t] = 900 + 0.6 * load[t - 1] + 38 * cdd[t] + 21 * hdd[t] + u[t]
    frame = pd.DataFrame(
        {"load_mw": load[1:], "load_lag": load[:-1], "cdd": cdd[1:], "hdd": hdd[1:]},
        index=pd.Index(dates[1:], name="date"),
    )
    return frame.round(2)


def clinic_visits(n_months: int = 156, *, seasonal_rho: float = 0.55, seed: int = 11) -> pd.DataFrame:
    """Monthly outpatient visits of an invented regional clinic network.

    Visits grow with the served population and rise in flu months; the part the
    model leaves out repeats from one year to the next (errors with lag-12
    correlation ``seasonal_rho`` and almost no lag-1 correlation), which the
    lag-1 statistic misses.
    """
    rng = np.random.default_rng(seed)
    months = pd.period_range("2012-01", periods=n_months, freq="M")
    population = 180 + 0.35 * np.arange(n_months) + rng.normal(0, 1.5, n_months)
    flu = np.isin(months.month, [12, 1, 2]).astype(int)
    u = _ar_noise(rng, n_months, {12: seasonal_rho}, 60.0)
    visits = 2000 + 21 * population + 650 * flu + u
    return pd.DataFrame(
        {"visits": visits.round(0), "population_k": population.round(2), "flu_season": flu},
        index=pd.Index(months, name="month"),
    )


def store_sales(
    n_stores: int = 300, n_weeks: int = 104, *, share_correlated: float = 0.3, seed: int = 5
) -> pd.DataFrame:
    """Weekly unit sales of an invented retail chain, one regression per store.

    Sales fall with price and rise with promotions; in a ``share_correlated``
    fraction of stores the unexplained part is AR(1) (rho drawn in 0.4..0.8), in
    the others it is independent.  Long format: store, week, units, price, promo.
    """
    rng = np.random.default_rng(seed)
    weeks = pd.date_range("2023-01-02", periods=n_weeks, freq="W-MON")
    parts = []
    for s in range(n_stores):
        price = 4.0 + 0.4 * rng.standard_normal(n_weeks)
        promo = (rng.random(n_weeks) < 0.15).astype(int)
        rho = rng.uniform(0.4, 0.8) if rng.random() < share_correlated else 0.0
        u = _ar_noise(rng, n_weeks, {1: rho}, 12.0)
        base = rng.uniform(150, 400)
        units = base - 18 * price + 40 * promo + u
        parts.append(
            pd.DataFrame(
                {"store": f"S{s:03d}", "week": weeks, "units": units.round(1), "price": price.round(2), "promo": promo}
            )
        )
    return pd.concat(parts, ignore_index=True)
