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
        A[start:start + m, start:start + m] = difference_matrix(m, 1)
        start += m
    return A


def residual_maker(X: np.ndarray) -> np.ndarray:
    n = X.shape[0]
    return np.eye(n) - X @ np.linalg.pinv(X)


def mam_eigenvalues(X: np.ndarray, lag: int = 1, A: np.ndarray | None = None) -> np.ndarray:
    """The n - rank(X) eigenvalues of M A M that belong to the residual space (A: the lag-``lag``
    difference matrix unless given)."""
    n = X.shape[0]
    M = residual_maker(X)
    A = difference_matrix(n, lag) if A is None else A
    ev = np.sort(np.linalg.eigvalsh(M @ A @ M))
    rank = np.linalg.matrix_rank(X)
    # M A M has rank(X) zero eigenvalues from the column space of X; the
    # eigenvalues of the residual space are all others.  Remove the zeros that
    # correspond to col(X) by matching the count.
    order = np.argsort(np.abs(ev))
    drop = order[:rank]
    return np.delete(ev, drop)


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
