"""The Durbin-Watson engine against outside references.

Sources named beside each check: statsmodels (a general-purpose reference
library and its shipped datasets), Savin & White (1977), Durbin & Watson (1951),
an independent dense computation (tests/dense_reference.py) and Monte Carlo.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from statsmodels.stats.stattools import durbin_watson as sm_durbin_watson

import lagsight
from dense_reference import block_difference_matrix, dense_cdf, mam_eigenvalues
from lagsight.stats import quadform
from lagsight.stats.durbin_watson import DurbinWatsonDistribution


def _ols_resid(y, X):
    return sm.OLS(y, X).fit().resid


def _longley():
    data = sm.datasets.longley.load_pandas()
    X = sm.add_constant(data.exog)
    return np.asarray(data.endog, float), np.asarray(X, float)


# ---------------------------------------------------------------------------
# the statistic
# ---------------------------------------------------------------------------
def test_longley_statistic_matches_statsmodels_summary():
    # statsmodels' OLS example (Longley, TOTEMP on the six other columns and a
    # constant) prints "Durbin-Watson: 2.559" in its summary.
    y, X = _longley()
    res = lagsight.durbin_watson(_ols_resid(y, X), X)
    assert round(res.statistic, 3) == 2.559


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_statistic_equals_statsmodels(seed):
    # reference library: statsmodels.stats.stattools.durbin_watson
    rng = np.random.default_rng(seed)
    n = 80 + 40 * seed
    X = sm.add_constant(np.column_stack([np.arange(n), rng.normal(size=(n, 2))]))
    y = X @ [1.0, 0.02, -1.0, 0.5] + np.cumsum(rng.normal(size=n)) * 0.3
    e = _ols_resid(y, X)
    res = lagsight.durbin_watson(e, X)
    assert abs(res.statistic - sm_durbin_watson(e)) < 1e-12
    assert abs(res.numerator / res.denominator - res.statistic) < 1e-15


def test_macrodata_statistic():
    # statsmodels' test-suite reference for its macrodata regression: DW 2.213805
    d = sm.datasets.macrodata.load_pandas().data
    y = 400 * np.diff(np.log(d["realinv"].to_numpy()))
    g = 400 * np.diff(np.log(d["realgdp"].to_numpy()))
    X = sm.add_constant(np.column_stack([g, d["realint"].to_numpy()[:-1]]))
    res = lagsight.durbin_watson(_ols_resid(y, X), X)
    assert abs(res.statistic - 2.213805) < 5e-7


# ---------------------------------------------------------------------------
# bounds
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "n,k,lower,upper",
    [
        # Savin & White (1977, Econometrica 45), 5% table
        (15, 1, 1.077, 1.361),
        (20, 1, 1.201, 1.411),
        (50, 1, 1.503, 1.585),
        (100, 1, 1.654, 1.694),
        (100, 5, 1.571, 1.780),
        (150, 3, 1.693, 1.774),
    ],
)
def test_bounds_savin_white_5pct(n, k, lower, upper):
    b = lagsight.dw_bounds(n, k, alpha=0.05)
    # three decimals; allow 0.001 where the exact value sits on a rounding edge
    assert abs(b.lower - lower) <= 0.001 + 1e-9
    assert abs(b.upper - upper) <= 0.001 + 1e-9


def test_bounds_1pct():
    # Savin & White (1977) 1% table, n=150, k'=3: 1.584 / 1.665
    b = lagsight.dw_bounds(150, 3, alpha=0.01)
    assert abs(b.lower - 1.584) <= 0.001 and abs(b.upper - 1.665) <= 0.001
    # Durbin & Watson (1951) 1% table, n=15, k'=1: 0.81 / 1.07 (two decimals)
    b = lagsight.dw_bounds(15, 1, alpha=0.01)
    assert round(b.lower, 2) == 0.81 and round(b.upper, 2) == 1.07


def test_bounds_are_quantiles_of_the_bounding_forms():
    # the lower bound is the alpha point of sum nu_j z_j^2 / sum z_j^2 over
    # nu_1..nu_{n-k'-1}: check with the dense reference integral
    from dense_reference import imhof_prob_nonpositive

    n, k = 30, 2
    b = lagsight.dw_bounds(n, k, alpha=0.05)
    nu = 2 - 2 * np.cos(np.pi * np.arange(n) / n)
    assert abs(imhof_prob_nonpositive(nu[1 : n - k] - b.lower) - 0.05) < 1e-9
    assert abs(imhof_prob_nonpositive(nu[k + 1 :] - b.upper) - 0.05) < 1e-9


def test_bounds_without_constant_bracket_exact_values():
    # Farebrother (1980): without a constant the exact critical value of any
    # design with k columns lies between the two bounds
    rng = np.random.default_rng(5)
    n, k = 40, 2
    b = lagsight.dw_bounds(n, k, alpha=0.05, has_constant=False)
    for _ in range(3):
        X = rng.normal(size=(n, k)) + 1.0
        crit = lagsight.dw_distribution(X).ppf(0.05)
        assert b.lower - 1e-9 <= crit <= b.upper + 1e-9


def test_exact_critical_value_lies_between_bounds():
    # Durbin & Watson (1950): for any design with a constant, dL <= d* <= dU
    rng = np.random.default_rng(11)
    for n, k in [(25, 1), (40, 3), (60, 5)]:
        b = lagsight.dw_bounds(n, k, alpha=0.05)
        for _ in range(3):
            X = sm.add_constant(rng.normal(size=(n, k)) * rng.uniform(0.5, 3, size=k))
            crit = lagsight.dw_distribution(X).ppf(0.05)
            assert b.lower - 1e-9 <= crit <= b.upper + 1e-9


# ---------------------------------------------------------------------------
# exact distribution against the dense reference and Monte Carlo
# ---------------------------------------------------------------------------
def _random_design(rng, n, k, constant, trend):
    cols = []
    if constant:
        cols.append(np.ones(n))
    if trend:
        cols.append(np.arange(n) / n)
    while len(cols) < k:
        kind = rng.integers(3)
        if kind == 0:
            cols.append(rng.normal(size=n))
        elif kind == 1:
            cols.append(np.cumsum(rng.normal(size=n)))
        else:
            cols.append(np.sin(2 * np.pi * np.arange(n) * rng.uniform(0.01, 0.3)))
    return np.column_stack(cols[:k])


@pytest.mark.parametrize("case", range(14))
def test_exact_cdf_agrees_with_dense_reference(case):
    # independent dense computation (eigenvalues of MAM, then Imhof) to 1e-8
    rng = np.random.default_rng(100 + case)
    n = int(rng.integers(12, 301))
    k = int(rng.integers(1, 9))
    constant = case % 2 == 0
    trend = case % 3 == 0
    X = _random_design(rng, n, k, constant, trend)
    dist = lagsight.dw_distribution(X)
    lam = mam_eigenvalues(X)
    for q in (0.02, 0.3, 0.5, 0.8, 0.99):
        c = float(np.quantile(lam, q))
        ours = dist.cdf(c)
        ref = dense_cdf(X, c)
        assert abs(ours - ref) < 1e-8, (n, k, c, ours, ref)


@pytest.mark.parametrize("lag", [4, 12])
def test_order_s_statistic_agrees_with_dense_reference(lag):
    rng = np.random.default_rng(lag)
    n = 96
    X = sm.add_constant(np.column_stack([np.arange(n), rng.normal(size=n)]))
    dist = lagsight.dw_distribution(X, lag=lag)
    for c in (1.5, 1.9, 2.3):
        assert abs(dist.cdf(c) - dense_cdf(X, c, lag=lag)) < 1e-8


@pytest.mark.parametrize("sizes", [(30, 45, 25), (12, 60), (20, 20, 20, 20)])
def test_within_block_statistic_agrees_with_dense_reference(sizes):
    # the pooled within-group statistic of panels: differences never cross a block boundary
    rng = np.random.default_rng(len(sizes))
    n = sum(sizes)
    groups = np.repeat(np.arange(len(sizes)), sizes)
    X = np.column_stack([np.ones(n), rng.normal(size=n), (groups == 1).astype(float)])
    starts = np.cumsum((0, *sizes[:-1]))
    blocks = [np.arange(a, a + m) for a, m in zip(starts, sizes)]
    dist = DurbinWatsonDistribution(X, blocks=blocks)
    A = block_difference_matrix(sizes)
    for c in (1.6, 1.95, 2.2):
        assert abs(dist.cdf(c) - dense_cdf(X, c, A=A)) < 1e-8
    lam = mam_eigenvalues(X, A=A)
    assert dist.mean == pytest.approx(lam.mean(), abs=1e-12)


def test_moments_match_dense_eigenvalues():
    # Durbin & Watson (1950): E d = mean of the eigenvalues; Var d from their spread
    rng = np.random.default_rng(3)
    X = _random_design(rng, 70, 4, True, True)
    lam = mam_eigenvalues(X)
    m = lam.size
    dist = lagsight.dw_distribution(X)
    assert abs(dist.mean - lam.mean()) < 1e-12
    var = 2 * (m * (lam**2).sum() - lam.sum() ** 2) / (m * m * (m + 2))
    assert abs(dist.var - var) < 1e-12


@pytest.mark.parametrize("seed,n,k", [(1, 20, 2), (2, 50, 4), (3, 120, 3)])
def test_exact_cdf_agrees_with_monte_carlo(seed, n, k):
    # 100,000 simulated N(0, I) samples, fixed seed; within 4 standard errors
    rng = np.random.default_rng(seed)
    X = sm.add_constant(rng.normal(size=(n, k - 1)))
    Q, _ = np.linalg.qr(X)
    draws = 100_000
    d = np.empty(draws)
    for s in range(0, draws, 20_000):
        Z = rng.normal(size=(20_000, n))
        E = Z - (Z @ Q) @ Q.T
        d[s : s + 20_000] = (np.diff(E, axis=1) ** 2).sum(1) / (E**2).sum(1)
    dist = lagsight.dw_distribution(X)
    for c in np.quantile(d, [0.05, 0.5, 0.9]):
        p_mc = np.mean(d <= c)
        se = math.sqrt(p_mc * (1 - p_mc) / draws)
        assert abs(dist.cdf(c) - p_mc) < 4 * se


@pytest.mark.parametrize("n", [400, 1200, 6000])
def test_chebyshev_path_agrees_with_direct_path(monkeypatch, n):
    # the large-n path (moment expansion) against the O(n)-per-point path
    rng = np.random.default_rng(8)
    X = sm.add_constant(np.column_stack([np.arange(n) / n, rng.normal(size=(n, 3))]))
    fast = lagsight.dw_distribution(X)
    assert fast.form.nu.size >= quadform._CHEB_MIN_N
    cs = [1.9, 1.95, 2.0, 2.03, 2.08]
    p_fast = [fast.cdf(c) for c in cs]
    monkeypatch.setattr(quadform, "_CHEB_MIN_N", 10**9)
    slow = lagsight.dw_distribution(X)
    p_slow = [slow.cdf(c) for c in cs]
    np.testing.assert_allclose(p_fast, p_slow, atol=1e-10, rtol=0)


def test_density_is_derivative_of_cdf_and_integrates_to_one():
    rng = np.random.default_rng(4)
    X = _random_design(rng, 40, 3, True, False)
    dist = lagsight.dw_distribution(X)
    h = 1e-4
    for c in (1.4, 2.0, 2.6):
        fd = (dist.cdf(c + h) - dist.cdf(c - h)) / (2 * h)
        assert abs(dist.pdf(c) - fd) < 1e-6
    grid, _, pdf = dist.grid(401)
    assert abs(np.trapezoid(pdf, grid) - 1.0) < 1e-4


# ---------------------------------------------------------------------------
# the test itself
# ---------------------------------------------------------------------------
def test_pvalue_alternatives_are_consistent():
    y, X = _longley()
    e = _ols_resid(y, X)
    pos = lagsight.durbin_watson(e, X, alternative="positive")
    neg = lagsight.durbin_watson(e, X, alternative="negative")
    two = lagsight.durbin_watson(e, X, alternative="two-sided")
    assert abs(pos.pvalue + neg.pvalue - 1) < 1e-10
    assert abs(two.pvalue - 2 * min(pos.pvalue, neg.pvalue)) < 1e-12
    assert pos.method.startswith("exact")
    assert "Durbin-Watson" in str(pos)


def test_residuals_only_give_bounds_and_say_so():
    y, X = _longley()
    e = _ols_resid(y, X)
    res = lagsight.durbin_watson(e, k_prime=6)
    assert math.isnan(res.pvalue)
    assert res.method == "bounds only"
    assert res.bounds is not None and res.bounds.k_prime == 6
    assert any("exact p-value" in n for n in res.notes)


def test_rank_deficient_design_is_reduced_with_a_note():
    rng = np.random.default_rng(2)
    n = 50
    x = rng.normal(size=n)
    X = np.column_stack([np.ones(n), x, 2 * x])
    y = 1 + x + rng.normal(size=n)
    e = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    res = lagsight.durbin_watson(e, X)
    assert res.rank == 2
    assert any("rank 2" in n for n in res.notes)
    ref = lagsight.durbin_watson(e, X[:, :2])
    assert abs(res.pvalue - ref.pvalue) < 1e-10


@pytest.mark.parametrize(
    "call,match",
    [
        (lambda e, X: lagsight.durbin_watson(np.r_[e[:-1], np.nan], X), "'resid' must be finite"),
        (lambda e, X: lagsight.durbin_watson(np.r_[e[:-1], np.inf], X), "'resid' must be finite"),
        (lambda e, X: lagsight.durbin_watson(e, X[:-1]), r"'exog' must have \d+ rows to match the residuals"),
        (lambda e, X: lagsight.durbin_watson(np.zeros_like(e), X), "zero variance"),
        (lambda e, X: lagsight.durbin_watson(e, X, lag=0), "'lag' must be an integer ≥ 1"),
        (lambda e, X: lagsight.durbin_watson(e, X, alternative="up"), "'alternative' must be one of"),
        (lambda e, X: lagsight.durbin_watson(e, X, alpha=1.5), r"'alpha' must be in \(0, 1\) \(got 1.5\)"),
        (lambda e, X: lagsight.durbin_watson(e[:3], X[:3, :3]), "need more residuals"),
        (lambda e, X: lagsight.dw_bounds(50, 0), "'k_prime' must be an integer ≥ 1"),
        (lambda e, X: lagsight.dw_bounds(3, 1), "'n' must exceed"),
        (lambda e, X: lagsight.dw_bounds(50, 2, alpha=0), r"'alpha' must be in \(0, 1\)"),
    ],
)
def test_bad_input_names_the_argument(call, match):
    y, X = _longley()
    e = np.asarray(_ols_resid(y, X))
    with pytest.raises(ValueError, match=match):
        call(e, X)


# ---------------------------------------------------------------------------
# properties
# ---------------------------------------------------------------------------
@settings(max_examples=25, deadline=None)
@given(
    seed=st.integers(0, 10_000),
    n=st.integers(8, 120),
    k=st.integers(1, 5),
    alt=st.sampled_from(["positive", "negative", "two-sided"]),
)
def test_properties(seed, n, k, alt):
    rng = np.random.default_rng(seed)
    X = sm.add_constant(rng.normal(size=(n, k)))
    y = rng.normal(size=n) + np.cumsum(rng.normal(size=n)) * rng.uniform(0, 1)
    e = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    res = lagsight.durbin_watson(e, X, alternative=alt)
    assert 0.0 <= res.statistic <= 4.0
    assert 0.0 <= res.pvalue <= 1.0
    assert abs(res.lower_tail + res.upper_tail - 1.0) < 1e-9
    dist = lagsight.dw_distribution(X)
    grid = np.sort(rng.uniform(0, 4, size=6))
    cdf = dist.cdf(grid)
    assert np.all(np.diff(cdf) >= -1e-10)
