"""What to do about serially correlated errors: HAC inference and AR(1) FGLS.

Inputs are plain arrays: ``endog`` (1-D) and ``exog`` (n x k design including
any constant).  Nothing here forms an n-by-n matrix, and nothing copies the
design: every regression (OLS, each FGLS iteration on the AR(1)-transformed rows)
is solved from the R factor of [X, y] read in row blocks (:mod:`lagsight.stats.tall`,
the numbers of statsmodels' OLS: pseudo-inverse, rank, degrees of freedom), and
the Newey-West middle matrix comes from moving sums of x_t u_t, a block at a time.
"""

from __future__ import annotations

import dataclasses
import math
import numbers
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

from ._arrays import (
    as_design,
    as_vector,
    check_alpha,
    check_choice,
    check_int,
    check_names,
    check_rank_of_r,
    constant_columns,
    readonly,
)
from .tall import LagProducts, Solution, column_tops, gram_of, map_blocks, r_factor, row_blocks, solve_r, stacked

__all__ = [
    "HacLag",
    "NeweyWestResult",
    "FGLSResult",
    "RhoOutOfRangeError",
    "InferenceComparison",
    "HAC_RULES",
    "hac_lag",
    "newey_west",
    "prais_winsten",
    "cochrane_orcutt",
    "compare_inference",
]

HAC_RULES = ("newey-west-1994", "common")
#: how each lag rule (an API value of ``lag_rule``; 'user' for a lag that was given) reads in prose
HAC_RULE_WORDS = {
    "newey-west-1994": "Newey-West (1994) automatic lag",
    "common": "common rule \u230a4 (n/100)^(2/9)\u230b",
    "user": "lag given",
}
RHO_METHODS = ("regression", "autocorrelation")


# ------------------------------------------------------------------- HAC lag
@dataclass(frozen=True)
class HacLag:
    """A HAC truncation lag and how it was chosen.

    ``bandwidth`` is the unrounded value, ``lag`` its integer part (capped at
    n - 1).  For the Newey-West (1994) rule, ``pilot_lag`` and ``gamma`` are the
    pre-set lag and the estimated constant: bandwidth = gamma * n**(1/3).
    """

    lag_rule: str
    lag: int
    n: int
    bandwidth: float
    pilot_lag: int | None = None
    gamma: float | None = None
    notes: tuple = ()


def _common_lag(n: int) -> float:
    return 4.0 * (n / 100.0) ** (2.0 / 9.0)


def hac_lag(n: int, *, lag_rule: str = "newey-west-1994", resid=None, exog=None) -> HacLag:
    """Choose the Bartlett-kernel HAC lag.

    Parameters
    ----------
    n : int
        Number of observations.
    lag_rule : {'newey-west-1994', 'common'}
        'common' is floor(4 (n/100)^(2/9)) (common practice).  'newey-west-1994'
        is the Newey & West (1994) plug-in: with the pre-set pilot lag
        m = floor(4 (n/100)^(2/9)), sigma_j = (1/n) sum_t h_t h_{t-j},
        s0 = sigma_0 + 2 sum_{j=1}^m sigma_j, s1 = 2 sum_{j=1}^m j sigma_j,
        alpha = (s1/s0)^2 and bandwidth = 1.1447 (alpha n)^(1/3).
    resid, exog : arrays, required for 'newey-west-1994'
        h_t = e_t * sum_i w_i x_ti with weight 1 on each non-constant column and
        0 on constant columns (weight 1 on a lone constant).  Without ``exog``,
        h_t = e_t.
    """
    n = check_int(n, "n", minimum=2)
    rule = check_choice(lag_rule, "lag_rule", HAC_RULES)
    if rule == "common":
        bw = _common_lag(n)
        return HacLag(
            lag_rule=rule,
            lag=min(int(math.floor(bw)), n - 1),
            n=n,
            bandwidth=bw,
            notes=("\u230a4 (n/100)^(2/9)\u230b: a common-practice rule of thumb.",),
        )
    if resid is None:
        raise ValueError("'resid' must be given for rule 'newey-west-1994' (got None)")
    e = as_vector(resid, "resid")
    if e.shape[0] != n:
        raise ValueError(f"'resid' must have n={n} observations (got {e.shape[0]})")
    return _plugin_lag(n, lambda a, b: e[a:b], None if exog is None else as_design(exog, n))


def _lagged_sums(n: int, values, m: int) -> np.ndarray:
    """[sum_{t >= j} h_t h_{t-j} for j = 0..m], with h read a block of rows at a time by
    ``values(a, b)`` (rows a..b-1), so no n-vector is formed."""

    def one(a, b):
        lo = max(a - m, 0)
        H = values(lo, b)
        out = np.zeros(m + 1)
        for j in range(m + 1):
            t0 = max(a, j)
            if t0 < b:
                out[j] = float(H[t0 - lo : b - lo] @ H[t0 - j - lo : b - j - lo])
        return out

    return sum(map_blocks(n, one), np.zeros(m + 1))


def _plugin_lag(n: int, resid, X: np.ndarray | None) -> HacLag:
    """The Newey-West (1994) rule of :func:`hac_lag` on checked arrays; ``resid(a, b)`` gives
    the residuals of rows a..b-1."""
    rule = "newey-west-1994"
    pilot = int(math.floor(_common_lag(n)))
    notes = []
    if X is None:
        values = resid
        notes.append("No design given: the lag is chosen from the residuals alone (a location model).")
    else:
        const = constant_columns(X)
        w = (~const).astype(float) if (~const).any() else np.ones(X.shape[1])
        values = lambda a, b: resid(a, b) * (X[a:b] @ w)  # noqa: E731
        notes.append("Weights: 1 on each non-constant regressor, 0 on the constant.")
    m = min(pilot, n - 1)
    sig = _lagged_sums(n, values, m) / n
    s0 = sig[0] + 2.0 * sig[1:].sum()
    s1 = 2.0 * np.dot(np.arange(1, m + 1), sig[1:])
    if not s0 > 0:
        bw = _common_lag(n)
        notes.append("The plug-in estimate failed (s\u2080 \u2264 0); the common rule was used instead.")
        return HacLag(
            lag_rule=rule, lag=min(int(math.floor(bw)), n - 1), n=n, bandwidth=bw, pilot_lag=m, notes=tuple(notes)
        )
    gamma = 1.1447 * ((s1 / s0) ** 2) ** (1.0 / 3.0)
    bw = gamma * n ** (1.0 / 3.0)
    lag = min(int(math.floor(bw)), n - 1)
    notes.append(f"Newey-West (1994) plug-in with pilot lag {m}, Bartlett kernel.")
    return HacLag(lag_rule=rule, lag=lag, n=n, bandwidth=float(bw), pilot_lag=m, gamma=float(gamma), notes=tuple(notes))


# ---------------------------------------------------------------- Newey-West
@dataclass(frozen=True, eq=False)
class NeweyWestResult:
    """OLS coefficients with Newey-West (Bartlett HAC) standard errors."""

    params: np.ndarray
    bse: np.ndarray
    tvalues: np.ndarray
    pvalues: np.ndarray
    names: tuple
    max_lag: int
    lag_rule: str
    use_correction: bool
    use_t: bool
    df_resid: float
    n: int
    method: str = ""
    notes: tuple = ()

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame(
            {"coef": self.params, "se": self.bse, "t": self.tvalues, "pvalue": self.pvalues}, index=list(self.names)
        )


@dataclass(frozen=True, eq=False)
class _Fit:
    """OLS of y on X: the solution, the R factor of B = [X, y] and the lag products of B's
    orthonormal factor (None when [X, y] is rank deficient), from which every AR(1)-transformed
    regression and every residual autocorrelation follows without another pass over the data."""

    y: np.ndarray
    X: np.ndarray
    sol: Solution
    R: np.ndarray
    lags: LagProducts | None

    def resid(self, a: int, b: int, params=None) -> np.ndarray:
        """Residuals y - X params of rows a..b-1 (the OLS coefficients by default)."""
        p = self.sol.params if params is None else params
        return self.y[a:b] - self.X[a:b] @ p


def _ols(y: np.ndarray, X: np.ndarray) -> _Fit:
    """OLS of y on X from the R factor of [X, y] (read in row blocks; the first pass's Gram
    matrix from products of the whole arrays); the rank check of the design comes from the
    same factor."""
    n, k = X.shape
    R, lags = r_factor(n, k + 1, stacked(X, y), gram=gram_of(X, y), lag_products=True)
    check_rank_of_r(R[:k, :k], n, "exog")
    return _Fit(y, X, solve_r(R, n), R, lags)


def _xy(endog, exog, *, rescale=False):
    """(y, X, OLS fit) for checked arrays: finite, matching, full column rank, n > k.

    With ``rescale``, data of extreme magnitude (1e200, 1e-200) is brought to unit scale before
    the fit: one factor for the response and one for all the non-constant columns keep every
    estimator's choices (the HAC lag rule, which gives constant columns no weight, included) as
    they are; each constant column is divided by its own value, so a constant of 1 beside
    regressors near 1e200 does not vanish.  Returns the factors (s_y and one per column) too, all 1
    when nothing was rescaled; coefficients and standard errors scale back by s_y / the column's.
    """
    y = as_vector(endog, "endog", min_len=3)
    X = as_design(exog, y.shape[0], full_rank=False)
    s_y, col_factor = 1.0, np.ones(X.shape[1])
    if rescale:
        const = constant_columns(X)
        top_y = float(np.max(np.abs(y)))
        top_x = float(column_tops(X)[~const].max()) if (~const).any() else 1.0  # no copy of X
        factors = np.where(const, np.abs(X[0]), top_x)
        if top_y > 0 and top_x > 0 and not all(1e-100 < v < 1e100 for v in (top_y, *factors)):
            s_y, col_factor = top_y, factors
            y, X = y / s_y, X / col_factor
    fit = _ols(y, X)
    if y.shape[0] <= X.shape[1]:
        raise ValueError(f"'exog' must have fewer columns than observations n={y.shape[0]} (got {X.shape[1]})")
    return (y, X, fit, s_y, col_factor) if rescale else (y, X, fit)


def _pvalues(t: np.ndarray, df: float, use_t: bool = True) -> np.ndarray:
    """Two-sided p-values of t-ratios: Student t with ``df`` or standard normal (as statsmodels)."""
    return 2.0 * (stats.t.sf(np.abs(t), df) if use_t else stats.norm.sf(np.abs(t)))


def _hac_middle(X: np.ndarray, resid, lag: int) -> np.ndarray:
    """sum_{|j| <= lag} (1 - |j|/(lag + 1)) sum_t h_t h_{t-j}', h_t = x_t u_t (statsmodels'
    S_hac_simple with Bartlett weights).

    Every pair of rows j apart lies in lag + 1 - j of the windows of lag + 1 consecutive rows
    (windows running over the ends of the sample included), so the sum equals
    (1/(lag + 1)) sum_m s_m s_m' over the window sums s_m: one product a block of windows at a
    time, O(n k^2) whatever the lag, where the lag-by-lag sum would be O(n k^2 lag).  Window
    sums come from cumulative sums restarted in each block; ``resid(a, b)`` gives the residuals
    u_t of rows a..b-1.
    """
    n, k = X.shape
    width = lag + 1

    def one(a, b):  # windows [m, m + lag] for m = a - lag .. b - lag - 1
        m0, m1 = a - lag, b - lag
        r0, r1 = max(m0, 0), min(m1 + lag, n)
        c = np.zeros((r1 - r0 + 1, k))
        np.cumsum(X[r0:r1] * resid(r0, r1)[:, None], axis=0, out=c[1:])
        m = np.arange(m0, m1)
        s = c[np.minimum(m + width, n) - r0] - c[np.maximum(m, 0) - r0]
        return s.T @ s

    return sum(map_blocks(n + lag, one, rows=max(4 * width, 1 << 15)), np.zeros((k, k))) / width


def newey_west(
    endog,
    exog,
    *,
    max_lag: int | None = None,
    lag_rule: str = "newey-west-1994",
    use_correction: bool = False,
    use_t: bool = True,
    names=None,
) -> NeweyWestResult:
    """OLS with HAC (Newey-West, Bartlett kernel) standard errors, as statsmodels'
    ``OLS(...).fit(cov_type="HAC")`` computes them.

    ``max_lag=None`` picks the lag with :func:`hac_lag` and ``lag_rule`` on the OLS
    residuals.  ``use_correction`` applies the n/(n-k) small-sample factor;
    ``use_t`` gives Student-t p-values with n - k df instead of normal ones.
    """
    _, _, ols = _xy(endog, exog)
    return _newey_west(ols, max_lag=max_lag, lag_rule=lag_rule, use_correction=use_correction, use_t=use_t, names=names)


def _newey_west(ols: _Fit, *, max_lag, lag_rule, use_correction, use_t, names) -> NeweyWestResult:
    X = ols.X
    n, k = X.shape
    labels = check_names(names, k)
    if max_lag is None:
        rule = check_choice(lag_rule, "lag_rule", HAC_RULES)
        chosen = hac_lag(n, lag_rule="common") if rule == "common" else _plugin_lag(n, ols.resid, X)
        lag, used_rule, notes = chosen.lag, lag_rule, list(chosen.notes)
    else:
        lag = check_int(max_lag, "max_lag", minimum=0)
        if lag >= n:
            raise ValueError(f"'max_lag' must be < n = {n} (got {lag})")
        used_rule, notes = "user", []
    # the sandwich of statsmodels' OLS(...).fit(cov_type="HAC"): (X'X)^+ S (X'X)^+, times n/(n - k)
    # with the small-sample correction
    H = ols.sol.cov
    cov = H @ _hac_middle(X, ols.resid, lag) @ H.T
    if use_correction:
        cov = cov * (n / float(n - k))
    params = ols.sol.params
    bse = np.sqrt(np.diag(cov))
    tvalues = params / bse
    df_resid = ols.sol.df_resid
    return NeweyWestResult(
        params=readonly(params),
        bse=readonly(bse),
        tvalues=readonly(tvalues),
        pvalues=readonly(_pvalues(tvalues, df_resid, bool(use_t))),
        names=labels,
        max_lag=lag,
        lag_rule=used_rule,
        use_correction=bool(use_correction),
        use_t=bool(use_t),
        df_resid=float(df_resid),
        n=n,
        method=f"HAC, Bartlett kernel, {lag} lags, {'t' if use_t else 'normal'} p-values",
        notes=tuple(notes),
    )


# ---------------------------------------------------------------------- FGLS
class RhoOutOfRangeError(ValueError):
    """Raised when Prais-Winsten meets an AR(1) estimate outside (-1, 1)."""


@dataclass(frozen=True, eq=False)
class FGLSResult:
    """Feasible GLS for AR(1) errors (Prais-Winsten or Cochrane-Orcutt)."""

    rho: float
    rho_se: float
    iterations: int
    converged: bool
    params: np.ndarray
    bse: np.ndarray
    pvalues: np.ndarray
    names: tuple
    method: str
    notes: tuple = ()
    n: int = 0
    df_resid: float = math.nan

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame({"coef": self.params, "se": self.bse, "pvalue": self.pvalues}, index=list(self.names))


class _ResidualMoments:
    """Sums of (lagged) products of the residuals u = y - X b for any b, and the R factor of the
    AR(1)-transformed [X, y] for any rho, from one OLS fit.

    With B = [X, y] = QR and w = R [-b; 1], u = Q w, so sum u_t u_{t-1} = w'Cw and
    sum u_t^2 = w'Gw with the lag products of Q (:class:`lagsight.stats.tall.LagProducts`, exact
    to rounding because Q is orthonormal to rounding); the transformed rows T B = (T Q) R have
    the Gram matrix R'MR, M = Q'T'TQ made of the same products, so chol(M)'R is their R factor.
    Each FGLS iteration is then O(k^3).  When [X, y] is rank deficient (no lag products) or M is
    not positive definite to rounding, the residuals and the transformed rows are formed block by
    block instead.
    """

    def __init__(self, ols: _Fit):
        self.ols = ols
        self.R_prev = ols.R
        lp = ols.lags
        if lp is not None:
            self.G = 0.5 * (lp.gram + lp.gram.T)
            self.C = 0.5 * (lp.lag1 + lp.lag1.T)  # only quadratic forms of it are needed
            self.f, self.last = lp.first, lp.last
        self.lp = lp

    def _w(self, beta):
        return self.ols.R @ np.concatenate([-np.asarray(beta, float), [1.0]])

    def _sums(self, beta):
        """(sum_{t>=1} u_t u_{t-1}, sum_{t<=n-2} u_t^2, sum_t u_t^2) by blocks of rows."""
        n = self.ols.y.shape[0]
        cross = head = total = 0.0
        prev = None
        for a, b in row_blocks(n):
            u = self.ols.resid(a, b, beta)
            cross += float(u[1:] @ u[:-1]) + (0.0 if prev is None else float(u[0] * prev))
            total += float(u @ u)
            prev = float(u[-1])
        head = total - prev * prev
        return cross, head, total

    def rho_hat(self, beta, how: str) -> float:
        """sum u_t u_{t-1} / sum u_{t-1}^2 ('regression') or / sum u_t^2 ('autocorrelation')."""
        if self.lp is None:
            cross, head, total = self._sums(beta)
        else:
            w = self._w(beta)
            cross, total = float(w @ self.C @ w), float(w @ self.G @ w)
            head = total - float(self.last @ w) ** 2
        return cross / (head if how == "regression" else total)

    def lag_ss(self, beta) -> float:
        """sum_{t <= n-2} u_t^2."""
        if self.lp is None:
            return self._sums(beta)[1]
        w = self._w(beta)
        return float(w @ self.G @ w) - float(self.last @ w) ** 2

    def _m(self, rho: float, keep_first: bool) -> np.ndarray:
        """Q'T'TQ for the quasi-differenced rows t >= 1 (and the first row scaled by
        sqrt(1 - rho^2) with ``keep_first``)."""
        f, last = self.f, self.last
        M = (self.G - np.outer(f, f)) - 2.0 * rho * self.C + rho * rho * (self.G - np.outer(last, last))
        if keep_first:
            M = M + (1.0 - rho * rho) * np.outer(f, f)
        return 0.5 * (M + M.T)

    def quasi_ss(self, beta, rho: float) -> float:
        """sum_{t>=1} (u_t - rho u_{t-1})^2."""
        if self.lp is None:
            n = self.ols.y.shape[0]
            total = 0.0
            prev = None
            for a, b in row_blocks(n):
                u = self.ols.resid(a, b, beta)
                d = u[1:] - rho * u[:-1]
                total += float(d @ d) + (0.0 if prev is None else (u[0] - rho * prev) ** 2)
                prev = float(u[-1])
            return total
        w = self._w(beta)
        return float(w @ self._m(rho, False) @ w)

    def transformed_r(self, rho: float, keep_first: bool, *, rows: bool = False) -> np.ndarray:
        """The R factor of the quasi-differenced [X, y]: from the lag products (O(k^3)), or with
        ``rows`` (or without lag products) from the transformed rows, a block at a time."""
        estimate = None
        if self.lp is not None:
            try:
                estimate = np.linalg.cholesky(self._m(rho, keep_first)).T @ self.ols.R
            except np.linalg.LinAlgError:
                estimate = None
            if estimate is not None and not rows:
                return estimate
        n, k = self.ols.X.shape
        # the estimate (or the previous transformed rows' R factor) makes these rows nearly
        # orthonormal: one pass of products
        self.R_prev = r_factor(
            n if keep_first else n - 1,
            k + 1,
            _ar1_rows(self.ols.X, self.ols.y, rho, keep_first),
            precondition=self.R_prev if estimate is None else estimate,
        )
        return self.R_prev


def _ar1_rows(X: np.ndarray, y: np.ndarray, rho: float, keep_first: bool):
    """``block(a, b)`` for rows a..b-1 of the quasi-differenced [X, y]: v_t - rho v_{t-1}, the first
    row scaled by sqrt(1 - rho^2) (Prais-Winsten) or dropped (Cochrane-Orcutt).  Built a block at
    a time, so the transformed design is never formed."""
    k = X.shape[1]
    off = 0 if keep_first else 1

    def block(a, b):
        t0, t1 = a + off, b + off
        lo = max(t0, 1)
        B = np.empty((t1 - t0, k + 1))
        body = B[lo - t0 :]
        np.multiply(X[lo - 1 : t1 - 1], rho, out=body[:, :k])
        np.subtract(X[lo:t1], body[:, :k], out=body[:, :k])
        np.multiply(y[lo - 1 : t1 - 1], rho, out=body[:, k])
        np.subtract(y[lo:t1], body[:, k], out=body[:, k])
        if t0 == 0:
            first = np.sqrt(1.0 - rho * rho)
            B[0, :k] = first * X[0]
            B[0, k] = first * y[0]
        return B

    return block


def _fgls(endog, exog, *, keep_first, tol, maxiter, names, rho_method) -> FGLSResult:
    _, _, ols = _xy(endog, exog)
    return _fgls_fit(ols, keep_first=keep_first, tol=tol, maxiter=maxiter, names=names, rho_method=rho_method)


def _fgls_fit(ols: _Fit, *, keep_first, tol, maxiter, names, rho_method) -> FGLSResult:
    n, k = ols.X.shape
    labels = check_names(names, k)
    check_choice(rho_method, "rho_method", RHO_METHODS)
    maxiter = check_int(maxiter, "maxiter", minimum=1)
    if isinstance(tol, bool) or not isinstance(tol, numbers.Real):
        raise TypeError(f"'tol' must be a positive number (got {tol!r})")
    tol = float(tol)
    if not tol > 0:
        raise ValueError(f"'tol' must be a positive number (got {tol!r})")
    if n - (0 if keep_first else 1) <= k:
        raise ValueError(f"'endog' must have more than {k + 1} observations for AR(1) FGLS (got {n})")
    beta = ols.sol.params
    m = n if keep_first else n - 1
    moments = _ResidualMoments(ols)
    rho_prev, converged, it, outside = None, False, 0, None
    for it in range(1, maxiter + 1):
        rho = moments.rho_hat(beta, rho_method)
        if not -1.0 < rho < 1.0:
            if keep_first:
                raise RhoOutOfRangeError(
                    f"'endog' residual AR(1) coefficient must be inside (-1, 1) for Prais-Winsten "
                    f"(got rho={rho:.4f} at iteration {it}); try cochrane_orcutt or differencing"
                )
            outside = rho
        fit = solve_r(moments.transformed_r(rho, keep_first), m)
        beta = fit.params
        if rho_prev is not None and abs(rho - rho_prev) < tol:
            converged = True
            break
        rho_prev = rho
    # the reported regression: the transformed rows themselves, one pass preconditioned by the
    # R factor found above (which loses digits when rho is near 1 and X nearly contains the
    # direction the transform shrinks, a constant for example)
    fit = solve_r(moments.transformed_r(rho, keep_first, rows=True), m)
    lag_ss, s2 = moments.lag_ss(fit.params), moments.quasi_ss(fit.params, rho) / (n - 2)
    name = "Prais-Winsten" if keep_first else "Cochrane-Orcutt"
    how = (
        "\u03c1 = \u03a3 u\u209c u\u209c\u208b\u2081 / \u03a3 u\u209c\u208b\u2081\u00b2 (residual regression)"
        if rho_method == "regression"
        else "\u03c1 = \u03a3 u\u209c u\u209c\u208b\u2081 / \u03a3 u\u209c\u00b2 (first-order autocorrelation)"
    )
    notes = ["The standard error of \u03c1 is the OLS standard error of the slope of the final residuals on their lag."]
    if keep_first:
        notes.append("First observation kept, scaled by \u221a(1 \u2212 \u03c1\u00b2).")
    else:
        notes.append("First observation dropped (no previous value to quasi-difference with).")
    if outside is not None:
        notes.append(
            f"\u03c1 reached {outside:.4f}, outside (\u22121, 1): the errors look non-stationary "
            "(a unit root or worse); consider differencing the data."
        )
    if not converged:
        notes.append(f"\u03c1 did not converge within {maxiter:,} iterations (tolerance {tol:g}).")
    bse = fit.bse
    return FGLSResult(
        rho=float(rho),
        rho_se=math.sqrt(s2 / lag_ss),
        iterations=it,
        converged=converged,
        params=readonly(fit.params),
        bse=readonly(bse),
        pvalues=readonly(_pvalues(fit.params / bse, fit.df_resid)),
        names=labels,
        method=f"{name} iterated FGLS, AR(1); {how}; Student-t inference",
        notes=tuple(notes),
        n=int(m),
        df_resid=float(fit.df_resid),
    )


def prais_winsten(endog, exog, *, tol=1e-8, maxiter=100, names=None, rho_method="regression") -> FGLSResult:
    """Iterated Prais-Winsten FGLS for AR(1) errors (keeps the first observation).

    rho is re-estimated from the untransformed residuals y - X b until it
    changes by less than ``tol``.  ``rho_method`` is 'regression' (u_t on
    u_{t-1}) or 'autocorrelation' (sum u_t u_{t-1} / sum u_t^2).  Standard
    errors are the OLS ones of the transformed regression (n - k df).

    Raises
    ------
    RhoOutOfRangeError
        If an estimate of rho leaves (-1, 1): the first row cannot be scaled.
    """
    return _fgls(endog, exog, keep_first=True, tol=tol, maxiter=maxiter, names=names, rho_method=rho_method)


def cochrane_orcutt(endog, exog, *, tol=1e-8, maxiter=100, names=None, rho_method="regression") -> FGLSResult:
    """Iterated Cochrane-Orcutt FGLS for AR(1) errors (drops the first observation).

    Same iteration as :func:`prais_winsten`; the regression uses n - 1 rows
    (n - 1 - k df).  A rho outside (-1, 1) is allowed and reported in ``notes``.
    """
    return _fgls(endog, exog, keep_first=False, tol=tol, maxiter=maxiter, names=names, rho_method=rho_method)


# ------------------------------------------------------------- side by side
@dataclass(frozen=True, eq=False)
class InferenceComparison:
    """OLS, HAC and FGLS inference side by side.

    ``table`` has one row per coefficient.  ``changed_hac`` / ``changed_fgls``
    flag coefficients whose significance at ``alpha`` differs from OLS;
    ``changes`` names the corrections that flip the conclusion.
    """

    table: pd.DataFrame
    alpha: float
    hac_lag: int
    lag_rule: str
    fgls_method: str
    rho: float
    notes: tuple = ()

    def at_alpha(self, alpha: float) -> InferenceComparison:
        """The same comparison judged at another alpha (estimates do not depend on alpha)."""
        alpha = check_alpha(alpha)
        t = _flag_changes(self.table.copy(), alpha)
        return dataclasses.replace(self, table=t, alpha=alpha)

    def __str__(self) -> str:
        return (
            f"OLS vs HAC ({self.hac_lag} lags, {HAC_RULE_WORDS.get(self.lag_rule, self.lag_rule)}) vs "
            f"{self.fgls_method} (\u03c1 = {self.rho:.3f}), \u03b1 = {self.alpha:g}\n{self.table.to_string()}"
        )


def _flag_changes(t: pd.DataFrame, alpha: float) -> pd.DataFrame:
    """Mark the coefficients whose significance at ``alpha`` differs from OLS."""
    sig_ols = t["p_ols"] < alpha
    t["changed_hac"] = (t["p_hac"] < alpha) != sig_ols
    t["changed_fgls"] = (t["p_fgls"] < alpha) != sig_ols
    t["changes"] = [
        ", ".join(w for w, flag in (("HAC", a), ("FGLS", b)) if flag)
        for a, b in zip(t["changed_hac"], t["changed_fgls"])
    ]
    return t


def compare_inference(
    endog, exog, *, names=None, alpha: float = 0.05, lag_rule: str = "newey-west-1994", fgls="prais-winsten"
) -> InferenceComparison:
    """Coefficients, standard errors and p-values under OLS, HAC and AR(1) FGLS.

    HAC coefficients equal the OLS ones, so only their SE and p-value appear.
    """
    alpha = check_alpha(alpha)
    check_choice(fgls, "fgls", ("prais-winsten", "cochrane-orcutt"))
    # data of extreme magnitude is fitted on unit scale; coefficients and standard errors scale
    # back by s_y / s_X
    y, X, ols, s_y, col_factor = _xy(endog, exog, rescale=True)
    rescale = s_y != 1.0 or bool(np.any(col_factor != 1.0))
    labels = check_names(names, X.shape[1])
    # one OLS fit (one R factor of [X, y]) serves the OLS column, HAC and the first FGLS step
    hac = _newey_west(ols, max_lag=None, lag_rule=lag_rule, use_correction=False, use_t=True, names=labels)
    extra = []
    options = dict(tol=1e-8, maxiter=100, names=labels, rho_method="regression")
    try:
        gls = _fgls_fit(ols, keep_first=fgls == "prais-winsten", **options)
    except RhoOutOfRangeError as err:
        gls = _fgls_fit(ols, keep_first=False, **options)
        fgls = "cochrane-orcutt"
        extra.append(f"Prais-Winsten was not possible ({err}); Cochrane-Orcutt used instead.")
    se_ols = ols.sol.bse
    p_ols = _pvalues(ols.sol.params / se_ols, ols.sol.df_resid)
    t = pd.DataFrame(
        {
            "coef_ols": ols.sol.params,
            "se_ols": se_ols,
            "p_ols": p_ols,
            "se_hac": hac.bse,
            "p_hac": hac.pvalues,
            "coef_fgls": gls.params,
            "se_fgls": gls.bse,
            "p_fgls": gls.pvalues,
        },
        index=pd.Index(list(labels), name="term"),
    )
    if rescale:
        for col in ("coef_ols", "se_ols", "se_hac", "coef_fgls", "se_fgls"):
            t[col] = t[col].to_numpy() * (s_y / col_factor)
    t = _flag_changes(t, alpha)
    notes = (*extra, f"HAC: {hac.method}.", f"FGLS: {gls.method}.", *gls.notes)
    return InferenceComparison(
        table=t,
        alpha=alpha,
        hac_lag=hac.max_lag,
        lag_rule=lag_rule,
        fgls_method="Prais-Winsten" if fgls == "prais-winsten" else "Cochrane-Orcutt",
        rho=gls.rho,
        notes=notes,
    )
