"""Monte Carlo power of the exact Durbin-Watson test.

Sources named beside each check: the exact-size property of the exact test
(Durbin & Watson 1950, 1951), an independent dense computation of the exact
power under AR(1) errors (numpy eigenvalues + Imhof's formula, written here),
the independent dense null reference in tests/dense_reference.py, statsmodels
(a general-purpose reference library) and the closed-form AR(1) variance.
"""

from __future__ import annotations

import dataclasses
import math
import tracemalloc

import numpy as np
import pytest
import statsmodels.api as sm
from statsmodels.stats.stattools import durbin_watson as sm_durbin_watson

from dense_reference import dense_cdf, difference_matrix
from lagsight.stats import imhof_cdf
from lagsight.stats import power as power_mod
from lagsight.stats.power import PowerCurve, dw_power


def _design(n: int, seed: int = 0, extra: int = 1) -> np.ndarray:
    """Invented design: a constant, a trend and ``extra - 1`` noise regressors."""
    rng = np.random.default_rng(seed)
    cols = [np.ones(n), np.linspace(-1.0, 1.0, n)]
    cols += [rng.normal(size=n) for _ in range(extra - 1)]
    return np.column_stack(cols)


def _exact_power(X: np.ndarray, rho: float, crit: float, alternative: str) -> float:
    """P(reject) under stationary AR(1) errors, by a dense n x n computation (test only).

    P(d <= c) = P(z' L' M (A - cI) M L z <= 0) with Sigma_rho = L L'; the
    weights are the eigenvalues from numpy, the probability from Imhof's formula.
    """
    n = X.shape[0]
    idx = np.arange(n)
    sigma = rho ** np.abs(idx[:, None] - idx[None, :]) / (1.0 - rho * rho)
    L = np.linalg.cholesky(sigma)
    M = np.eye(n) - X @ np.linalg.pinv(X)
    B = L.T @ M @ (difference_matrix(n) - crit * np.eye(n)) @ M @ L
    w = np.linalg.eigvalsh(0.5 * (B + B.T))
    w = w[np.abs(w) > 1e-9 * np.abs(w).max()]  # the k exact zeros from the column space of X
    lower = imhof_cdf(w, 0.0)
    return lower if alternative == "positive" else 1.0 - lower


# ---------------------------------------------------------------------------
# against outside references
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("alternative", ["positive", "negative", "two-sided"])
def test_size_at_rho_zero_is_alpha(alternative):
    # exact-size property: with the exact critical value (Durbin & Watson 1950, 1951
    # null distribution) the rejection rate at rho = 0 is alpha; binomial Monte Carlo error
    X = _design(60, extra=3)
    pc = dw_power(X, alpha=0.05, rhos=[0.0], alternative=alternative, n_sim=20000, seed=7)
    se = math.sqrt(0.05 * 0.95 / 20000)
    assert abs(pc.power[0] - 0.05) < 4 * se


def test_size_at_rho_zero_order_four():
    # exact-size property for the order-4 statistic (Wallis 1972 uses it for quarterly data)
    X = _design(48, extra=2)
    pc = dw_power(X, alpha=0.10, rhos=[0.0], n_sim=20000, seed=3, lag=4)
    assert abs(pc.power[0] - 0.10) < 4 * math.sqrt(0.1 * 0.9 / 20000)


def test_critical_values_against_dense_reference():
    # independent dense Imhof reference (tests/dense_reference.py): P(d <= c) at the
    # reported critical values equals alpha, alpha/2 and 1 - alpha/2
    X = _design(30, extra=2)
    pos = dw_power(X, alpha=0.05, rhos=[0.0], n_sim=100)
    neg = dw_power(X, alpha=0.05, rhos=[0.0], n_sim=100, alternative="negative")
    two = dw_power(X, alpha=0.05, rhos=[0.0], n_sim=100, alternative="two-sided")
    assert abs(dense_cdf(X, pos.critical_value) - 0.05) < 1e-7
    assert abs(dense_cdf(X, neg.critical_value) - 0.95) < 1e-7
    assert abs(dense_cdf(X, two.critical_value[0]) - 0.025) < 1e-7
    assert abs(dense_cdf(X, two.critical_value[1]) - 0.975) < 1e-7


def test_power_matches_exact_dense_computation():
    # independent exact power under stationary AR(1) errors (dense Sigma_rho,
    # numpy eigenvalues, Imhof's formula) for n = 20, a constant and one regressor
    n = 20
    x = np.random.default_rng(11).gamma(2.0, 1.0, size=n)
    X = np.column_stack([np.ones(n), x])
    pc = dw_power(X, rhos=[0.5, 0.8], n_sim=20000, seed=2024)
    for rho, p, se in zip(pc.rhos, pc.power, pc.se):
        exact = _exact_power(X, rho, pc.critical_value, "positive")
        assert 0.1 < exact < 0.9  # the comparison is informative
        assert abs(p - exact) < 4 * se, (rho, p, exact)
    neg = dw_power(X, rhos=[-0.5], alternative="negative", n_sim=20000, seed=99)
    exact = _exact_power(X, -0.5, neg.critical_value, "negative")
    assert abs(neg.power[0] - exact) < 4 * neg.se[0]


def test_simulated_statistic_equals_statsmodels():
    # reference library: statsmodels OLS residuals and statsmodels' durbin_watson
    n = 50
    X = _design(n, seed=4, extra=2)
    eps = np.random.default_rng(5).standard_normal((6, n))
    u = power_mod._ar1(eps, 0.6)
    basis_t = np.linalg.qr(X)[0].T
    d = power_mod._dw_of_projected(u, basis_t, 1)
    for i in range(u.shape[0]):
        e = sm.OLS(u[i], X).fit().resid
        assert abs(d[i] - sm_durbin_watson(e)) < 1e-12


def test_ar1_paths_follow_the_recursion_and_are_stationary():
    # closed form: a stationary AR(1) with unit innovations has variance 1 / (1 - rho^2)
    # at every t; the recursion itself is checked against a plain loop
    rho = 0.7
    eps = np.random.default_rng(8).standard_normal((40000, 30))
    u = power_mod._ar1(eps, rho)
    loop = np.empty(30)
    loop[0] = eps[0, 0] / math.sqrt(1 - rho * rho)
    for t in range(1, 30):
        loop[t] = rho * loop[t - 1] + eps[0, t]
    assert np.allclose(u[0], loop, rtol=0, atol=1e-12)
    target = 1.0 / (1.0 - rho * rho)
    se = target * math.sqrt(2.0 / 40000)
    for t in (0, 1, 29):
        assert abs(u[:, t].var() - target) < 4 * se


def test_power_rises_with_rho():
    # from memory: with a constant in the regression the power of the test against
    # AR(1) errors rises with rho (Kraemer 1985 shows the fall to zero as rho -> 1
    # only for regressions without a constant); monotone up to Monte Carlo noise
    X = _design(40, extra=2)
    pc = dw_power(X, rhos=np.linspace(0.0, 0.95, 20), n_sim=4000, seed=1)
    steps = np.diff(pc.power)
    assert np.all(steps >= -2 * np.hypot(pc.se[:-1], pc.se[1:]))
    assert pc.power[-1] > 0.9 > 0.1 > pc.power[0]


def test_power_near_one_for_strong_autocorrelation():
    # behaviour: rho = 0.9 with 200 observations is detected almost always
    X = _design(200, extra=2)
    pc = dw_power(X, rhos=[0.9], n_sim=2000)
    assert pc.power[0] > 0.99


# ---------------------------------------------------------------------------
# behaviour
# ---------------------------------------------------------------------------
def test_result_fields_and_text():
    X = _design(40)
    pc = dw_power(X, rhos=[0.0, 0.3, 0.6], n_sim=500, seed=9)
    assert isinstance(pc, PowerCurve)
    assert (pc.n, pc.rank, pc.n_sim, pc.seed, pc.alpha) == (40, 2, 500, 9, 0.05)
    assert np.allclose(pc.se, np.sqrt(pc.power * (1 - pc.power) / 500))
    assert pc.method.startswith("Monte Carlo with 500 draws of AR(1) errors per rho, seed 9")
    text = str(pc)
    assert f"{pc.critical_value:.4f}" in text and "0.300" in text
    with pytest.raises(dataclasses.FrozenInstanceError):
        pc.alpha = 0.1
    with pytest.raises(ValueError):
        pc.power[0] = 1.0  # arrays are read-only


def test_reproducible_and_independent_of_chunk_size(monkeypatch):
    X = _design(120, extra=2)
    a = dw_power(X, n_sim=700, seed=5)
    b = dw_power(X, n_sim=700, seed=5)
    monkeypatch.setattr(power_mod, "_CHUNK_ELEMENTS", 120 * 37)  # 37 series per chunk
    c = dw_power(X, n_sim=700, seed=5)
    assert np.array_equal(a.power, b.power) and np.array_equal(a.power, c.power)
    assert not np.array_equal(a.power, dw_power(X, n_sim=700, seed=6).power)


def test_common_random_numbers_across_rho():
    # the same innovations serve every rho: a rho's power does not depend on the grid
    X = _design(50)
    a = dw_power(X, rhos=[0.2, 0.4], n_sim=800)
    b = dw_power(X, rhos=[0.4, 0.0, 0.2, 0.2], n_sim=800)
    assert list(b.rhos) == [0.0, 0.2, 0.2, 0.4]
    assert b.power[1] == b.power[2] == a.power[0] and b.power[3] == a.power[1]
    assert any("sorted" in note for note in b.notes)


def test_min_detectable_rho_is_the_interpolated_crossing():
    X = _design(60)
    pc = dw_power(X, rhos=np.linspace(0.0, 0.9, 10), n_sim=2000)
    r = pc.min_detectable_rho
    assert abs(np.interp(r, pc.rhos, pc.power) - 0.8) < 1e-12
    assert np.all(pc.power[pc.rhos < r] < 0.8)
    neg = dw_power(X, rhos=np.linspace(-0.9, 0.0, 10), alternative="negative", n_sim=2000)
    rn = neg.min_detectable_rho
    assert rn < 0 and abs(np.interp(rn, neg.rhos, neg.power) - 0.8) < 1e-12
    assert np.all(neg.power[neg.rhos > rn] < 0.8)
    two = dw_power(X, rhos=np.linspace(-0.9, 0.9, 7), alternative="two-sided", n_sim=2000)
    assert abs(np.interp(two.min_detectable_rho, two.rhos, two.power) - 0.8) < 1e-12
    assert abs(two.min_detectable_rho) < 0.6


def test_min_detectable_rho_nan_with_note():
    X = _design(15)
    pc = dw_power(X, rhos=[0.0, 0.05, 0.1], n_sim=500)
    assert math.isnan(pc.min_detectable_rho)
    assert any("stays below 0.8" in note for note in pc.notes)
    assert "not reached" in str(pc)


def test_large_n_runs_in_bounded_memory():
    # behaviour: n = 10^4 with default settings, memory linear in n (well under 200 MB)
    n = 10_000
    X = _design(n, extra=3)
    tracemalloc.start()
    try:
        pc = dw_power(X, rhos=[0.0, 0.05], n_sim=2000)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 200e6
    assert abs(pc.power[0] - 0.05) < 4 * math.sqrt(0.05 * 0.95 / 2000)  # exact size
    assert pc.power[1] > 0.99


@pytest.mark.parametrize(
    "kwargs,match",
    [
        ({"alpha": 0.0}, r"'alpha' must be in \(0, 1\) \(got 0.0\)"),
        ({"alpha": 1.5}, r"'alpha' must be in \(0, 1\) \(got 1.5\)"),
        ({"rhos": [0.0, 1.0]}, r"'rhos' must lie in \(-1, 1\).*\(got 1\)"),
        ({"rhos": [-1.2]}, r"'rhos' must lie in \(-1, 1\).*\(got -1.2\)"),
        ({"rhos": [0.1, np.nan]}, r"'rhos' must be finite \(got nan\)"),
        ({"rhos": []}, r"'rhos' must be a non-empty 1-D array"),
        ({"rhos": [[0.1, 0.2]]}, r"'rhos' must be a non-empty 1-D array \(got shape \(1, 2\)\)"),
        ({"n_sim": 99}, r"'n_sim' must be an integer ≥ 100 \(got 99\)"),
        ({"seed": -1}, r"'seed' must be an integer ≥ 0 \(got -1\)"),
        ({"alternative": "up"}, r"'alternative' must be one of"),
        ({"lag": 0}, r"'lag' must be an integer ≥ 1 \(got 0\)"),
    ],
)
def test_bad_inputs(kwargs, match):
    with pytest.raises(ValueError, match=match):
        dw_power(_design(30), **kwargs)


@pytest.mark.parametrize(
    "kwargs,match",
    [
        ({"n_sim": 500.0}, r"'n_sim' must be an integer ≥ 100 \(got 500.0\)"),
        ({"n_sim": True}, r"'n_sim' must be an integer ≥ 100 \(got True\)"),
    ],
)
def test_wrong_types_are_type_errors(kwargs, match):
    with pytest.raises(TypeError, match=match):
        dw_power(_design(30), **kwargs)


def test_bad_designs():
    with pytest.raises(TypeError, match="'exog'"):
        dw_power(None)
    with pytest.raises(ValueError, match="need more residuals"):
        dw_power(_design(3))
    with pytest.raises(TypeError, match="'rhos'"):
        dw_power(_design(30), rhos=["a"])


@pytest.mark.parametrize("scale", [1e200, 1e-200])
def test_power_depends_on_the_column_space_not_the_units(scale):
    # the DW test (and its power) depend on the design only through its column space: a constant of 1
    # beside a regressor in other units is the same design (before: the constant was dropped as
    # 'rank 1 < 2' and the power was that of another design)
    rng = np.random.default_rng(3)
    n = 60
    X = np.column_stack([np.ones(n), rng.normal(size=n)])
    base = dw_power(X, n_sim=400)
    mixed = dw_power(X * np.array([1.0, scale]), n_sim=400)
    assert mixed.rank == 2 and not mixed.notes
    np.testing.assert_array_equal(mixed.power, base.power)
