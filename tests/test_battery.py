"""Tests for lagsight.stats.battery against published reference values and libraries."""

from itertools import combinations

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import stats
from statsmodels.datasets import macrodata
from statsmodels.sandbox.stats.runs import runstest_1samp
from statsmodels.stats.diagnostic import acorr_breusch_godfrey

from lagsight.stats.battery import (
    breusch_godfrey,
    detect_lagged_response,
    durbin_alternative,
    durbin_h,
    ljung_box,
)
from lagsight.stats.runs import runs_distribution, runs_test


@pytest.fixture(scope="module")
def macro_growth():
    """Quarterly investment-growth regression built as statsmodels' own test suite builds it
    (statsmodels/stats/tests/test_diagnostic.py, TestDiagnosticG): n = 202."""
    d = macrodata.load_pandas().data
    endog = 400 * np.diff(np.log(d["realinv"].to_numpy()))
    exog = sm.add_constant(np.c_[400 * np.diff(np.log(d["realgdp"].to_numpy())), d["realint"].to_numpy()[:-1]])
    res = sm.OLS(endog, exog).fit()
    return endog, exog, res


@pytest.fixture(scope="module")
def macro_consumption():
    """Consumption function with lagged consumption on statsmodels.datasets.macrodata:
    log realcons_t on const, log realdpi_t, log realcons_{t-1} (n = 202)."""
    d = macrodata.load_pandas().data
    c = np.log(d["realcons"].to_numpy())
    inc = np.log(d["realdpi"].to_numpy())
    y = c[1:]
    X = np.column_stack([np.ones(y.shape[0]), inc[1:], c[:-1]])
    return y, X, sm.OLS(y, X).fit()


# ------------------------------------------------------------- Breusch-Godfrey
def test_breusch_godfrey_matches_published_reference(macro_growth):
    _, exog, res = macro_growth
    bg = breusch_godfrey(res.resid, exog, max_lag=4)
    # statsmodels test suite (test_diagnostic.py, test_acorr_breusch_godfrey), values from R lmtest::bgtest
    assert bg.statistic == pytest.approx(4.771042651230007, abs=1e-11)
    assert bg.pvalue == pytest.approx(0.3116067133066697, abs=1e-11)
    assert bg.f_statistic == pytest.approx(1.179280833676792, abs=1e-11)
    assert bg.f_pvalue == pytest.approx(0.321197487261203, abs=1e-11)
    assert bg.f_df == (4.0, 195.0)
    assert bg.df == (4.0,)


@pytest.mark.parametrize("order", [1, 2, 7])
@pytest.mark.parametrize("with_const", [True, False])
def test_breusch_godfrey_equals_statsmodels(macro_growth, order, with_const):
    endog, exog, _ = macro_growth
    X = exog if with_const else exog[:, 1:]
    res = sm.OLS(endog, X).fit()
    ours = breusch_godfrey(res.resid, X, max_lag=order)
    # reference library: statsmodels.stats.diagnostic.acorr_breusch_godfrey
    ref = acorr_breusch_godfrey(res, nlags=order, result_object=True)
    assert_allclose(
        [ours.statistic, ours.pvalue, ours.f_statistic, ours.f_pvalue],
        [ref.lm, ref.lmpval, ref.fval, ref.fpval],
        rtol=1e-10,
        atol=1e-12,
    )
    assert any("constant was added" in n for n in ours.notes) is (not with_const)


def test_breusch_godfrey_rejects_bad_input(macro_growth):
    _, exog, res = macro_growth
    e = np.asarray(res.resid).copy()
    with pytest.raises(ValueError, match="'max_lag'"):
        breusch_godfrey(e, exog, max_lag=0)
    with pytest.raises(ValueError, match="'max_lag' is too large"):
        breusch_godfrey(e[:8], exog[:8], max_lag=5)
    with pytest.raises(ValueError, match="'exog' must have 202 rows"):
        breusch_godfrey(e, exog[:-1], max_lag=2)
    e[3] = np.nan
    with pytest.raises(ValueError, match="'resid' must be finite"):
        breusch_godfrey(e, exog, max_lag=2)


# ------------------------------------------------------------------ Ljung-Box
def test_ljung_box_matches_published_reference(macro_growth):
    _, _, res = macro_growth
    lb = ljung_box(res.resid, max_lag=4)
    # statsmodels test suite (test_diagnostic.py, test_acorr_ljung_box), values from R Box.test
    assert lb.statistic == pytest.approx(5.23587172795227, abs=1e-10)
    assert lb.pvalue == pytest.approx(0.263940335284713, abs=1e-10)
    assert lb.bp_stat[-1] == pytest.approx(5.12462932741681, abs=1e-10)
    assert lb.bp_pvalue[-1] == pytest.approx(0.2747471266820692, abs=1e-10)
    assert list(lb.lags) == [1, 2, 3, 4]
    assert "largest lag" in lb.method


def test_ljung_box_model_df_reference_and_nan(macro_growth):
    _, _, res = macro_growth
    lb = ljung_box(res.resid, max_lag=[1, 2, 4], model_df=2)
    # statsmodels test suite comment (R Box.test(..., lag=4, fitdf=2)):
    # p 0.0729532930400377 (LB), 0.0771260128929921 (BP)
    assert lb.lb_pvalue[-1] == pytest.approx(0.0729532930400377, abs=1e-10)
    assert lb.bp_pvalue[-1] == pytest.approx(0.0771260128929921, abs=1e-10)
    assert lb.df == (2.0,)
    assert np.isnan(lb.lb_pvalue[:2]).all() and np.isnan(lb.bp_pvalue[:2]).all()
    assert any("lag(s) 1, 2" in n for n in lb.notes)
    assert "lb_pvalue" in str(lb)


def test_ljung_box_rejects_bad_lags():
    e = np.random.default_rng(1).standard_normal(30)
    with pytest.raises(ValueError, match="'max_lag' must be an integer ≥ 1"):
        ljung_box(e, max_lag=0)
    with pytest.raises(ValueError, match="'max_lag' must be smaller than n=30"):
        ljung_box(e, max_lag=30)
    with pytest.raises(ValueError, match="'model_df'"):
        ljung_box(e, max_lag=3, model_df=-1)


# ------------------------------------------------------------- Durbin's h / alt
def test_detect_lagged_response_finds_column(macro_consumption):
    y, X, _ = macro_consumption
    assert detect_lagged_response(X, y) == 2
    assert detect_lagged_response(X[:, :2], y) is None


def test_detect_lagged_response_tolerance_and_names():
    rng = np.random.default_rng(5)
    y = rng.standard_normal(50).cumsum() + 100
    lag = np.r_[99.0, y[:-1]]
    X = np.column_stack([np.ones(50), lag * (1 + 1e-12), rng.standard_normal(50), lag])
    # two numerical matches: the one whose name hints at a lag wins
    assert detect_lagged_response(X, y) == 1
    assert detect_lagged_response(X, y, names=["c", "a", "b", "y_lag1"]) == 3
    X2 = np.column_stack([np.ones(50), lag * (1 + 1e-6)])
    assert detect_lagged_response(X2, y) is None
    with pytest.raises(ValueError, match="'names' must have one entry per column"):
        detect_lagged_response(X, y, names=["a"])


def test_durbin_h_agrees_with_hand_computation(macro_consumption):
    y, X, res = macro_consumption
    e = res.resid
    n = y.shape[0]
    # Durbin (1970): h = rho_hat * sqrt(n / (1 - n Var(b_lag))), rho_hat = 1 - d/2
    beta = np.linalg.solve(X.T @ X, X.T @ y)
    u = y - X @ beta
    s2 = u @ u / (n - X.shape[1])
    var_b = s2 * np.linalg.inv(X.T @ X)[2, 2]
    d = np.sum(np.diff(u) ** 2) / np.sum(u**2)
    h = (1 - d / 2) * np.sqrt(n / (1 - n * var_b))
    out = durbin_h(e, X, y)  # lag column detected
    assert out.lag_column == 2
    assert out.statistic == pytest.approx(h, rel=1e-10)
    assert out.pvalue == pytest.approx(stats.norm.sf(h), rel=1e-8)
    two = durbin_h(e, X, y, lag_column=2, alternative="two-sided")
    assert two.pvalue == pytest.approx(2 * stats.norm.sf(abs(h)), rel=1e-8)
    neg = durbin_h(e, X, y, lag_column=2, alternative="negative")
    assert neg.pvalue == pytest.approx(stats.norm.cdf(h), rel=1e-10)
    assert "1 − d/2" in out.method


def test_durbin_h_undefined_when_variance_too_large():
    # invented behaviour data: a regressor nearly collinear with the lagged response
    rng = np.random.default_rng(11)
    n = 15
    y = rng.standard_normal(n + 1).cumsum()
    ylag = y[:-1]
    X = np.column_stack([np.ones(n), ylag, ylag + 1e-3 * rng.standard_normal(n)])
    res = sm.OLS(y[1:], X).fit()
    assert n * res.bse[1] ** 2 >= 1  # precondition of the scenario
    out = durbin_h(res.resid, X, y[1:], lag_column=1)
    assert np.isnan(out.statistic) and np.isnan(out.pvalue)
    assert any("undefined" in s and "Durbin's alternative" in s for s in out.notes)


def test_durbin_h_rejects_wrong_residuals(macro_consumption):
    y, X, res = macro_consumption
    with pytest.raises(ValueError, match="'resid' must be the OLS residuals"):
        durbin_h(res.resid + 0.5, X, y, lag_column=2)
    with pytest.raises(ValueError, match="'lag_column' must be < 3"):
        durbin_h(res.resid, X, y, lag_column=3)
    with pytest.raises(ValueError, match="'lag_column' must be given"):
        durbin_h(res.resid, X[:, :2], y)
    with pytest.raises(ValueError, match="'endog' must have 202"):
        durbin_h(res.resid, X, y[:-1], lag_column=2)


def test_durbin_alternative_agrees_with_hand_computation(macro_consumption):
    y, X, res = macro_consumption
    e = np.asarray(res.resid)
    # Durbin (1970) alternative: regress e_t on x_t and e_{t-1} (t = 2..n); t-ratio of e_{t-1}
    Z = np.column_stack([X[1:], e[:-1]])
    g = np.linalg.solve(Z.T @ Z, Z.T @ e[1:])
    v = e[1:] - Z @ g
    df = Z.shape[0] - Z.shape[1]
    se = np.sqrt(v @ v / df * np.linalg.inv(Z.T @ Z)[-1, -1])
    t = g[-1] / se
    out = durbin_alternative(e, X)
    assert out.statistic == pytest.approx(t, rel=1e-9)
    assert out.df == (float(df),)
    assert out.pvalue == pytest.approx(2 * stats.t.sf(abs(t), df), rel=1e-8)
    pos = durbin_alternative(e, X, alternative="positive")
    assert pos.pvalue == pytest.approx(stats.t.sf(t, df), rel=1e-8)
    assert "t-test" in out.method and any("dropped" in s for s in out.notes)


def test_durbin_alternative_order_two_is_f_test(macro_consumption):
    y, X, res = macro_consumption
    e = np.asarray(res.resid)
    # F = ((SSR_r - SSR_u)/q) / (SSR_u/df) for the two lag coefficients, rows t = 3..n
    Zr = X[2:]
    Zu = np.column_stack([X[2:], e[1:-1], e[:-2]])
    ssr = lambda Z: np.sum((e[2:] - Z @ np.linalg.lstsq(Z, e[2:], rcond=None)[0]) ** 2)
    df = Zu.shape[0] - Zu.shape[1]
    F = (ssr(Zr) - ssr(Zu)) / 2 / (ssr(Zu) / df)
    out = durbin_alternative(e, X, max_lag=2)
    assert out.statistic == pytest.approx(F, rel=1e-9)
    assert out.pvalue == pytest.approx(stats.f.sf(F, 2, df), rel=1e-7)
    assert out.df == (2.0, float(df)) and "F-test" in out.method
    with pytest.raises(ValueError, match="'alternative' must be 'two-sided' when max_lag > 1"):
        durbin_alternative(e, X, max_lag=2, alternative="positive")


# ------------------------------------------------------------------ runs test
def _brute_force_runs(n1, n2):
    """Count runs over every arrangement of n1 pluses among n1 + n2 places."""
    n = n1 + n2
    counts = {}
    for pos in combinations(range(n), n1):
        s = np.zeros(n, bool)
        s[list(pos)] = True
        r = 1 + int(np.count_nonzero(s[1:] != s[:-1]))
        counts[r] = counts.get(r, 0) + 1
    total = sum(counts.values())
    return {r: c / total for r, c in counts.items()}


@pytest.mark.parametrize("n1,n2", [(1, 1), (1, 4), (3, 3), (4, 6), (7, 5)])
def test_runs_distribution_equals_brute_force(n1, n2):
    bf = _brute_force_runs(n1, n2)
    dist = runs_distribution(n1, n2)
    r, pmf = dist.runs, dist.pmf
    for runs, p in zip(r, pmf):
        assert p == pytest.approx(bf.get(int(runs), 0.0), abs=1e-12)


@settings(max_examples=40, deadline=None)
@given(st.integers(1, 300), st.integers(1, 300))
def test_runs_distribution_moments_match_closed_form(n1, n2):
    # Wald & Wolfowitz (1940): E[R] = 2 n1 n2 / N + 1, Var[R] = 2 n1 n2 (2 n1 n2 - N) / (N^2 (N - 1))
    dist = runs_distribution(n1, n2)
    r, pmf = dist.runs, dist.pmf
    N = n1 + n2
    mean = 2 * n1 * n2 / N + 1
    var = 2 * n1 * n2 * (2 * n1 * n2 - N) / (N**2 * (N - 1))
    assert pmf.sum() == pytest.approx(1.0, abs=1e-10)
    assert (pmf * r).sum() == pytest.approx(mean, rel=1e-9)
    assert (pmf * (r - mean) ** 2).sum() == pytest.approx(var, rel=1e-7, abs=1e-9)


def test_runs_exact_pvalue_equals_brute_force_tail():
    # sign pattern + + + - - + + - - - (n1 = 5, n2 = 5, 4 runs)
    e = np.array([0.3, 1.2, 0.4, -0.5, -0.1, 0.9, 0.2, -1.0, -0.4, -0.7])
    bf = _brute_force_runs(5, 5)
    out = runs_test(e)
    assert out.method == "exact runs distribution" and out.runs == 4
    assert out.pvalue == pytest.approx(sum(p for r, p in bf.items() if r <= 4), abs=1e-12)
    neg = runs_test(e, alternative="negative")
    assert neg.pvalue == pytest.approx(sum(p for r, p in bf.items() if r >= 4), abs=1e-12)


def test_runs_normal_form_matches_statsmodels():
    e = np.random.default_rng(3).standard_normal(300)
    e = e - e.mean()
    out = runs_test(e, alternative="two-sided")
    assert out.method.startswith("normal")
    # reference library: statsmodels.sandbox.stats.runs.runstest_1samp, no continuity correction
    z, p = runstest_1samp(e, cutoff=0, correction=False)
    assert out.statistic == pytest.approx(z, rel=1e-12)
    assert out.pvalue == pytest.approx(p, rel=1e-12)


def test_runs_positive_autocorrelation_gives_few_runs_and_small_pvalue():
    # invented behaviour data: a smooth AR(1) with strong positive dependence
    rng = np.random.default_rng(8)
    e = np.zeros(200)
    for t in range(1, 200):
        e[t] = 0.9 * e[t - 1] + rng.standard_normal()
    out = runs_test(e - e.mean())
    assert out.runs < out.expected_runs and out.statistic < 0 and out.pvalue < 0.01


def test_runs_zeros_dropped_and_errors():
    e = np.array([1.0, 0.0, -1.0, 2.0, 0.0, -3.0, 1.0])
    out = runs_test(e)
    assert out.zeros_dropped == 2 and out.n_positive + out.n_negative == 5
    assert any("2 zero residual" in s for s in out.notes)
    with pytest.raises(ValueError, match="'resid' must have both positive and negative"):
        runs_test(np.ones(5))
    with pytest.raises(ValueError, match="'alternative'"):
        runs_test(e, alternative="greater")
    with pytest.raises(ValueError, match="'method'"):
        runs_test(e, method="fast")


def test_seasonal_lag_test_is_the_t_ratio_of_the_lag_s_coefficient():
    # reference: the same auxiliary regression solved by numpy's least squares, t-ratio by hand
    from lagsight.stats.battery import seasonal_lag_test

    rng = np.random.default_rng(12)
    n, s = 80, 4
    X = np.column_stack([np.ones(n), rng.normal(size=n)])
    y = X @ [1.0, 2.0] + rng.normal(size=n)
    e = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    res = seasonal_lag_test(e, X, period=s, alternative="positive")
    A = np.column_stack([X[s:], e[s - 1 : n - 1], e[: n - s]])
    b, *_ = np.linalg.lstsq(A, e[s:], rcond=None)
    r = e[s:] - A @ b
    sigma2 = r @ r / (A.shape[0] - A.shape[1])
    t = b[-1] / np.sqrt(sigma2 * np.linalg.inv(A.T @ A)[-1, -1])
    assert abs(res.statistic - t) < 1e-10
    assert res.df == (A.shape[0] - A.shape[1],)
    # large t means positive correlation: the positive alternative is the upper tail
    assert abs(res.pvalue - stats.t.sf(t, A.shape[0] - A.shape[1])) < 1e-12
    with pytest.raises(ValueError, match="'period'"):
        seasonal_lag_test(e, X, period=1)


# --- residuals without variation ---------------------------------------------------------------
@pytest.mark.parametrize("value", [0.0, 3.5])
def test_constant_residuals_are_a_one_line_value_error(value):
    # autocorrelations of a constant are 0/0: one clear ValueError, never a ZeroDivisionError or NaN
    e = np.full(40, value)
    X = np.column_stack([np.ones(40), np.arange(40.0)])
    for run in (lambda: breusch_godfrey(e, X, max_lag=2), lambda: ljung_box(e, max_lag=4)):
        with pytest.raises(ValueError, match="'resid' must vary") as err:
            run()
        assert "\n" not in str(err.value)
