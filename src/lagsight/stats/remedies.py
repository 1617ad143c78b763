"""What to do about serially correlated errors: HAC inference and AR(1) FGLS.

Inputs are plain arrays: ``endog`` (1-D) and ``exog`` (n x k design including
any constant).  Nothing here forms an n-by-n matrix: the AR(1) transform is
applied row by row.
"""
from __future__ import annotations

import dataclasses

from dataclasses import dataclass
import math
import numbers

import numpy as np
import pandas as pd
from statsmodels.regression.linear_model import OLS

from ._arrays import (as_design, as_vector, check_alpha, check_choice, check_int,
                      check_names, constant_columns, readonly)

__all__ = [
    "HacLag", "NeweyWestResult", "FGLSResult", "RhoOutOfRangeError", "InferenceComparison",
    "HAC_RULES", "hac_lag", "newey_west", "prais_winsten", "cochrane_orcutt", "compare_inference",
]

HAC_RULES = ("newey-west-1994", "common")
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
    pilot = int(math.floor(_common_lag(n)))
    if rule == "common":
        bw = _common_lag(n)
        return HacLag(lag_rule=rule, lag=min(int(math.floor(bw)), n - 1), n=n, bandwidth=bw,
                      notes=("floor(4 (n/100)^(2/9)): a common-practice rule of thumb.",))
    if resid is None:
        raise ValueError("'resid' must be given for rule 'newey-west-1994' (got None)")
    e = as_vector(resid, "resid")
    if e.shape[0] != n:
        raise ValueError(f"'resid' must have n={n} observations (got {e.shape[0]})")
    notes = []
    if exog is None:
        h = e
        notes.append("No exog given: h_t = e_t (weight on a location model).")
    else:
        X = as_design(exog, n)
        const = constant_columns(X)
        w = (~const).astype(float) if (~const).any() else np.ones(X.shape[1])
        h = e * (X @ w)
        notes.append("Weights: 1 on each non-constant regressor, 0 on the constant.")
    m = min(pilot, n - 1)
    sig = np.array([np.dot(h[j:], h[: n - j]) / n for j in range(m + 1)])
    s0 = sig[0] + 2.0 * sig[1:].sum()
    s1 = 2.0 * np.dot(np.arange(1, m + 1), sig[1:])
    if not s0 > 0:
        bw = _common_lag(n)
        notes.append("Plug-in failed (s0 <= 0); fell back to the common rule.")
        return HacLag(lag_rule=rule, lag=min(int(math.floor(bw)), n - 1), n=n, bandwidth=bw,
                      pilot_lag=m, notes=tuple(notes))
    gamma = 1.1447 * ((s1 / s0) ** 2) ** (1.0 / 3.0)
    bw = gamma * n ** (1.0 / 3.0)
    lag = min(int(math.floor(bw)), n - 1)
    notes.append(f"Newey-West (1994) plug-in with pilot lag {m}, Bartlett kernel.")
    return HacLag(lag_rule=rule, lag=lag, n=n, bandwidth=float(bw), pilot_lag=m,
                  gamma=float(gamma), notes=tuple(notes))


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
        return pd.DataFrame({"coef": self.params, "se": self.bse, "t": self.tvalues,
                             "pvalue": self.pvalues}, index=list(self.names))


def _xy(endog, exog):
    y = as_vector(endog, "endog", min_len=3)
    X = as_design(exog, y.shape[0])
    if y.shape[0] <= X.shape[1]:
        raise ValueError(f"'exog' must have fewer columns than observations n={y.shape[0]} (got {X.shape[1]})")
    return y, X


def newey_west(endog, exog, *, max_lag: int | None = None, lag_rule: str = "newey-west-1994",
               use_correction: bool = False, use_t: bool = True, names=None) -> NeweyWestResult:
    """OLS with HAC (Newey-West, Bartlett kernel) standard errors via statsmodels.

    ``max_lag=None`` picks the lag with :func:`hac_lag` and ``lag_rule`` on the OLS
    residuals.  ``use_correction`` applies the n/(n-k) small-sample factor;
    ``use_t`` gives Student-t p-values with n - k df instead of normal ones.
    """
    y, X = _xy(endog, exog)
    n, k = X.shape
    labels = check_names(names, k)
    ols = OLS(y, X).fit()
    if max_lag is None:
        chosen = hac_lag(n, lag_rule=lag_rule, resid=ols.resid, exog=X)
        lag, used_rule, notes = chosen.lag, lag_rule, list(chosen.notes)
    else:
        lag = check_int(max_lag, "max_lag", minimum=0)
        if lag >= n:
            raise ValueError(f"'max_lag' must be < n = {n} (got {lag})")
        used_rule, notes = "user", []
    fit = OLS(y, X).fit(cov_type="HAC", use_t=bool(use_t),
                        cov_kwds={"maxlags": lag, "use_correction": bool(use_correction)})
    return NeweyWestResult(
        params=readonly(fit.params), bse=readonly(fit.bse), tvalues=readonly(fit.tvalues),
        pvalues=readonly(fit.pvalues), names=labels, max_lag=lag, lag_rule=used_rule,
        use_correction=bool(use_correction), use_t=bool(use_t), df_resid=float(fit.df_resid),
        n=n, method=f"HAC, Bartlett kernel, {lag} lags, "
                       f"{'t' if use_t else 'normal'} p-values", notes=tuple(notes),
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
        return pd.DataFrame({"coef": self.params, "se": self.bse, "pvalue": self.pvalues},
                            index=list(self.names))


def _rho_hat(u: np.ndarray, how: str) -> float:
    num = float(np.dot(u[1:], u[:-1]))
    den = float(np.dot(u[:-1], u[:-1])) if how == "regression" else float(np.dot(u, u))
    return num / den


def _ar1_transform(v: np.ndarray, rho: float, keep_first: bool) -> np.ndarray:
    """Quasi-difference rows: v_t - rho v_{t-1}; first row scaled by sqrt(1 - rho^2) or dropped."""
    body = v[1:] - rho * v[:-1]
    if not keep_first:
        return body
    return np.concatenate([np.sqrt(1.0 - rho * rho) * v[:1], body])


def _fgls(endog, exog, *, keep_first, tol, maxiter, names, rho_method) -> FGLSResult:
    y, X = _xy(endog, exog)
    n, k = X.shape
    labels = check_names(names, k)
    check_choice(rho_method, "rho_method", RHO_METHODS)
    maxiter = check_int(maxiter, "maxiter", minimum=1)
    if isinstance(tol, bool) or not isinstance(tol, numbers.Real) or not tol > 0:
        raise ValueError(f"'tol' must be a positive number (got {tol!r})")
    if n - (0 if keep_first else 1) <= k:
        raise ValueError(f"'endog' must have more than {k + 1} observations for AR(1) FGLS (got {n})")
    beta = np.linalg.lstsq(X, y, rcond=None)[0]
    rho_prev, converged, it, outside = None, False, 0, None
    for it in range(1, maxiter + 1):
        rho = _rho_hat(y - X @ beta, rho_method)
        if not -1.0 < rho < 1.0:
            if keep_first:
                raise RhoOutOfRangeError(
                    f"'endog' residual AR(1) coefficient must be inside (-1, 1) for Prais-Winsten "
                    f"(got rho={rho:.4f} at iteration {it}); try cochrane_orcutt or differencing"
                )
            outside = rho
        ys, Xs = _ar1_transform(y, rho, keep_first), _ar1_transform(X, rho, keep_first)
        beta = np.linalg.lstsq(Xs, ys, rcond=None)[0]
        if rho_prev is not None and abs(rho - rho_prev) < tol:
            converged = True
            break
        rho_prev = rho
    fit = OLS(ys, Xs).fit()
    u = y - X @ fit.params
    lag_ss = float(np.dot(u[:-1], u[:-1]))
    s2 = float(np.sum((u[1:] - rho * u[:-1]) ** 2)) / (n - 2)
    name = "Prais-Winsten" if keep_first else "Cochrane-Orcutt"
    how = ("rho = sum u_t u_{t-1} / sum u_{t-1}^2 (residual regression)" if rho_method == "regression"
           else "rho = sum u_t u_{t-1} / sum u_t^2 (first-order autocorrelation)")
    notes = ["rho_se is the OLS standard error of the slope of u_t on u_{t-1} from the final residuals."]
    if keep_first:
        notes.append("First observation kept, scaled by sqrt(1 - rho^2).")
    else:
        notes.append("First observation dropped (no previous value to quasi-difference with).")
    if outside is not None:
        notes.append(f"rho reached {outside:.4f}, outside (-1, 1): the errors look non-stationary "
                     "(a unit root or worse); consider differencing the data.")
    if not converged:
        notes.append(f"rho did not converge within {maxiter} iterations (tol {tol:g}).")
    return FGLSResult(
        rho=float(rho), rho_se=math.sqrt(s2 / lag_ss), iterations=it, converged=converged,
        params=readonly(fit.params), bse=readonly(fit.bse), pvalues=readonly(fit.pvalues), names=labels,
        method=f"{name} iterated FGLS, AR(1); {how}; Student-t inference",
        notes=tuple(notes), n=int(ys.shape[0]), df_resid=float(fit.df_resid),
    )


def prais_winsten(endog, exog, *, tol=1e-8, maxiter=100, names=None,
                  rho_method="regression") -> FGLSResult:
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
    return _fgls(endog, exog, keep_first=True, tol=tol, maxiter=maxiter, names=names,
                 rho_method=rho_method)


def cochrane_orcutt(endog, exog, *, tol=1e-8, maxiter=100, names=None,
                    rho_method="regression") -> FGLSResult:
    """Iterated Cochrane-Orcutt FGLS for AR(1) errors (drops the first observation).

    Same iteration as :func:`prais_winsten`; the regression uses n - 1 rows
    (n - 1 - k df).  A rho outside (-1, 1) is allowed and reported in ``notes``.
    """
    return _fgls(endog, exog, keep_first=False, tol=tol, maxiter=maxiter, names=names,
                 rho_method=rho_method)


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

    def at_alpha(self, alpha: float) -> "InferenceComparison":
        """The same comparison judged at another alpha (estimates do not depend on alpha)."""
        alpha = check_alpha(alpha)
        t = _flag_changes(self.table.copy(), alpha)
        return dataclasses.replace(self, table=t, alpha=alpha)

    def __str__(self) -> str:
        return (f"OLS vs HAC ({self.hac_lag} lags) vs {self.fgls_method} (rho={self.rho:.4f}), "
                f"alpha={self.alpha:g}\n{self.table.to_string()}")


def _flag_changes(t: pd.DataFrame, alpha: float) -> pd.DataFrame:
    """Mark the coefficients whose significance at ``alpha`` differs from OLS."""
    sig_ols = t["p_ols"] < alpha
    t["changed_hac"] = (t["p_hac"] < alpha) != sig_ols
    t["changed_fgls"] = (t["p_fgls"] < alpha) != sig_ols
    t["changes"] = [", ".join(w for w, flag in (("HAC", a), ("FGLS", b)) if flag)
                    for a, b in zip(t["changed_hac"], t["changed_fgls"])]
    return t


def compare_inference(endog, exog, *, names=None, alpha: float = 0.05, lag_rule: str = "newey-west-1994",
                      fgls="prais-winsten") -> InferenceComparison:
    """Coefficients, standard errors and p-values under OLS, HAC and AR(1) FGLS.

    HAC coefficients equal the OLS ones, so only their SE and p-value appear.
    """
    alpha = check_alpha(alpha)
    check_choice(fgls, "fgls", ("prais-winsten", "cochrane-orcutt"))
    y, X = _xy(endog, exog)
    labels = check_names(names, X.shape[1])
    # data of extreme magnitude (1e200, 1e-200) is fitted on unit scale: one factor for the
    # response and one for all the non-constant columns keep every estimator's choices (the HAC
    # lag rule, which gives constant columns no weight, included) as they are; each constant column
    # is divided by its own value, so a constant of 1 beside regressors near 1e200 does not vanish.
    # Coefficients and standard errors scale back by s_y / (the column's factor).
    const = constant_columns(X)
    s_y = float(np.max(np.abs(y)))
    s_x = float(np.max(np.abs(X[:, ~const]))) if (~const).any() else 1.0
    col_factor = np.where(const, np.abs(X[0]), s_x)
    rescale = s_y > 0 and s_x > 0 and not all(1e-100 < v < 1e100 for v in (s_y, *col_factor))
    if rescale:
        y, X = y / s_y, X / col_factor
    ols = OLS(y, X).fit()
    hac = newey_west(y, X, lag_rule=lag_rule, names=labels)
    extra = []
    try:
        gls = (prais_winsten if fgls == "prais-winsten" else cochrane_orcutt)(y, X, names=labels)
    except RhoOutOfRangeError as err:
        gls = cochrane_orcutt(y, X, names=labels)
        fgls = "cochrane-orcutt"
        extra.append(f"Prais-Winsten was not possible ({err}); Cochrane-Orcutt used instead.")
    t = pd.DataFrame({
        "coef_ols": ols.params, "se_ols": ols.bse, "p_ols": ols.pvalues,
        "se_hac": hac.bse, "p_hac": hac.pvalues,
        "coef_fgls": gls.params, "se_fgls": gls.bse, "p_fgls": gls.pvalues,
    }, index=pd.Index(list(labels), name="term"))
    if rescale:
        for col in ("coef_ols", "se_ols", "se_hac", "coef_fgls", "se_fgls"):
            t[col] = t[col].to_numpy() * (s_y / col_factor)
    t = _flag_changes(t, alpha)
    notes = (*extra, f"HAC: {hac.method}.", f"FGLS: {gls.method}.", *gls.notes)
    return InferenceComparison(table=t, alpha=alpha, hac_lag=hac.max_lag, lag_rule=lag_rule,
                               fgls_method="Prais-Winsten" if fgls == "prais-winsten" else "Cochrane-Orcutt",
                               rho=gls.rho, notes=notes)
