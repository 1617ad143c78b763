"""Run the test battery on one ordered series of residuals.

This is the single place that decides which tests apply to a
:class:`~lagsight.inputs.ResidualData` and with which settings; ``diagnose``
and the per-group panel both call it.  A test that cannot run records its
error message instead of stopping the others.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from .formats import format_count
from .hints import option_hint
from .inputs import ResidualData
from .order import infer_bg_order
from .stats import battery, runs
from .stats._arrays import scaled, unit_scale
from .stats._caught import caught_warnings
from .stats.correlogram import Correlogram, correlogram
from .stats.durbin_watson import DurbinWatsonDistribution, durbin_watson, durbin_watson_exact
from .stats.results import TestResult

__all__ = [
    "SEASONAL_GIVEN",
    "BatterySettings",
    "BatteryRun",
    "LeadPlan",
    "run_battery",
    "lead_plan",
    "input_problem",
    "ljung_box_lag",
    "MIN_PORTMANTEAU_N",
]

# test names, used as keys of Diagnosis.tests and as labels in every view
DW = "Durbin-Watson"
BG = "Breusch-Godfrey"
LB = "Ljung-Box"
DH = "Durbin's h"
DALT = "Durbin's alternative"
SEASONAL = "Seasonal Durbin-Watson"
SEASONAL_GIVEN = "Seasonal lag given lag 1"
RUNS = "Runs test"

#: fewest observations for a verdict led by the large-sample Ljung-Box test (our own threshold)
MIN_PORTMANTEAU_N = 10


@dataclass(frozen=True)
class LeadPlan:
    """Which test leads the verdict, decided from the model's kind before any p-value is read.

    ``kind`` is 'regression' (OLS-type residuals with their design), 'lagged response', 'arma'
    (ARIMA-type residuals) or 'residuals' (no design).  ``family`` holds the tests the finding is
    decided over (the leading test first; weighted Holm when there are two, see
    :data:`SEASONAL_PAIR_WEIGHTS`).  ``problem`` says
    why no verdict can be given (degenerate input, too few rows), else None.
    """

    kind: str
    leading: str
    family: tuple
    problem: str | None = None
    weights: tuple = ()

    def weight(self, name: str) -> float:
        """The share of alpha that the weighted Holm procedure gives a family member."""
        if not self.weights:
            return 1.0 / max(1, len(self.family))
        return dict(zip(self.family, self.weights)).get(name, 0.0)


#: weighted Holm over Durbin-Watson and its order-s twin: most of alpha stays with the
#: lag-1 test (the most powerful invariant test against AR(1) errors), so the verdict loses
#: little power against AR(1) while still catching strong seasonal correlation alone
SEASONAL_PAIR_WEIGHTS = (0.8, 0.2)


@dataclass(frozen=True)
class BatterySettings:
    alpha: float = 0.05
    alternative: str = "positive"
    max_lag: int | None = None
    bg_max_lag: int | None = None
    period: int | None = None
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
    period: int | None
    bg_max_lag: int | None
    notes: tuple = field(default_factory=tuple)
    plan: LeadPlan | None = None
    #: test name -> notes made from the library warnings raised while it ran (also in the test's notes)
    warned: dict = field(default_factory=dict)

    @property
    def warned_notes(self) -> tuple:
        """The library warnings caught while testing, one note per warning, prefixed with the test's name."""
        return tuple(f"{name}: {note}" for name, notes in self.warned.items() for note in notes)


def ljung_box_lag(n: int, period: int | None, *, leading: bool = False) -> int:
    """Ljung-Box lag: 10 for non-seasonal data, 2 periods for seasonal data, at most n/5.

    A rule of thumb (common practice), not a theorem.  When Ljung-Box leads the verdict (no design, or
    ARIMA-type residuals) the lag is at most n/20: the chi-square reference rejects white noise too often
    when the lag is large relative to n (our own simulation: 7% at lag 24 and 10% at lag 48 for n = 120,
    at alpha 0.05; about 5% at n/20 or fewer lags).
    """
    lag = 2 * period if period and period > 1 else 10
    return int(max(1, min(lag, n // 20 if leading else n // 5)))


def _relative_spread(v: np.ndarray) -> float:
    """(max - min) / max |v|, computed without overflow (0 for a constant or all-zero v)."""
    return float(np.ptp(unit_scale(v)))


def input_problem(data: ResidualData) -> str | None:
    """Why the residuals cannot be tested at all, or None.

    Non-finite values, a constant response, residuals that are zero relative to the response (an exact
    fit) and constant residuals.  The tolerances are our own: residuals count as zero when
    ||e|| <= 1e-8 ||y - mean y|| (1 - R^2 below 1e-16) or ||e|| <= 1e-12 ||y|| (rounding of a fit to a
    response with a large mean); values count as constant when their range is below 1e-12 of their size.
    """
    e = data.resid
    if not np.all(np.isfinite(e)):
        return "the residuals contain values that are not finite (they overflow double precision)"
    y = data.endog
    if y is not None and data.exog is not None:
        if not np.all(np.isfinite(y)):
            return "the response contains values that are not finite (they overflow double precision)"
        yu, top = scaled(y)
        if not np.any(y) or _relative_spread(y) <= 1e-12:
            return "the response is constant, so there is no variation for the model to leave in its residuals"
        eu = e / top  # the residuals in the response's units
        size = float(np.linalg.norm(eu))
        if size <= max(1e-8 * float(np.linalg.norm(yu - yu.mean())), 1e-12 * float(np.linalg.norm(yu))):
            return (
                "the residuals are numerically zero relative to the response: the model fits the data "
                "exactly, so there is no error left to test"
            )
    if _relative_spread(e) <= 1e-12:
        what = "all zero" if not np.any(e) else "constant"
        return f"the residuals are {what}, so their serial correlation is undefined"
    return None


def _seasonal_fits(n: int, period: int | None, k: int) -> bool:
    """Enough observations for the order-s statistic: n > 2s + k."""
    return period is not None and period > 0 and n > 2 * period + k


def lead_plan(data: ResidualData, *, lagged_response: str | None, period: int | None) -> LeadPlan:
    """The one rule for which test leads the verdict; it reads the model's kind, never a p-value."""
    n = data.n
    if data.exog is not None and data.dw_applicable:
        k = data.exog.shape[1]
        if lagged_response is not None:
            plan = LeadPlan("lagged response", DALT, (DALT,))
        else:
            if _seasonal_fits(n, period, k):
                plan = LeadPlan("regression", DW, (DW, SEASONAL), weights=SEASONAL_PAIR_WEIGHTS)
            else:
                plan = LeadPlan("regression", DW, (DW,))
    else:
        k = max(1, data.arma_df) if not data.dw_applicable else 1
        plan = LeadPlan("arma" if not data.dw_applicable else "residuals", LB, (LB,))
    problem = input_problem(data)
    if problem is None and n <= k + 1:
        problem = (
            f"n = {format_count(n)} observations for k = {k} coefficients: the residuals have at most one degree of "
            f"freedom, and the tests need n > k + 1"
        )
    if problem is None and plan.leading == LB and n < MIN_PORTMANTEAU_N:
        problem = (
            f"n = {format_count(n)} observations are too few for the large-sample Ljung-Box test that leads without "
            f"a design (at least {MIN_PORTMANTEAU_N})"
        )
    return dataclasses.replace(plan, problem=problem) if problem else plan


def run_battery(data: ResidualData, settings: BatterySettings) -> BatteryRun:
    e = data.resid
    n = data.n
    tests: dict[str, TestResult] = {}
    errors: dict[str, str] = {}
    notes: list[str] = []
    alt = settings.alternative
    period = settings.period if settings.period and settings.period > 1 else None

    warned: dict[str, tuple] = {}

    def attempt(name, fn, tests=tests, errors=errors):
        # a test that fails for any reason is recorded with a one-line reason; the others still run
        with caught_warnings() as caught:
            try:
                res = fn()
            except Exception as err:
                errors[name] = failure_reason(err)
                res = None
        if caught:
            warned[name] = caught.notes()
            if res is not None:
                res = dataclasses.replace(res, notes=tuple(res.notes) + warned[name])
        if res is not None:
            tests[name] = res

    # which regressor is the lagged response, if any
    lag_col = None
    lagged_name = None
    if data.exog is not None and data.endog is not None:
        lag_col = battery.detect_lagged_response(data.exog, data.endog, data.exog_names)
        if lag_col is not None:
            lagged_name = data.exog_names[lag_col] if data.exog_names else f"column {lag_col}"
    plan = lead_plan(data, lagged_response=lagged_name, period=period)
    bg_max_lag = settings.bg_max_lag or infer_bg_order(data.index)
    bg_max_lag = int(max(1, min(bg_max_lag, max(1, n // 4))))
    if plan.problem is not None:
        for name in (DW, BG, LB, RUNS):
            errors[name] = "not run: the input is degenerate (see the verdict)"
        return BatteryRun(
            tests=tests,
            errors=errors,
            correlogram=None,
            distribution=None,
            lagged_response=lagged_name,
            period=period,
            bg_max_lag=bg_max_lag,
            notes=(f"No test was run: {plan.problem}.",),
            plan=plan,
        )

    # every statistic is scale-free: residuals of unit size keep sums of squares finite; the tests
    # bring the design's columns to unit size a block of rows at a time (no copy of the design)
    raw = e
    e = unit_scale(e)
    exog = data.exog

    # the order-s distribution (see below) is built and dropped before the lag-1 one, which the views
    # keep: the two bases (n x k each) are never held at once
    seasonal_tests: dict = {}
    seasonal_errors: dict = {}
    if period and exog is not None and data.dw_applicable and _seasonal_fits(n, period, exog.shape[1]):
        s_lag, s_exog = int(period), exog
        attempt(
            SEASONAL,
            lambda: durbin_watson(e, s_exog, alternative=alt, lag=s_lag, alpha=settings.alpha),
            seasonal_tests,
            seasonal_errors,
        )

    # Durbin-Watson, exact when the design is known
    dist = None
    if data.dw_applicable:
        if exog is not None:

            def dw():
                nonlocal dist
                res, dist = durbin_watson_exact(e, exog, alternative=alt, alpha=settings.alpha)
                return res

            attempt(DW, dw)
        else:
            attempt(DW, lambda: durbin_watson(e, alternative=alt, alpha=settings.alpha))
            res = tests.get(DW)
            assumed = getattr(res, "k_prime", None) if getattr(res, "k_prime_assumed", False) else None
            if assumed is not None and getattr(res, "bounds", None) is not None:
                notes.append(
                    f"No design was given, so the Durbin-Watson bounds dL/dU assume k' = "
                    f"{assumed} (one regressor besides a constant); pass the fitted model "
                    f"or {option_hint('exog')} for the exact p-value of the real design."
                )
    else:
        errors[DW] = (
            "not applicable: the exact Durbin-Watson distribution assumes fixed regressors "
            "and OLS residuals, which an ARIMA-type model does not have"
        )
    if lagged_name is not None:
        notes.append(
            f"The regressors include the lagged response ({lagged_name}): Durbin-Watson is biased "
            "towards 2 there, so Durbin's alternative test leads and h is shown beside it."
        )
        attempt(DH, lambda: battery.durbin_h(raw, data.exog, data.endog, lag_column=lag_col, alternative=alt))
        attempt(DALT, lambda: battery.durbin_alternative(e, exog, max_lag=1, alternative=alt))

    # Breusch-Godfrey
    attempt(BG, lambda: battery.breusch_godfrey(e, np.ones((n, 1)) if exog is None else exog, max_lag=bg_max_lag))

    # Ljung-Box and Box-Pierce
    lb_lag = settings.lb_lag or ljung_box_lag(n, period, leading=plan.leading == LB)
    if data.arma_df and lb_lag <= data.arma_df:
        lb_lag = data.arma_df + max(1, lb_lag)
    attempt(LB, lambda: battery.ljung_box(e, max_lag=int(lb_lag), model_df=data.arma_df))

    # seasonal order-s Durbin-Watson: only when the period is known (index frequency or given)
    if period:
        if exog is None or not data.dw_applicable:
            errors[SEASONAL] = f"needs the model's design matrix ({option_hint('exog')}) for an exact p-value"
        elif not _seasonal_fits(n, period, exog.shape[1]):
            errors[SEASONAL] = f"too few observations ({format_count(n)}) for the order-{period} statistic"
        else:
            tests.update(seasonal_tests)
            errors.update(seasonal_errors)
            attempt(SEASONAL_GIVEN, lambda: battery.seasonal_lag_test(e, exog, period=period, alternative=alt))

    # runs test on signs
    attempt(RUNS, lambda: runs.runs_test(e, alternative=alt))

    # correlogram
    cg = None
    if settings.correlogram and n >= 4:
        nlags = settings.max_lag or default_max_lag(n, period)
        nlags = int(max(1, min(nlags, n // 2 - 1)))
        with caught_warnings() as caught:
            try:
                cg = correlogram(e, max_lag=nlags, alpha=settings.alpha)
            except Exception as err:
                errors["Correlogram"] = failure_reason(err)
        if caught:
            warned["Correlogram"] = caught.notes()
            notes += [f"Correlogram: {note}" for note in warned["Correlogram"]]
    return BatteryRun(
        tests=tests,
        errors=errors,
        correlogram=cg,
        distribution=dist,
        lagged_response=lagged_name,
        period=period,
        bg_max_lag=bg_max_lag,
        notes=tuple(notes),
        plan=plan,
        warned=warned,
    )


def failure_reason(err: BaseException, *, with_kind: bool = False) -> str:
    """One line on why a computation failed: its message's first line, with the kind of error when
    the message alone would not say it (a bare ZeroDivisionError, an index error deep in a library)
    or when ``with_kind`` (screen's table, where one column lists failures of every kind)."""
    first = (str(err).strip().splitlines() or [""])[0]
    if isinstance(err, (ValueError, TypeError)) and first and not with_kind:
        return first
    return f"{type(err).__name__}: {first}" if first else type(err).__name__


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
