"""Tests for lagsight.stats.correlogram against statsmodels and hand computation."""

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.datasets import macrodata
from statsmodels.tsa.stattools import acf as sm_acf
from statsmodels.tsa.stattools import pacf as sm_pacf

from lagsight.stats.correlogram import FFT_MIN_N, PACF_METHOD, correlogram, lag_pairs


@pytest.fixture(scope="module")
def macro_resid():
    """OLS residuals of the statsmodels test-suite investment regression on macrodata (n = 202)."""
    d = macrodata.load_pandas().data
    y = 400 * np.diff(np.log(d["realinv"].to_numpy()))
    X = sm.add_constant(np.c_[400 * np.diff(np.log(d["realgdp"].to_numpy())), d["realint"].to_numpy()[:-1]])
    return np.asarray(sm.OLS(y, X).fit().resid)


def test_acf_pacf_equal_statsmodels(macro_resid):
    cg = correlogram(macro_resid, max_lag=12)
    # reference library: statsmodels.tsa.stattools.acf / pacf
    np.testing.assert_allclose(cg.acf, sm_acf(macro_resid, nlags=12, fft=False)[1:], rtol=0, atol=1e-12)
    np.testing.assert_allclose(cg.pacf, sm_pacf(macro_resid, nlags=12, method="ywadjusted")[1:], rtol=0, atol=1e-12)
    assert cg.pacf_method == PACF_METHOD == "ywadjusted"
    assert list(cg.lags) == list(range(1, 13)) and cg.n == 202


def test_fft_path_for_long_series_equals_direct_acf():
    rng = np.random.default_rng(2)
    n = 50 * FFT_MIN_N
    e = np.convolve(rng.standard_normal(n + 3), [1.0, 0.6, 0.3, 0.1], mode="valid")
    cg = correlogram(e, max_lag=8)
    # reference library: statsmodels acf computed directly (no FFT)
    np.testing.assert_allclose(cg.acf, sm_acf(e, nlags=8, fft=False)[1:], rtol=0, atol=1e-12)
    np.testing.assert_allclose(cg.pacf, sm_pacf(e, nlags=8, method="ywadjusted")[1:], rtol=0, atol=1e-12)


def test_bands_by_hand_on_small_example():
    e = np.array([1.0, 2.0, -1.0, 0.5, -2.0, 1.5, -0.5, 0.0, 1.0, -2.5])
    n = e.size
    # hand computation: r_h = sum_t (e_t - m)(e_{t-h} - m) / sum_t (e_t - m)^2
    m = sum(e) / n
    den = sum((x - m) ** 2 for x in e)
    r = [sum((e[t] - m) * (e[t - h] - m) for t in range(h, n)) / den for h in range(1, 5)]
    z = stats.norm.ppf(0.95)  # alpha = 0.10
    # Bartlett's formula: se(r_h) = sqrt((1 + 2 sum_{j<h} r_j^2) / n)
    band = [z * np.sqrt((1 + 2 * sum(rj**2 for rj in r[: h - 1])) / n) for h in range(1, 5)]
    cg = correlogram(e, max_lag=4, alpha=0.10)
    np.testing.assert_allclose(cg.acf, r, rtol=1e-12)
    np.testing.assert_allclose(cg.bartlett_band, band, rtol=1e-12)
    assert cg.white_band == pytest.approx(z / np.sqrt(n), rel=1e-14)
    assert cg.bartlett_band[0] == pytest.approx(cg.white_band, rel=1e-14)


def test_bartlett_band_equals_statsmodels_confint(macro_resid):
    cg = correlogram(macro_resid, max_lag=10, alpha=0.05)
    # reference library: statsmodels acf confint uses Bartlett's formula
    ref = sm_acf(macro_resid, nlags=10, fft=False, alpha=0.05, result_object=True)
    half = (ref.confint[1:, 1] - ref.confint[1:, 0]) / 2
    np.testing.assert_allclose(cg.bartlett_band, half, rtol=1e-10)


def test_outside_band_and_str(macro_resid):
    e = np.sin(np.arange(100) / 3.0)  # invented: strongly autocorrelated
    cg = correlogram(e, max_lag=5)
    assert 1 in cg.outside_white_band()
    assert "lag" in str(cg) and "*" in str(cg)


def test_lag_pairs():
    e = np.array([0.5, -1.0, 2.0, 0.3, -0.7, 1.1, -0.2, 0.9])
    lp = lag_pairs(e, lag=2)
    np.testing.assert_array_equal(lp.lagged, e[:-2])
    np.testing.assert_array_equal(lp.current, e[2:])
    # reference library: scipy.stats.pearsonr on the same pairs
    assert lp.correlation == pytest.approx(stats.pearsonr(e[:-2], e[2:])[0], rel=1e-12)
    with pytest.raises(ValueError, match="'lag' must be ≤ n - 2 = 6"):
        lag_pairs(e, lag=7)
    with pytest.raises(ValueError, match="'lag' must be an integer ≥ 1"):
        lag_pairs(e, lag=0)


@pytest.mark.parametrize(
    "kwargs,match",
    [
        ({"max_lag": 0}, "'max_lag' must be an integer ≥ 1 \\(got 0\\)"),
        ({"max_lag": 6}, "'max_lag' must be ≤ n // 2 = 5"),
        ({"max_lag": 2, "alpha": 1.5}, "'alpha' must be in \\(0, 1\\) \\(got 1.5\\)"),
    ],
)
def test_correlogram_rejects_bad_arguments(kwargs, match):
    e = np.random.default_rng(0).standard_normal(10)
    with pytest.raises(ValueError, match=match):
        correlogram(e, **kwargs)


def test_correlogram_rejects_nonfinite_and_constant():
    with pytest.raises(ValueError, match="'resid' must be finite"):
        correlogram(np.array([1.0, np.inf, 2.0, 3.0, 1.0, 0.0]), max_lag=1)
    with pytest.raises(ValueError, match="'resid' must not be constant"):
        correlogram(np.zeros(10), max_lag=2)
    with pytest.raises(ValueError, match="'resid' must be 1-D"):
        correlogram(np.zeros((5, 3)), max_lag=2)
