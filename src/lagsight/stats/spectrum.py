"""The spectrum of the Durbin-Watson difference matrix and quantiles of a spectral form.

The matrix of sum_t (e_t - e_{t-s})^2 splits into s interleaved first-difference
chains (and, for panels, never differences across a block boundary); each chain
of length m is diagonalised by the DCT-II with eigenvalues 2 - 2 cos(pi j / m).
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtri

from .quadform import SpectralForm

__all__ = ["difference_spectrum", "form_moments", "solve_quantile"]


def difference_spectrum(n: int, lag: int = 1, blocks=None):
    """Eigenvalues of the order-``lag`` difference matrix and its chain layout.

    The matrix of sum (e_t - e_{t-lag})^2 splits into independent
    first-difference chains: rows r, r+lag, r+2 lag, ... for r = 0..lag-1, and,
    with ``blocks`` (a list of row-position arrays, e.g. the groups of a panel),
    no difference is taken across block boundaries.  Each chain of length m is
    diagonalised by the DCT-II with eigenvalues 2 - 2 cos(pi j / m).

    Returns (nu, chains): the chains' row positions, whose DCT coefficients
    occupy consecutive slices of ``nu`` in that order.
    """
    if blocks is None:
        blocks = [np.arange(n)]
    nus, chains = [], []
    for block in blocks:
        block = np.asarray(block)
        for r in range(lag):
            rows = block[r::lag]
            m = rows.size
            if m == 0:
                continue
            nus.append(2.0 - 2.0 * np.cos(np.pi * np.arange(m) / m))
            chains.append(rows)
    return np.concatenate(nus), chains


def form_moments(form: SpectralForm) -> tuple[float, float]:
    """Null mean and variance of the ratio whose numerator spectrum is ``form``
    (Durbin & Watson 1950 moments)."""
    p1, p2 = form.power_sums(0.0)
    m = form.m
    return p1 / m, 2.0 * (m * p2 - p1 * p1) / (m * m * (m + 2.0))


def solve_quantile(form: SpectralForm, q: float, mean: float, sd: float) -> float:
    """Root of P(Q_c <= 0) = q in c: safeguarded Newton steps with the exact density."""
    lo, hi = form.nu_min, form.nu_max
    c = float(np.clip(mean + ndtri(q) * sd, lo + 1e-9 * (hi - lo), hi - 1e-9 * (hi - lo)))
    for _ in range(60):
        p, _, dens = form.cdf_at_zero(c, density=True)
        if p < q:
            lo = c
        else:
            hi = c
        if dens and dens > 0:
            step = (q - p) / dens
            new = c + step
        else:
            new = 0.5 * (lo + hi)
        if not lo < new < hi:
            new = 0.5 * (lo + hi)
        if abs(new - c) < 1e-11 or hi - lo < 1e-12:
            return float(new)
        c = new
    raise RuntimeError("quantile search did not converge")  # pragma: no cover
