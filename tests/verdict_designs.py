"""Invented designs for the verdict's size and power simulation (shared by tests/test_verdict.py and
benchmarks/bench_verdict.py).

Each design draws one model's input for ``diagnose`` from a seeded generator, with errors that are white
noise (rho = 0) or AR(1) with coefficient rho.  The scenarios are our own; nothing here is data.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd

import lagsight


def ar1_errors(n: int, rho: float, rng: np.random.Generator) -> np.ndarray:
    """AR(1) errors started from their stationary distribution (white noise when rho = 0)."""
    eps = rng.normal(size=n)
    u = np.empty(n)
    u[0] = eps[0] / math.sqrt(1.0 - rho * rho)
    for t in range(1, n):
        u[t] = rho * u[t - 1] + eps[t]
    return u


def _ols_residuals(y: np.ndarray, X: np.ndarray) -> np.ndarray:
    return y - X @ np.linalg.lstsq(X, y, rcond=None)[0]


def _regression(n: int, index: pd.Index | None, columns: Callable[[int], list]) -> Callable:
    X = np.column_stack([np.ones(n), *columns(n)])
    idx = pd.RangeIndex(n) if index is None else index

    def draw(rho: float, rng: np.random.Generator) -> dict:
        y = X @ np.linspace(1.0, 0.2, X.shape[1]) + ar1_errors(n, rho, rng)
        return {"model": pd.Series(_ols_residuals(y, X), index=idx), "exog": X}

    return draw


def _residuals_only(n: int, index: pd.Index) -> Callable:
    def draw(rho: float, rng: np.random.Generator) -> dict:
        u = ar1_errors(n, rho, rng)
        return {"model": pd.Series(u - u.mean(), index=index)}  # residuals of a mean-only model

    return draw


def _lagged_response(n: int) -> Callable:
    def draw(rho: float, rng: np.random.Generator) -> dict:
        m = n + 1
        x = rng.normal(size=m)
        u = ar1_errors(m, rho, rng)
        y = np.empty(m)
        y[0] = 2.0 * x[0] + u[0]
        for t in range(1, m):
            y[t] = 1.0 + 0.5 * y[t - 1] + 2.0 * x[t] + u[t]
        frame = pd.DataFrame({"y": y[1:], "y_lag": y[:-1], "x": x[1:]})
        return {"model": frame, "response": "y", "predictors": ["y_lag", "x"]}

    return draw


@dataclass(frozen=True)
class Design:
    name: str
    n: int
    what: str
    draw: Callable


def _trend(n):
    return [np.arange(n) / n]


DESIGNS = (
    Design("tiny shop, 8 periods", 8, "constant + trend, no frequency", _regression(8, None, _trend)),
    Design(
        "orchard, 9 years",
        9,
        "annual index, constant + trend",
        _regression(9, pd.date_range("2015-01-01", periods=9, freq="YS"), _trend),
    ),
    Design(
        "ferry tickets, 40 quarters",
        40,
        "quarterly index, trend + timetable-change dummy",
        _regression(
            40,
            pd.period_range("2014Q1", periods=40, freq="Q"),
            lambda n: [np.arange(n) / n, (np.arange(n) >= 26).astype(float)],
        ),
    ),
    Design(
        "heat pump, 96 months",
        96,
        "monthly index, constant + outdoor-temperature wave",
        _regression(
            96,
            pd.date_range("2016-01-01", periods=96, freq="MS"),
            lambda n: [np.cos(2 * np.pi * np.arange(n) / 12 + 0.4)],
        ),
    ),
    Design(
        "bike counter, 365 days",
        365,
        "daily index, constant + rain + holiday dummy",
        _regression(
            365,
            pd.date_range("2023-01-01", periods=365, freq="D"),
            lambda n: [np.abs(np.sin(np.arange(n) * 0.37)) * 8, (np.arange(n) % 53 == 0).astype(float)],
        ),
    ),
    Design(
        "wind mast, 1,000 hours",
        1000,
        "hourly index, constant + 3 regressors",
        _regression(
            1000,
            pd.date_range("2024-03-01", periods=1000, freq="h"),
            lambda n: [np.sin(np.arange(n) / 17.0), np.cos(np.arange(n) / 5.0), np.arange(n) / n],
        ),
    ),
    Design(
        "pressure log, 120 months, residuals only",
        120,
        "monthly index, no design",
        _residuals_only(120, pd.date_range("2010-01-01", periods=120, freq="MS")),
    ),
    Design(
        "warehouse stock, 80 weeks, lagged response", 80, "y on its own lag and one regressor", _lagged_response(80)
    ),
)


@dataclass(frozen=True)
class Rates:
    """Share of draws with 'evidence' from the verdict and from the leading test alone."""

    verdict: float
    leading: float
    reps: int
    leading_name: str
    rule: str

    @property
    def se(self) -> float:
        """Monte Carlo standard error of the verdict's rate."""
        return math.sqrt(max(self.verdict * (1 - self.verdict), 1e-12) / self.reps)


def simulate(design: Design, rho: float, reps: int, seed: int, alpha: float = 0.05) -> Rates:
    """Run ``diagnose`` (remedies off) on ``reps`` seeded draws; count 'evidence' by the verdict and by
    the leading test's own p-value below alpha."""
    rng = np.random.default_rng(seed)
    found = alone = 0
    lead = rule = ""
    for _ in range(reps):
        d = lagsight.diagnose(**design.draw(rho, rng), alpha=alpha, remedies=False)
        v = d.verdict
        lead, rule = v.leading, v.rule
        found += v.finding == "evidence"
        res = d.tests.get(v.leading)
        alone += res is not None and res.pvalue < alpha
    return Rates(found / reps, alone / reps, reps, lead, rule)
