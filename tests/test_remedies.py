"""Tests for lagsight.stats.remedies against published reference output and statsmodels."""

import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import linalg, stats
from statsmodels.datasets import macrodata
from statsmodels.regression.linear_model import GLS, GLSAR

from lagsight.stats.remedies import (
    cochrane_orcutt,
    compare_inference,
    hac_lag,
    newey_west,
    prais_winsten,
)


@pytest.fixture(scope="module")
def macro_growth():
    """Investment-growth regression on statsmodels.datasets.macrodata, built as in statsmodels'
    test suite (regression/tests/test_glsar_gretl.py): n = 202, columns const, gdp growth, realint(-1)."""
    d = macrodata.load_pandas().data
    y = 400 * np.diff(np.log(d["realinv"].to_numpy()))
    X = sm.add_constant(np.c_[400 * np.diff(np.log(d["realgdp"].to_numpy())), d["realint"].to_numpy()[:-1]])
    return y, X


def _ar1_data(n, rho, seed, beta=(1.0, 2.0)):
    """Invented simulation: y = b0 + b1 x + u with AR(1) errors u_t = rho u_{t-1} + eps_t."""
    rng = np.random.default_rng(seed)
    eps = rng.standard_normal(n)
    u = np.empty(n)
    u[0] = eps[0] / math.sqrt(1 - rho**2)
    for t in range(1, n):
        u[t] = rho * u[t - 1] + eps[t]
    x = rng.standard_normal(n)
    X = np.column_stack([np.ones(n), x])
    return X @ np.asarray(beta) + u, X


# ----------------------------------------------------------------------- HAC
def test_newey_west_matches_published_reference(macro_growth):
    y, X = macro_growth
    nw = newey_west(y, X, max_lag=4, use_correction=False)
    # statsmodels test suite (regression/tests/test_glsar_gretl.py, "HAC standard errors,
    # bandwidth 4 (Bartlett kernel)", gretl output): coef, se, t-ratio, p-value with t(199)
    np.testing.assert_almost_equal(nw.params, [-9.48167, 4.37422, -0.613997], 5)
    np.testing.assert_almost_equal(nw.bse, [1.17709, 0.328787, 0.293619], 5)
    np.testing.assert_almost_equal(nw.tvalues, [-8.055, 13.30, -2.091], 2)
    np.testing.assert_allclose(nw.pvalues, [7.17e-14, 2.62e-29, 0.0378], rtol=2e-3)
    assert nw.max_lag == 4 and nw.lag_rule == "user" and nw.df_resid == 199


def test_newey_west_correction_factor(macro_growth):
    y, X = macro_growth
    a = newey_west(y, X, max_lag=4, use_correction=False)
    b = newey_west(y, X, max_lag=4, use_correction=True)
    n, k = X.shape
    np.testing.assert_allclose(b.bse, a.bse * np.sqrt(n / (n - k)), rtol=1e-12)
    z = newey_west(y, X, max_lag=4, use_t=False)
    np.testing.assert_allclose(z.pvalues, 2 * stats.norm.sf(np.abs(z.tvalues)), rtol=1e-10)


def test_common_rule_values():
    # common practice: floor(4 (n/100)^(2/9))
    assert hac_lag(100, lag_rule="common").lag == 4
    assert hac_lag(202, lag_rule="common").lag == 4  # the "bandwidth 4" of the reference HAC output above
    assert hac_lag(1000, lag_rule="common").lag == math.floor(4 * 10 ** (2 / 9)) == 6
    assert hac_lag(202, lag_rule="common").bandwidth == pytest.approx(4 * 2.02 ** (2 / 9), rel=1e-14)


def test_newey_west_1994_plugin_by_hand(macro_growth):
    y, X = macro_growth
    e = sm.OLS(y, X).fit().resid
    n = y.size
    # Newey & West (1994), Bartlett kernel: pilot m = floor(4 (n/100)^(2/9)); h_t = e_t * (x_t' w)
    # with w = (0, 1, 1); s(0) = sum_{|j|<=m} sig_j, s(1) = sum_{|j|<=m} |j| sig_j;
    # gamma = 1.1447 (s(1)/s(0))^(2/3); lag = floor(gamma n^(1/3))
    m = math.floor(4 * (n / 100) ** (2 / 9))
    h = e * (X[:, 1] + X[:, 2])
    sig = [sum(h[t] * h[t - j] for t in range(j, n)) / n for j in range(m + 1)]
    s0 = sig[0] + 2 * sum(sig[1:])
    s1 = 2 * sum(j * sig[j] for j in range(1, m + 1))
    gamma = 1.1447 * (s1 / s0) ** (2 / 3)
    out = hac_lag(n, lag_rule="newey-west-1994", resid=e, exog=X)
    assert out.pilot_lag == m
    assert out.gamma == pytest.approx(gamma, rel=1e-10)
    assert out.bandwidth == pytest.approx(gamma * n ** (1 / 3), rel=1e-10)
    assert out.lag == math.floor(gamma * n ** (1 / 3))
    auto = newey_west(y, X)
    assert auto.max_lag == out.lag and auto.lag_rule == "newey-west-1994"


def test_plugin_lag_grows_with_autocorrelation():
    # invented behaviour data: AR(1) regressor (0.9) and AR(1) errors of growing persistence;
    # the moment series x_t e_t then has lag-1 autocorrelation 0.9 * rho_e, so more lags are asked for
    rng = np.random.default_rng(0)
    n = 2000

    def ar1(r):
        eps = rng.standard_normal(n)
        u = np.empty(n)
        u[0] = eps[0] / math.sqrt(1 - r * r)
        for t in range(1, n):
            u[t] = r * u[t - 1] + eps[t]
        return u

    lags = []
    for rho_e in (0.0, 0.5, 0.9):
        x = ar1(0.9)
        X = np.column_stack([np.ones(n), x])
        e = sm.OLS(1 + 2 * x + ar1(rho_e), X).fit().resid
        lags.append(hac_lag(n, resid=e, exog=X).lag)
    assert lags[0] < lags[1] < lags[2]
    assert lags[0] <= hac_lag(n, lag_rule="common").lag < lags[2]


def test_hac_lag_rejects_bad_input():
    with pytest.raises(ValueError, match="'lag_rule' must be one of"):
        hac_lag(100, lag_rule="andrews")
    with pytest.raises(ValueError, match="'resid' must be given"):
        hac_lag(100)
    with pytest.raises(ValueError, match="'resid' must have n=100"):
        hac_lag(100, resid=np.ones(99))
    with pytest.raises(ValueError, match="'n' must be an integer ≥ 2"):
        hac_lag(1, lag_rule="common")
    with pytest.raises(ValueError, match="'max_lag' must be < n = 10"):
        newey_west(np.arange(10.0) ** 2, np.column_stack([np.ones(10), np.arange(10.0)]), max_lag=10)


# ---------------------------------------------------------------------- FGLS
def test_cochrane_orcutt_matches_published_reference(macro_growth):
    y, X = macro_growth
    Xs = X[:, [1, 2, 0]]  # reference orders the constant last
    co = cochrane_orcutt(y, Xs, rho_method="autocorrelation", tol=1e-6)
    # statsmodels test suite (regression/tests/results/macro_gr_corc_stata.py): Stata
    # "prais g_realinv g_realgdp L.realint, corc rhotype(tscorr)", tol 1e-6, 4 iterations
    assert co.rho == pytest.approx(-0.1080744185979703, abs=1e-10)
    np.testing.assert_allclose(co.params, [4.3704012379033, -0.5792713864578, -9.509886614971], rtol=1e-10)
    np.testing.assert_allclose(co.bse, [0.20815070994319, 0.26801792119756, 0.99049648344574], rtol=1e-10)
    np.testing.assert_allclose(co.pvalues, [2.939551581e-52, 0.03187117882819, 3.656321106e-18], rtol=1e-8)
    assert co.n == 201 and co.df_resid == 198 and co.iterations == 4 and co.converged


def test_cochrane_orcutt_equals_glsar_at_same_rho(macro_growth):
    y, X = macro_growth
    co = cochrane_orcutt(y, X)
    model = GLSAR(y, X, rho=co.rho)
    # statsmodels GLSAR whitening drops the first observation, like Cochrane-Orcutt
    assert model.wendog.shape[0] == y.size - 1
    ref = model.fit()
    np.testing.assert_allclose(co.params, ref.params, rtol=1e-10)
    np.testing.assert_allclose(co.bse, ref.bse, rtol=1e-10)
    np.testing.assert_allclose(co.pvalues, ref.pvalues, rtol=1e-8)
    # GLSAR.iterative_fit estimates rho by Yule-Walker on demeaned residuals, not by the
    # residual regression used here, so only closeness (not equality) is expected
    it = GLSAR(y, X, 1).iterative_fit(maxiter=50)
    assert abs(it.model.rho[0] - co.rho) < 0.1 * co.rho_se  # within a tenth of its SE


def test_prais_winsten_equals_gls_with_ar1_covariance():
    y, X = _ar1_data(40, 0.5, seed=4)
    pw = prais_winsten(y, X)
    # reference library: statsmodels GLS with the AR(1) covariance rho^|i-j| at the same rho
    # (the n x n matrix is built here, in the test only, for n = 40)
    sigma = linalg.toeplitz(pw.rho ** np.arange(40))
    ref = GLS(y, X, sigma=sigma).fit()
    np.testing.assert_allclose(pw.params, ref.params, rtol=1e-9)
    np.testing.assert_allclose(pw.bse, ref.bse, rtol=1e-9)
    assert pw.n == 40 and pw.converged


@pytest.mark.parametrize("fn", [prais_winsten, cochrane_orcutt])
def test_fgls_recovers_simulated_rho(fn):
    y, X = _ar1_data(500, 0.6, seed=2024)
    out = fn(y, X, names=["const", "x"])
    # seeded simulation: estimate within two standard errors of the true 0.6
    assert abs(out.rho - 0.6) < 2 * out.rho_se
    # rho_se near the large-sample value sqrt((1 - rho^2)/n)
    assert out.rho_se == pytest.approx(math.sqrt((1 - 0.36) / 500), rel=0.2)
    assert abs(out.params[1] - 2.0) < 3 * out.bse[1]
    assert out.names == ("const", "x") and out.converged


def test_prais_winsten_rho_se_coverage():
    # Monte Carlo over 200 seeded replications: +/- 1 SE should cover rho about 68% of the time
    hits = 0
    for seed in range(200):
        y, X = _ar1_data(200, 0.5, seed=1000 + seed)
        out = prais_winsten(y, X, tol=1e-6)
        hits += abs(out.rho - 0.5) < out.rho_se
    assert 0.55 < hits / 200 < 0.80


def test_fgls_nonconvergence_and_errors():
    y, X = _ar1_data(60, 0.7, seed=9)
    out = prais_winsten(y, X, maxiter=1)
    assert not out.converged and out.iterations == 1
    assert any("did not converge" in s for s in out.notes)
    with pytest.raises(ValueError, match="'tol' must be a positive number"):
        prais_winsten(y, X, tol=0)
    with pytest.raises(ValueError, match="'rho_method' must be one of"):
        cochrane_orcutt(y, X, rho_method="burg")
    grow = 1.1 ** np.arange(60.0)  # invented: explosive residuals
    with pytest.raises(ValueError, match="inside \\(-1, 1\\)"):
        prais_winsten(grow, np.ones((60, 1)))
    with pytest.raises(ValueError, match="'endog' must be finite"):
        prais_winsten(np.r_[np.nan, y[1:]], X)


def test_fgls_linear_memory_on_long_series():
    # 200 000 rows: an n x n matrix would need 320 GB, so this only runs in linear memory
    y, X = _ar1_data(200_000, 0.3, seed=5)
    out = cochrane_orcutt(y, X, tol=1e-6)
    assert abs(out.rho - 0.3) < 3 * out.rho_se


# ------------------------------------------------------------- side by side
def test_compare_inference_columns_and_flags(macro_growth):
    y, X = macro_growth
    cmp = compare_inference(y, X, names=["const", "gdp", "realint"], alpha=0.05)
    t = cmp.table
    ols = sm.OLS(y, X).fit()
    np.testing.assert_allclose(t["p_ols"], ols.pvalues, rtol=1e-12)
    np.testing.assert_allclose(t["se_hac"], newey_west(y, X).bse, rtol=1e-12)
    np.testing.assert_allclose(t["coef_fgls"], prais_winsten(y, X).params, rtol=1e-12)
    assert list(t.index) == ["const", "gdp", "realint"]
    assert (t["changed_hac"] == ((t["p_hac"] < 0.05) != (t["p_ols"] < 0.05))).all()
    assert cmp.fgls_method == "Prais-Winsten" and cmp.hac_lag == 4


def test_compare_inference_corrects_spurious_significance():
    # invented Monte Carlo: regress one random walk on an unrelated one (true slope 0);
    # OLS rejects far too often, the FGLS correction much less (seeded, 60 replications)
    rej = {"ols": 0, "fgls": 0}
    flips = 0
    for seed in range(60):
        rng = np.random.default_rng(500 + seed)
        x = np.cumsum(rng.standard_normal(100))
        y = np.cumsum(rng.standard_normal(100))
        row = compare_inference(y, np.column_stack([np.ones(100), x]), names=["const", "x"]).table.loc["x"]
        rej["ols"] += row["p_ols"] < 0.05
        rej["fgls"] += row["p_fgls"] < 0.05
        flips += "FGLS" in row["changes"]
    assert rej["ols"] / 60 > 0.4
    assert rej["fgls"] / 60 < 0.15
    assert flips >= rej["ols"] - rej["fgls"]


def test_compare_inference_falls_back_to_cochrane_orcutt():
    # invented: explosive residuals make Prais-Winsten impossible (|rho| >= 1)
    n = 60
    y = 1.1 ** np.arange(float(n))
    X = np.column_stack([np.ones(n), np.sin(np.arange(n))])
    cmp = compare_inference(y, X)
    assert cmp.fgls_method == "Cochrane-Orcutt" and cmp.rho > 1
    assert any("Prais-Winsten was not possible" in s for s in cmp.notes)
    assert any("non-stationary" in s for s in cmp.notes)


@pytest.mark.parametrize("scale", [1e200, 1e-200])
def test_corrections_are_scale_free(scale):
    # every estimator here is equivariant: data in other units give the same t-ratios, p-values,
    # HAC lag and rho, and coefficients in the new units (here y and X share the factor)
    from lagsight.stats.remedies import compare_inference

    rng = np.random.default_rng(40)
    n = 120
    X = np.column_stack([np.ones(n), rng.normal(size=n)])
    u = np.zeros(n)
    for t in range(1, n):
        u[t] = 0.6 * u[t - 1] + rng.normal()
    y = X @ [1.0, 0.5] + u
    base = compare_inference(y, X)
    scaled = compare_inference(y * scale, X * scale)
    assert scaled.hac_lag == base.hac_lag and abs(scaled.rho - base.rho) < 1e-10
    for col in ("coef_ols", "se_ols", "se_hac", "coef_fgls", "se_fgls", "p_ols", "p_hac", "p_fgls"):
        np.testing.assert_allclose(scaled.table[col], base.table[col], rtol=1e-8)


@pytest.mark.parametrize("scale", [1e200, 1e-200])
def test_corrections_with_a_unit_constant_beside_extreme_regressors(scale):
    # a DataFrame (or CSV) at 1e200 gets a constant of 1 added beside its regressors: the constant must
    # not vanish next to them (before: "'exog' must have full column rank 2 (got rank 1)" and no table).
    # Equivariance: with y and x in new units the slope stays, the intercept scales with y, and the
    # t-ratios, p-values, HAC lag and rho do not change
    from lagsight.stats.remedies import compare_inference

    rng = np.random.default_rng(41)
    n = 120
    x = rng.normal(size=n)
    u = np.zeros(n)
    for t in range(1, n):
        u[t] = 0.6 * u[t - 1] + rng.normal()
    y = 1.0 + 0.5 * x + u
    base = compare_inference(y, np.column_stack([np.ones(n), x]))
    scaled = compare_inference(y * scale, np.column_stack([np.ones(n), x * scale]))
    assert scaled.hac_lag == base.hac_lag and abs(scaled.rho - base.rho) < 1e-10
    units = np.array([scale, 1.0])  # intercept in y's units; slope unchanged
    for col in ("coef_ols", "se_ols", "se_hac", "coef_fgls", "se_fgls"):
        np.testing.assert_allclose(scaled.table[col] / units, base.table[col], rtol=1e-8)
    for col in ("p_ols", "p_hac", "p_fgls"):
        np.testing.assert_allclose(scaled.table[col], base.table[col], rtol=1e-8)
