"""One adapter: every accepted kind of input becomes a :class:`ResidualData`.

:func:`as_residual_data` is the single dispatcher.  It accepts statsmodels
regression and state-space (ARIMA/SARIMAX) results, fitted scikit-learn
regressors with their ``X`` and ``y``, plain residual vectors and DataFrames
(lagsight then fits OLS itself).  Rows that cannot be used are dropped with a
note; nothing is dropped silently.  scikit-learn is never imported at module
import time.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .stats._arrays import check_label, check_labels, finite_rows, has_constant, has_constant_sharing_r
from .stats._caught import caught_warnings
from .stats.tall import column_tops, gram_of, map_blocks, r_factor, solve_r, stacked

ACCEPTED_KINDS = (
    "statsmodels regression results (OLS, WLS, GLS, GLSAR)",
    "statsmodels ARIMA/SARIMAX or other state-space results",
    "a fitted scikit-learn regressor together with X= and y=",
    "a 1-D numpy array, list or pandas Series of residuals (optionally with exog=)",
    "a pandas DataFrame with response= and predictors=",
)

_ARG_KIND = {
    "exog": "residual arrays and scikit-learn estimators",
    "endog": "scikit-learn estimators",
    "response": "DataFrames",
    "predictors": "DataFrames",
}
_ROW_FIELDS = ("resid", "exog", "endog", "groups", "order_values")


def _rows(k: int) -> str:
    return f"{k} row" if k == 1 else f"{k:,} rows"


def frame_column(frame: pd.DataFrame, column, arg: str) -> pd.Series:
    """The column ``column`` of ``frame``; a one-line ValueError when it is absent or not unique."""
    if column not in frame.columns:
        raise ValueError(f"'{arg}': column {column!r} is not in the DataFrame (columns: {list(frame.columns)})")
    count = 1 if isinstance(frame.columns, pd.MultiIndex) else int(np.sum(frame.columns == column))
    if count > 1:  # counted on the names alone: no sub-frame of the data is built
        raise ValueError(
            f"'{arg}': the DataFrame has {count} columns named {column!r}; "
            "column names must be unique (rename the duplicates)"
        )
    col = frame[column]
    if isinstance(col, pd.DataFrame):  # a MultiIndex level names several columns
        raise ValueError(f"'{arg}': {column!r} names {col.shape[1]} columns of the DataFrame; name one column")
    return col


def typed_column(item: str, columns) -> str:
    """A column name as typed on a command line: as it is, or without the spaces around it when only
    that names a column (so ' x' finds 'x', and a column named ' x' is still found)."""
    return item if item in columns or item.strip() not in columns else item.strip()


def typed_columns(text: str, columns, option: str) -> list:
    """Comma-separated column names typed for ``option`` (--x, --X): each item names a column, none is
    dropped; an empty item is a one-line ValueError."""
    names = [typed_column(item, columns) for item in text.split(",")]
    if any(not name.strip() and name not in columns for name in names):
        raise ValueError(f"{option} {text!r} holds an empty column name (name each column once, comma separated)")
    return names


def unlabelled(labels) -> np.ndarray:
    """Mask of the group labels that are missing (NaN, None, NaT); a ValueError when all are."""
    missing = np.asarray(pd.isna(pd.Series(labels, dtype=object)), dtype=bool)
    if missing.size and missing.all():
        raise ValueError(
            f"'groups': all {missing.size} group labels are missing (NaN or None); "
            "give each row a label, or leave groups out"
        )
    return missing


def unlabelled_note(k: int) -> str:
    """The note for rows left out because they have no group label (one wording everywhere)."""
    return f"{_rows(k)} {'has' if k == 1 else 'have'} no group label and {'was' if k == 1 else 'were'} left out."


_NO_DW_NOTE = (
    "Durbin-Watson does not apply: its exact distribution assumes fixed regressors, "
    "while ARIMA-type residuals depend on lagged values of the series itself; "
    "use Ljung-Box with the ARMA parameters subtracted from its degrees of freedom."
)


@dataclass(frozen=True, eq=False)
class ResidualData:
    """Residuals and everything row-aligned with them, in one canonical form.

    ``resid`` (1-D float) is the series to test and ``index`` its original row
    labels.  Row-aligned, when known: ``exog`` (2-D float design, whitened for
    WLS/GLS) named by ``exog_names``; ``endog`` (the response) named by
    ``endog_name``; ``groups`` (labels); ``order_values`` (values to sort by,
    named by ``order_name``); ``frame`` (the input DataFrame, formula data or
    DataFrame ``X``, restricted to the rows kept).  ``has_constant`` says
    whether ``exog`` spans a constant (None if unknown); ``arma_df`` is the
    number of ARMA parameters to subtract from Ljung-Box degrees of freedom;
    ``dw_applicable`` is False for ARIMA-type models; ``source`` describes the
    input; ``notes`` say what was done to it; ``fitted`` is the statsmodels
    results object the input was (None when lagsight fitted the OLS of a DataFrame itself:
    it keeps only the residuals, not a results object with its copies of the design).
    """

    resid: np.ndarray
    index: pd.Index
    exog: np.ndarray | None = None
    exog_names: tuple | None = None
    has_constant: bool | None = None
    endog: np.ndarray | None = None
    endog_name: str | None = None
    groups: np.ndarray | None = None
    order_values: np.ndarray | None = None
    order_name: str | None = None
    arma_df: int = 0
    dw_applicable: bool = True
    source: str = ""
    notes: tuple = ()
    frame: pd.DataFrame | None = None
    fitted: Any = None

    @property
    def n(self) -> int:
        """Number of residuals."""
        return int(self.resid.shape[0])

    def replace(self, **changes) -> ResidualData:
        """Return a copy with some fields changed."""
        return dataclasses.replace(self, **changes)

    def with_notes(self, *notes: str) -> ResidualData:
        """Return a copy with ``notes`` appended."""
        return self.replace(notes=self.notes + tuple(notes))

    def _take(self, pos: np.ndarray) -> ResidualData:
        changes = {k: getattr(self, k)[pos] for k in _ROW_FIELDS if getattr(self, k) is not None}
        changes["index"] = self.index[pos]
        if self.frame is not None:
            changes["frame"] = self.frame.iloc[pos]
        return self.replace(**changes)

    def reorder(self, permutation) -> ResidualData:
        """Return a copy whose rows are taken in the order ``permutation``."""
        perm = np.asarray(permutation)
        if (
            perm.ndim != 1
            or perm.size != self.n
            or perm.dtype.kind not in "iu"
            or not np.array_equal(np.sort(perm), np.arange(self.n))
        ):
            raise ValueError(
                f"'permutation' must be an integer permutation of 0..{self.n - 1} "
                f"(got shape {perm.shape}, dtype {perm.dtype})"
            )
        return self._take(perm.astype(np.intp))

    def subset(self, selector) -> ResidualData:
        """Return the rows picked by a boolean mask or by integer positions."""
        sel = np.asarray(selector)
        if sel.dtype == bool:
            if sel.shape != (self.n,):
                raise ValueError(f"'selector' mask must have shape ({self.n},) (got {sel.shape})")
            return self._take(np.flatnonzero(sel))
        if sel.ndim != 1 or (sel.size and sel.dtype.kind not in "iu"):
            raise ValueError(f"'selector' must be a boolean mask or integer positions (got dtype {sel.dtype})")
        if sel.size and (sel.min() < 0 or sel.max() >= self.n):
            raise ValueError(f"'selector' positions must lie in [0, {self.n}) (got {sel.min()}..{sel.max()})")
        return self._take(sel.astype(np.intp))


def _as_2d(exog, name: str) -> tuple[np.ndarray, tuple | None, pd.Index | None]:
    if isinstance(exog, pd.DataFrame):
        values, names, idx = exog, tuple(str(c) for c in exog.columns), exog.index
    elif isinstance(exog, pd.Series):
        values, names, idx = exog.to_frame(), (str(exog.name),), exog.index
    else:
        values, names, idx = exog, None, None
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise ValueError(f"'{name}' must be numeric (got {type(exog).__name__} with non-numeric values)") from None
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise ValueError(f"'{name}' must be 1-D or 2-D (got shape {arr.shape})")
    return arr, names, idx


def _unwrap(res):
    return getattr(res, "_results", res)


def _kind(model) -> str | None:
    from statsmodels.regression.linear_model import RegressionResults
    from statsmodels.tsa.statespace.mlemodel import MLEResults

    inner = _unwrap(model)
    if isinstance(inner, RegressionResults):
        return "regression"
    if isinstance(inner, MLEResults):
        return "statespace"
    if isinstance(model, pd.DataFrame):
        return "frame"
    if isinstance(model, (np.ndarray, list, tuple, pd.Series)):
        return "array"
    if all(hasattr(model, a) for a in ("fit", "predict", "get_params")):
        return "sklearn"
    return None


def is_fitted_model(obj) -> bool:
    """True for a fitted model lagsight diagnoses with nothing else given (statsmodels regression and
    state-space results); what ``%lagsight`` with no argument looks for."""
    try:
        return _kind(obj) in ("regression", "statespace")
    except Exception:  # an object whose attributes raise is no model
        return False


def _from_regression(res) -> tuple[ResidualData, np.ndarray | None]:
    from statsmodels.regression.linear_model import OLS

    inner = _unwrap(res)
    mod, data = inner.model, inner.model.data
    name = type(mod).__name__
    resid = np.asarray(inner.wresid, dtype=float).ravel()
    labels = getattr(data, "row_labels", None)
    index = pd.Index(labels) if labels is not None else pd.RangeIndex(len(np.asarray(mod.endog)))
    notes = []
    missing = getattr(data, "missing_row_idx", None)
    if missing is not None and len(missing):
        notes.append(
            f"statsmodels dropped {_rows(len(missing))} with missing values before fitting; "
            "the time order has gaps there."
        )
    lost = len(index) - resid.size
    if lost > 0:  # GLSAR whitening loses the first `order` rows
        index = index[lost:]
        notes.append(
            f"{name} whitening uses the first {_rows(lost)} as start-up values; "
            "they have no whitened residual and are not tested."
        )
    frame = None
    if getattr(mod, "formula", None) is not None and getattr(data, "frame", None) is not None:
        kept = np.setdiff1d(np.arange(len(data.frame)), np.asarray(missing if missing is not None else [], int))
        frame = data.frame.iloc[kept].iloc[max(lost, 0) :]
    X = np.asarray(mod.wexog, dtype=float)
    if isinstance(mod, OLS):
        k_const = getattr(mod, "k_constant", None)
        has_const = None if k_const is None else bool(k_const)
    else:
        has_const = None  # detected on the whitened design: weighting can turn a constant into a variable
        notes.append(
            f"{name}: the residuals tested are the whitened residuals (wresid) and the design "
            "is the whitened design (wexog), which satisfy the OLS assumptions the tests use."
        )
    return ResidualData(
        resid=resid,
        index=index,
        exog=X,
        exog_names=tuple(mod.exog_names),
        has_constant=has_const,
        endog=np.asarray(mod.wendog, dtype=float).ravel(),
        endog_name=str(mod.endog_names),
        source=f"statsmodels {name} results" + (" (formula)" if frame is not None else ""),
        notes=tuple(notes),
        frame=frame,
        fitted=res,
    ), None


def _from_statespace(res) -> tuple[ResidualData, np.ndarray | None]:
    inner = _unwrap(res)
    mod = inner.model
    r = res.resid
    values = np.asarray(r, dtype=float)
    if values.ndim > 1 and values.shape[1] > 1:
        raise TypeError(f"'model' is a multivariate {type(mod).__name__} result; one residual series is needed")
    values = values.ravel()
    index = r.index if isinstance(r, pd.Series) else pd.RangeIndex(values.size)
    arma_df = sum(
        int(getattr(mod, a, 0) or 0)
        for a in ("k_ar_params", "k_ma_params", "k_seasonal_ar_params", "k_seasonal_ma_params")
    )
    d, D = int(getattr(mod, "k_diff", 0) or 0), int(getattr(mod, "k_seasonal_diff", 0) or 0)
    s = int(getattr(mod, "seasonal_periods", 0) or 0)
    burn = int(getattr(inner, "loglikelihood_burn", 0) or 0)
    notes = [_NO_DW_NOTE]
    keep = np.ones(values.size, dtype=bool)
    if burn > 0:
        keep[:burn] = False
        why = f"d + D*s = {d} + {D}*{s}" if d or D else "diffuse initialisation"
        first = "The first residual was" if burn == 1 else f"The first {burn} residuals were"
        notes.append(
            f"{first} dropped as burn-in ({why}), as statsmodels does for the likelihood; "
            "burn-in residuals are not one-step forecast errors."
        )
    elif d or D:
        notes.append(
            "The model was fitted to the differenced series, so its residuals already "
            f"exclude the first d + D*s = {d + D * s} observations."
        )
    raw_endog = np.asarray(mod.endog, dtype=float)
    endog = raw_endog.ravel() if raw_endog.size == values.size else None
    order = getattr(mod, "order", None)
    spec = "" if order is None else str(tuple(order))
    sorder = getattr(mod, "seasonal_order", None)
    if sorder is not None and any(sorder):
        spec += f"x{tuple(sorder)}"
    return ResidualData(
        resid=values,
        index=pd.Index(index),
        endog=endog,
        endog_name=str(getattr(mod, "endog_names", "y")),
        arma_df=arma_df,
        dw_applicable=False,
        notes=tuple(notes),
        fitted=res,
        source=f"statsmodels {type(mod).__name__}{spec} results",
    ), keep


def _check_fitted(est) -> None:
    try:
        from sklearn.exceptions import NotFittedError
        from sklearn.utils.validation import check_is_fitted
    except ImportError:  # not a scikit-learn object after all; predict() will tell
        return
    try:
        check_is_fitted(est)
    except NotFittedError:
        raise ValueError(
            f"'model' is a scikit-learn {type(est).__name__} that has not been fitted (call .fit(X, y) first)"
        ) from None


def _from_sklearn(est, X, y) -> tuple[ResidualData, np.ndarray | None]:
    """``X`` is the ``exog`` and ``y`` the ``endog`` the estimator is checked on."""
    _check_fitted(est)
    name = type(est).__name__
    yv = np.asarray(y.to_numpy() if isinstance(y, (pd.Series, pd.DataFrame)) else y, dtype=float)
    if yv.ndim == 2 and yv.shape[1] == 1:
        yv = yv.ravel()
    if yv.ndim != 1:
        raise ValueError(f"'endog' must be 1-D (got shape {yv.shape})")
    n = yv.size
    if len(X) != n:
        raise ValueError(f"'exog' and 'endog' must have the same number of rows (got {len(X)} and {n})")
    index = (
        X.index
        if isinstance(X, (pd.DataFrame, pd.Series))
        else (y.index if isinstance(y, (pd.Series, pd.DataFrame)) else pd.RangeIndex(n))
    )
    try:
        Xv, names, _ = _as_2d(X, "exog")
    except ValueError:
        Xv, names = None, None  # e.g. categorical columns handled inside a pipeline
    keep = np.isfinite(yv) & (finite_rows(Xv) if Xv is not None else True)
    notes = []
    if (~keep).any():
        notes.append(
            f"{_rows(int((~keep).sum()))} with missing or infinite values in exog or endog were dropped; "
            "the time order has gaps there."
        )
    pos = np.flatnonzero(keep)
    X_kept = X.iloc[pos] if isinstance(X, (pd.DataFrame, pd.Series)) else np.asarray(X)[pos]
    pred = np.full(n, np.nan)
    pred[pos] = np.asarray(est.predict(X_kept), dtype=float).ravel()
    resid = yv - pred
    exog, has_const = None, None
    fit_intercept = bool(getattr(est, "fit_intercept", False))
    if hasattr(est, "coef_") and Xv is not None and np.size(est.coef_) == Xv.shape[1]:
        names = names or tuple(f"x{j + 1}" for j in range(Xv.shape[1]))
        exog, has_const = Xv, has_constant(Xv if keep.all() else Xv[keep])
        if fit_intercept and not has_const:
            exog, names, has_const = np.column_stack([np.ones(n), Xv]), ("const",) + names, True
        if name != "LinearRegression":
            notes.append(
                f"{name} residuals are not least-squares residuals; tests that assume "
                "OLS residuals for this design are approximate."
            )
    else:
        notes.append(
            f"{name} is not a linear model of X, so there is no design matrix for the exact Durbin-Watson distribution."
        )
    return ResidualData(
        resid=resid,
        index=pd.Index(index),
        exog=exog,
        exog_names=names,
        has_constant=has_const,
        endog=yv,
        endog_name=str(getattr(y, "name", None) or "y"),
        notes=tuple(notes),
        frame=X if isinstance(X, pd.DataFrame) else None,
        source=f"scikit-learn {name} with X and y",
    ), keep


def _from_array(values, exog) -> tuple[ResidualData, np.ndarray | None]:
    index = values.index if isinstance(values, pd.Series) else None
    arr = np.asarray(values.to_numpy() if index is not None else values)
    try:
        arr = arr.astype(float)
    except (TypeError, ValueError):
        raise ValueError(f"'model' residuals must be numeric (got dtype {arr.dtype})") from None
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr.ravel()
    if arr.ndim != 1:
        raise ValueError(f"'model' residuals must be 1-D (got shape {arr.shape})")
    index = pd.Index(index) if index is not None else pd.RangeIndex(arr.size)
    X, names = None, None
    if exog is not None:
        X, names, xidx = _as_2d(exog, "exog")
        if X.shape[0] != arr.size:
            raise ValueError(f"'exog' must have one row per residual ({arr.size}) (got {X.shape[0]} rows)")
        if xidx is not None and isinstance(values, pd.Series) and not xidx.equals(index):
            raise ValueError("'exog' index must equal the residuals' index (got different labels)")
    kind = "Series" if isinstance(values, pd.Series) else type(values).__name__
    return ResidualData(
        resid=arr,
        index=index,
        exog=X,
        exog_names=names,
        source=f"residual {kind}" + (" with exog" if X is not None else ""),
    ), None


def _from_frame(
    df: pd.DataFrame, response, predictors, add_constant: bool, left_out=None
) -> tuple[ResidualData, np.ndarray | None]:
    """OLS of ``response`` on ``predictors``; rows in ``left_out`` (no group label) are not fitted."""
    if response is None or predictors is None:
        raise TypeError(
            "a DataFrame needs response= (the response column) and predictors= "
            f"(a list of column names) (got response={response!r}, predictors={predictors!r})"
        )
    response = check_label(response, "response")
    preds = check_labels(predictors, "predictors")
    columns = [("response", response)] + [("predictors", c) for c in preds]
    picked = {col: frame_column(df, col, arg) for arg, col in columns}
    for arg, col in columns:
        if not pd.api.types.is_numeric_dtype(picked[col]):
            raise ValueError(f"'{arg}': column {col!r} must be numeric (got dtype {picked[col].dtype})")
    if response in preds:
        raise ValueError(f"'predictors' must not contain the response {response!r}")
    # the design is built once, column by column (no copy of the frame as a whole), with room
    # for the constant in front
    n = len(df)
    lead = 1 if add_constant else 0
    cols = [picked[col].to_numpy(dtype=float) for col in preds]  # float columns: views, no copy
    y = np.array(picked[response].to_numpy(dtype=float), dtype=float)
    X = np.empty((n, lead + len(preds)))
    finite = np.empty(n, dtype=bool)

    def fill(a, b):  # a block of rows stays in cache while its columns are written
        for j, col in enumerate(cols):
            X[a:b, lead + j] = col[a:b]
        finite[a:b] = np.isfinite(y[a:b]) & np.isfinite(X[a:b, lead:]).all(axis=1)

    map_blocks(n, fill)
    ok = finite if left_out is None else finite & ~left_out  # the rows fitted
    complete = bool(ok.all())
    names, notes = tuple(str(c) for c in preds), []
    if not finite.all():
        notes.append(
            f"{_rows(int((~finite).sum()))} with missing or infinite values in {response!r} or the "
            "predictors were dropped before fitting; the time order has gaps there."
        )
    P = X[:, lead:]
    y_fit = y if complete else y[ok]
    top = float(np.max(np.abs(y_fit))) or 1.0
    shared = None
    if P.shape[1]:
        P_fit = P if complete else P[ok]
        # the constant check's R factor, of [P, 1, y], also gives the OLS residuals on [1, P]
        has_const, shared, p_top = has_constant_sharing_r(P_fit, y_fit / top)
    else:
        has_const = False
    spans = has_const  # whether the predictors themselves span a constant
    if add_constant and has_const:
        notes.append("'add_constant': the predictors already span a constant, so none was added.")
        X = np.ascontiguousarray(P)
    elif add_constant:
        X[:, 0] = 1.0
        names, has_const = ("const",) + names, True
    if X.shape[1] == 0:
        raise ValueError("'predictors' must name at least one column when 'add_constant' is False (got [])")
    if ok.sum() <= X.shape[1]:
        raise ValueError(
            f"'model' DataFrame has {int(ok.sum())} complete rows for {X.shape[1]} "
            "coefficients; more rows than coefficients are needed"
        )
    resid = np.full(n, np.nan)
    with caught_warnings() as caught:
        if add_constant and shared is not None and not spans:
            # unit-scaled fit, as ols_residuals; the residuals do not depend on the column order
            sol = solve_r(shared, int(ok.sum()))
            coef, rank = sol.params, sol.rank
            resid[ok] = (y_fit / top - P_fit @ (coef[:-1] / p_top) - coef[-1]) * top
        else:
            resid[ok], rank = ols_residuals(y_fit, X if complete else X[ok])
    notes += caught.notes()
    if rank < X.shape[1]:
        notes.append(
            f"The design has rank {rank} < {X.shape[1]} columns (collinear predictors): the "
            "coefficients are not unique; the residuals are those of the minimum-norm least-squares fit."
        )
    rhs = " + ".join(names) if names else "1"
    return ResidualData(
        resid=resid,
        index=df.index,
        exog=X,
        exog_names=names,
        has_constant=has_const,
        endog=y,
        endog_name=str(response),
        notes=tuple(notes),
        frame=df,
        source=f"DataFrame, OLS of {response} on {rhs} fitted by lagsight",
    ), finite


def ols_residuals(y: np.ndarray, X: np.ndarray) -> tuple[np.ndarray, int]:
    """Residuals (and the rank of ``X``) of the least-squares fit of ``y`` on ``X`` (finite), fitted on
    unit-scaled columns:
    the pseudo-inverse's cut-off (statsmodels' 1e-15) treats every column alike and nothing
    overflows for data near 1e200.  Read in row blocks (:mod:`lagsight.stats.tall`); OLS residuals
    do not depend on the columns' scales."""
    n, k = X.shape
    top = float(np.max(np.abs(y))) or 1.0
    tops = column_tops(X)
    tops = np.where(tops > 0, tops, 1.0)
    scale = np.append(tops, top)
    with np.errstate(over="ignore", invalid="ignore"):
        G = gram_of(X, y) / np.outer(scale, scale)  # the first pass, from products of the whole arrays
    R = r_factor(n, k + 1, stacked(X, y, scale=scale), gram=G)
    sol = solve_r(R, n)
    beta = sol.params / tops
    return (y / top - X @ beta) * top, sol.rank


def _aligned(value, arg: str, n: int, frame: pd.DataFrame | None):
    """Resolve ``groups``/``time`` to an array with one entry per input row."""
    if value is None:
        return None, None
    if isinstance(value, str):
        if frame is None:
            raise ValueError(f"'{arg}' names a column ({value!r}) but the input has no DataFrame to take it from")
        return frame_column(frame, value, arg).to_numpy(), value
    name = getattr(value, "name", None)
    arr = np.asarray(value.to_numpy() if isinstance(value, (pd.Series, pd.Index)) else value)
    if arr.ndim != 1 or arr.size != n:
        raise ValueError(f"'{arg}' must be a column name or have one entry per row ({n}) (got shape {arr.shape})")
    return arr, (str(name) if name is not None else None)


def as_residual_data(
    model, *, exog=None, endog=None, response=None, predictors=None, groups=None, time=None, add_constant: bool = True
) -> ResidualData:
    """Turn a fitted model or a residual vector into a :class:`ResidualData`.

    Parameters
    ----------
    model : object
        One of :data:`ACCEPTED_KINDS`.
    exog : array-like or DataFrame, optional
        The design: for residuals given as an array, list or Series, the design
        that produced them; for a scikit-learn estimator, its X (required).
    endog : array-like, optional
        The response y of a scikit-learn estimator (required for that kind).
    response, predictors : str and list of str, optional
        Columns when ``model`` is a DataFrame; lagsight then fits OLS, with an
        intercept if ``add_constant``.
    groups, time : str or array-like, optional
        A column of the input DataFrame, or values aligned with the input rows.

    Raises
    ------
    TypeError
        Unknown kind, missing required argument, or an argument foreign to the kind.
    ValueError
        Misaligned, non-numeric or missing columns, or fewer than 3 usable rows.
    """
    kind = _kind(model)
    if kind is None:
        hint = " (an unfitted model? call .fit() first)" if hasattr(model, "fit") else ""
        raise TypeError(
            f"Unexpected type for 'model': {type(model)!r}; expected one of: " + "; ".join(ACCEPTED_KINDS) + hint
        )
    if kind == "sklearn" and (exog is None or endog is None):
        lacking = " and ".join(a for a, v in (("exog", exog), ("endog", endog)) if v is None)
        raise TypeError(
            f"a scikit-learn estimator needs its X and y as exog and endog: give {lacking} "
            f"(the data {type(model).__name__} is to be checked on)"
        )
    allowed = {
        "regression": (),
        "statespace": (),
        "sklearn": ("exog", "endog"),
        "array": ("exog",),
        "frame": ("response", "predictors"),
    }[kind]
    for arg, val in (("exog", exog), ("endog", endog), ("response", response), ("predictors", predictors)):
        if val is not None and arg not in allowed:
            raise TypeError(
                f"'{arg}' does not apply when 'model' is {type(model).__name__} "
                f"(got {type(val).__name__}); it is for {_ARG_KIND[arg]}"
            )
    left_out = None
    if kind == "frame" and groups is not None:  # rows without a group label are not fitted
        left_out = unlabelled(_aligned(groups, "groups", len(model), model)[0])
    build = {
        "regression": lambda: _from_regression(model),
        "statespace": lambda: _from_statespace(model),
        "sklearn": lambda: _from_sklearn(model, exog, endog),
        "array": lambda: _from_array(model, exog),
        "frame": lambda: _from_frame(model, response, predictors, add_constant, left_out),
    }[kind]
    return _finish(*build(), groups, time)


def _finish(raw: ResidualData, keep, groups, time) -> ResidualData:
    n0 = raw.resid.size
    if n0 == 0:
        raise ValueError("'model' has no residuals (got 0 rows)")
    group_arr, _ = _aligned(groups, "groups", n0, raw.frame)
    order_arr, order_name = _aligned(time, "time", n0, raw.frame)
    keep = np.ones(n0, dtype=bool) if keep is None else keep.copy()
    notes = list(raw.notes)
    if group_arr is not None:
        missing = keep & unlabelled(group_arr)  # rows dropped for another reason are counted there
        if missing.any():
            notes.append(unlabelled_note(int(missing.sum())))
            keep &= ~missing
    bad = keep & ~np.isfinite(raw.resid)
    if bad.any():
        notes.append(
            f"{_rows(int(bad.sum()))} with missing or infinite residuals were dropped; the time order has gaps there."
        )
        keep &= ~bad
    if raw.exog is not None:
        bad = keep & ~finite_rows(raw.exog)
        if bad.any():
            notes.append(
                f"{_rows(int(bad.sum()))} with missing or infinite values in the design "
                "were dropped; the time order has gaps there."
            )
            keep &= ~bad
    n = int(keep.sum())
    if n < 3:
        raise ValueError(f"'model' gives {n} usable rows; at least 3 are needed")
    out = raw.replace(
        groups=group_arr,
        order_values=order_arr,
        order_name=order_name,
        source=f"{raw.source}, {n:,} rows",
        notes=tuple(notes),
    )
    if n < n0:  # no copy of the rows when every row is kept
        out = out.subset(keep)
    if out.has_constant is None and out.exog is not None:
        out = out.replace(has_constant=has_constant(out.exog))
    return out
