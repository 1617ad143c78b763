"""Far-tail Durbin-Watson probabilities with relative accuracy.

References, named beside each check: an independent dense computation
(tests/dense_reference.py: the eigenvalues of P'AP for the n x n difference
matrix A with LAPACK, then the inversion integral along the saddle-point line
with QUADPACK, sharing no code with lagsight), and the closed form for two
residual eigenvalues (a ratio of two squared normals is a Cauchy ratio).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy import fft, optimize

import lagsight
from dense_reference import block_difference_matrix, log_dense_tail, mam_eigenvalues, two_eigenvalue_cdf
from lagsight.stats.durbin_watson import DurbinWatsonDistribution
from lagsight.stats.quadform import SpectralForm
from lagsight.stats.tails import tail_probability

EPS = np.finfo(float).eps


def _poly(n, degree):
    t = np.arange(1.0, n + 1)
    return np.column_stack([t**j for j in range(degree + 1)])


def _quarterly_dummies(n):
    q = np.arange(n) % 4
    X = np.column_stack([np.ones(n)] + [(q == j).astype(float) for j in (1, 2, 3)] + [np.arange(n) / n])
    return X


def _no_intercept(n, k, seed):
    return np.random.default_rng(seed).normal(size=(n, k))


def _with_constant(n, k, seed):
    rng = np.random.default_rng(seed)
    return np.column_stack([np.ones(n), rng.normal(size=(n, k - 1))])


# (design, lag, blocks): n from k + 2 up to 50, awkward on purpose
DESIGNS = {
    "quadratic trend, n=25": (_poly(25, 2), 1, None),
    "cubic trend, n=12": (_poly(12, 3), 1, None),
    "quarterly dummies and trend, lag 4, n=40": (_quarterly_dummies(40), 4, None),
    "no intercept, n=5, k=2": (_no_intercept(5, 2, 1), 1, None),
    "no intercept, n=30, k=3": (_no_intercept(30, 3, 2), 1, None),
    "constant and 3 regressors, n=50": (_with_constant(50, 4, 3), 1, None),
    "two blocks of 12 and 9": (_with_constant(21, 2, 5), 1, [np.arange(12), np.arange(12, 21)]),
}


def _reference(X, c, tail, lag, blocks):
    A = None
    if blocks is not None:
        A = block_difference_matrix([len(b) for b in blocks])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return log_dense_tail(X, c, tail, lag=lag, A=A, with_saddle=True)


def _edges(X, lag, blocks):
    A = block_difference_matrix([len(b) for b in blocks]) if blocks is not None else None
    lam = mam_eigenvalues(X, lag, A)
    return lam.min(), lam.max(), lam.mean(), lam.size


def _solve_target(dist, target, tail, lo, hi):
    """The c where the engine's tail equals ``target`` (found with the engine; the check
    that follows compares engine and reference at that same c)."""

    def f(c):
        return dist.tail(c, tail).log_value - math.log(target)

    try:
        return optimize.brentq(f, lo, hi, xtol=1e-15, rtol=4 * EPS, maxiter=200)
    except ValueError:
        return None


@pytest.mark.parametrize("name", list(DESIGNS))
@pytest.mark.parametrize("tail", ["lower", "upper"])
def test_far_tails_match_dense_reference(name, tail):
    X, lag, blocks = DESIGNS[name]
    dist = DurbinWatsonDistribution(X, lag, blocks=blocks)
    lam_min, lam_max, mean, m = _edges(X, lag, blocks)
    checked = 0
    for target in (1e-6, 1e-9, 1e-12, 1e-15, 1e-30):
        if tail == "lower":
            lo, hi = lam_min + 1e-13 * (mean - lam_min), mean - 1e-3 * (mean - lam_min)
        else:
            lo, hi = mean + 1e-3 * (lam_max - mean), lam_max - 1e-13 * (lam_max - mean)
        c = _solve_target(dist, target, tail, lo, hi)
        if c is None:
            continue  # not reachable for this design: the tail ends before the target
        log_ref, s0 = _reference(X, c, tail, lag, blocks)
        # one rounding unit in c (or in an O(1) eigenvalue) moves log P by |s0| m eps:
        # targets where that alone exceeds 1e-7 are too ill-conditioned to compare to 1e-6
        if s0 * m * max(1.0, c) * EPS > 1e-7:
            continue
        res = dist.tail(c, tail)
        rel = abs(math.expm1(res.log_value - log_ref))
        assert rel <= 1e-6, (name, tail, target, c, res, math.exp(log_ref))
        assert res.method.startswith("exact (saddle-line inversion)")
        checked += 1
        print(name, tail, target, f"{rel:.1e}")
    assert checked >= 1, f"no target reachable for {name}, {tail}"


def test_two_eigenvalue_closed_form_far_lower_tail():
    # X spans the DCT-II vectors 1..n-2, so the residual space is spanned by the constant
    # (eigenvalue 0) and the last DCT vector (eigenvalue nu = 2 - 2 cos(pi (n-1)/n)):
    # P(d <= c) = (2/pi) arctan(sqrt(c / (nu - c))) in closed form (a Cauchy ratio).
    n = 9
    nu_all = 2.0 - 2.0 * np.cos(np.pi * np.arange(n) / n)
    nu = nu_all[-1]
    # the design built from data: exact down to where its rounding (1e-17) matters
    X = fft.idct(np.eye(n)[:, 1 : n - 1], type=2, norm="ortho", axis=0)
    dist = DurbinWatsonDistribution(X)
    for c in (1e-3, 1e-10, 1e-20):
        exact = two_eigenvalue_cdf(0.0, nu, c)
        assert abs(dist.cdf(c) / exact - 1.0) < 1e-9, c
    # the same form with its basis given exactly (W = V'Q is a selection of DCT rows):
    # the closed form holds for any c, so p down to 1e-100
    form = SpectralForm(nu_all, np.eye(n)[1 : n - 1])
    for c in (1e-40, 1e-62, 1e-200):
        exact = two_eigenvalue_cdf(0.0, nu, c)
        got = tail_probability(form, c, "lower")
        assert abs(math.exp(got.log_value - math.log(exact)) - 1.0) < 1e-9, (c, got, exact)
    # the upper tail as far as c can be told apart from nu in double precision
    for off in (1e-3, 1e-8, 1e-12):
        c = nu * (1 - off)
        exact_sf = 2.0 / math.pi * math.atan(math.sqrt((nu - c) / c))
        assert abs(dist.sf(c) / exact_sf - 1.0) < 1e-6, (c, dist.sf(c), exact_sf)


def test_two_eigenvalue_closed_form_general_design():
    # closed form for n = k + 2 with the two eigenvalues taken from the dense reference
    X = _with_constant(7, 5, 11)
    l1, l2 = mam_eigenvalues(X)
    dist = DurbinWatsonDistribution(X)
    for frac in (1e-4, 1e-8, 0.3):
        c = l1 + frac * (l2 - l1)
        exact = two_eigenvalue_cdf(l1, l2, c)
        assert abs(dist.cdf(c) / exact - 1.0) < 1e-6
        c = l2 - frac * (l2 - l1)
        exact_sf = 2.0 / math.pi * math.atan(math.sqrt((l2 - c) / (c - l1)))
        assert abs(dist.sf(c) / exact_sf - 1.0) < 1e-6


def test_cubic_residuals_on_a_quadratic_trend():
    # y = t^3 on [1, t, t^2], t = 1..25: d = 0.214017...; the probability of d this small
    # under the null is about 3e-15 (dense reference), and the test reports it exactly
    X = _poly(25, 2)
    t = np.arange(1.0, 26)
    e = t**3 - X @ np.linalg.lstsq(X, t**3, rcond=None)[0]
    res = lagsight.durbin_watson(e, X)
    log_ref = log_dense_tail(X, res.statistic, "lower")
    assert abs(res.pvalue / math.exp(log_ref) - 1) < 1e-6
    assert res.method.startswith("exact (saddle-line")
    assert abs(res.log10_pvalue - log_ref / math.log(10)) < 1e-6


def test_edge_of_support_without_intercept():
    # a 5 x 2 design without a constant: the support of d starts at the smallest residual
    # eigenvalue (dense reference); just above it the tail is tiny, below it exactly 0
    X = np.array(
        [[1.52006, 0.53631], [2.54711, -1.10479], [1.15606, -0.18289], [1.05060, -0.24901], [0.61487, -0.27219]]
    )
    lam = mam_eigenvalues(X)
    dist = DurbinWatsonDistribution(X)
    assert dist.cdf(lam[0] - 1e-4) == 0.0
    for off in (1e-4, 1e-6):
        c = lam[0] + off
        log_ref = log_dense_tail(X, c, "lower")
        assert abs(dist.cdf(c) / math.exp(log_ref) - 1) < 1e-6


def test_probabilities_below_the_smallest_double_keep_their_logarithm():
    # n = 1500, d = 0.3: P(d <= 0.3) is about exp(-967) = 1e-420, far below the smallest
    # double; the value underflows to 0 but its logarithm matches the dense reference
    X = _with_constant(1500, 3, 8)
    dist = DurbinWatsonDistribution(X)
    res = dist.tail(0.3, "lower")
    log_ref = log_dense_tail(X, 0.3, "lower")
    assert log_ref < -745
    assert res.value == 0.0
    assert abs(res.log_value - log_ref) < 1e-6 * abs(log_ref)


@pytest.mark.parametrize("scale", [1e200, 1e-200])
def test_scale_free(scale):
    # d and its p-value do not depend on the units of the data
    rng = np.random.default_rng(9)
    X = np.column_stack([np.ones(60), rng.normal(size=(60, 2))])
    y = X @ [1.0, 2.0, -1.0] + np.cumsum(rng.normal(size=60)) * 0.3
    e = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    base = lagsight.durbin_watson(e, X)
    scaled = lagsight.durbin_watson(e * scale, X * scale)
    assert abs(scaled.statistic - base.statistic) < 1e-12
    assert abs(scaled.pvalue - base.pvalue) <= 1e-9 * base.pvalue
    assert not any("not orthogonal" in n for n in scaled.notes)


def test_underflowed_p_value_is_written_from_its_logarithm():
    # a regression whose residuals follow a smooth wave: d is tiny, P(d <= d_obs) ~ 1e-500 (below
    # the smallest double); the verdict and the sentence to paste give it from log10 p
    from lagsight.render.text import report_sentence

    n = 800
    rng = np.random.default_rng(21)
    X = np.column_stack([np.ones(n), rng.normal(size=n)])
    y = X @ [1.0, 1.0] + np.sin(np.arange(n) / 40.0) * 5 + 0.05 * rng.normal(size=n)
    fit = __import__("statsmodels.api", fromlist=["OLS"]).OLS(y, X).fit()
    d = lagsight.diagnose(fit, remedies=False)
    res = d.tests["Durbin-Watson"]
    assert res.pvalue == 0.0 and res.log10_pvalue < -330
    log_ref = log_dense_tail(X, res.statistic, "lower") / math.log(10)
    assert abs(res.log10_pvalue - log_ref) < 1e-6 * abs(log_ref)
    exponent = math.floor(res.log10_pvalue)
    assert f"e{exponent}" in d.verdict.headline
    assert f"e{exponent}" in report_sentence(d, "text")


@pytest.mark.parametrize("scale", [1e200, 1e-200])
def test_scale_free_on_the_large_n_path(scale):
    # n >= 20,000 takes the Gram-matrix (Cholesky QR) route to the basis, where X'X would
    # overflow or underflow at these scales: same d and the same log p as unscaled data
    rng = np.random.default_rng(10)
    n = 25_000
    X = np.column_stack([np.ones(n), rng.normal(size=(n, 2))])
    y = X @ [1.0, 2.0, 3.0] + np.cumsum(rng.normal(size=n)) * 0.002 + rng.normal(size=n)
    e = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    base = lagsight.durbin_watson(e, X)
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        scaled = lagsight.durbin_watson(e * scale, X * scale)
    assert abs(scaled.statistic - base.statistic) < 1e-12
    assert abs(scaled.log10_pvalue - base.log10_pvalue) <= 1e-8 * abs(base.log10_pvalue)


@settings(max_examples=int(__import__("os").environ.get("LAGSIGHT_TAIL_EXAMPLES", "15")), deadline=None)
@given(
    n=st.integers(6, 40),
    k=st.integers(1, 4),
    intercept=st.booleans(),
    lag=st.sampled_from([1, 1, 2, 4]),
    tail=st.sampled_from(["lower", "upper"]),
    closeness=st.floats(0.02, 9.0),
    seed=st.integers(0, 10**6),
)
def test_random_designs_in_the_tails_match_dense_reference(n, k, intercept, lag, tail, closeness, seed):
    # property: for random designs (with or without a constant, lag 1, 2 or 4) and a c between
    # the mean and the end of the support, engine and dense reference agree to 1e-6 relative
    # wherever one rounding unit in c cannot move the answer by more than 1e-7
    rng = np.random.default_rng(seed)
    cols = [np.ones(n)] if intercept else []
    cols += [rng.normal(size=n) for _ in range(k - len(cols))] if k > len(cols) else []
    X = np.column_stack(cols)
    assume(n - lag > X.shape[1] + 2)
    dist = DurbinWatsonDistribution(X, lag)
    lam_min, lam_max, mean, m = _edges(X, lag, None)
    depth = 1.0 - 10.0**-closeness  # c from the mean (0) to within 1e-9 of the end (1)
    c = mean - depth * (mean - lam_min) if tail == "lower" else mean + depth * (lam_max - mean)
    res = dist.tail(c, tail)
    log_ref, s0 = _reference(X, c, tail, lag, None)
    assume(s0 * m * max(1.0, c) * EPS <= 1e-7)
    assert abs(math.expm1(res.log_value - log_ref)) <= 1e-6, (res, log_ref)


def test_long_series_far_below_the_smallest_double_is_zero_without_a_search():
    # n k^2 large: a d this small has P far below the smallest double (the bound P <= M(s) at a
    # cheap point says so), so 0.0 is the exact double and no high-degree search is run; a
    # shallower tail on the same design still gets its exact logarithm
    n = 300_000
    dist = DurbinWatsonDistribution(_with_constant(n, 10, 30))
    deep = dist.tail(0.01, "lower")
    assert deep.value == 0.0 and math.isnan(deep.log_value)
    assert deep.method == "exact (below the smallest positive double)"
    shallow = dist.tail(2.0 - 20.0 / math.sqrt(n), "lower")
    assert 0.0 < shallow.value < 1e-20 and math.isfinite(shallow.log_value)
    assert shallow.method == "exact (saddle-line inversion)"
