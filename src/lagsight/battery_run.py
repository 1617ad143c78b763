"""Run the test battery on one ordered series of residuals.

This is the single place that decides which tests apply to a
:class:`~lagsight.inputs.ResidualData` and with which settings; ``diagnose``
and the per-group panel both call it.  A test that cannot run records its
error message instead of stopping the others.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .inputs import ResidualData
from .order import infer_bg_order
from .stats import battery, runs
from .stats.correlogram import Correlogram, correlogram
from .stats.durbin_watson import DurbinWatsonDistribution, durbin_watson, durbin_watson_exact
from .stats.results import TestResult

__all__ = ["BatterySettings", "BatteryRun", "run_battery", "ljung_box_lag"]

# test names, used as keys of Diagnosis.tests and as labels in every view
DW = "Durbin-Watson"
BG = "Breusch-Godfrey"
LB = "Ljung-Box"
DH = "Durbin's h"
DALT = "Durbin's alternative"
SEASONAL = "Seasonal Durbin-Watson"
RUNS = "Runs test"


@dataclass(frozen=True)
class BatterySettings:
    alpha: float = 0.05
    alternative: str = "positive"
    max_lag: int | None = None
    bg_order: int | None = None
    seasonal_period: int | None = None
    lb_lag: int | None = None
    correlogram: bool = True


@dataclass(frozen=True, eq=False)
class BatteryRun:
    """Results of one battery run: tests by name, errors by name, the correlogram."""

    tests: dict
    errors: dict
    correlogram: Correlogram | None
    distribution: DurbinWatsonDistribution | None
    lagged_response: str | None
    seasonal_period: int | None
    bg_order: int | None
    notes: tuple = field(default_factory=tuple)


def ljung_box_lag(n: int, period: int | None) -> int:
    """Ljung-Box lag: 10 for non-seasonal data, 2 periods for seasonal data, at most n/5.

    A rule of thumb (common practice), not a theorem.
    """
    lag = 2 * period if period and period > 1 else 10
    return int(max(1, min(lag, n // 5)))


def _design(data: ResidualData) -> np.ndarray:
    """The design for auxiliary regressions: the model's, or a constant alone."""
    if data.exog is not None:
        return data.exog
    return np.ones((data.n, 1))


def run_battery(data: ResidualData, settings: BatterySettings) -> BatteryRun:
    e = data.resid
    n = data.n
    tests: dict[str, TestResult] = {}
    errors: dict[str, str] = {}
    notes: list[str] = []
    alt = settings.alternative

    def attempt(name, fn):
        try:
            tests[name] = fn()
        except (ValueError, TypeError, np.linalg.LinAlgError) as err:
            errors[name] = str(err).splitlines()[0]

    # which regressor is the lagged response, if any
    lag_col = None
    lagged_name = None
    if data.exog is not None and data.endog is not None:
        lag_col = battery.detect_lagged_response(data.exog, data.endog, data.exog_names)
        if lag_col is not None:
            lagged_name = data.exog_names[lag_col] if data.exog_names else f"column {lag_col}"

    # Durbin-Watson, exact when the design is known
    dist = None
    if data.dw_applicable:
        if data.exog is not None:
            def dw():
                nonlocal dist
                res, dist = durbin_watson_exact(e, data.exog, alternative=alt, alpha=settings.alpha)
                return res
            attempt(DW, dw)
        else:
            attempt(DW, lambda: durbin_watson(e, alternative=alt, alpha=settings.alpha))
    else:
        errors[DW] = (
            "not applicable: the exact Durbin-Watson distribution assumes fixed regressors "
            "and OLS residuals, which an ARIMA-type model does not have"
        )
    if lagged_name is not None and DW in tests:
        notes.append(
            f"The regressors include the lagged response ({lagged_name}): Durbin-Watson is biased "
            "towards 2 there, so Durbin's h and the alternative test are the ones to read."
        )
        attempt(DH, lambda: battery.durbin_h(e, data.exog, data.endog, lag_column=lag_col, alternative=alt))
        attempt(DALT, lambda: battery.durbin_alternative(e, data.exog, order=1, alternative="two-sided"))

    # Breusch-Godfrey
    bg_order = settings.bg_order or infer_bg_order(data.index)
    bg_order = int(max(1, min(bg_order, max(1, n // 4))))
    attempt(BG, lambda: battery.breusch_godfrey(e, _design(data), order=bg_order))

    # Ljung-Box and Box-Pierce
    period = settings.seasonal_period
    lb_lag = settings.lb_lag or ljung_box_lag(n, period)
    if data.arma_df and lb_lag <= data.arma_df:
        lb_lag = data.arma_df + max(1, lb_lag)
    attempt(LB, lambda: battery.ljung_box(e, lags=int(lb_lag), model_df=data.arma_df))

    # seasonal order-s Durbin-Watson
    if period and period > 1:
        if data.exog is None or not data.dw_applicable:
            errors[SEASONAL] = "needs the model's design matrix (pass exog) for an exact p-value"
        elif n <= 2 * period + (data.exog.shape[1] if data.exog is not None else 0):
            errors[SEASONAL] = f"too few observations ({n}) for the order-{period} statistic"
        else:
            attempt(SEASONAL, lambda: durbin_watson(e, data.exog, alternative=alt, lag=period,
                                                    alpha=settings.alpha))

    # runs test on signs
    attempt(RUNS, lambda: runs.runs_test(e, alternative=alt))

    # correlogram
    cg = None
    if settings.correlogram and n >= 4:
        nlags = settings.max_lag or default_max_lag(n, period)
        nlags = int(max(1, min(nlags, n // 2 - 1)))
        try:
            cg = correlogram(e, nlags=nlags, alpha=settings.alpha)
        except ValueError as err:
            errors["Correlogram"] = str(err)
    return BatteryRun(
        tests=tests, errors=errors, correlogram=cg, distribution=dist,
        lagged_response=lagged_name, seasonal_period=period if period and period > 1 else None,
        bg_order=bg_order, notes=tuple(notes),
    )


def default_max_lag(n: int, period: int | None) -> int:
    """Correlogram lags: 40, or 3 seasonal periods if longer, and at most n/4 (common practice)."""
    lag = 40
    if period and period > 1:
        lag = max(lag, 3 * period)
    return int(max(1, min(lag, n // 4)))


def strength(p: float, alpha: float) -> str:
    """Words for the strength of evidence carried by a p-value."""
    if p is None or math.isnan(p):
        return "unknown"
    if p < min(alpha, 0.001):
        return "strong"
    if p < min(alpha, 0.01):
        return "clear"
    if p < alpha:
        return "some"
    return "none"
