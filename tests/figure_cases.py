"""Every figure kind drawn through the public figure functions, and helpers that read their text.

Used by tests/test_figure_text.py.  The data are invented
scenarios (lagsight.scenarios) and seeded random series; nothing here is a reference value.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import statsmodels.api as sm
import statsmodels.formula.api as smf
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.text import Text

import lagsight
from lagsight.render import figures as F
from lagsight.render.export import figure_to_svg
from lagsight.scenarios import water_demand

#: the narrowest column the panel gives a figure (CSS px)
COLUMN_PX = 480
#: a caveat as long as the one drawn when the rows are not in time order
CAVEAT = "Not meaningful: the rows are not in time order, so this does not show serial correlation."
#: the smallest text allowed at that width (CSS px)
MIN_TEXT_PX = 10.0


def design_case(n, k, *, seed=0, rho=0.0, alternative="positive"):
    rng = np.random.default_rng(seed)
    X = sm.add_constant(rng.normal(size=(n, k)))
    u = np.zeros(n)
    eps = rng.normal(size=n)
    for t in range(1, n):
        u[t] = rho * u[t - 1] + eps[t]
    fit = sm.OLS(X @ np.ones(k + 1) + u, X).fit()
    return lagsight.diagnose(fit.resid, exog=X, alternative=alternative)


def seasonal_series(n=720, period=24, seed=3):
    rng = np.random.default_rng(seed)
    e = rng.normal(size=n)
    for t in range(period, n):
        e[t] += 0.5 * e[t - period]
    return e


def figure_kinds() -> dict[str, Figure]:
    """name -> a drawn figure, one per kind the panel and the HTML report show."""
    water_fit = smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=water_demand()).fit()
    water = lagsight.diagnose(water_fit)
    water_two = lagsight.diagnose(water_fit, alternative="two-sided")
    low = design_case(60, 2, seed=4, rho=0.8)  # d well inside the evidence region
    high = design_case(60, 2, seed=5, rho=-0.7)
    small_two = design_case(40, 3, seed=6, alternative="two-sided")
    bare = lagsight.diagnose(np.random.default_rng(7).normal(size=120))
    seasonal = lagsight.diagnose(seasonal_series(), period=24, max_lag=72)
    frame = water_demand(400)
    frame = frame.drop(frame.index[[50, 51, 200, 300]])
    gappy = lagsight.diagnose(smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=frame).fit())
    rng = np.random.default_rng(12)
    gframe = pd.DataFrame({"g": np.repeat([f"site {i}" for i in range(8)], 30), "x": rng.normal(size=240)})
    gframe["y"] = 1 + gframe["x"] + rng.normal(size=240)
    grouped = lagsight.diagnose(gframe, response="y", predictors=["x"], groups="g")
    many = pd.DataFrame({"g": np.repeat([f"g{i}" for i in range(60)], 20), "x": rng.normal(size=1200)})
    many["y"] = many["x"] + rng.normal(size=1200)
    many_groups = lagsight.diagnose(many, response="y", predictors=["x"], groups="g")
    from lagsight.stats.power import dw_power

    shuffled_frame = water_demand(200).sample(frac=1.0, random_state=1)
    shuffled = lagsight.diagnose(smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=shuffled_frame).fit())

    curve = dw_power(design_case(60, 2, seed=11).data.exog, n_sim=200)
    return {
        "scale close-up": F.scale_figure(water),
        "scale two-sided close-up": F.scale_figure(water_two),
        "scale low d": F.scale_figure(low),
        "scale high d": F.scale_figure(high),
        "scale two-sided": F.scale_figure(small_two),
        "scale forced close-up": F.scale_figure(low, zoom=True),
        "scale bare residuals": F.scale_figure(bare),
        "bounds": F.bounds_figure(lagsight.dw_bounds(20, 1)),
        "bounds close-up": F.bounds_figure(lagsight.dw_bounds(1500, 3)),
        "correlogram seasonal": F.correlogram_figure(seasonal.correlogram, max_lag=72, period=24),
        "correlogram bartlett": F.correlogram_figure(water.correlogram, max_lag=20, band="bartlett"),
        "lag scatter": F.lag_scatter_figure(water.data.resid, lag=1),
        "residuals time gaps": F.residuals_figure(gappy),
        "residuals positions": F.residuals_figure(bare),
        "groups": F.groups_figure(grouped.groups),
        "groups histogram": F.groups_figure(many_groups.groups),
        "power": F.power_figure(curve),
        "correlogram with caveat": F.correlogram_figure(seasonal.correlogram, max_lag=48, period=24, caveat=CAVEAT),
        "lag scatter with caveat": F.lag_scatter_figure(bare, lag=2, caveat=CAVEAT),
        "residuals out of order": F.residuals_figure(shuffled),
    }


def drawn_texts(fig: Figure) -> list[Text]:
    """Every visible, non-empty Text the figure draws: figure texts, legends, titles, axis labels,
    annotations and the tick labels of ticks inside the view limits."""
    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    fig.canvas.draw()
    tick_in_view = {}
    for ax in fig.axes:
        for axis, lim in ((ax.xaxis, ax.get_xlim()), (ax.yaxis, ax.get_ylim())):
            lo, hi = min(lim), max(lim)
            for tick in axis.get_major_ticks() + axis.get_minor_ticks():
                inside = lo - 1e-9 <= tick.get_loc() <= hi + 1e-9
                tick_in_view[id(tick.label1)] = tick_in_view[id(tick.label2)] = inside
    return [t for t in fig.findobj(Text) if t.get_visible() and t.get_text().strip() and tick_in_view.get(id(t), True)]


def svg_font_sizes(fig: Figure) -> tuple[float, list[float]]:
    """(natural width in CSS px, font sizes in SVG user units) of the exported SVG."""
    svg = figure_to_svg(fig)
    width_pt = float(re.search(r'<svg[^>]*\swidth="([\d.]+)pt"', svg).group(1))
    view_w = float(re.search(r'viewBox="[\d.]+ [\d.]+ ([\d.]+) [\d.]+"', svg).group(1))
    sizes = [float(s) for s in re.findall(r"font-size:\s*([\d.]+)px", svg)]
    sizes += [float(s) for s in re.findall(r'font-size="([\d.]+)"', svg)]
    # user units are pt (the viewBox spans width_pt); CSS px at natural size = units * width_px / view_w
    width_px = width_pt * 96 / 72
    return width_px, [s * width_px / view_w for s in sizes]


def overlaps(fig: Figure, slack: float = 1.0) -> list[tuple[str, str]]:
    """Pairs of drawn texts whose boxes overlap by more than ``slack`` px (touching is allowed)."""
    texts = drawn_texts(fig)
    renderer = fig.canvas.get_renderer()
    boxes = [(t, t.get_window_extent(renderer)) for t in texts]
    hits = []
    for i, (a, ba) in enumerate(boxes):
        for b, bb in boxes[i + 1 :]:
            w = min(ba.x1, bb.x1) - max(ba.x0, bb.x0)
            h = min(ba.y1, bb.y1) - max(ba.y0, bb.y0)
            if w > slack and h > slack:
                hits.append((a.get_text(), b.get_text()))
    return hits


def outside_figure(fig: Figure, slack: float = 1.0) -> list[str]:
    """Drawn texts that stick out of the figure (they would be cut off)."""
    texts = drawn_texts(fig)
    renderer = fig.canvas.get_renderer()
    W, H = fig.bbox.width, fig.bbox.height
    out = []
    for t in texts:
        b = t.get_window_extent(renderer)
        if b.x0 < -slack or b.y0 < -slack or b.x1 > W + slack or b.y1 > H + slack:
            out.append(t.get_text())
    return out
