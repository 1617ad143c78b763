"""Preview of the static views: the water-demand scenario as an HTML report and the scale figure as PNG.

Writes benchmarks/out/preview.html, benchmarks/out/preview_png.html (figures as PNG),
benchmarks/out/scale.png and benchmarks/out/correlogram.png, and prints sizes and timings,
including the scale figure at n = 10^5 once its density grid is cached.

Usage: python scripts/render_preview.py [--no-large]
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import statsmodels.api as sm
import statsmodels.formula.api as smf

import lagsight
from lagsight.render import figures, html
from lagsight.render.scale import density_grid
from lagsight.scenarios import water_demand

OUT = Path(__file__).resolve().parents[1] / "benchmarks" / "out"


def timed(fn, *args, **kw):
    t0 = time.perf_counter()
    out = fn(*args, **kw)
    return out, time.perf_counter() - t0


def large_case(n=100_000, seed=0):
    rng = np.random.default_rng(seed)
    X = sm.add_constant(rng.normal(size=(n, 4)))
    u = np.empty(n)
    eps = rng.normal(size=n)
    u[0] = eps[0]
    for t in range(1, n):
        u[t] = 0.05 * u[t - 1] + eps[t]
    idx = pd.date_range("2015-01-01", periods=n, freq="h")
    return sm.OLS(pd.Series(X @ np.ones(5) + u, index=idx), pd.DataFrame(X, index=idx)).fit()


def main(large=True):
    OUT.mkdir(parents=True, exist_ok=True)
    frame = water_demand()
    fit = smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=frame).fit()
    diag = lagsight.diagnose(fit)
    path, s = timed(html.save_html, diag, OUT / "preview.html", overwrite=True)
    print(f"preview.html             {path.stat().st_size / 1024:8.1f} KB   {s:6.2f} s (first render, grid included)")
    _, s = timed(html.diagnosis_html, diag)
    print(f"diagnosis_html again     {'':8}      {s:6.2f} s (grid cached)")
    path, s = timed(html.save_html, diag, OUT / "preview_png.html", overwrite=True, figures="png")
    print(f"preview_png.html         {path.stat().st_size / 1024:8.1f} KB   {s:6.2f} s")
    fig = figures.scale_figure(diag)
    (OUT / "scale.png").write_bytes(figures.figure_to_png(fig, dpi=110))
    (OUT / "correlogram.png").write_bytes(figures.figure_to_png(figures.correlogram_figure(diag.correlogram)))
    print(f"scale figure SVG          {len(figures.figure_to_svg(fig)) / 1024:8.1f} KB")
    if not large:
        return
    big, s = timed(lagsight.diagnose, large_case())
    print(f"diagnose n=1e5            {'':8}      {s:6.2f} s")
    _, s = timed(density_grid, big.distribution)
    print(f"density grid n=1e5 (once) {'':8}      {s:6.2f} s")
    best_fig, best_svg = np.inf, np.inf
    for _ in range(3):
        fig, s1 = timed(figures.scale_figure, big)
        svg, s2 = timed(figures.figure_to_svg, fig)
        best_fig, best_svg = min(best_fig, s1), min(best_svg, s1 + s2)
    print(
        f"scale figure n=1e5        {'':8}      {best_fig * 1000:6.0f} ms build, {best_svg * 1000:.0f} ms build + SVG"
    )
    page, s = timed(html.diagnosis_html, big)
    print(f"diagnosis_html n=1e5     {len(page.encode()) / 1024:8.1f} KB   {s:6.2f} s (grid cached)")


if __name__ == "__main__":
    main(large="--no-large" not in sys.argv)
