"""Invented demonstration scenarios, generated in code with fixed seeds.

Nothing here is real data: each function simulates a plausible situation so that
the demo, the example notebooks and the tutorials have something to diagnose.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["water_demand"]


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
    doy = dates.dayofyear.to_numpy()
    temp = 16 + 9 * np.sin(2 * np.pi * (doy - 105) / 365.25) + rng.normal(0, 2.5, n_days)
    wet = rng.random(n_days) < 0.3
    rain = np.where(wet, rng.gamma(1.4, 6.0, n_days), 0.0)
    weekend = (dates.dayofweek >= 5).astype(int)
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
