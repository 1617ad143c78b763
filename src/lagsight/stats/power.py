"""Power of the exact Durbin-Watson test against stationary AR(1) errors.

For each autocorrelation rho the errors u_t = rho u_{t-1} + eps_t, with
u_0 ~ N(0, 1/(1 - rho^2)), are simulated for many series at once, the design is
projected out with its orthonormal basis (e = u - Q (Q'u), never an n x n
matrix), d is computed and compared with the exact critical value of the test
for this design.  The same innovations eps are reused for every rho (common
random numbers), so the curve is smooth and differences along it are precise.
Work is done in chunks of series so memory stays bounded for any n.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import signal

from ._arrays import check_alpha, check_int
from .durbin_watson import _orthonormal_basis, dw_distribution
from .results import check_alternative

__all__ = ["PowerCurve", "dw_power"]

#: power a test is commonly required to reach (common practice: 80%)
TARGET_POWER = 0.8
#: float64 entries per simulated block (32 MB); at most about five blocks are alive at once
_CHUNK_ELEMENTS = 4_000_000
_MIN_SIM = 100


# ----------------------------------------------------------------------------
# result
# ----------------------------------------------------------------------------
def _readonly(a) -> np.ndarray:
    a = np.array(a, dtype=float, copy=True)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class PowerCurve:
    """Simulated power of the exact Durbin-Watson test along a grid of AR(1) coefficients.

    Attributes
    ----------
    rhos, power, se : ndarray
        AR(1) coefficients (ascending), rejection rates and their Monte Carlo
        standard errors sqrt(p (1 - p) / n_sim).
    critical_value : float or tuple of float
        Exact critical value of d: reject when d <= it ('positive'), d >= it
        ('negative'); for 'two-sided' the pair (lower, upper) of alpha/2 points.
    alpha, n, k, n_sim, seed : level, observations, design rank, draws per rho, seed.
    method : str
        How the power was obtained.
    min_detectable_rho : float
        Nearest-to-zero rho, on the side of the alternative, where the linear
        interpolation of the curve reaches power 0.8; NaN if it never does.
    notes : tuple of str
        Findings and caveats, as sentences.
    alternative : str
        'positive', 'negative' or 'two-sided'.
    lag : int
        Order of the Durbin-Watson statistic.
    """

    rhos: np.ndarray
    power: np.ndarray
    se: np.ndarray
    critical_value: float | tuple
    alpha: float
    n: int
    rank: int
    n_sim: int
    seed: int
    method: str
    min_detectable_rho: float
    notes: tuple = ()
    alternative: str = "positive"
    lag: int = 1

    def _rule(self) -> str:
        cv: Any = self.critical_value
        if self.alternative == "two-sided":
            return f"reject when d <= {cv[0]:.4f} or d >= {cv[1]:.4f}"
        return f"reject when d {'<=' if self.alternative == 'positive' else '>='} {cv:.4f}"

    def __str__(self) -> str:
        side = "two-sided" if self.alternative == "two-sided" else f"{self.alternative} autocorrelation"
        name = "Durbin-Watson" if self.lag == 1 else f"Durbin-Watson, order {self.lag}"
        lines = [
            f"Power of the {name} test ({side}, alpha {self.alpha:g})",
            f"  n = {self.n}   rank = {self.rank}   {self._rule()} (exact critical value)",
            f"  {'rho':>7}  {'power':>7}  {'se':>7}",
        ]
        rows: list[int | None] = list(range(self.rhos.size))
        if len(rows) > 25:
            rows = rows[:10] + [None] + rows[-10:]
        for i in rows:
            if i is None:
                lines.append(f"  {'...':>7}")
                continue
            lines.append(f"  {self.rhos[i]:7.3f}  {self.power[i]:7.4f}  {self.se[i]:7.4f}")
        if math.isnan(self.min_detectable_rho):
            lines.append(f"  power {TARGET_POWER:g} is not reached on this grid")
        else:
            lines.append(f"  power reaches {TARGET_POWER:g} at rho = {self.min_detectable_rho:.3f}")
        lines.append(f"  method: {self.method}")
        lines.extend(f"  note: {note}" for note in self.notes)
        return "\n".join(lines)


# ----------------------------------------------------------------------------
# validation
# ----------------------------------------------------------------------------
def _check_rhos(rhos) -> np.ndarray:
    try:
        r = np.asarray(rhos, dtype=float)
    except (TypeError, ValueError):
        raise TypeError(f"'rhos' must be a 1-D array of numbers (got {type(rhos).__name__})") from None
    r = np.atleast_1d(r)
    if r.ndim != 1 or r.size == 0:
        raise ValueError(f"'rhos' must be a non-empty 1-D array (got shape {r.shape})")
    if not np.all(np.isfinite(r)):
        raise ValueError(f"'rhos' must be finite (got {r[~np.isfinite(r)][0]})")
    bad = r[np.abs(r) >= 1.0]
    if bad.size:
        raise ValueError(f"'rhos' must lie in (-1, 1) for stationary AR(1) errors (got {bad[0]:g})")
    return r


# ----------------------------------------------------------------------------
# simulation
# ----------------------------------------------------------------------------
def _ar1(eps: np.ndarray, rho: float) -> np.ndarray:
    """Stationary AR(1) paths along axis 1 driven by ``eps`` (m x n), u_0 = eps_0 / sqrt(1 - rho^2)."""
    if rho == 0.0:
        return eps
    # lfilter's y_0 = x_0 + zi, so zi rescales the first value to the stationary variance
    zi = eps[:, :1] * (1.0 / math.sqrt(1.0 - rho * rho) - 1.0)
    u, _ = signal.lfilter([1.0], [1.0, -rho], eps, axis=1, zi=zi)
    return u


def _dw_of_projected(u: np.ndarray, basis_t: np.ndarray, lag: int, work=None) -> np.ndarray:
    """Order-``lag`` d of the OLS residuals of each row of ``u``; ``basis_t`` is k x n orthonormal.

    ``work`` is an optional pair of scratch arrays shaped like ``u`` and like
    its lag-differences, reused across calls to avoid fresh allocations.
    """
    m, n = u.shape
    e_buf, d_buf = work if work is not None else (np.empty((m, n)), np.empty((m, n - lag)))
    e_buf, d_buf = e_buf[:m], d_buf[:m]
    if basis_t.shape[0]:
        np.matmul(u @ basis_t.T, basis_t, out=e_buf)
        e = np.subtract(u, e_buf, out=e_buf)
    else:
        e = u
    diff = np.subtract(e[:, lag:], e[:, :-lag], out=d_buf)
    return np.einsum("ij,ij->i", diff, diff) / np.einsum("ij,ij->i", e, e)


def _rejections(d: np.ndarray, crit, alternative: str) -> int:
    if alternative == "positive":
        return int(np.count_nonzero(d <= crit))
    if alternative == "negative":
        return int(np.count_nonzero(d >= crit))
    return int(np.count_nonzero((d <= crit[0]) | (d >= crit[1])))


def _crossing(r: np.ndarray, p: np.ndarray, target: float) -> float:
    """First r, scanning in the given order, where the linear interpolant of p reaches ``target``."""
    hit = np.flatnonzero(p >= target)
    if not hit.size:
        return float("nan")
    i = int(hit[0])
    if i == 0:
        return float(r[0])
    frac = (target - p[i - 1]) / (p[i] - p[i - 1])
    return float(r[i - 1] + frac * (r[i] - r[i - 1]))


def _min_detectable(r: np.ndarray, p: np.ndarray, alternative: str) -> float:
    """``r`` ascending and unique; the rho nearest zero on the side of the alternative."""
    if alternative == "positive":
        return _crossing(r, p, TARGET_POWER)
    if alternative == "negative":
        return _crossing(r[::-1], p[::-1], TARGET_POWER)
    # two-sided: walk outwards from zero on each side, keep the nearer crossing
    p0 = float(np.interp(0.0, r, p)) if r[0] < 0.0 < r[-1] else None
    pos, neg = r >= 0.0, r <= 0.0
    best = float("nan")
    for rs, ps in ((r[pos], p[pos]), (r[neg][::-1], p[neg][::-1])):
        if p0 is not None and 0.0 not in rs:
            rs, ps = np.r_[0.0, rs], np.r_[p0, ps]
        cand = _crossing(rs, ps, TARGET_POWER) if rs.size else float("nan")
        if not math.isnan(cand) and (math.isnan(best) or abs(cand) < abs(best)):
            best = cand
    return best


# ----------------------------------------------------------------------------
# public function
# ----------------------------------------------------------------------------
#: the AR(1) coefficients of the default power curve
DEFAULT_RHOS = tuple(np.linspace(0.0, 0.9, 10))


def dw_power(
    exog,
    *,
    alpha: float = 0.05,
    rhos=DEFAULT_RHOS,
    alternative: str = "positive",
    n_sim: int = 2000,
    seed: int = 12345,
    lag: int = 1,
) -> PowerCurve:
    """Monte Carlo power of the exact Durbin-Watson test for design ``exog`` under AR(1) errors.

    Parameters
    ----------
    exog : array_like
        The n x k design (with its constant column, if any).
    alpha : float
        Level of the test.
    rhos : array_like
        AR(1) coefficients in (-1, 1); sorted ascending in the result.
    alternative : {'positive', 'negative', 'two-sided'}
        Direction of the test; 'positive' rejects for small d.
    n_sim : int
        Simulated series per rho (at least 100); the same innovations serve every rho.
    seed : int
        Seed of the random generator; equal inputs give equal curves.
    lag : int
        Order of the statistic.

    Returns
    -------
    PowerCurve
    """
    if exog is None:
        raise TypeError("'exog' must be a 2-D array of numbers (got None)")
    alpha = check_alpha(alpha)
    r = _check_rhos(rhos)
    check_alternative(alternative)
    n_sim = check_int(n_sim, "n_sim", minimum=_MIN_SIM)
    seed = check_int(seed, "seed", minimum=0)

    dist = dw_distribution(exog, lag=lag)
    n, k, lag = dist.n, dist.rank, dist.lag
    notes = list(dist.notes)
    if alternative == "positive":
        crit: float | tuple[float, float] = dist.ppf(alpha)
    elif alternative == "negative":
        crit = dist.ppf(1.0 - alpha)
    else:
        crit = (dist.ppf(alpha / 2.0), dist.ppf(1.0 - alpha / 2.0))

    order = np.argsort(r, kind="stable")
    if np.any(order != np.arange(r.size)):
        notes.append("'rhos' was sorted into ascending order")
    r = r[order]
    uniq, inverse = np.unique(r, return_inverse=True)

    basis_t, _, _ = _orthonormal_basis(np.asarray(exog, dtype=float).reshape(n, -1))
    rng = np.random.default_rng(seed)
    rows = max(1, min(n_sim, _CHUNK_ELEMENTS // n))
    hits = np.zeros(uniq.size, dtype=np.int64)
    work = (np.empty((rows, n)), np.empty((rows, n - lag)))
    done = 0
    while done < n_sim:
        m = min(rows, n_sim - done)
        eps = rng.standard_normal((m, n))
        for j, rho in enumerate(uniq):
            d = _dw_of_projected(_ar1(eps, float(rho)), basis_t, lag, work)
            hits[j] += _rejections(d, crit, alternative)
        done += m
    p_uniq = hits / n_sim
    power = p_uniq[inverse]
    se = np.sqrt(power * (1.0 - power) / n_sim)

    mdr = _min_detectable(uniq, p_uniq, alternative)
    if math.isnan(mdr):
        i = int(np.argmax(p_uniq))
        notes.append(
            f"power stays below {TARGET_POWER:g} for every rho studied (largest {p_uniq[i]:.3f} at "
            f"rho = {uniq[i]:g}); min_detectable_rho is NaN"
        )
    else:
        first = uniq[0] if alternative == "positive" else uniq[-1] if alternative == "negative" else None
        if first is not None and mdr == first and first != 0.0:
            notes.append(
                f"power is already {TARGET_POWER:g} or more at rho = {first:g}, the first value studied; "
                "a rho nearer zero may reach it too"
            )
    method = (
        f"Monte Carlo with {n_sim} draws of AR(1) errors per rho, seed {seed}, against the exact "
        "critical value (the same innovations for every rho)"
    )
    return PowerCurve(
        rhos=_readonly(r),
        power=_readonly(power),
        se=_readonly(se),
        critical_value=crit if isinstance(crit, tuple) else float(crit),
        alpha=alpha,
        n=n,
        rank=k,
        n_sim=n_sim,
        seed=seed,
        method=method,
        min_detectable_rho=mdr,
        notes=tuple(notes),
        alternative=alternative,
        lag=lag,
    )
