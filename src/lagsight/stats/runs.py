"""The Wald-Wolfowitz runs test on residual signs, free of distributional assumptions.

Too few runs of one sign signals positive autocorrelation (lower tail); too many,
negative.  Small samples use the exact runs distribution.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from ._arrays import as_vector, check_int, readonly
from .results import TestResult, check_alternative, tail_pvalue

__all__ = ["RunsDistribution", "RunsResult", "runs_distribution", "runs_test"]


@dataclass(frozen=True)
class RunsResult(TestResult):
    """Runs test on residual signs; ``statistic`` is z = (runs - E[runs]) / sd."""

    runs: int = 0
    expected_runs: float = math.nan
    n_positive: int = 0
    n_negative: int = 0
    zeros_dropped: int = 0
    #: P(R <= runs) and P(R >= runs): any alternative's p-value follows from these
    lower_tail: float = math.nan
    upper_tail: float = math.nan


def _log_comb(a, b):
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    out = np.full(np.broadcast(a, b).shape, -np.inf)
    ok = (b >= 0) & (b <= a)
    a, b = np.broadcast_arrays(a, b)
    out[ok] = special.gammaln(a[ok] + 1) - special.gammaln(b[ok] + 1) - special.gammaln(a[ok] - b[ok] + 1)
    return out


@dataclass(frozen=True, eq=False)
class RunsDistribution:
    """Exact null distribution of the number of runs: P(R = ``runs[i]``) = ``pmf[i]``."""

    runs: np.ndarray
    pmf: np.ndarray


def runs_distribution(n1: int, n2: int) -> RunsDistribution:
    """Exact null pmf of the number of runs for n1 of one sign and n2 of the other.

    The runs go from 2 to n1 + n2.  P(R=2k) = 2 C(n1-1,k-1) C(n2-1,k-1) / C(n,n1);
    P(R=2k+1) = [C(n1-1,k) C(n2-1,k-1) + C(n1-1,k-1) C(n2-1,k)] / C(n,n1).
    """
    n1 = check_int(n1, "n1", minimum=1)
    n2 = check_int(n2, "n2", minimum=1)
    r = np.arange(2, n1 + n2 + 1)
    k = r // 2
    even = r % 2 == 0
    log_total = _log_comb(n1 + n2, n1)
    with np.errstate(invalid="ignore"):
        ev = np.log(2.0) + _log_comb(n1 - 1, k - 1) + _log_comb(n2 - 1, k - 1)
        od = np.logaddexp(
            _log_comb(n1 - 1, k) + _log_comb(n2 - 1, k - 1), _log_comb(n1 - 1, k - 1) + _log_comb(n2 - 1, k)
        )
    pmf = np.exp(np.where(even, ev, od) - log_total)
    return RunsDistribution(readonly(r), readonly(pmf))


def runs_test(resid, *, alternative="positive", method="auto") -> RunsResult:
    """Wald-Wolfowitz runs test on the signs of the residuals.

    Too FEW runs signals positive autocorrelation, so 'positive' uses the lower
    tail.  ``method='auto'`` uses the exact runs distribution unless both sign
    counts exceed 20, then the normal approximation (no continuity correction).
    Zero residuals carry no sign and are dropped (with a note).
    """
    check_alternative(alternative)
    if method not in ("auto", "exact", "normal"):
        raise ValueError(f"'method' must be one of 'auto', 'exact', 'normal' (got {method!r})")
    e = as_vector(resid, "resid", min_len=2)
    signs = e[e != 0] > 0
    dropped = e.shape[0] - signs.shape[0]
    n1 = int(signs.sum())
    n2 = int(signs.shape[0] - n1)
    if n1 == 0 or n2 == 0:
        raise ValueError(f"'resid' must have both positive and negative values (got {n1} positive, {n2} negative)")
    runs = int(1 + np.count_nonzero(signs[1:] != signs[:-1]))
    N = n1 + n2
    mean = 2.0 * n1 * n2 / N + 1.0
    var = 2.0 * n1 * n2 * (2.0 * n1 * n2 - N) / (N**2 * (N - 1.0))
    z = (runs - mean) / math.sqrt(var) if var > 0 else math.nan
    use_exact = method == "exact" or (method == "auto" and min(n1, n2) <= 20) or var <= 0
    if use_exact:
        dist = runs_distribution(n1, n2)
        r, pmf = dist.runs, dist.pmf
        lower = min(1.0, float(pmf[r <= runs].sum()))
        upper = min(1.0, float(pmf[r >= runs].sum()))
        how = "exact runs distribution"
    else:
        lower, upper = float(stats.norm.cdf(z)), float(stats.norm.sf(z))
        how = "normal approximation, no continuity correction"
    notes = []
    if dropped:
        notes.append(f"{dropped} zero residual(s) dropped: they have no sign.")
    return RunsResult(
        statistic=float(z),
        pvalue=tail_pvalue(lower, upper, alternative),
        alternative=alternative,
        df=None,
        method=how,
        name="Runs test",
        notes=tuple(notes),
        runs=runs,
        expected_runs=mean,
        n_positive=n1,
        n_negative=n2,
        zeros_dropped=dropped,
        lower_tail=lower,
        upper_tail=upper,
    )
