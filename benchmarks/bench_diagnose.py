"""Benchmark of diagnose(): the full battery at n = 10^5, k = 5, and a 2,000-group panel.

Usage: python benchmarks/bench_diagnose.py [--quick]
"""

from __future__ import annotations

import sys
import time

import numpy as np
import pandas as pd
import statsmodels.api as sm

import lagsight


def single(n, k, rng):
    X = sm.add_constant(rng.normal(size=(n, k - 1)))
    u = np.zeros(n)
    eps = rng.normal(size=n)
    for t in range(1, n):
        u[t] = 0.3 * u[t - 1] + eps[t]
    idx = pd.date_range("2000-01-01", periods=n, freq="h")
    y = pd.Series(X @ np.ones(k) + u, index=idx)
    return sm.OLS(y, pd.DataFrame(X, index=idx)).fit()


def panel(groups, rows, rng):
    g = np.repeat(np.arange(groups), rows)
    x = rng.normal(size=groups * rows)
    y = 1 + x + rng.normal(size=groups * rows)
    return pd.DataFrame({"g": g, "x": x, "y": y})


def timed(fn, *args, **kw):
    t0 = time.perf_counter()
    out = fn(*args, **kw)
    return out, time.perf_counter() - t0


def main(quick=False):
    rng = np.random.default_rng(0)
    print(f"{'case':<40} {'seconds':>8}")
    for n in [10**4] if quick else [10**4, 10**5]:
        fit = single(n, 5, rng)
        d, s = timed(lagsight.diagnose, fit)
        print(f"{f'diagnose n={n} k=5 (full battery)':<40} {s:>8.2f}   {d.verdict.finding}")
    groups = 200 if quick else 2000
    frame = panel(groups, 200, rng)
    d, s = timed(lagsight.diagnose, frame, response="y", predictors=["x"], groups="g")
    print(f"{f'panel {groups} groups x 200 rows':<40} {s:>8.2f}   pooled d {d.groups.pooled_dw:.4f}")


if __name__ == "__main__":
    main(quick="--quick" in sys.argv)
