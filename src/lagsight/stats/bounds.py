"""Durbin-Watson bounds dL and dU for any n, k' and alpha, from the exact bounding distributions.

The bounding statistics (Durbin & Watson 1950, 1951; Farebrother 1980 without a
constant) are ratios of forms in the eigenvalues of the first-difference
matrix, so their quantiles come from the same spectral engine as the exact test.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ._arrays import check_alpha, check_flag, check_int
from .quadform import SpectralForm
from .results import check_alternative
from .spectrum import difference_spectrum, form_moments, solve_quantile

__all__ = ["BOUNDS_MAX_N", "BoundsResult", "bounding_forms", "dw_bounds"]

#: bounds are computed alongside an exact p-value up to this n
BOUNDS_MAX_N = 200_000


@dataclass(frozen=True)
class BoundsResult:
    """Durbin-Watson bounds dL, dU at level ``alpha`` for n observations.

    ``k_prime`` counts the regressors excluding the constant (k' in published tables).
    """

    lower: float
    upper: float
    n: int
    k_prime: int
    alpha: float
    has_constant: bool = True
    method: str = "exact bounding distributions (Imhof inversion)"

    def decision(self, d: float, alternative: str = "positive") -> str:
        """The classical bounds decision for an observed d: 'reject', 'inconclusive' or 'no evidence'."""
        check_alternative(alternative)
        lo, up = self.lower, self.upper
        if alternative == "positive":
            return "reject" if d < lo else ("inconclusive" if d <= up else "no evidence")
        if alternative == "negative":
            return "reject" if d > 4 - lo else ("inconclusive" if d >= 4 - up else "no evidence")
        if d < lo or d > 4 - lo:
            return "reject"
        return "inconclusive" if (d <= up or d >= 4 - up) else "no evidence"

    def __str__(self) -> str:
        const = "with" if self.has_constant else "without"
        return (
            f"Durbin-Watson bounds (n = {self.n:,}, k' = {self.k_prime}, \u03b1 = {self.alpha:g}, {const} constant)\n"
            f"  dL {self.lower:.3f}   dU {self.upper:.3f}\n"
            f"  method: {self.method}"
        )


def bounding_forms(n: int, k_prime: int, has_constant: bool = True):
    """The SpectralForms of the lower and upper bounding statistics.

    With a constant and k' = k_prime regressors (k+1 columns, k = k_prime) dL uses nu_1..nu_{n-k-1}
    and dU uses nu_{k+1}..nu_{n-1} (Durbin & Watson 1950, 1951); without a
    constant (k columns) the lower bound uses nu_0..nu_{n-k-1} and the upper
    nu_k..nu_{n-1} (Farebrother 1980).
    """
    nu = difference_spectrum(n)[0]
    cols = k_prime + 1 if has_constant else k_prime
    idx = np.arange(n)
    if has_constant:
        keep_lo = (idx >= 1) & (idx <= n - cols)
    else:
        keep_lo = idx <= n - cols - 1
    keep_hi = idx >= cols
    return (
        SpectralForm(nu, exclude=np.flatnonzero(~keep_lo)),
        SpectralForm(nu, exclude=np.flatnonzero(~keep_hi)),
    )


@lru_cache(maxsize=512)
def _bounds_cached(n: int, k_prime: int, alpha: float, has_constant: bool) -> tuple[float, float]:
    lo_form, hi_form = bounding_forms(n, k_prime, has_constant)
    out = []
    for form in (lo_form, hi_form):
        mean, var = form_moments(form)
        out.append(solve_quantile(form, alpha, mean, math.sqrt(var)))
    return out[0], out[1]


def dw_bounds(n: int, k_prime: int, *, alpha: float = 0.05, has_constant: bool = True) -> BoundsResult:
    """Exact Durbin-Watson bounds dL and dU for any n, k' and alpha.

    Parameters
    ----------
    n : int
        Number of observations.
    k_prime : int
        Number of regressors excluding the constant (k' in published tables).
    alpha : float
        Level of the one-sided test against positive autocorrelation.
    has_constant : bool
        Whether the regression has a constant.
    """
    k_prime = check_int(k_prime, "k_prime", minimum=1)
    n = check_int(n, "n", minimum=1)
    has_constant = check_flag(has_constant, "has_constant")
    cols = k_prime + 1 if has_constant else k_prime
    if n <= cols + 1:
        raise ValueError(f"'n' must exceed the number of columns + 1 = {cols + 1} (got {n})")
    alpha = check_alpha(alpha)
    lower, upper = _bounds_cached(n, k_prime, alpha, has_constant)
    return BoundsResult(lower, upper, n, k_prime, alpha, has_constant)
