"""The Durbin-Watson statistic, its exact null distribution, bounds and moments.

d_s = sum_t (e_t - e_{t-s})^2 / sum_t e_t^2 for OLS residuals e = M y.  Under
the classical null (fixed regressors, normal i.i.d. errors) P(d_s <= c) is the
probability that a quadratic form in normal variables is non-positive; the
matrix of the numerator is diagonalised by a DCT-II basis (one per interleaved
chain for s > 1), which is what makes the exact computation linear in n.
"""

from __future__ import annotations

import math
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np
from scipy import fft

from ._arrays import (
    as_design,
    as_vector,
    check_alpha,
    check_int,
    check_optional_int,
    has_constant,
    k_prime,
    scaled,
    unit_columns,
    unit_scale,
)
from .bounds import BOUNDS_MAX_N, BoundsResult, dw_bounds
from .quadform import SpectralForm
from .results import TestResult, check_alternative, tail_pvalue
from .spectrum import difference_spectrum, form_moments, solve_quantile
from .tails import TailResult, tail_probability
from .tall import cores, orthonormal_basis_t

__all__ = [
    "DurbinWatsonDistribution",
    "DurbinWatsonResult",
    "durbin_watson",
    "durbin_watson_exact",
    "dw_distribution",
    "dw_statistic",
]

#: below this a tail probability is computed with relative accuracy on the saddle line
#: (the Imhof inversion is accurate to about 1e-12 absolute, so 1e-9 relative at the switch)
TAIL_SWITCH = 1e-3


# ----------------------------------------------------------------------------
# validation (one place)
# ----------------------------------------------------------------------------
def _as_vector(x, name: str) -> np.ndarray:
    return as_vector(x, name)


def _as_design(exog, n: int) -> np.ndarray:
    return as_design(exog, n, full_rank=False)


def _check_lag(lag, n: int) -> int:
    lag = check_int(lag, "lag", minimum=1)
    if lag >= n:
        raise ValueError(f"'lag' must be smaller than the number of residuals {n} (got {lag})")
    return int(lag)


# ----------------------------------------------------------------------------
# statistic
# ----------------------------------------------------------------------------
def dw_statistic(resid, *, lag: int = 1) -> float:
    """The order-``lag`` Durbin-Watson statistic d = sum (e_t - e_{t-lag})^2 / sum e_t^2."""
    return _dw_parts(resid, lag)[0]


def _dw_parts(resid, lag: int) -> tuple[float, float, float]:
    """(d, numerator, denominator) of the order-``lag`` Durbin-Watson statistic."""
    e = _as_vector(resid, "resid")
    lag = _check_lag(lag, e.size)
    # d is scale-free: sums of squares are taken of e / max|e| so that residuals of any
    # magnitude (1e-200 or 1e200) neither underflow nor overflow; numerator and
    # denominator are returned in the original units (inf or 0 when those do not fit)
    if not np.any(e):
        raise ValueError("'resid' has zero variance (all residuals are 0)")
    u, top = scaled(e)
    diff = u[lag:] - u[:-lag]
    num = float(np.dot(diff, diff))
    den = float(np.dot(u, u))
    with np.errstate(over="ignore", under="ignore"):
        scale2 = top * top
    return num / den, num * scale2, den * scale2


#: from this many rows on, the basis is built block by block (Cholesky QR2, lagsight.stats.tall)
BLOCKED_BASIS_MIN_N = 20_000


def _orthonormal_basis(X: np.ndarray, order=None):
    """Orthonormal basis of the column space of X, transposed (rank x n), the rank, and for tall
    designs the matrix T with Q' = T X' (None for short ones).

    ``order`` (a permutation of the rows) arranges the columns of the result: column j belongs
    to row order[j].  Tall designs (n >= :data:`BLOCKED_BASIS_MIN_N`) use Cholesky QR2 on
    column-scaled X, read in row blocks (:func:`lagsight.stats.tall.orthonormal_basis_t`: a few
    GEMMs, the result the only n-sized array); short ones use Householder QR with an SVD of R,
    which decides the rank.
    """
    n, k = X.shape
    if n >= BLOCKED_BASIS_MIN_N:
        return orthonormal_basis_t(X, order)
    # columns of comparable size: the rank decided below is the column space's, not the units' (a
    # constant of 1 beside a regressor near 1e200 is not negligible); the basis is the same
    Q, R = np.linalg.qr(unit_columns(X), mode="reduced")
    U, s, _ = np.linalg.svd(R)
    tol = s[0] * max(X.shape) * np.finfo(float).eps if s.size and s[0] > 0 else 0.0
    rank = int(np.count_nonzero(s > tol))
    if rank < k:
        Q = Q @ U[:, :rank]
    if order is not None:
        Q = Q[np.asarray(order)]
    return np.ascontiguousarray(Q.T), rank, None


#: rows at least this long are transformed one per thread (see :func:`_dct`)
_LONG_DCT = 1 << 16


def _dct(a: np.ndarray, overwrite: bool) -> np.ndarray:
    """Orthonormal DCT-II along the last axis.  Long rows go one per thread: transforming
    several at once makes the FFT library buffer them all (0.75 GB for 10 rows of 10^7,
    measured), one at a time it needs one row's buffer per thread."""
    if a.ndim == 1 or a.shape[-1] < _LONG_DCT or a.shape[0] == 1:
        return fft.dct(a, type=2, norm="ortho", axis=-1, workers=-1, overwrite_x=overwrite)
    out = a if overwrite else np.empty_like(a)

    def one(i):
        out[i] = fft.dct(a[i], type=2, norm="ortho", overwrite_x=overwrite)

    with ThreadPoolExecutor(max_workers=min(a.shape[0], cores())) as pool:
        list(pool.map(one, range(a.shape[0])))
    return out


# ----------------------------------------------------------------------------
# the exact distribution for a design
# ----------------------------------------------------------------------------
class DurbinWatsonDistribution:
    """Exact null distribution of the order-``lag`` Durbin-Watson statistic for a design.

    Build with :func:`dw_distribution`.  Evaluation never forms an n x n matrix:
    memory is O(n k) and the precomputation O(n k^2 + k n log n).
    """

    def __init__(self, exog, lag: int = 1, *, blocks=None, _n: int | None = None):
        if exog is None:
            if _n is None:
                raise ValueError("'exog' is required for the exact distribution")
            n, X = _n, np.empty((_n, 0))
        else:
            X = np.asarray(exog, dtype=float)
            if X.ndim == 1:
                X = X[:, None]
            n = X.shape[0]
            X = _as_design(X, n)
        self.n = n
        self.lag = _check_lag(lag, n)
        self.notes: list[str] = []
        nu, chains = difference_spectrum(n, self.lag, blocks)
        single = blocks is None and self.lag == 1
        # the chains' rows side by side; W = V'Q is then the DCT of each chain's slice of Q',
        # taken in place, so Q' and W never exist at the same time
        self._chains = None if single else chains
        self._basis_map = None
        if X.shape[1]:
            Wt, rank, self._basis_map = _orthonormal_basis(X, None if single else np.concatenate(chains))
            if rank < X.shape[1]:
                self.notes.append(
                    f"the design has rank {rank} < {X.shape[1]:,} columns; it was reduced to its column space"
                )
        else:
            Wt, rank = None, 0
        self.rank = rank
        self.has_constant = has_constant(X)
        if n - rank < 2:
            raise ValueError(f"need more residuals than the design's rank + 1 (n = {n}, rank = {rank})")
        Wt = self._chain_dct(Wt, overwrite=True) if rank else None
        self.form = SpectralForm(nu, Wt)
        self.df = n - rank

    @property
    def k_prime(self) -> int:
        """Regressors excluding the constant (k' of the published bounds)."""
        return k_prime(self.rank, self.has_constant)

    def _chain_dct(self, a: np.ndarray, *, overwrite: bool = False) -> np.ndarray:
        """The DCT-II (orthonormal) of each chain's slice of the last axis of ``a`` (rows in chain
        order), in place with ``overwrite``."""
        if self._chains is None:
            return _dct(a, overwrite)
        out = a if overwrite else np.empty_like(a)
        pos = 0
        for rows in self._chains:
            out[..., pos : pos + rows.size] = _dct(a[..., pos : pos + rows.size], overwrite)
            pos += rows.size
        return out

    def project(self, u, exog=None) -> np.ndarray:
        """Q'u for the orthonormal basis Q of the design's column space (no copy of the basis is
        kept): T (X'u) when the design ``exog`` it was built from is given and the basis came
        from the blocked factorisation (Q' = T X'), else from W = V'Q as Q'u = W'(V'u), with V'u
        the chains' DCTs of u."""
        u = np.asarray(u, dtype=float)
        if self.form.W is None:
            return np.zeros(0)
        if exog is not None and self._basis_map is not None:
            return self._basis_map @ (np.asarray(exog, dtype=float).T @ u)
        if self._chains is not None:
            u = u[np.concatenate(self._chains)]
        return self.form.W @ self._chain_dct(u)

    # moments (Durbin & Watson 1950) ------------------------------------------------
    @property
    def mean(self) -> float:
        return form_moments(self.form)[0]

    @property
    def var(self) -> float:
        return form_moments(self.form)[1]

    # distribution -----------------------------------------------------------------
    def _both_tails(self, c):
        """(P(d <= c), P(d >= c)) for an array of c, each with relative accuracy."""
        cs = np.atleast_1d(np.asarray(c, dtype=float))
        lower = self._body(cs)
        upper = 1.0 - lower
        for i in np.flatnonzero(np.minimum(lower, upper) < TAIL_SWITCH):
            lower[i], upper[i], _, _ = self._refine(float(cs[i]), float(lower[i]), body_known=True)
        return lower, upper

    def _body(self, cs: np.ndarray) -> np.ndarray:
        """P(d <= c) by the Imhof inversion (1e-12 absolute).  Where that integral cannot be
        evaluated (c within rounding of a point mass of the spectrum, at the very end of the
        range) the value is set to 0 or 1 by the side of the mean, so the tail computation
        takes over."""
        try:
            return self.form.cdf_many(cs)[0]
        except (np.linalg.LinAlgError, FloatingPointError):
            out = np.empty(cs.shape)
            for i, ci in enumerate(cs):
                try:
                    out[i] = self.form.cdf_many(np.array([ci]))[0][0]
                except (np.linalg.LinAlgError, FloatingPointError):
                    out[i] = 0.0 if ci < self.mean else 1.0
            return out

    def cdf(self, c):
        """P(d <= c): exact, to 1e-12 absolute and, below 1e-3, to about 1e-10 relative."""
        out = self._both_tails(c)[0]
        return out if np.ndim(c) else float(out[0])

    def sf(self, c):
        """P(d >= c), with the same accuracy as :meth:`cdf` (relative in the upper tail)."""
        out = self._both_tails(c)[1]
        return out if np.ndim(c) else float(out[0])

    def tail(self, c: float, tail: str) -> TailResult:
        """The smaller tail at c ('lower': P(d <= c), 'upper': P(d >= c)) with relative accuracy,
        its natural logarithm (finite below the smallest double) and the error estimate."""
        return tail_probability(self.form, float(c), tail)

    def pdf(self, c):
        """Density of d at c."""
        out = self.form.cdf_many(np.atleast_1d(np.asarray(c, dtype=float)), density=True)[2]
        return out if np.ndim(c) else float(out[0])

    def grid(self, num: int = 161, lo: float = 0.0, hi: float = 4.0):
        """(c, cdf, pdf) on an even grid over [lo, hi], for plotting (one vectorised pass)."""
        c = np.linspace(lo, hi, num)
        cdf, _, pdf = self.form.cdf_many(c, density=True)
        return c, cdf, pdf

    def ppf(self, q: float) -> float:
        """The c with P(d <= c) = q."""
        q = float(q)
        if not 0.0 < q < 1.0:
            raise ValueError(f"'q' must be in (0, 1) (got {q!r})")
        return solve_quantile(self.form, q, self.mean, math.sqrt(self.var))

    def tails(self, d: float):
        """(lower, upper, method) for an observed d: P(d <= d_obs), P(d >= d_obs)."""
        lower, upper, method, _ = self.tails_with_logs(d)
        return lower, upper, method

    def tails_with_logs(self, d: float):
        """(lower, upper, method, (log lower, log upper)).

        The larger tail comes from the Imhof inversion (1e-12 absolute); when the
        smaller one is below :data:`TAIL_SWITCH` it is recomputed on the saddle line,
        with relative accuracy down to and below the smallest double (its natural
        logarithm stays finite when the value underflows to 0).
        """
        d = float(d)
        z = (d - self.mean) / math.sqrt(self.var) if self.var > 0 else 0.0
        if abs(z) > 6.0:
            # far outside the body (the normal tail there is 1e-9) the small tail is computed on
            # the saddle line, which is exact at any level, without the Imhof pass first
            return self._refine(d, 0.0 if z < 0 else 1.0, body_known=False)
        return self._refine(d, float(self._body(np.array([d]))[0]), body_known=True)

    def _refine(self, d: float, lower: float, *, body_known: bool):
        """(lower, upper, method, logs) from the Imhof value ``lower`` at d (or, without
        ``body_known``, only its side of the mean): the smaller tail below
        :data:`TAIL_SWITCH` is recomputed on the saddle line."""
        upper = 1.0 - lower
        if min(lower, upper) >= TAIL_SWITCH:
            return lower, upper, "exact (Imhof inversion)", (_log(lower), _log(upper))
        side = 0 if lower < upper else 1
        try:
            res = self.tail(d, ("lower", "upper")[side])
        except (RuntimeError, ValueError, np.linalg.LinAlgError) as err:
            if not body_known:
                lower = float(self._body(np.array([d]))[0])
                upper = 1.0 - lower
            why = str(err).splitlines()[0]
            return (
                lower,
                upper,
                f"Imhof inversion, 1e-12 absolute only (the relative-accuracy tail failed: {why})",
                (_log(lower), _log(upper)),
            )
        small, large = res.value, 1.0 - res.value
        logs = [math.log1p(-small), math.log1p(-small)]
        logs[side] = res.log_value
        lower, upper = (small, large) if side == 0 else (large, small)
        return lower, upper, res.method, tuple(logs)


def _log(p: float) -> float:
    return math.log(p) if p > 0 else -math.inf


def dw_distribution(exog, *, lag: int = 1, blocks=None) -> DurbinWatsonDistribution:
    """The exact null distribution of the Durbin-Watson statistic for design ``exog``.

    ``blocks`` (row-position arrays) gives the within-block statistic used for
    panels: differences are never taken across block boundaries.
    """
    return DurbinWatsonDistribution(exog, lag, blocks=blocks)


# ----------------------------------------------------------------------------
# the test
# ----------------------------------------------------------------------------
@dataclass(frozen=True)
class DurbinWatsonResult(TestResult):
    """The Durbin-Watson test (order ``lag``), with its exact p-value when the design is known."""

    numerator: float = float("nan")
    denominator: float = float("nan")
    n: int = 0
    rank: int | None = None
    k_prime: int | None = None
    k_prime_assumed: bool = False
    lag: int = 1
    null_mean: float = float("nan")
    null_var: float = float("nan")
    lower_tail: float = float("nan")
    upper_tail: float = float("nan")
    log_lower_tail: float = float("nan")
    log_upper_tail: float = float("nan")
    bounds: BoundsResult | None = field(default=None, repr=False)
    bounds_decision: str | None = None

    @property
    def log10_pvalue(self) -> float:
        """log10 of the p-value for the result's alternative, finite even when the p-value
        underflows to 0 (nan without an exact p-value)."""
        lo, up = self.log_lower_tail, self.log_upper_tail
        if self.alternative == "positive":
            v = lo
        elif self.alternative == "negative":
            v = up
        else:
            v = min(0.0, math.log(2.0) + min(lo, up))
        return v / math.log(10.0)

    @property
    def rho_hat(self) -> float:
        """The autocorrelation implied by d, 1 - d/2."""
        return 1.0 - self.statistic / 2.0

    def __str__(self) -> str:
        p = "not available" if math.isnan(self.pvalue) else f"{self.pvalue:.4g}"
        lines = [
            f"{self.name} test (alternative: {self.alternative} autocorrelation)"
            if self.alternative != "two-sided"
            else f"{self.name} test (two-sided)",
            f"  d = {self.statistic:.4f}   n = {self.n}"
            + (
                ""
                if self.k_prime is None
                else f"   k' = {self.k_prime}" + (" (assumed)" if self.k_prime_assumed else "")
            ),
            f"  p-value {p}   method: {self.method}",
        ]
        if not math.isnan(self.null_mean):
            lines.append(f"  under no autocorrelation: E d = {self.null_mean:.4f}, sd = {math.sqrt(self.null_var):.4f}")
        if self.bounds is not None:
            lines.append(
                f"  bounds at alpha {self.bounds.alpha:g}: dL {self.bounds.lower:.4f}, dU {self.bounds.upper:.4f}"
                f" -> {self.bounds_decision}"
            )
        lines.extend(f"  note: {n}" for n in self.notes)
        return "\n".join(lines)


def durbin_watson(
    resid,
    exog=None,
    *,
    alternative: str = "positive",
    lag: int = 1,
    alpha: float = 0.05,
    k_prime: int | None = None,
) -> DurbinWatsonResult:
    """The Durbin-Watson test with the exact p-value for the design ``exog``.

    Parameters
    ----------
    resid : array_like
        OLS residuals in time order.
    exog : array_like, optional
        The n x k design the residuals come from (with its constant column, if
        any).  Without it there is no exact p-value and the bounds dL, dU are
        given instead.
    alternative : {'positive', 'negative', 'two-sided'}
        Positive autocorrelation is the lower tail of d.
    lag : int
        Order s of the statistic: 1 is Durbin-Watson, 4 is Wallis's quarterly test.
    alpha : float
        Level used for the bounds decision.
    k_prime : int, optional
        Without ``exog``: the number of regressors excluding the constant, used
        for the bounds (default 1, marked as assumed, with a note).
    """
    if exog is not None:
        if k_prime is not None:
            raise TypeError("give either 'exog' or 'k_prime', not both (k' comes from the design)")
        return durbin_watson_exact(resid, exog, alternative=alternative, lag=lag, alpha=alpha)[0]
    check_alternative(alternative)
    alpha = check_alpha(alpha)
    k_given = check_optional_int(k_prime, "k_prime", minimum=1)
    d, num, den = _dw_parts(resid, lag)
    n = _as_vector(resid, "resid").size
    notes: list[str] = []
    kp = 1 if k_given is None else k_given
    if k_given is None:
        notes.append(
            "no design given: k' = 1 was assumed for the bounds (one regressor besides a constant); "
            "give the design for an exact p-value"
        )
    else:
        notes.append("no design given: no exact p-value, only the bounds dL and dU")
    bounds = None
    decision = None
    if lag == 1 and n > kp + 2:
        bounds = dw_bounds(n, kp, alpha=alpha, has_constant=True)
        decision = bounds.decision(d, alternative)
    elif lag != 1:
        notes.append(f"bounds are tabulated for lag 1 only; the order-{lag} statistic needs the design")
    return DurbinWatsonResult(
        statistic=d,
        pvalue=float("nan"),
        alternative=alternative,
        df=None,
        method="bounds only",
        name=_name(lag),
        notes=tuple(notes),
        numerator=num,
        denominator=den,
        n=n,
        rank=None,
        k_prime=kp,
        k_prime_assumed=k_given is None,
        lag=lag,
        bounds=bounds,
        bounds_decision=decision,
    )


def durbin_watson_exact(resid, exog, *, alternative="positive", lag=1, alpha=0.05):
    """:func:`durbin_watson` with a design, also returning the distribution it built (for the views)."""
    check_alternative(alternative)
    alpha = check_alpha(alpha)
    d, num, den = _dw_parts(resid, lag)
    e = _as_vector(resid, "resid")
    n = e.size
    notes: list[str] = []
    X = _as_design(exog, n)
    if n - X.shape[1] < 2:
        raise ValueError(f"need more residuals than design columns + 1 (n = {n}, columns = {X.shape[1]})")
    dist = DurbinWatsonDistribution(X, lag)
    notes.extend(dist.notes)
    u = unit_scale(e)
    proj = dist.project(u, X)
    if float(np.dot(proj, proj)) > 1e-12 * float(np.dot(u, u)):
        notes.append(
            "the residuals are not orthogonal to the design; the exact distribution assumes they are "
            "the OLS residuals of this design"
        )
    lower, upper, method, (log_lower, log_upper) = dist.tails_with_logs(d)
    pvalue = tail_pvalue(lower, upper, alternative)
    bounds = decision = None
    kp = dist.k_prime
    if lag == 1 and kp >= 1 and n > dist.rank + 1:
        if n <= BOUNDS_MAX_N:
            bounds = dw_bounds(n, kp, alpha=alpha, has_constant=dist.has_constant)
            decision = bounds.decision(d, alternative)
        else:
            notes.append(f"bounds dL/dU not computed for n > {BOUNDS_MAX_N:,}; the exact p-value replaces them")
    result = DurbinWatsonResult(
        statistic=d,
        pvalue=pvalue,
        alternative=alternative,
        df=(n, dist.rank),
        method=method,
        name=_name(lag),
        notes=tuple(notes),
        numerator=num,
        denominator=den,
        n=n,
        rank=dist.rank,
        k_prime=kp,
        lag=lag,
        null_mean=dist.mean,
        null_var=dist.var,
        lower_tail=lower,
        upper_tail=upper,
        log_lower_tail=log_lower,
        log_upper_tail=log_upper,
        bounds=bounds,
        bounds_decision=decision,
    )
    return result, dist


def _name(lag: int) -> str:
    return "Durbin-Watson" if lag == 1 else f"Durbin-Watson, order {lag}"
