"""Residual autocorrelations (ACF), partial autocorrelations (PACF) and their bands.

Memory stays linear in n: :func:`sample_acf` takes the lagged products directly
(statsmodels' FFT route only for many lags of a long series) and the PACF is the
Yule-Walker ('ywadjusted') solution built from the same autocorrelations.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
from scipy import stats
from statsmodels.tsa.stattools import acf as _sm_acf
from statsmodels.tsa.stattools import pacf as _sm_pacf

from ._arrays import as_vector, check_alpha, check_int, readonly, unit_scale

__all__ = [
    "Correlogram",
    "LagPairs",
    "correlogram",
    "lag_pairs",
    "sample_acf",
    "ljung_box_q",
    "PACF_METHOD",
    "FFT_MIN_N",
]

#: statsmodels PACF method used: Yule-Walker with n-k denominators.
PACF_METHOD = "ywadjusted"
#: from this many observations on, the PACF comes from the autocorrelations by Levinson-Durbin.
FFT_MIN_N = 1000
#: more lags than this (of a series of at least FFT_MIN_N values) are computed by FFT
DIRECT_MAX_LAGS = 200


def sample_acf(resid, nlags: int) -> np.ndarray:
    """Autocorrelations r_1 .. r_nlags of the demeaned series, denominator n (statsmodels'
    ``acf``, adjusted=False).  The lagged products are summed directly (as statsmodels does
    without FFT): O(n nlags) time and no memory beyond one copy of the series, where the FFT
    route would need several complex arrays of twice its length.  Many lags of a long series
    (more than :data:`DIRECT_MAX_LAGS`) go through statsmodels' FFT route."""
    e = np.asarray(resid, dtype=float)
    n = e.shape[0]
    if nlags > DIRECT_MAX_LAGS and n >= FFT_MIN_N:
        return _sm_acf(e, nlags=nlags, fft=True)[1:]
    x = e - e.mean()
    c0 = float(x @ x)
    return np.array([float(x[h:] @ x[: n - h]) for h in range(1, nlags + 1)]) / c0


def ljung_box_q(r: np.ndarray, n: int) -> np.ndarray:
    """Ljung-Box Q at lags 1 .. r.size from the autocorrelations r_1 .. r_L of n values:
    Q_h = n (n + 2) sum_{k<=h} r_k^2 / (n - k) (Ljung & Box 1978)."""
    r = np.asarray(r, dtype=float)
    k = np.arange(1, r.size + 1)
    return n * (n + 2.0) * np.cumsum(r * r / (n - k))


@dataclass(frozen=True, eq=False)
class Correlogram:
    """ACF and PACF of residuals at lags 1..nlags (lag 0 is left out).

    Attributes
    ----------
    lags : ndarray of int
    acf, pacf : ndarray
        Sample autocorrelations (denominator n, statsmodels ``acf``) and partial
        autocorrelations (statsmodels ``pacf``, method ``pacf_method``).
    white_band : float
        z_{1-alpha/2} / sqrt(n): the band for white noise at every lag.
    bartlett_band : ndarray
        z_{1-alpha/2} * sqrt((1 + 2 sum_{j<h} r_j^2) / n) for lag h (Bartlett's formula).
    n : int
    alpha : float
    pacf_method : str
    """

    lags: np.ndarray
    acf: np.ndarray
    pacf: np.ndarray
    white_band: float
    bartlett_band: np.ndarray
    n: int
    alpha: float
    pacf_method: str = PACF_METHOD

    def at_alpha(self, alpha: float) -> Correlogram:
        """The same correlogram with both bands at level ``alpha`` (they scale with z_{1-alpha/2})."""
        alpha = check_alpha(alpha)
        if alpha == self.alpha:
            return self
        factor = stats.norm.ppf(1 - alpha / 2) / stats.norm.ppf(1 - self.alpha / 2)
        return dataclasses.replace(
            self, white_band=self.white_band * factor, bartlett_band=readonly(self.bartlett_band * factor), alpha=alpha
        )

    def outside_white_band(self) -> np.ndarray:
        """Lags whose autocorrelation lies outside +/- ``white_band``."""
        return self.lags[np.abs(self.acf) > self.white_band]

    def __str__(self) -> str:
        lines = [
            f"Correlogram (n={self.n}, alpha={self.alpha:g}, white band +/-{self.white_band:.4f})",
            f"  {'lag':>4} {'acf':>9} {'pacf':>9} {'bartlett':>9}",
        ]
        for h, a, p, b in zip(self.lags, self.acf, self.pacf, self.bartlett_band):
            flag = " *" if abs(a) > self.white_band else ""
            lines.append(f"  {h:>4d} {a:>9.4f} {p:>9.4f} {b:>9.4f}{flag}")
        return "\n".join(lines)


def _pacf_yw_adjusted(r: np.ndarray, n: int) -> np.ndarray:
    """statsmodels' 'ywadjusted' PACF from the autocorrelations r_1 .. r_nlags, by Levinson-Durbin.

    Yule-Walker with denominators n - j solves one Toeplitz system per order
    from the autocovariances c_j / (n - j) (proportional to r_j n / (n - j), and the
    recursion does not see a common factor); Levinson-Durbin gives the same
    last coefficients in O(nlags^2).
    """
    nlags = r.size
    lags = np.arange(nlags + 1)
    acov = np.concatenate(([1.0], r)) * n / (n - lags)
    out = np.empty(nlags)
    phi = np.zeros(0)
    v = acov[0]
    for k in range(1, nlags + 1):
        kappa = (acov[k] - phi @ acov[1:k][::-1]) / v
        phi = np.concatenate([phi - kappa * phi[::-1], [kappa]])
        v *= 1.0 - kappa * kappa
        out[k - 1] = kappa
    return out


def correlogram(resid, *, max_lag: int, alpha: float = 0.05) -> Correlogram:
    """ACF, PACF and the white-noise and Bartlett bands of ``resid``.

    Parameters
    ----------
    resid : 1-D array
    max_lag : int
        Largest lag, 1 <= max_lag <= n // 2 (the Yule-Walker PACF needs that).
    alpha : float
        Two-sided level of the bands.
    """
    e = as_vector(resid, "resid", min_len=4)
    n = e.shape[0]
    nlags = check_int(max_lag, "max_lag", minimum=1)
    if nlags > n // 2:
        raise ValueError(f"'max_lag' must be ≤ n // 2 = {n // 2} for the PACF (got {nlags})")
    alpha = check_alpha(alpha)
    if np.ptp(e) == 0:
        raise ValueError(f"'resid' must not be constant (got all values equal to {e[0]})")
    r = sample_acf(e, nlags)
    p = _pacf_yw_adjusted(r, n) if n >= FFT_MIN_N else _sm_pacf(e, nlags=nlags, method=PACF_METHOD)[1:]
    z = float(stats.norm.ppf(1.0 - alpha / 2.0))
    cum = np.concatenate(([0.0], np.cumsum(r[:-1] ** 2)))  # sum_{j=1}^{h-1} r_j^2
    bartlett = z * np.sqrt((1.0 + 2.0 * cum) / n)
    return Correlogram(
        lags=readonly(np.arange(1, nlags + 1)),
        acf=readonly(r),
        pacf=readonly(p),
        white_band=z / np.sqrt(n),
        bartlett_band=readonly(bartlett),
        n=n,
        alpha=alpha,
    )


@dataclass(frozen=True, eq=False)
class LagPairs:
    """Pairs (e_{t-lag}, e_t) for a lag scatter plot, with their Pearson correlation."""

    lag: int
    lagged: np.ndarray
    current: np.ndarray
    correlation: float


def lag_pairs(resid, *, lag: int) -> LagPairs:
    """Return the n - lag pairs (e_{t-lag}, e_t) and their Pearson correlation.

    The correlation is that of the pairs themselves (each side centred on its
    own mean), so it differs slightly from the ACF value at lag h.
    """
    e = as_vector(resid, "resid", min_len=3)
    n = e.shape[0]
    h = check_int(lag, "lag", minimum=1)
    if h > n - 2:
        raise ValueError(f"'lag' must be ≤ n - 2 = {n - 2} to leave two pairs (got {h})")
    lagged, current = e[:-h], e[h:]
    if np.ptp(lagged) == 0 or np.ptp(current) == 0:
        corr = float("nan")
    else:
        corr = float(np.corrcoef(unit_scale(lagged), unit_scale(current))[0, 1])  # scale-free; no overflow
    return LagPairs(lag=h, lagged=readonly(lagged), current=readonly(current), correlation=corr)
