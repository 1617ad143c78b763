"""Imhof's (1961) inversion integral for a short explicit list of weights.

P(sum_j w_j chi2_{h_j}(delta_j) <= x).  The tail of the integral is a Fourier
integral with a smooth amplitude, handed to QUADPACK's QAWF rule, so slowly
decaying cases (three terms, say) stay exact.  The Durbin-Watson engine with
thousands to millions of weights is :class:`lagsight.stats.quadform.SpectralForm`;
this function is its independent check and the general tool.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import integrate

__all__ = ["imhof_cdf"]


def imhof_cdf(weights, x: float = 0.0, *, df=1, nc=0.0) -> float:
    """P(Q <= x) for Q = sum_j w_j * chi2(df_j, nc_j), by Imhof's (1961) formula.

    Meant for short lists of weights (up to a few thousand).  Accuracy is about
    1e-11 absolute.
    """
    lam = np.atleast_1d(np.asarray(weights, dtype=float))
    h = np.broadcast_to(np.asarray(df, dtype=float), lam.shape)
    delta = np.broadcast_to(np.asarray(nc, dtype=float), lam.shape)
    if lam.size == 0 or not np.all(np.isfinite(lam)):
        raise ValueError(f"'weights' must be a non-empty array of finite numbers (got {weights!r})")
    if np.any(h <= 0) or np.any(delta < 0):
        raise ValueError("'df' must be positive and 'nc' non-negative")
    keep = lam != 0
    lam, h, delta = lam[keep], h[keep], delta[keep]
    if lam.size == 0:
        return 1.0 if x >= 0 else 0.0

    def beta_rho(u):
        lu = lam * u
        beta = 0.5 * np.sum(h * np.arctan(lu) + delta * lu / (1 + lu * lu))
        log_rho = np.sum(0.25 * h * np.log1p(lu * lu) + 0.5 * delta * lu * lu / (1 + lu * lu))
        return beta, log_rho

    def integrand(u):
        if u == 0.0:
            return 0.5 * (np.sum(lam * (h + delta)) - x)
        beta, log_rho = beta_rho(u)
        if log_rho > 700.0:
            return 0.0
        return math.sin(beta - 0.5 * x * u) / (u * math.exp(log_rho))

    # the head of the integral in geometric panels between the scales 1/|w_j|
    u_small = 0.05 / np.max(np.abs(lam))
    split = 50.0 / np.min(np.abs(lam))
    edges = np.concatenate(
        [[0.0], np.geomspace(u_small, split, max(2, int(np.log(split / u_small) / np.log(4.0)) + 2))]
    )
    head = 0.0
    for a, b in zip(edges[:-1], edges[1:]):
        head += integrate.quad(integrand, a, b, limit=200, epsabs=1e-14, epsrel=1e-12)[0]
    if x == 0.0:
        tail, _ = integrate.quad(integrand, split, np.inf, limit=2000, epsabs=1e-13, epsrel=1e-13)
    else:

        def amp_sin(u):
            beta, log_rho = beta_rho(u)
            return 0.0 if log_rho > 700.0 else math.sin(beta) / (u * math.exp(log_rho))

        def amp_cos(u):
            beta, log_rho = beta_rho(u)
            return 0.0 if log_rho > 700.0 else math.cos(beta) / (u * math.exp(log_rho))

        w = 0.5 * abs(x)
        sign = 1.0 if x > 0 else -1.0
        # sin(beta - x u / 2) = sin(beta) cos(|x| u/2) - sign * cos(beta) sin(|x| u/2)
        t1, _ = integrate.quad(amp_sin, split, np.inf, weight="cos", wvar=w, limlst=200)
        t2, _ = integrate.quad(amp_cos, split, np.inf, weight="sin", wvar=w, limlst=200)
        tail = t1 - sign * t2
    upper = 0.5 + (head + tail) / math.pi
    return float(min(1.0, max(0.0, 1.0 - upper)))
