"""The exact null density of d for display, computed once per distribution and cached.

Each exact density value costs one characteristic-function inversion, so the
curve is built from :data:`DENSITY_NODES` exact values (``dist.grid``) and
densified to :data:`GRID_POINTS` by cubic Hermite interpolation of the log
density.  The cache is keyed weakly by the distribution object.
"""

from __future__ import annotations

import math
import weakref

import numpy as np

__all__ = ["density_grid", "exact_point", "grid_entry", "GRID_POINTS", "DENSITY_NODES", "GRID_SPAN_SD"]

#: points of the displayed density curve
GRID_POINTS = 161
#: exact density evaluations behind it (each costs one characteristic-function inversion)
DENSITY_NODES = 33
#: the curve covers mean +/- this many standard deviations (clipped to [0, 4])
GRID_SPAN_SD = 6.0

_GRIDS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def _log_hermite(c: np.ndarray, pdf: np.ndarray, num: int) -> tuple[np.ndarray, np.ndarray]:
    """Densify an even grid of exact density values by cubic Hermite interpolation of log pdf.

    Slopes are centred differences, exact for a quadratic log density (the
    normal shape d approaches), so the curve between nodes is smooth and close
    to exact; intervals touching a zero density are interpolated linearly.
    """
    x = np.linspace(c[0], c[-1], num)
    if c.size < 3:
        return x, np.interp(x, c, pdf)
    h = c[1] - c[0]
    pos = pdf > 0
    floor = pdf[pos].min() if pos.any() else 1.0
    logp = np.log(np.where(pos, pdf, floor))
    slope = np.gradient(logp, h)
    i = np.clip(((x - c[0]) / h).astype(int), 0, c.size - 2)
    t = (x - c[i]) / h
    t2, t3 = t * t, t * t * t
    y = (
        (2 * t3 - 3 * t2 + 1) * logp[i]
        + (t3 - 2 * t2 + t) * h * slope[i]
        + (-2 * t3 + 3 * t2) * logp[i + 1]
        + (t3 - t2) * h * slope[i + 1]
    )
    out = np.exp(y)
    edge = ~(pos[i] & pos[i + 1])
    out[edge] = np.interp(x[edge], c, pdf)
    return x, out


def grid_entry(dist, num: int = GRID_POINTS) -> dict:
    """The cache entry of ``dist``: display grid, exact nodes, quantiles, mean and sd (built on first use)."""
    entry = _GRIDS.get(dist)
    if entry is None or entry["num"] != num:
        mean, sd = float(dist.mean), math.sqrt(max(float(dist.var), 0.0))
        lo, hi = max(0.0, mean - GRID_SPAN_SD * sd), min(4.0, mean + GRID_SPAN_SD * sd)
        c, cdf, pdf = dist.grid(DENSITY_NODES, lo, hi)
        x, dens = _log_hermite(np.asarray(c, float), np.nan_to_num(np.asarray(pdf, float)), num)
        entry = {"num": num, "grid": (x, dens), "nodes": (c, cdf, pdf), "points": {}, "mean": mean, "sd": sd}
        _GRIDS[dist] = entry
    return entry


def density_grid(dist, num: int = GRID_POINTS):
    """(c, pdf): the exact null density of d over its bulk for display, computed once per distribution.

    The curve has ``num`` points interpolated (in log density) from
    :data:`DENSITY_NODES` exact evaluations of ``dist.grid``.
    """
    return grid_entry(dist, num)["grid"]


def exact_point(dist, q: float) -> float:
    """The exact q-quantile of d for this design (cached with the grid)."""
    points = grid_entry(dist)["points"]
    if q not in points:
        points[q] = float(dist.ppf(q))
    return points[q]
