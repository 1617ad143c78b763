"""A battery of serial-correlation tests on OLS residuals (the runs test is in :mod:`.runs`).

All functions take plain numpy arrays: ``resid`` (1-D), ``exog`` (n x k design
including any constant column) and, where needed, ``endog``.  Each returns a
frozen result dataclass built on :class:`lagsight.stats.results.TestResult`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import ClassVar

import numpy as np
import pandas as pd
from scipy import linalg, stats
from statsmodels.regression.linear_model import OLS

from ._arrays import (
    ArrayResult,
    _check_rank,
    as_design,
    as_vector,
    check_int,
    check_names,
    constant_columns,
    design_rank,
    has_constant,
    readonly,
    scaled,
)
from .correlogram import ljung_box_q, sample_acf
from .results import TestResult, check_alternative, tail_pvalue
from .tall import column_tops, r_factor, solve_r, stacked

__all__ = [
    "BreuschGodfreyResult",
    "PortmanteauResult",
    "DurbinHResult",
    "DurbinAlternativeResult",
    "breusch_godfrey",
    "ljung_box",
    "durbin_h",
    "durbin_alternative",
    "seasonal_lag_test",
    "detect_lagged_response",
]


def _upper_means_positive(stat_cdf: float, stat_sf: float, alternative: str) -> float:
    """p-value for a statistic whose LARGE values signal positive autocorrelation.

    :func:`tail_pvalue` maps 'positive' to its first argument, so the upper
    tail is passed first.
    """
    return tail_pvalue(stat_sf, stat_cdf, alternative)


def _unit_columns(exog, n: int, *, full_rank: bool) -> tuple[np.ndarray, np.ndarray]:
    """The design (never copied) and the factors that bring its columns to unit size: regressors of
    very different sizes are put on one footing, block by block, for the QR and the rank check."""
    X = as_design(exog, n, full_rank=False)
    top = column_tops(X)
    top = np.where(top > 0, top, 1.0)
    if full_rank:
        _check_rank(design_rank(X, top), X.shape[1], "exog")  # on columns of comparable size
    return X, top


def _check_varies(e: np.ndarray) -> None:
    """A ValueError for residuals without variation: their correlations are 0/0."""
    if not np.any(e - e.mean()):
        raise ValueError(
            f"'resid' must vary (got {e.shape[0]} equal values): the autocorrelations of a constant are undefined"
        )


def _aux_rows(X, top, e, lags, *, start=0, constant=False):
    """``block(a, b)`` for rows t = start + a .. start + b - 1 of the auxiliary regression
    [X_t / top, (1), e_{t-l} for l in lags, e_t], with e_{t-l} = 0 before the sample.  Read a
    block at a time, so the n x (k + p) matrix is never formed."""
    lags = list(lags)
    extra = (1 if constant else 0) + len(lags)

    def block(a, b):
        a, b = a + start, b + start
        B = np.zeros((b - a, X.shape[1] + extra + 1))
        np.divide(X[a:b], top, out=B[:, : X.shape[1]])
        col = X.shape[1]
        if constant:
            B[:, col] = 1.0
            col += 1
        for lag in lags:
            lo = max(a, lag)
            if lo < b:
                B[lo - a :, col] = e[lo - lag : b - lag]
            col += 1
        B[:, col] = e[a:b]
        return B

    return block


def _aux_precondition(X, top, e, lags, *, start=0, constant=False):
    """An approximate R factor of the auxiliary matrix of :func:`_aux_rows`: the exact one of the
    design's columns and one of the residuals' columns (from their autocovariances), the cross
    products left out.  They are small (the residuals are orthogonal to the design), so the
    auxiliary matrix times its inverse is nearly orthonormal and one pass of products gives the
    R factor (:func:`lagsight.stats.tall.r_factor` checks, and makes two passes otherwise)."""
    n = e.shape[0]
    Xs = X[start:]
    with np.errstate(over="ignore", invalid="ignore"):
        GX = (Xs.T @ Xs) / np.outer(top, top)
        if constant:
            col = Xs.sum(axis=0) / top
            GX = np.block([[GX, col[:, None]], [col[None, :], np.array([[float(n - start)]])]])
    shifts = list(lags) + [0]
    c = {d: float(e[d:] @ e[: n - d]) for d in {abs(i - j) for i in shifts for j in shifts}}
    GE = np.array([[c[abs(i - j)] for j in shifts] for i in shifts])
    try:
        return linalg.block_diag(np.linalg.cholesky(GX).T, np.linalg.cholesky(GE).T)
    except np.linalg.LinAlgError:
        return None


def _aux_fit(rows: int, block, ncols: int, precondition=None):
    """The least-squares solution of the last of ``ncols + 1`` columns on the others."""
    return solve_r(r_factor(rows, ncols + 1, block, precondition=precondition), rows)


def _wald_f(sol, idx) -> float:
    """F statistic of the joint test that the coefficients ``idx`` are zero (statsmodels' f_test)."""
    b = sol.params[idx]
    V = sol.cov[np.ix_(idx, idx)] * sol.scale
    return float(b @ np.linalg.pinv(V) @ b) / len(idx)


# --------------------------------------------------------------------------- BG
@dataclass(frozen=True)
class BreuschGodfreyResult(TestResult):
    """Breusch-Godfrey LM test; ``statistic`` is n*R^2 (chi-square), F form alongside."""

    f_statistic: float = math.nan
    f_pvalue: float = math.nan
    f_df: tuple = ()
    max_lag: int = 0


def breusch_godfrey(resid, exog, *, max_lag: int) -> BreuschGodfreyResult:
    """Breusch-Godfrey test for autocorrelation up to lag ``max_lag``.

    The auxiliary regression of ``resid`` on ``[exog, e_{t-1}, ..., e_{t-max_lag}]``
    uses zeros for pre-sample residuals (all n rows kept) and adds a constant
    when ``exog`` has none, as statsmodels' ``acorr_breusch_godfrey`` does.
    LM = n R^2 ~ chi2(max_lag); F = joint test of the lag coefficients.

    The lag columns come last, so with the R factor of [aux, e] (read in row blocks,
    :mod:`lagsight.stats.tall`) RSS_restricted - RSS_full is the sum of squares of the last
    ``max_lag`` entries of Q'e: the same numbers as statsmodels' OLS + f_test.
    """
    e, _ = scaled(as_vector(resid, "resid", min_len=3))
    _check_varies(e)
    n = e.shape[0]
    order = check_int(max_lag, "max_lag", minimum=1)
    X, top = _unit_columns(exog, n, full_rank=False)  # a deficient design falls back to pinv below
    notes = [f"Pre-sample residuals set to zero; all {n:,} observations used."]
    constant = not has_constant(X)
    if constant:
        notes.append("A constant was added to the auxiliary regression (the design has none).")
    k_aux = X.shape[1] + int(constant) + order
    if n <= k_aux:
        raise ValueError(
            f"'max_lag' is too large for n={n}: need n > {k_aux - order} regressors + max_lag (got {order})"
        )
    lags = range(1, order + 1)
    block = _aux_rows(X, top, e, lags, constant=constant)
    R = r_factor(n, k_aux + 1, block, precondition=_aux_precondition(X, top, e, lags, constant=constant))
    diag = np.diag(R)[:k_aux]
    if diag.min() > 1e-10 * diag.max():
        coef = R[:k_aux, k_aux]
        rss = float(R[k_aux, k_aux] ** 2)
        dev = e - e.mean()
        lm = float(n * (1.0 - rss / float(dev @ dev)))
        df_denom = float(n - k_aux)
        gain = float(coef[k_aux - order :] @ coef[k_aux - order :])
        if rss <= 1e-13 * float(e @ e):  # the lags and the design explain the residuals exactly
            f_stat, f_p = math.inf, 0.0
        else:
            f_stat = (gain / order) / (rss / df_denom)
            f_p = float(stats.f.sf(f_stat, order, df_denom))
    else:  # rank-deficient auxiliary design: statsmodels' pseudo-inverse handles it
        aux = block(0, n)[:, :k_aux]
        fit = OLS(e, aux).fit()
        lm = float(n * fit.rsquared)
        ftest = fit.f_test(np.eye(order, k_aux, k_aux - order))
        df_denom = float(ftest.df_denom)
        f_stat, f_p = float(np.squeeze(ftest.fvalue)), float(np.squeeze(ftest.pvalue))
    return BreuschGodfreyResult(
        statistic=lm,
        pvalue=float(stats.chi2.sf(lm, order)),
        alternative=f"autocorrelation up to lag {order}",
        df=(float(order),),
        method="LM = n\u00b7R\u00b2 of the auxiliary regression, chi-square",
        name="Breusch-Godfrey",
        notes=tuple(notes),
        f_statistic=float(f_stat),
        f_pvalue=f_p,
        f_df=(float(order), df_denom),
        max_lag=order,
    )


# ------------------------------------------------------------------ Ljung-Box
@dataclass(frozen=True)
class PortmanteauResult(ArrayResult):
    """Ljung-Box and Box-Pierce statistics for a set of lags.

    ``statistic``/``pvalue``/``df`` are the Ljung-Box values at the largest lag;
    the arrays hold every requested lag.  ``lag_df`` is lags - model_df.
    """

    lags: np.ndarray = field(default_factory=lambda: np.empty(0, int))
    lb_stat: np.ndarray = field(default_factory=lambda: np.empty(0))
    lb_pvalue: np.ndarray = field(default_factory=lambda: np.empty(0))
    bp_stat: np.ndarray = field(default_factory=lambda: np.empty(0))
    bp_pvalue: np.ndarray = field(default_factory=lambda: np.empty(0))
    lag_df: np.ndarray = field(default_factory=lambda: np.empty(0, int))
    model_df: int = 0


def ljung_box(resid, *, max_lag, model_df: int = 0) -> PortmanteauResult:
    """Ljung-Box (and Box-Pierce) portmanteau tests.

    Parameters
    ----------
    resid : 1-D array
    max_lag : int or sequence of int
        An int L tests lags 1..L; a sequence tests exactly those lags.
    model_df : int
        Degrees of freedom used up by a fitted ARMA model; the reference
        chi-square has lags - model_df df, and lags with df <= 0 get NaN p-values.
    """
    e, _ = scaled(as_vector(resid, "resid", min_len=3))
    _check_varies(e)
    n = e.shape[0]
    model_df = check_int(model_df, "model_df", minimum=0)
    if np.ndim(max_lag) == 0:
        maxlag = check_int(max_lag, "max_lag", minimum=1)
        lag_arr = np.arange(1, maxlag + 1)
    else:
        raw = list(np.asarray(max_lag).ravel())
        if not raw:
            raise ValueError("'max_lag' must be an integer ≥ 1 or a non-empty sequence of them (got [])")
        lag_arr = np.array(
            sorted({check_int(v.item() if hasattr(v, "item") else v, "max_lag", minimum=1) for v in raw})
        )
    if lag_arr.max() >= n:
        raise ValueError(f"'max_lag' must be smaller than n={n} (got largest lag {int(lag_arr.max())})")
    # Q_LB = n(n+2) sum r_k^2/(n-k), Q_BP = n sum r_k^2 (Ljung & Box 1978; Box & Pierce 1970)
    r = sample_acf(e, int(lag_arr.max()))
    lb_all = ljung_box_q(r, n)
    bp_all = n * np.cumsum(r * r)
    lag_df = lag_arr - model_df
    with np.errstate(invalid="ignore"):
        dfs = np.where(lag_df > 0, lag_df, np.nan)
        table = pd.DataFrame(
            {
                "lb_stat": lb_all[lag_arr - 1],
                "lb_pvalue": stats.chi2.sf(lb_all[lag_arr - 1], dfs),
                "bp_stat": bp_all[lag_arr - 1],
                "bp_pvalue": stats.chi2.sf(bp_all[lag_arr - 1], dfs),
            }
        )
    notes = ["Residuals are demeaned before the autocorrelations are computed."]
    bad = lag_arr[lag_df <= 0]
    if bad.size:
        notes.append(
            f"No p-value at lag(s) {', '.join(map(str, bad))}: lags - model_df <= 0 leaves no degrees of freedom."
        )
    top = lag_arr.max()
    return PortmanteauResult(
        statistic=float(table["lb_stat"].iloc[-1]),
        pvalue=float(table["lb_pvalue"].iloc[-1]),
        alternative=f"autocorrelation at some lag up to {int(top)}",
        df=(float(top - model_df),),
        method=f"Ljung-Box Q, chi-square; statistic and p-value at the largest lag ({int(top)})",
        name="Ljung-Box",
        notes=tuple(notes),
        lags=readonly(lag_arr),
        lb_stat=readonly(table["lb_stat"].to_numpy(float)),
        lb_pvalue=readonly(table["lb_pvalue"].to_numpy(float)),
        bp_stat=readonly(table["bp_stat"].to_numpy(float)),
        bp_pvalue=readonly(table["bp_pvalue"].to_numpy(float)),
        lag_df=readonly(lag_df),
        model_df=model_df,
    )


# ---------------------------------------------------------------- Durbin's h
_LAG_HINTS = ("lag", "l1", "_1", "(-1)", "[-1]", "shift", "prev")


def detect_lagged_response(exog, endog, names=None):
    """Index of the ``exog`` column equal to ``endog`` shifted by one, or None.

    Column j matches when ``exog[t, j] == endog[t-1]`` for t = 1..n-1 within a
    relative tolerance of 1e-10.  Constant columns never match.  If several
    columns match, one whose name hints at a lag ('lag', 'l1', '_1', ...) wins,
    else the first.
    """
    y = as_vector(endog, "endog", min_len=3)
    X = as_design(exog, y.shape[0], full_rank=False)
    labels = check_names(names, X.shape[1])
    target = y[:-1]
    scale = max(float(np.max(np.abs(target))), np.finfo(float).tiny)
    const = constant_columns(X)
    head = min(64, target.size)  # most columns fail on the first rows already: no full pass for them

    def matches(j):
        tol = 1e-10 * scale
        return np.max(np.abs(X[1 : head + 1, j] - target[:head])) <= tol and np.max(np.abs(X[1:, j] - target)) <= tol

    hits = [j for j in range(X.shape[1]) if not const[j] and matches(j)]
    if not hits:
        return None
    for j in hits:
        if any(h in labels[j].lower() for h in _LAG_HINTS):
            return j
    return hits[0]


@dataclass(frozen=True)
class DurbinHResult(TestResult):
    """Durbin's h; ``rho`` = 1 - d/2, ``var_lag`` = OLS variance of the lag coefficient."""

    rho: float = math.nan
    dw: float = math.nan
    var_lag: float = math.nan
    lag_column: int = -1
    n: int = 0
    #: P(H <= h) and P(H >= h) under the null (standard normal)
    lower_tail: float = math.nan
    upper_tail: float = math.nan
    #: large h signals positive autocorrelation (the upper tail), unlike d
    large_means_positive: ClassVar[bool] = True


def _ols_checked(y, X, top, e):
    """The OLS fit of y on the columns X / top (read in row blocks), after checking that ``e`` are
    its residuals."""
    n = y.shape[0]
    sol = solve_r(r_factor(n, X.shape[1] + 1, stacked(X, y, scale=np.append(top, 1.0))), n)
    scale = max(float(np.max(np.abs(y))), 1.0)
    gap = float(np.max(np.abs((y - X @ (sol.params / top)) - e)))
    if gap > 1e-6 * scale:
        raise ValueError(f"'resid' must be the OLS residuals of endog on exog (max difference {gap:.3g})")
    return sol


def durbin_h(resid, exog, endog, *, lag_column=None, alternative="positive") -> DurbinHResult:
    """Durbin's (1970) h test for a regression that includes the lagged response.

    h = rho * sqrt(n / (1 - n Var(b_lag))) with rho = 1 - d/2 (d the Durbin-Watson
    statistic), compared with the standard normal.  Large h means positive
    autocorrelation.  When n Var(b_lag) >= 1, h is undefined: statistic and
    p-value are NaN and a note points to :func:`durbin_alternative`.

    Parameters
    ----------
    lag_column : int, optional
        Column of ``exog`` holding the lagged response; found with
        :func:`detect_lagged_response` when omitted.
    """
    check_alternative(alternative)
    e = as_vector(resid, "resid", min_len=3)
    n = e.shape[0]
    y = as_vector(endog, "endog")
    if y.shape[0] != n:
        raise ValueError(f"'endog' must have {n} observations to match 'resid' (got {y.shape[0]})")
    X, col_scale = _unit_columns(exog, n, full_rank=True)
    k = X.shape[1]
    if n <= k:
        raise ValueError(f"'exog' must have fewer columns than observations n={n} (got {k})")
    notes = []
    if lag_column is None:
        lag_column = detect_lagged_response(X, y)
        if lag_column is None:
            raise ValueError("'lag_column' must be given: no column of 'exog' equals 'endog' shifted by one (got None)")
        notes.append(f"Lagged response found in column {lag_column}.")
    lag_column = check_int(lag_column, "lag_column", minimum=0)
    if lag_column >= k:
        raise ValueError(f"'lag_column' must be < {k}, the number of columns of 'exog' (got {lag_column})")
    y, y_scale = scaled(y)
    e = e / y_scale  # the residuals of the scaled response
    fit = _ols_checked(y, X, col_scale, e)
    e, _ = scaled(e)
    d = float(np.sum(np.diff(e) ** 2) / np.dot(e, e))
    rho = 1.0 - d / 2.0
    # Var(b_lag) in the original units: b_lag = b_scaled * y_scale / col_scale[lag]
    var_lag = float((fit.bse[lag_column] * (y_scale / col_scale[lag_column])) ** 2)
    nv = n * var_lag
    method = "normal; \u03c1 = 1 \u2212 d/2 from the Durbin-Watson d"
    if nv >= 1.0:
        notes.append(
            f"h is undefined because n times the variance of the lagged response's coefficient is {nv:.4g} "
            "(1 or more); Durbin's alternative test does not need it."
        )
        h = pval = lower = upper = math.nan
    else:
        h = rho * math.sqrt(n / (1.0 - nv))
        lower, upper = float(stats.norm.cdf(h)), float(stats.norm.sf(h))
        pval = _upper_means_positive(lower, upper, alternative)
    notes.append("Large-sample test: the normal reference is asymptotic.")
    return DurbinHResult(
        statistic=float(h),
        pvalue=float(pval),
        alternative=alternative,
        df=None,
        method=method,
        name="Durbin's h",
        notes=tuple(notes),
        rho=rho,
        dw=d,
        var_lag=var_lag,
        lag_column=lag_column,
        n=n,
        lower_tail=lower,
        upper_tail=upper,
    )


@dataclass(frozen=True)
class DurbinAlternativeResult(TestResult):
    """Durbin's alternative test of order 1: the t-ratio of the e_{t-1} coefficient."""

    #: P(T <= t) and P(T >= t) under the null (Student t)
    lower_tail: float = math.nan
    upper_tail: float = math.nan
    #: large t signals positive autocorrelation (the upper tail), unlike d
    large_means_positive: ClassVar[bool] = True


def durbin_alternative(resid, exog, *, max_lag: int = 1, alternative: str = "two-sided") -> TestResult:
    """Durbin's alternative test: regress e_t on exog_t and e_{t-1}, ..., e_{t-max_lag}.

    The first ``max_lag`` rows are dropped (their lagged residuals are pre-sample).
    With ``max_lag=1`` the statistic is the t-ratio of the e_{t-1} coefficient
    (Student t, any alternative; large t means positive autocorrelation); with
    ``max_lag > 1`` it is the F statistic of the joint test (two-sided only).
    """
    check_alternative(alternative)
    e = as_vector(resid, "resid", min_len=3)
    n = e.shape[0]
    order = check_int(max_lag, "max_lag", minimum=1)
    if order > 1 and alternative != "two-sided":
        raise ValueError(f"'alternative' must be 'two-sided' when max_lag > 1 (got {alternative!r})")
    e, _ = scaled(e)
    X, top = _unit_columns(exog, n, full_rank=True)
    k = X.shape[1]
    m = n - order
    if m <= k + order:
        raise ValueError(
            f"'max_lag' is too large for n={n} with {k} regressors: need n - max_lag > k + max_lag (got {order})"
        )
    # rows t = order .. n-1 of [X_t, e_{t-1}, ..., e_{t-order}, e_t], a block at a time
    lags = range(1, order + 1)
    fit = _aux_fit(
        m, _aux_rows(X, top, e, lags, start=order), k + order, _aux_precondition(X, top, e, lags, start=order)
    )
    notes = (
        f"The first {order:,} observation(s) are dropped: their lagged residuals are pre-sample; {m:,} rows used.",
        "Assumes the residuals are the OLS residuals of the response on the design (which may include the "
        "lagged response), homoskedastic errors, and no constant added beyond those in the design.",
    )
    if order == 1:
        t = float(fit.params[-1] / fit.bse[-1])
        df = float(fit.df_resid)
        lower, upper = float(stats.t.cdf(t, df)), float(stats.t.sf(t, df))
        return DurbinAlternativeResult(
            statistic=t,
            pvalue=_upper_means_positive(lower, upper, alternative),
            alternative=alternative,
            df=(df,),
            method="t-test of the coefficient on the lag-1 residual, Student t",
            name="Durbin's alternative",
            notes=notes,
            lower_tail=lower,
            upper_tail=upper,
        )
    f_stat = _wald_f(fit, np.arange(k, k + order))
    return TestResult(
        statistic=f_stat,
        pvalue=float(stats.f.sf(f_stat, order, fit.df_resid)),
        alternative="two-sided",
        df=(float(order), float(fit.df_resid)),
        method=f"F-test of the {order} lagged-residual coefficients",
        name="Durbin's alternative",
        notes=notes,
    )


def seasonal_lag_test(resid, exog, *, period, alternative="positive") -> DurbinAlternativeResult:
    """Correlation at lag s beyond what lag 1 carries: regress e_t on exog_t, e_{t-1} and
    e_{t-s} (t = s .. n-1) and take the t-ratio of the e_{t-s} coefficient.

    The order-s Durbin-Watson statistic assumes independent errors; under AR(1) errors its
    null distribution is wrong (its rejection rate grows with rho although an AR(1) process
    has no partial correlation at lag s).  This regression form, Durbin's alternative test
    with the lags 1 and s, stays valid with lag-1 correlation (large sample).  Large t
    means positive correlation at lag s.
    """
    check_alternative(alternative)
    e = as_vector(resid, "resid", min_len=3)
    n = e.shape[0]
    period = check_int(period, "period", minimum=2)
    e, _ = scaled(e)
    X, top = _unit_columns(exog, n, full_rank=True)
    k = X.shape[1]
    m = n - period
    if m <= k + 2:
        raise ValueError(
            f"'period' is too large for n={n} with {k} regressors: need n - period > k + 2 (got period={period})"
        )
    # rows t = s .. n-1 of [X_t, e_{t-1}, e_{t-s}, e_t], a block at a time
    fit = _aux_fit(
        m,
        _aux_rows(X, top, e, (1, period), start=period),
        k + 2,
        _aux_precondition(X, top, e, (1, period), start=period),
    )
    t = float(fit.params[-1] / fit.bse[-1])
    df = float(fit.df_resid)
    lower, upper = float(stats.t.cdf(t, df)), float(stats.t.sf(t, df))
    notes = (
        f"The first {period:,} observations are dropped (their lag-{period} residuals are pre-sample); "
        f"{m:,} rows used.",
        "Large-sample test; assumes homoskedastic errors and that the residuals are the OLS residuals of the design.",
    )
    return DurbinAlternativeResult(
        statistic=t,
        pvalue=_upper_means_positive(lower, upper, alternative),
        alternative=alternative,
        df=(df,),
        method=f"t-test of the coefficient on the lag-{period} residual given lag 1, Student t",
        name=f"Lag {period} given lag 1",
        notes=notes,
        lower_tail=lower,
        upper_tail=upper,
    )
