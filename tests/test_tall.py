"""Blocked least squares (lagsight.stats.tall) against numpy's lstsq/QR and statsmodels' OLS.

The blocks are made small here (a few hundred rows) so that every test runs the blocked
accumulation over many blocks, the way a series of 10^7 rows is read.
"""

import numpy as np
import pytest
import statsmodels.api as sm

from lagsight.stats import tall


@pytest.fixture(autouse=True)
def small_blocks(monkeypatch):
    monkeypatch.setattr(tall, "ROWS", 257)


def _designs():
    """Invented designs: well conditioned, a polynomial trend (ill conditioned enough for the
    Householder fallback), a duplicated column (rank deficient) and columns of 1e200 / 1e-200."""
    rng = np.random.default_rng(7)
    n = 3000
    t = np.linspace(0.0, 1.0, n)
    plain = np.column_stack([np.ones(n), rng.standard_normal((n, 4))])
    poly = np.column_stack([t**j for j in range(8)])
    dup = np.column_stack([plain, plain[:, 2]])
    wide = np.column_stack([np.ones(n), 1e200 * rng.standard_normal(n), 1e-200 * rng.standard_normal(n)])
    y = plain @ np.arange(1.0, 6.0) + rng.standard_normal(n)
    return {
        "plain": (plain, y),
        "poly": (poly, np.sin(5 * t) + 0.01 * rng.standard_normal(n)),
        "rank-deficient": (dup, y),
        "extreme": (wide, 1e100 * y),
    }


@pytest.mark.filterwarnings("ignore:The design matrix is rank-deficient")  # statsmodels, on purpose
@pytest.mark.parametrize("name", ["plain", "poly", "rank-deficient"])
def test_solution_equals_statsmodels_ols(name):
    X, y = _designs()[name]
    n, k = X.shape
    sol = tall.solve_r(tall.r_factor(n, k + 1, tall.stacked(X, y)), n)
    ref = sm.OLS(y, X).fit()  # reference library: pseudo-inverse (rcond 1e-15), rank, df_resid
    assert sol.rank == ref.model.rank and sol.df_resid == ref.df_resid
    scale = np.max(np.abs(ref.params))
    # poly: condition number about 1e7, so agreement to that many digits fewer
    tol = 1e-6 if name == "poly" else 1e-11
    np.testing.assert_allclose(sol.params, ref.params, rtol=0, atol=tol * scale)
    np.testing.assert_allclose(sol.rss, ref.ssr, rtol=1e-9)
    if name == "plain":
        np.testing.assert_allclose(sol.bse, ref.bse, rtol=1e-11)
        np.testing.assert_allclose(sol.cov, ref.normalized_cov_params, rtol=1e-10, atol=1e-18)


def test_r_factor_equals_numpy_qr_up_to_signs():
    for name, (X, _) in _designs().items():
        if name == "extreme":
            continue
        n, k = X.shape
        R = tall.r_factor(n, k, lambda a, b, X=X: X[a:b])
        ref = np.linalg.qr(X, mode="r")  # reference: LAPACK Householder QR of the whole matrix
        ref = ref * np.where(np.diag(ref) < 0, -1.0, 1.0)[:, None]
        # R'R = X'X: the same factor when X has full rank, to rounding relative to ||X||
        np.testing.assert_allclose(R.T @ R, X.T @ X, rtol=0, atol=1e-12 * np.linalg.norm(X) ** 2)
        if name == "plain":
            np.testing.assert_allclose(R, ref, rtol=0, atol=1e-12 * np.abs(ref).max())


def test_extreme_magnitudes_are_scaled_not_overflowed():
    X, y = _designs()["extreme"]
    n, k = X.shape
    R = tall.r_factor(n, k + 1, tall.stacked(X, y))  # X'X would overflow (1e400) and underflow
    assert np.all(np.isfinite(R))
    # R / top is the R factor of the matrix with every column brought to unit size, so the fit on
    # unit scale follows; reference: numpy's lstsq on that matrix scaled by hand
    top = np.max(np.abs(np.column_stack([X, y])), axis=0)
    sol = tall.solve_r(R / top[None, :], n)
    ref = np.linalg.lstsq(X / top[:k], y / top[k], rcond=None)[0]
    np.testing.assert_allclose(sol.params, ref, rtol=1e-10)


def test_householder_fallback_and_cholesky_path_agree():
    X, y = _designs()["plain"]
    n, k = X.shape
    block = tall.stacked(X, y)
    np.testing.assert_allclose(
        tall.r_factor(n, k + 1, block), tall._tsqr(n, k + 1, block), rtol=1e-12, atol=1e-12 * np.linalg.norm(y)
    )


def test_one_pass_with_a_preconditioner_equals_two_passes():
    X, y = _designs()["plain"]
    n, k = X.shape
    exact = tall.r_factor(n, k + 1, tall.stacked(X, y))
    rough = exact * (1.0 + 1e-3 * np.triu(np.ones((k + 1, k + 1))))  # a nearby R factor
    np.testing.assert_allclose(
        tall.r_factor(n, k + 1, tall.stacked(X, y), precondition=rough),
        exact,
        rtol=1e-12,
        atol=1e-12 * np.abs(exact).max(),
    )


def test_lag_products_give_the_sums_of_lagged_residual_products():
    X, y = _designs()["plain"]
    n, k = X.shape
    R, lp = tall.r_factor(n, k + 1, tall.stacked(X, y), lag_products=True)
    b = np.linalg.lstsq(X, y, rcond=None)[0] * 0.9  # any coefficients
    u = y - X @ b
    w = R @ np.append(-b, 1.0)
    # reference: the sums over the explicit residual vector
    assert w @ lp.gram @ w == pytest.approx(u @ u, rel=1e-12)
    assert w @ lp.lag1 @ w == pytest.approx(u[1:] @ u[:-1], rel=1e-11)
    assert lp.first @ w == pytest.approx(u[0], rel=1e-10)
    assert lp.last @ w == pytest.approx(u[-1], rel=1e-10)


@pytest.mark.parametrize("name", ["plain", "poly", "rank-deficient"])
def test_orthonormal_basis_spans_the_columns(name):
    X, _ = _designs()[name]
    n = X.shape[0]
    order = np.random.default_rng(3).permutation(n)
    Qt, rank, T = tall.orthonormal_basis_t(X, order)
    assert rank == np.linalg.matrix_rank(X)  # reference: numpy's SVD rank
    np.testing.assert_allclose(T @ X[order].T, Qt, atol=1e-8)  # Q' = T X'

    Q = np.empty((n, rank))
    Q[order] = Qt.T  # column j of Qt belongs to row order[j]
    np.testing.assert_allclose(Q.T @ Q, np.eye(rank), atol=1e-13)
    # the same projection as numpy's Householder Q of the (rank-reduced) design
    U = np.linalg.svd(X, full_matrices=False)[0][:, :rank]
    np.testing.assert_allclose(Q @ (Q.T @ X), U @ (U.T @ X), atol=1e-9 * np.abs(X).max())


def test_threads_give_the_serial_numbers(monkeypatch):
    X, y = _designs()["plain"]
    n, k = X.shape
    monkeypatch.setattr(tall, "POOL_MIN_ROWS", 10**12)
    serial = tall.r_factor(n, k + 1, tall.stacked(X, y), lag_products=True)
    monkeypatch.setattr(tall, "POOL_MIN_ROWS", 0)
    threaded = tall.r_factor(n, k + 1, tall.stacked(X, y), lag_products=True)
    np.testing.assert_array_equal(serial[0], threaded[0])
    np.testing.assert_array_equal(serial[1].lag1, threaded[1].lag1)
    np.testing.assert_array_equal(tall.column_tops(X), np.max(np.abs(X), axis=0))
