"""Benchmark of the exact Durbin-Watson engine.

Prints wall time and peak traced memory for the exact p-value at n = 10^3 .. 10^6
(k = 4 and k = 10 columns including the constant), the dense method (n x n
matrices, LAPACK eigenvalues, Imhof integral) at n = 500 .. 4000 with the speed
ratio measured in the same run, and the time of one pair of bounds.

Usage: python benchmarks/bench_engine.py [--quick]
"""

from __future__ import annotations

import sys
import time
import tracemalloc

import numpy as np

import lagsight
from lagsight.stats import imhof_cdf
from lagsight.stats.bounds import _bounds_cached


def design(n, k, rng):
    return np.column_stack([np.ones(n), rng.normal(size=(n, k - 1))])


def residuals(X, rng):
    y = X @ np.ones(X.shape[1]) + rng.normal(size=X.shape[0])
    return y - X @ np.linalg.lstsq(X, y, rcond=None)[0]


def exact_pvalue(e, X):
    d = lagsight.stats.dw_statistic(e)
    dist = lagsight.dw_distribution(X)
    lower, _, _ = dist.tails(d)
    return lower


def dense_pvalue(e, X):
    n = X.shape[0]
    Q, _ = np.linalg.qr(X)
    M = np.eye(n) - Q @ Q.T
    A = 2 * np.eye(n) - np.eye(n, k=1) - np.eye(n, k=-1)
    A[0, 0] = A[-1, -1] = 1
    lam = np.linalg.eigvalsh(M @ A @ M)[X.shape[1] :]
    d = float(e @ A @ e / (e @ e))
    return imhof_cdf(lam - d, 0.0)


def measure(fn, *args, repeat=1):
    """Best wall time of ``repeat`` untraced runs, then peak traced memory of one more run.

    tracemalloc slows allocation-heavy code, so time and memory are measured apart.
    """
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn(*args)
        best = min(best, time.perf_counter() - t0)
    tracemalloc.start()
    fn(*args)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return out, best, peak / 2**20


def _once(fn, *args):
    t0 = time.perf_counter()
    out = fn(*args)
    return out, time.perf_counter() - t0, float("nan")


def main(quick=False):
    rng = np.random.default_rng(1)
    print("exact p-value (dw_distribution + tails): best wall time of 3, peak traced memory of one run")
    print(f"{'n':>9} {'k':>3} {'seconds':>9} {'peak MB':>9} {'X MB':>7}  p-value")
    sizes = [10**3, 10**4, 10**5] + ([] if quick else [10**6])
    for n in sizes:
        for k in (4, 10):
            X = design(n, k, rng)
            e = residuals(X, rng)
            p, wall, peak = measure(exact_pvalue, e, X, repeat=3)
            print(f"{n:>9} {k:>3} {wall:>9.3f} {peak:>9.1f} {X.nbytes / 2**20:>7.1f}  {p:.6f}")
    print()
    print("dense method vs exact engine, same run (k = 4)")
    print(f"{'n':>6} {'dense s':>9} {'engine s':>9} {'ratio':>8} {'|dp|':>9}")
    for n in [500, 1000, 2000] + ([] if quick else [4000]):
        X = design(n, 4, rng)
        e = residuals(X, rng)
        p_dense, t_dense, _ = measure(dense_pvalue, e, X) if n < 4000 else _once(dense_pvalue, e, X)
        p_fast, t_fast, _ = measure(exact_pvalue, e, X, repeat=5)
        print(f"{n:>6} {t_dense:>9.3f} {t_fast:>9.4f} {t_dense / t_fast:>8.0f} {abs(p_dense - p_fast):>9.1e}")
    print()
    print("far-tail p-values (saddle-line inversion): distribution built once, then each tail cold")
    print("(a fresh distribution per row, so the Chebyshev moments are computed inside the timing)")
    print(
        f"{'n':>9} {'k':>3} {'d':>6} {'build s':>8} {'tail s':>8}  {'p (lower tail)':>16} {'log10 p':>10}"
        "  rel. error est."
    )
    tail_sizes = [10**3, 10**5] + ([] if quick else [10**6])
    for n in tail_sizes:
        k = 10 if n == 10**6 else 5
        X = design(n, k, rng)
        for d in (2 - 6 / n**0.5, 2 - 12 / n**0.5, 2 - 30 / n**0.5, 0.5):
            t0 = time.perf_counter()
            dist = lagsight.dw_distribution(X)
            t_build = time.perf_counter() - t0
            t0 = time.perf_counter()
            res = dist.tail(d, "lower")
            t_tail = time.perf_counter() - t0
            print(
                f"{n:>9} {k:>3} {d:>6.3f} {t_build:>8.3f} {t_tail:>8.3f}  {res.value:>16.6e} "
                f"{res.log_value / np.log(10):>10.2f}  {res.error:.1e}"
            )
    print()
    print("one pair of bounds dL, dU (alpha 0.05, uncached)")
    print(f"{'n':>8} {'k':>3} {'ms':>8}   dL       dU")
    for n, k in [(15, 1), (100, 5), (150, 3), (1000, 5), (10_000, 10), (100_000, 5)]:
        _bounds_cached.cache_clear()
        t0 = time.perf_counter()
        lo, up = _bounds_cached(n, k, 0.05, True)
        ms = (time.perf_counter() - t0) * 1000
        print(f"{n:>8} {k:>3} {ms:>8.1f}   {lo:.4f}   {up:.4f}")


if __name__ == "__main__":
    main(quick="--quick" in sys.argv)
