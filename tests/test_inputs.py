"""Behaviour tests for lagsight.inputs: every accepted kind becomes one ResidualData."""

import subprocess
import sys
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from statsmodels.tsa.arima.model import ARIMA
from statsmodels.tsa.statespace.sarimax import SARIMAX

from lagsight.inputs import ACCEPTED_KINDS, ResidualData, as_residual_data

LONGLEY_X = ["GNPDEFL", "GNP", "UNEMP", "ARMED", "POP", "YEAR"]


@pytest.fixture(scope="module")
def longley():
    # statsmodels.datasets.longley: the NIST StRD Longley data (16 annual rows, 1947-1962)
    return sm.datasets.longley.load_pandas().data


@pytest.fixture(scope="module")
def quarterly_gdp():
    # statsmodels.datasets.macrodata: US quarterly macro series 1959Q1-2009Q3 (203 rows)
    d = sm.datasets.macrodata.load_pandas().data
    idx = pd.PeriodIndex.from_fields(year=d.year.astype(int), quarter=d.quarter.astype(int), freq="Q")
    return pd.Series(np.log(d.realgdp.to_numpy()), index=idx, name="log_realgdp")


# --- statsmodels regression results -------------------------------------------------------------


def test_dataframe_path_reproduces_nist_longley(longley):
    # NIST StRD Longley certified values: residual sum of squares 836424.055505915,
    # residual standard deviation 304.854073561965 (n = 16, 7 coefficients).
    data = as_residual_data(longley, response="TOTEMP", predictors=LONGLEY_X)
    rss = float(data.resid @ data.resid)
    assert rss == pytest.approx(836424.055505915, rel=1e-8)
    assert np.sqrt(rss / (16 - 7)) == pytest.approx(304.854073561965, rel=1e-8)
    assert data.has_constant is True and data.exog_names[0] == "const"
    assert data.exog.shape == (16, 7) and data.endog_name == "TOTEMP"
    assert data.dw_applicable and data.arma_df == 0
    assert data.source.endswith("16 rows")


def test_formula_results_keep_dataframe_index_and_report_statsmodels_drops(longley):
    df = longley.copy()
    df.index = pd.Index(np.arange(1947, 1963), name="year")
    df.loc[1952, "GNP"] = np.nan
    res = smf.ols("TOTEMP ~ GNP + POP", df).fit()
    data = as_residual_data(res, time="YEAR")
    assert list(data.index) == [y for y in range(1947, 1963) if y != 1952]
    np.testing.assert_allclose(data.resid, res.resid.to_numpy())  # reference: statsmodels' own residuals
    assert data.exog_names == ("Intercept", "GNP", "POP") and data.has_constant is True
    assert data.frame is not None and list(data.frame.index) == list(data.index)
    np.testing.assert_array_equal(data.order_values, data.frame["YEAR"].to_numpy())
    assert data.order_name == "YEAR"
    assert any("dropped 1 row with missing values" in note for note in data.notes)
    assert "(formula)" in data.source and data.fitted is res


def test_wls_uses_whitened_residuals_and_design(longley):
    X = sm.add_constant(longley[["GNP", "POP"]])
    w = np.linspace(1.0, 4.0, 16)
    res = sm.WLS(longley.TOTEMP, X, weights=w).fit()
    data = as_residual_data(res)
    # statsmodels WLS whitening multiplies rows by sqrt(weight)
    np.testing.assert_allclose(data.resid, res.resid.to_numpy() * np.sqrt(w))
    np.testing.assert_allclose(data.exog, X.to_numpy() * np.sqrt(w)[:, None])
    assert data.has_constant is False  # the whitened intercept column is no longer constant
    assert any("whitened" in note for note in data.notes)


def test_glsar_drops_the_start_up_rows(longley):
    res = sm.GLSAR(longley.TOTEMP, sm.add_constant(longley[["GNP", "POP"]]), rho=2).iterative_fit(2)
    data = as_residual_data(res)
    assert data.n == 14 and list(data.index) == list(range(2, 16))
    np.testing.assert_allclose(data.resid, res.wresid)
    assert any("first 2 rows" in note for note in data.notes)


def test_ols_numpy_results_detect_constant_and_range_index(longley):
    res = sm.OLS(longley.TOTEMP.to_numpy(), sm.add_constant(longley[["GNP"]].to_numpy())).fit()
    data = as_residual_data(res)
    assert isinstance(data.index, pd.RangeIndex) and data.has_constant is True
    assert data.exog_names == ("const", "x1") and data.notes == ()


# --- ARIMA / SARIMAX -------------------------------------------------------------------------------


def _fit_quietly(model):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return model.fit()


def test_arima_arma_df_and_burn_in(quarterly_gdp):
    res = _fit_quietly(ARIMA(quarterly_gdp, order=(2, 1, 1), seasonal_order=(1, 0, 1, 4)))
    data = as_residual_data(res)
    # reference: statsmodels names each ARMA parameter 'ar.L*', 'ma.L*', 'ar.S.L*', 'ma.S.L*'
    n_arma = sum(name.startswith(("ar.", "ma.")) for name in res.params.index)
    assert data.arma_df == n_arma == 5
    assert not data.dw_applicable and data.exog is None
    assert data.n == len(quarterly_gdp) - 1  # d + D*s = 1
    np.testing.assert_allclose(data.resid, res.resid.to_numpy()[1:])
    assert isinstance(data.index, pd.PeriodIndex) and data.index[0] == pd.Period("1959Q2", "Q")
    assert any("fixed regressors" in note for note in data.notes)
    assert any("first residual was dropped" in note for note in data.notes)


def test_sarimax_seasonal_differencing_burn_in(quarterly_gdp):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = SARIMAX(quarterly_gdp, order=(1, 1, 0), seasonal_order=(0, 1, 1, 4)).fit(disp=False)
    data = as_residual_data(res)
    assert data.arma_df == 2
    assert data.n == len(quarterly_gdp) - (1 + 1 * 4)  # d + D*s
    assert any("d + D*s = 1 + 1*4" in note for note in data.notes)


# --- scikit-learn -----------------------------------------------------------------------------------


def test_sklearn_residuals_equal_statsmodels_ols(longley):
    from sklearn.linear_model import LinearRegression

    X, y = longley[["GNP", "UNEMP", "POP"]], longley.TOTEMP
    data = as_residual_data(LinearRegression().fit(X, y), exog=X, endog=y)
    reference = sm.OLS(y, sm.add_constant(X)).fit()  # reference library: statsmodels OLS
    np.testing.assert_allclose(data.resid, reference.resid.to_numpy(), atol=1e-6 * y.std())
    np.testing.assert_allclose(data.exog, sm.add_constant(X).to_numpy())
    assert data.exog_names == ("const", "GNP", "UNEMP", "POP") and data.has_constant is True
    assert data.endog_name == "TOTEMP" and data.notes == ()


def test_sklearn_without_intercept_and_ridge_note(longley):
    from sklearn.linear_model import LinearRegression, Ridge

    X, y = longley[["GNP", "POP"]].to_numpy(), longley.TOTEMP.to_numpy()
    data = as_residual_data(LinearRegression(fit_intercept=False).fit(X, y), exog=X, endog=y)
    assert data.exog.shape == (16, 2) and data.has_constant is False
    assert data.exog_names == ("x1", "x2")
    ridge = as_residual_data(Ridge(alpha=1.0).fit(X, y), exog=X, endog=y)
    assert any("not least-squares" in note for note in ridge.notes)


@pytest.mark.parametrize("given", [{}, {"exog": np.ones((5, 1))}, {"endog": np.ones(5)}])
def test_sklearn_missing_data_is_a_type_error(given):
    from sklearn.linear_model import LinearRegression

    est = LinearRegression().fit(np.arange(10.0)[:, None], np.arange(10.0))
    with pytest.raises(TypeError, match=r"^a scikit-learn estimator needs its X and y as exog and endog: "):
        as_residual_data(est, **given)


def test_sklearn_unfitted_is_a_value_error():
    from sklearn.linear_model import LinearRegression

    with pytest.raises(ValueError, match="has not been fitted"):
        as_residual_data(LinearRegression(), exog=np.ones((5, 1)), endog=np.ones(5))


def test_importing_inputs_does_not_import_sklearn():
    code = "import sys, lagsight.inputs; print('sklearn' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


# --- residual arrays ----------------------------------------------------------------------------------


def test_series_keeps_index_and_nan_rows_are_dropped_with_a_note():
    idx = pd.date_range("2021-01-01", periods=8, freq="D")
    s = pd.Series([0.1, -0.2, np.nan, 0.3, np.inf, -0.1, 0.2, 0.0], index=idx)
    data = as_residual_data(s)
    assert data.n == 6 and list(data.index) == list(idx.delete([2, 4]))
    assert any(note.startswith("2 rows with missing or infinite residuals") and "gaps" in note for note in data.notes)
    assert data.exog is None and data.has_constant is None


def test_list_with_exog_and_nan_exog_rows():
    X = np.column_stack([np.ones(6), np.arange(6.0)])
    X[3, 1] = np.nan
    data = as_residual_data([0.5, -0.5, 0.25, 0.1, -0.25, 0.0], exog=X)
    assert data.n == 5 and data.has_constant is True
    assert any(note.startswith("1 row with missing or infinite values in the design") for note in data.notes)


def test_exog_row_mismatch_and_bad_shapes():
    with pytest.raises(ValueError, match=r"'exog' must have one row per residual \(4\) \(got 3 rows\)"):
        as_residual_data(np.zeros(4), exog=np.ones((3, 2)))
    with pytest.raises(ValueError, match="'model' residuals must be 1-D"):
        as_residual_data(np.zeros((4, 2)))
    with pytest.raises(ValueError, match="must be numeric"):
        as_residual_data(["a", "b", "c"])
    with pytest.raises(ValueError, match="'exog' index must equal"):
        as_residual_data(pd.Series(np.zeros(3), index=[1, 2, 3]), exog=pd.DataFrame({"x": [1.0, 2, 3]}))


def test_too_few_or_no_rows():
    with pytest.raises(ValueError, match="no residuals"):
        as_residual_data(np.array([]))
    with pytest.raises(ValueError, match="2 usable rows; at least 3"):
        as_residual_data([1.0, np.nan, 2.0])


# --- DataFrame input ------------------------------------------------------------------------------------


def test_dataframe_errors_name_the_column(longley):
    with pytest.raises(ValueError, match="'predictors': column 'GDP' is not in the DataFrame"):
        as_residual_data(longley, response="TOTEMP", predictors=["GDP"])
    with pytest.raises(ValueError, match="'response': column 'jobs' is not in the DataFrame"):
        as_residual_data(longley, response="jobs", predictors=["GNP"])
    df = longley.assign(label=["a"] * 16)
    with pytest.raises(ValueError, match="'predictors': column 'label' must be numeric"):
        as_residual_data(df, response="TOTEMP", predictors=["GNP", "label"])
    with pytest.raises(TypeError, match="a DataFrame needs response="):
        as_residual_data(longley, predictors=["GNP"])
    with pytest.raises(ValueError, match="'groups': column 'region' is not in the DataFrame"):
        as_residual_data(longley, response="TOTEMP", predictors=["GNP"], groups="region")


def test_dataframe_groups_time_and_missing_rows(longley):
    df = longley.assign(half=np.repeat(["early", "late"], 8))
    df.loc[3, "UNEMP"] = np.nan
    data = as_residual_data(df, response="TOTEMP", predictors=["GNP", "UNEMP"], groups="half", time="YEAR")
    assert data.n == 15 and 3 not in data.index
    assert list(data.groups) == ["early"] * 7 + ["late"] * 8
    assert data.order_name == "YEAR" and data.frame.shape[0] == 15
    assert any(note.startswith("1 row with missing or infinite values in 'TOTEMP'") for note in data.notes)
    # reference: statsmodels OLS on the complete rows
    kept = df.drop(index=3)
    ref = sm.OLS(kept.TOTEMP, sm.add_constant(kept[["GNP", "UNEMP"]])).fit()
    np.testing.assert_allclose(data.resid, ref.resid.to_numpy())


def test_no_constant_added_twice(longley):
    df = longley.assign(one=1.0)
    data = as_residual_data(df, response="TOTEMP", predictors=["one", "GNP"])
    assert data.exog_names == ("one", "GNP")
    assert any("already span a constant" in note for note in data.notes)


# --- dispatcher errors -------------------------------------------------------------------------------------


def test_unexpected_type_lists_the_accepted_kinds():
    with pytest.raises(TypeError) as info:
        as_residual_data({"resid": [1, 2, 3]})
    message = str(info.value)
    assert message.startswith("Unexpected type for 'model': <class 'dict'>; expected one of: ")
    assert all(kind in message for kind in ACCEPTED_KINDS)


def test_arguments_foreign_to_the_kind_are_type_errors(longley):
    res = sm.OLS(longley.TOTEMP, sm.add_constant(longley.GNP)).fit()
    with pytest.raises(TypeError, match="'exog' does not apply"):
        as_residual_data(res, exog=np.ones((16, 1)))
    with pytest.raises(TypeError, match="'response' does not apply"):
        as_residual_data(np.zeros(5), response="y")
    with pytest.raises(ValueError, match="'groups' names a column"):
        as_residual_data(np.zeros(5), groups="g")
    with pytest.raises(ValueError, match=r"'time' must be a column name or have one entry per row \(5\)"):
        as_residual_data(np.zeros(5), time=[1, 2])


# --- ResidualData helpers ------------------------------------------------------------------------------------


def test_reorder_and_subset_move_every_row_field_together():
    idx = pd.Index(list("abcde"))
    data = as_residual_data(
        pd.Series([1.0, 2, 3, 4, 5], index=idx),
        exog=pd.DataFrame({"x": [10.0, 20, 30, 40, 50]}, index=idx),
        groups=np.array([0, 0, 1, 1, 1]),
        time=[5, 4, 3, 2, 1],
    )
    back = data.reorder([4, 3, 2, 1, 0])
    assert list(back.index) == list("edcba") and list(back.resid) == [5, 4, 3, 2, 1]
    assert list(back.exog[:, 0]) == [50, 40, 30, 20, 10] and list(back.groups) == [1, 1, 1, 0, 0]
    assert list(back.order_values) == [1, 2, 3, 4, 5]
    part = data.subset(data.groups == 1)
    assert isinstance(part, ResidualData) and list(part.index) == list("cde") and part.n == 3
    assert list(data.subset([0, 2]).resid) == [1, 3]
    with pytest.raises(ValueError, match="'permutation' must be an integer permutation of 0..4"):
        data.reorder([0, 0, 1, 2, 3])
    with pytest.raises(ValueError, match="'selector' mask must have shape"):
        data.subset(np.array([True, False]))
    with pytest.raises(ValueError, match=r"'selector' positions must lie in \[0, 5\)"):
        data.subset([7])


# --- hostile DataFrames ----------------------------------------------------------------------------
def test_duplicated_column_names_are_a_one_line_value_error(longley):
    frame = longley[["TOTEMP", "GNP", "UNEMP"]].set_axis(["TOTEMP", "GNP", "GNP"], axis=1)
    for kwargs in ({"response": "TOTEMP", "predictors": ["GNP"]}, {"response": "GNP", "predictors": ["TOTEMP"]}):
        with pytest.raises(ValueError, match="the DataFrame has 2 columns named 'GNP'") as err:
            as_residual_data(frame, **kwargs)
        assert "\n" not in str(err.value)
    grouped = longley[["TOTEMP", "GNP"]].assign(g=1, h=2).set_axis(["TOTEMP", "GNP", "g", "g"], axis=1)
    with pytest.raises(ValueError, match="'groups': the DataFrame has 2 columns named 'g'"):
        as_residual_data(grouped, response="TOTEMP", predictors=["GNP"], groups="g")


def test_response_may_be_a_one_item_list(longley):
    plain = as_residual_data(longley, response="TOTEMP", predictors=LONGLEY_X)
    listed = as_residual_data(longley, response=["TOTEMP"], predictors=LONGLEY_X)
    np.testing.assert_array_equal(plain.resid, listed.resid)
    assert listed.endog_name == "TOTEMP"
    with pytest.raises(ValueError, match="'response' must be one column name \\(got a list of 2"):
        as_residual_data(longley, response=["TOTEMP", "GNP"], predictors=["YEAR"])
    with pytest.raises(TypeError, match="'response' must be a column name \\(got dict\\)"):
        as_residual_data(longley, response={"TOTEMP": 1}, predictors=["YEAR"])
    with pytest.raises(ValueError, match="'predictors' names column 'GNP' more than once"):
        as_residual_data(longley, response="TOTEMP", predictors=["GNP", "GNP"])
    one = as_residual_data(longley, response="TOTEMP", predictors=pd.Index(["GNP"]))
    assert one.exog_names == ("const", "GNP")
