"""An independent, deliberately naive reference for the exact Durbin-Watson distribution.

Written separately from ``lagsight.stats`` and sharing no code with it: it forms
the dense n x n matrices M and A (fine for n <= a few hundred), takes the
eigenvalues of M A M with LAPACK, and integrates Imhof's (1961) formula

    P(Q > 0) = 1/2 + (1/pi) * int_0^inf sin(theta(u)) / (u rho(u)) du,
    theta(u) = 1/2 sum_j arctan(l_j u),  rho(u) = prod_j (1 + l_j^2 u^2)^(1/4),

with QUADPACK on panels, for Q = sum_j (lambda_j - c) z_j^2.
"""

from __future__ import annotations

import numpy as np
from scipy import integrate


def difference_matrix(n: int, lag: int = 1) -> np.ndarray:
    """A = D'D for the (n - lag) x n lag-``lag`` difference operator D."""
    D = np.zeros((n - lag, n))
    idx = np.arange(n - lag)
    D[idx, idx + lag] = 1.0
    D[idx, idx] = -1.0
    return D.T @ D


def block_difference_matrix(sizes) -> np.ndarray:
    """A for first differences taken within consecutive blocks of the given sizes, never across them."""
    n = int(sum(sizes))
    A = np.zeros((n, n))
    start = 0
    for m in sizes:
        A[start : start + m, start : start + m] = difference_matrix(m, 1)
        start += m
    return A


def residual_maker(X: np.ndarray) -> np.ndarray:
    n = X.shape[0]
    return np.eye(n) - X @ np.linalg.pinv(X)


def mam_eigenvalues(X: np.ndarray, lag: int = 1, A: np.ndarray | None = None) -> np.ndarray:
    """The n - rank(X) eigenvalues of M A M that belong to the residual space (A: the lag-``lag``
    difference matrix unless given)."""
    n = X.shape[0]
    A = difference_matrix(n, lag) if A is None else A
    rank = np.linalg.matrix_rank(X)
    # P: an orthonormal basis of the orthogonal complement of col(X), from the
    # complete QR of X (pivoted, so a rank-deficient X is handled); the residual
    # space eigenvalues of M A M are those of P' A P.
    from scipy import linalg

    Q, _, _ = linalg.qr(X, pivoting=True)
    P = Q[:, rank:]
    return np.sort(np.linalg.eigvalsh(P.T @ A @ P))


def imhof_prob_nonpositive(weights: np.ndarray) -> float:
    """P(sum_j w_j z_j^2 <= 0) by Imhof's integral, integrated naively in panels."""
    w = np.asarray(weights, float)
    w = w[w != 0]

    def integrand(u):
        if u == 0:
            return 0.5 * w.sum()
        wu = w * u
        theta = 0.5 * np.arctan(wu).sum()
        log_rho = 0.25 * np.log1p(wu * wu).sum()
        if log_rho > 700:
            return 0.0
        return np.sin(theta) / (u * np.exp(log_rho))

    wmax = np.abs(w).max()
    edges = np.concatenate([[0.0], np.geomspace(1e-3 / wmax, 1e9 / wmax, 73)])
    total = 0.0
    for a, b in zip(edges[:-1], edges[1:]):
        total += integrate.quad(integrand, a, b, limit=400, epsabs=1e-14, epsrel=1e-13)[0]
    return 1.0 - (0.5 + total / np.pi)


def dense_cdf(X: np.ndarray, c: float, lag: int = 1, A: np.ndarray | None = None) -> float:
    """P(d <= c) for the order-``lag`` Durbin-Watson statistic of design X (or the ratio with matrix A)."""
    lam = mam_eigenvalues(X, lag, A)
    return imhof_prob_nonpositive(lam - c)


# ----------------------------------------------------------------------------
# tails with relative accuracy
# ----------------------------------------------------------------------------
def tail_prob(weights, tail: str = "lower", with_saddle: bool = False):
    """P(sum_j w_j z_j^2 <= 0) ('lower') or P(... >= 0) ('upper') with relative accuracy.

    Independent of the package: the moment generating function prod (1 - 2 s w_j)^(-1/2)
    is evaluated factor by factor from the explicit weights, its saddle point is found by
    scipy's brentq, and the inversion integral along the vertical line through it,

        P = exp(K(s0)) / (pi |s0|) * int_0^inf Re[exp(K(s0 + iy) - K(s0)) s0 / (s0 + iy)] dy,

    is integrated with QUADPACK on geometric panels.  Returns the natural logarithm of
    the probability (so values below the smallest double can be compared too).
    """
    from scipy import optimize

    w = np.asarray(weights, float)
    w = w[w != 0]
    if tail == "upper":
        w = -w
    # P(sum w z^2 <= 0) with the smaller tail on this side: saddle point s0 < 0
    lo_edge = 1.0 / (2.0 * w.min())  # negative: the interval of the mgf is (lo_edge, 1/(2 w.max()))

    def K(s):
        return -0.5 * np.sum(np.log(1.0 - 2.0 * s * w))

    def K1(s):
        return np.sum(w / (1.0 - 2.0 * s * w))

    def K2(s):
        q = w / (1.0 - 2.0 * s * w)
        return 2.0 * np.sum(q * q)

    a, b = lo_edge * (1 - 1e-15), 0.0
    s0 = optimize.brentq(K1, a, b, xtol=1e-300, rtol=1e-15, maxiter=500)
    k0 = K(s0)
    width = 1.0 / np.sqrt(K2(s0))

    def integrand(y):
        s = s0 + 1j * y
        logm = -0.5 * np.sum(np.log(1.0 - 2.0 * s * w)) - k0
        return (np.exp(logm) * s0 / s).real

    edges = np.concatenate([[0.0], width * np.geomspace(0.25, 1e14, 70)])
    total = integrate.quad(integrand, 0.0, edges[1], limit=400, epsabs=0.0, epsrel=1e-13)[0]
    floor = 1e-16 * abs(total)
    for lo, hi in zip(edges[1:-1], edges[2:]):
        total += integrate.quad(integrand, lo, hi, limit=400, epsabs=floor, epsrel=1e-13)[0]
    log_p = float(k0 - np.log(np.pi * abs(s0)) + np.log(total))
    return (log_p, abs(s0)) if with_saddle else log_p


def log_dense_tail(X: np.ndarray, c: float, tail: str = "lower", lag: int = 1, A=None, with_saddle=False):
    """log P(d <= c) ('lower') or log P(d >= c) ('upper') from the dense eigenvalues of M A M."""
    return tail_prob(mam_eigenvalues(X, lag, A) - c, tail, with_saddle)


def two_eigenvalue_cdf(l1: float, l2: float, c: float) -> float:
    """Closed form for two residual eigenvalues l1 < c < l2 (a Cauchy ratio):
    P(l1 z1^2 + l2 z2^2 <= c (z1^2 + z2^2)) = (2/pi) arctan(sqrt((c - l1) / (l2 - c)))."""
    return float(2.0 / np.pi * np.arctan(np.sqrt((c - l1) / (l2 - c))))
