"""The paths taken for long series give the numbers of the paths for short ones, where both apply.

Each long-series path is switched on below its usual size (blocks of a few hundred rows, the
blocked basis, the blocked direct sums, threads, one R factor shared by several fits) and
compared with the short-series path on the same data, or with the reference library the
short path was checked against (named beside each check).  Speed and memory at 10^7 rows are
measured by benchmarks/bench_scale.py, not here.
"""

import importlib

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.stats.diagnostic import acorr_breusch_godfrey
from statsmodels.stats.sandwich_covariance import S_hac_simple
from statsmodels.tsa.stattools import acf

import lagsight
from lagsight.stats import tall
from lagsight.stats.battery import breusch_godfrey
from lagsight.stats.correlogram import sample_acf
from lagsight.stats.quadform import SpectralForm
from lagsight.stats.remedies import _hac_middle, cochrane_orcutt, newey_west, prais_winsten

dw_module = importlib.import_module("lagsight.stats.durbin_watson")
quadform = importlib.import_module("lagsight.stats.quadform")
remedies = importlib.import_module("lagsight.stats.remedies")
correlogram_module = importlib.import_module("lagsight.stats.correlogram")
order_module = importlib.import_module("lagsight.order")


def _regression(n=3000, rho=0.5, seed=11, k=4):
    """Invented data: a constant, k - 1 normal regressors, a trend, AR(1) errors."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / n
    X = np.column_stack([np.ones(n), rng.standard_normal((n, k - 2)), t])
    u = np.zeros(n)
    eps = rng.standard_normal(n)
    for i in range(1, n):
        u[i] = rho * u[i - 1] + eps[i]
    y = X @ np.arange(1.0, k + 1.0) + u
    return y, X


@pytest.fixture
def long_paths(monkeypatch):
    """Every long-series switch on at small n: row blocks of 200, threads, the blocked basis,
    the blocked direct sums, Chebyshev moments in column blocks of 128."""
    monkeypatch.setattr(tall, "ROWS", 200)
    monkeypatch.setattr(tall, "POOL_MIN_ROWS", 0)
    monkeypatch.setattr(dw_module, "BLOCKED_BASIS_MIN_N", 0)
    monkeypatch.setattr(quadform, "_WW_CACHE_MAX", 0)
    monkeypatch.setattr(quadform._ChebMoments, "_COLS", 128)


def _short_paths(monkeypatch):
    monkeypatch.setattr(tall, "ROWS", 1 << 30)
    monkeypatch.setattr(tall, "POOL_MIN_ROWS", 1 << 40)
    monkeypatch.setattr(dw_module, "BLOCKED_BASIS_MIN_N", 1 << 40)
    monkeypatch.setattr(quadform, "_WW_CACHE_MAX", 1 << 40)
    monkeypatch.setattr(quadform._ChebMoments, "_COLS", 1 << 30)


@pytest.mark.parametrize("lag,blocks", [(1, None), (4, None), (1, "panel")])
def test_exact_durbin_watson_same_on_both_paths(monkeypatch, lag, blocks):
    y, X = _regression(n=2400)
    e = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    rows = [np.arange(0, 1000), np.arange(1000, 2400)] if blocks else None
    d = dw_module.dw_statistic(e, lag=lag)
    out, used = {}, []
    blocked_basis = dw_module.orthonormal_basis_t
    monkeypatch.setattr(dw_module, "orthonormal_basis_t", lambda *a: used.append(1) or blocked_basis(*a))
    for name in ("short", "long", "direct"):
        with monkeypatch.context() as m:
            if name == "short":
                _short_paths(m)
            else:
                m.setattr(tall, "ROWS", 200)
                m.setattr(tall, "POOL_MIN_ROWS", 0)
                m.setattr(dw_module, "BLOCKED_BASIS_MIN_N", 0)
                m.setattr(quadform._ChebMoments, "_COLS", 128)
                m.setattr(quadform, "_WW_CACHE_MAX", 0)
                if name == "direct":  # every evaluation by the direct sums, in column blocks
                    m.setattr(quadform, "_CHEB_MIN_N", 1 << 40)
                    m.setattr(quadform, "_DIRECT_BLOCK", 20_000)
            dist = dw_module.DurbinWatsonDistribution(X, lag, blocks=rows)
            out[name] = (
                dist.mean,
                dist.var,
                dist.cdf(np.array([d, d + 0.05, 1.6])),
                dist.tails(1.6)[0],
                dist.project(e),
                dist.rank,
            )
            probe = np.random.default_rng(0).standard_normal(X.shape[0])  # not orthogonal to X
            np.testing.assert_allclose(dist.project(probe, X), dist.project(probe), rtol=1e-10)
    assert len(used) == 2  # the blocked basis ran for the long paths only
    short = out["short"]
    for name in ("long", "direct"):
        other = out[name]
        assert short[5] == other[5] == X.shape[1]
        np.testing.assert_allclose(other[0], short[0], rtol=1e-13)
        np.testing.assert_allclose(other[1], short[1], rtol=1e-11)
        np.testing.assert_allclose(other[2], short[2], rtol=0, atol=1e-12)  # the engine's absolute accuracy
        np.testing.assert_allclose(other[3], short[3], rtol=1e-9)  # a tail near 1e-10, relative
        # the residuals are orthogonal to the design on both paths (Q'e is rounding)
        assert np.abs(other[4]).max() < 1e-10 * np.linalg.norm(e)


def test_direct_sums_without_the_product_matrix(monkeypatch):
    y, X = _regression(n=600)
    Q = np.linalg.qr(X)[0]
    from scipy import fft

    W = fft.dct(Q.T, type=2, norm="ortho", axis=1)
    nu = 2.0 - 2.0 * np.cos(np.pi * np.arange(600) / 600)
    z = 2j * np.array([0.3, 1.0, 7.0, 40.0])
    cached = SpectralForm(nu, W)._eval_direct(z, np.full(4, 1.7), True)
    monkeypatch.setattr(quadform, "_WW_CACHE_MAX", 0)
    monkeypatch.setattr(quadform, "_DIRECT_BLOCK", 3000)  # column blocks of 3000 // k^2 = 187
    blocked = SpectralForm(nu, W)._eval_direct(z, np.full(4, 1.7), True)
    np.testing.assert_allclose(blocked[0], cached[0], rtol=1e-13)
    np.testing.assert_allclose(blocked[1], cached[1], rtol=1e-12)


def test_chebyshev_moments_raised_step_by_step_equal_one_pass():
    rng = np.random.default_rng(2)
    W = rng.standard_normal((3, 5000)) / 70.0
    x = np.cos(np.pi * (np.arange(5000) + 0.5) / 5000)
    a = quadform._ChebMoments(x, W)
    for deg in (2, 20, 45, 90):
        a.ensure(deg)
    b = quadform._ChebMoments(x, W)
    b.ensure(a.degree)
    np.testing.assert_allclose(a.mu, b.mu, rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(a.G, b.G, rtol=1e-12, atol=1e-13)


def test_fgls_from_lag_products_equals_the_transformed_rows(monkeypatch, long_paths):
    y, X = _regression(rho=0.8)
    fast = prais_winsten(y, X), cochrane_orcutt(y, X, rho_method="autocorrelation")
    original = remedies._ResidualMoments.__init__

    def without_products(self, ols):
        original(self, ols)
        self.lp = None  # every residual and transformed row formed block by block

    monkeypatch.setattr(remedies._ResidualMoments, "__init__", without_products)
    slow = prais_winsten(y, X), cochrane_orcutt(y, X, rho_method="autocorrelation")
    for f, s in zip(fast, slow):
        assert f.iterations == s.iterations and f.converged == s.converged
        assert f.rho == pytest.approx(s.rho, rel=1e-12)
        assert f.rho_se == pytest.approx(s.rho_se, rel=1e-10)
        np.testing.assert_allclose(f.params, s.params, rtol=1e-10)
        np.testing.assert_allclose(f.bse, s.bse, rtol=1e-10)
    # and the regression at the final rho is statsmodels' GLSAR (it drops the first row, as
    # Cochrane-Orcutt does)
    ref = sm.GLSAR(y, X, rho=fast[1].rho).fit()
    np.testing.assert_allclose(fast[1].params, ref.params, rtol=1e-10)
    np.testing.assert_allclose(fast[1].bse, ref.bse, rtol=1e-10)


@pytest.mark.parametrize("lag", [0, 1, 5, 40])
def test_hac_middle_by_moving_sums_equals_statsmodels(long_paths, lag):
    y, X = _regression()
    u = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    # reference library: statsmodels' S_hac_simple (lag-by-lag sum with Bartlett weights)
    ref = S_hac_simple(X * u[:, None], nlags=lag)
    got = _hac_middle(X, lambda a, b: u[a:b], lag)
    np.testing.assert_allclose(got, ref, rtol=1e-11, atol=1e-11 * np.abs(ref).max())


@pytest.mark.parametrize("use_correction", [False, True])
def test_newey_west_equals_statsmodels_hac(long_paths, use_correction):
    y, X = _regression()
    got = newey_west(y, X, max_lag=9, use_correction=use_correction)
    # reference library: statsmodels' OLS(...).fit(cov_type="HAC")
    ref = sm.OLS(y, X).fit(cov_type="HAC", use_t=True, cov_kwds={"maxlags": 9, "use_correction": use_correction})
    np.testing.assert_allclose(got.params, ref.params, rtol=1e-12)
    np.testing.assert_allclose(got.bse, ref.bse, rtol=1e-11)
    np.testing.assert_allclose(got.pvalues, ref.pvalues, rtol=1e-9)


@pytest.mark.filterwarnings("ignore:acorr_breusch_godfrey currently returns")
def test_breusch_godfrey_one_pass_equals_statsmodels(long_paths):
    y, X = _regression(rho=0.3)
    fit = sm.OLS(y, X).fit()
    got = breusch_godfrey(fit.resid, X, max_lag=5)
    # reference library: statsmodels' acorr_breusch_godfrey on the same fit
    lm, lm_p, f, f_p = acorr_breusch_godfrey(fit, nlags=5)
    assert got.statistic == pytest.approx(lm, rel=1e-10)
    assert got.f_statistic == pytest.approx(f, rel=1e-10)
    assert got.pvalue == pytest.approx(lm_p, rel=1e-8)


def test_acf_by_lagged_sums_equals_the_fft_route(monkeypatch):
    rng = np.random.default_rng(5)
    e = np.cumsum(rng.standard_normal(4000)) * 0.05 + rng.standard_normal(4000)
    direct = sample_acf(e, 300)
    monkeypatch.setattr(correlogram_module, "DIRECT_MAX_LAGS", 10)
    via_fft = sample_acf(e, 300)
    np.testing.assert_allclose(direct, via_fft, atol=1e-13)
    # reference library: statsmodels' acf without FFT (lagged products)
    np.testing.assert_allclose(direct, acf(e, nlags=300, fft=False)[1:], atol=1e-14)


def test_order_check_skips_ranking_an_increasing_index_with_the_same_report(monkeypatch):
    idx = pd.date_range("2021-01-01", periods=500, freq="D").delete([40, 41, 300])
    data = lagsight.inputs.as_residual_data(np.random.default_rng(1).standard_normal(idx.size)).replace(index=idx)
    fast = order_module.check_order(data)
    monkeypatch.setattr(order_module, "_strictly_increasing", lambda key: False)
    full = order_module.check_order(data)
    assert fast.flags == full.flags and fast.warnings == full.warnings and fast.order_used == full.order_used
    np.testing.assert_array_equal(fast.permutation, full.permutation)


def test_dataframe_fit_sharing_the_constant_check_equals_statsmodels(long_paths, monkeypatch):
    def no_second_factor(*args):
        raise AssertionError("the frame's fit should come from the constant check's R factor")

    monkeypatch.setattr(lagsight.inputs, "ols_residuals", no_second_factor)
    y, X = _regression(n=2000)
    frame = pd.DataFrame({"y": y, "a": X[:, 1], "b": X[:, 2], "trend": X[:, 3]})
    data = lagsight.inputs.as_residual_data(frame, response="y", predictors=["a", "b", "trend"])
    # reference library: statsmodels' OLS residuals with a constant added
    ref = sm.OLS(y, sm.add_constant(X[:, 1:])).fit().resid
    np.testing.assert_allclose(data.resid, ref, rtol=0, atol=1e-12 * np.abs(y).max())
    assert data.has_constant and data.exog_names[0] == "const"


def test_checks_read_in_blocks_find_what_a_whole_array_check_finds(long_paths):
    from lagsight.stats._arrays import as_design, constant_columns

    X = np.column_stack([np.full(1000, 2.0), np.ones(1000), np.arange(1000.0)])
    X[999, 1] = 1.5  # no longer constant in the last block only
    np.testing.assert_array_equal(constant_columns(X), (np.ptp(X, axis=0) == 0) & (X[0] != 0))
    X[777, 2] = np.nan
    with pytest.raises(ValueError, match="at row 777, column 2"):
        as_design(X, 1000, full_rank=False)
    huge = np.full((500, 2), 1e308)  # finite, though their sum overflows
    assert as_design(huge, 500, full_rank=False) is huge


def test_diagnose_same_on_both_paths(monkeypatch):
    y, X = _regression(n=2500, rho=0.6)
    frame = pd.DataFrame({"y": y, "a": X[:, 1], "b": X[:, 2], "trend": X[:, 3]})
    out = {}
    for name in ("short", "long"):
        with monkeypatch.context() as m:
            if name == "short":
                _short_paths(m)
            else:
                m.setattr(tall, "ROWS", 300)
                m.setattr(tall, "POOL_MIN_ROWS", 0)
                m.setattr(dw_module, "BLOCKED_BASIS_MIN_N", 0)
                m.setattr(quadform, "_WW_CACHE_MAX", 0)
                m.setattr(quadform._ChebMoments, "_COLS", 256)
            out[name] = lagsight.diagnose(frame, response="y", predictors=["a", "b", "trend"], remedies=True)
    short, long = out["short"], out["long"]
    assert set(short.tests) == set(long.tests) and short.verdict.finding == long.verdict.finding
    for name, res in short.tests.items():
        assert long.tests[name].statistic == pytest.approx(res.statistic, rel=1e-10), name
        assert long.tests[name].pvalue == pytest.approx(res.pvalue, rel=1e-8, abs=1e-12), name
    cols = ["coef_ols", "se_ols", "se_hac", "coef_fgls", "se_fgls", "p_ols", "p_hac", "p_fgls"]
    np.testing.assert_allclose(
        long.remedies.table[cols].to_numpy(float), short.remedies.table[cols].to_numpy(float), rtol=1e-9
    )
    assert long.remedies.hac_lag == short.remedies.hac_lag


def test_residual_line_thinned_by_chunks_equals_one_pass(monkeypatch):
    figures = importlib.import_module("lagsight.render.figures")
    rng = np.random.default_rng(8)
    e = np.round(rng.standard_normal(50_001), 1)  # many ties: the first extreme of each block counts
    one_pass = figures._thin_series(e, 400)
    monkeypatch.setattr(figures, "_THIN_CHUNK", 300)
    np.testing.assert_array_equal(figures._thin_series(e, 400), one_pass)
    # each block of neighbours keeps its first lowest and first highest value
    edges = np.linspace(0, e.size, 201).astype(int)
    for a, b in zip(edges[:-1], edges[1:]):
        assert a + int(np.argmin(e[a:b])) in one_pass and a + int(np.argmax(e[a:b])) in one_pass
