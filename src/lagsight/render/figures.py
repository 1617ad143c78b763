"""matplotlib Figures for every lagsight view (never pyplot state).

Each function returns a new :class:`matplotlib.figure.Figure` built inside a
local ``rc_context``; ``fig.lagsight_caption`` holds a one-paragraph caption
(what is drawn, what was thinned for display).  Dense series are thinned for
display only: the statistics always use every observation.
"""

from __future__ import annotations

import math
import re
import textwrap

import matplotlib.dates as mdates
import numpy as np
import pandas as pd
from matplotlib.artist import Artist
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.ticker import ScalarFormatter
from scipy import stats

from ..order import _time_axis
from ..stats._arrays import scaled
from ..stats.correlogram import Correlogram, lag_pairs, ljung_box_q
from ..stats.power import TARGET_POWER
from .export import figure_to_png, figure_to_png_data_uri, figure_to_svg
from .scale import ALTERNATIVE_WORDS, bounds_figure, density_grid, scale_figure
from .style import FIG_WIDTH, MIN_FONT_PT, PALETTE, figure_rc, figure_title
from .text import format_pvalue, order_caveat

__all__ = [
    "scale_figure",
    "bounds_figure",
    "correlogram_figure",
    "lag_scatter_figure",
    "residuals_figure",
    "power_figure",
    "groups_figure",
    "figure_to_svg",
    "figure_to_png",
    "figure_to_png_data_uri",
    "density_grid",
    "MAX_POINTS",
    "BANDS",
]

#: most points drawn in a residual or scatter plot (display only)
MAX_POINTS = 2000
#: above this many markers a scatter is rasterised inside the SVG to keep it small
RASTER_MARKERS = 300
BANDS = ("white", "bartlett")


def _plain(text) -> str:
    """A user string for a matplotlib Text: dollar signs stay literal (no mathtext)."""
    return str(text).replace("$", r"\$")


_DIGITS = re.compile(r"(?<![\d.])\d{4,}")


class _GroupedFormatter(ScalarFormatter):
    """matplotlib's plain tick labels with thousands separators (2,016, never 2016)."""

    def __call__(self, x, pos=None):
        return _DIGITS.sub(lambda m: f"{int(m.group()):,}", super().__call__(x, pos))


def _group_digits(*axes) -> None:
    """Tick labels with thousands separators on these axes (x and y)."""
    for ax in axes:
        for axis in (ax.xaxis, ax.yaxis):
            if isinstance(axis.get_major_formatter(), ScalarFormatter):
                fmt = _GroupedFormatter(useOffset=False)
                fmt.set_scientific(False)
                axis.set_major_formatter(fmt)


def _grow_top(fig: Figure, extra: float) -> None:
    """Add ``extra`` inches at the top of the figure; everything drawn keeps its place from the bottom."""
    w, h = fig.get_size_inches()
    k = h / (h + extra)
    anchors = []
    for leg in fig.legends:
        bb = leg.get_bbox_to_anchor()
        anchors.append((leg, (bb.x0 / fig.dpi / w, bb.y0 / fig.dpi / (h + extra))))
    fig.set_size_inches(w, h + extra)
    for ax in fig.axes:
        x0, y0, aw, ah = ax.get_position().bounds
        ax.set_position((x0, y0 * k, aw, ah * k))
    for t in fig.texts:
        t.set_y(t.get_position()[1] * k)
    for leg, xy in anchors:
        leg.set_bbox_to_anchor(xy, transform=fig.transFigure)


def _finish(fig: Figure, caption: str, caveat: str = "") -> Figure:
    """Attach the caption; a caveat (rows not in time order) leads the caption and is drawn in a
    band of its own above the figure, wrapped to the figure's width."""
    if caveat:
        w = float(fig.get_size_inches()[0])
        lines = textwrap.wrap(_plain(caveat), max(30, int((w - 0.28) * 72 / 4.9)))
        _grow_top(fig, 0.18 * len(lines) + 0.06)
        h = float(fig.get_size_inches()[1])
        fig.text(
            0.14 / w,
            1 - 0.08 / h,
            "\n".join(lines),
            ha="left",
            va="top",
            fontsize=MIN_FONT_PT,
            style="italic",
            color=PALETTE["orange"],
        ).set_gid("lgs-caveat")
        caption = f"{caveat} {caption}"
    fig.lagsight_caption = caption  # type: ignore[attr-defined]
    return fig


# ---------------------------------------------------------------------------
def correlogram_figure(
    correlogram: Correlogram,
    *,
    max_lag: int | None = None,
    band: str = "white",
    period: int | None = None,
    width: float = FIG_WIDTH,
    caveat: str = "",
) -> Figure:
    """ACF and PACF panels with a white-noise or Bartlett band.

    Parameters
    ----------
    correlogram : Correlogram
    max_lag : int, optional
        Largest lag drawn (default all computed lags).
    band : {'white', 'bartlett'}
        Band of the ACF panel: +/- z/sqrt(n) at every lag, or Bartlett's
        formula (wider at lag h when earlier lags are correlated).  The PACF
        panel always uses +/- z/sqrt(n).
    period : int, optional
        Seasonal period: its multiples get faint guide lines.
    caveat : str
        Drawn on the figure and put before the caption (the rows are not in time order).
    """
    if not isinstance(correlogram, Correlogram):
        raise TypeError(f"'correlogram' must be a Correlogram (got {type(correlogram).__name__})")
    if band not in BANDS:
        raise ValueError(f"'band' must be 'white' or 'bartlett' (got {band!r})")
    available = int(correlogram.lags.size)
    if max_lag is None:
        max_lag = available
    if not isinstance(max_lag, (int, np.integer)) or isinstance(max_lag, bool) or max_lag < 1:
        raise ValueError(f"'max_lag' must be an integer >= 1 (got {max_lag!r})")
    shown = min(int(max_lag), available)
    lags = correlogram.lags[:shown]
    z_note = f"{100 * (1 - correlogram.alpha):g}%"
    n = correlogram.n
    q = float(ljung_box_q(correlogram.acf[:shown], n)[-1])
    q_p = float(stats.chi2.sf(q, shown))
    every = int(period) if period is not None and 1 < period <= shown else 0  # seasonal guides
    seasonal = every > 0
    # layout in inches, from the top: header, then ACF and PACF stacked on one lag axis
    head_h, title_h, ax_h, foot_h, legend_h = 0.3, 0.2, 0.9, 0.42, 0.26
    height = head_h + 2 * (title_h + ax_h) + foot_h + legend_h
    left, right = 0.64 / width, 1 - 0.14 / width
    with figure_rc():
        fig = Figure(figsize=(width, height))
        axes: list = []
        y = height - head_h
        for _ in range(2):
            y -= title_h
            axes.append(
                fig.add_axes((left, (y - ax_h) / height, right - left, ax_h / height), sharex=axes[0] if axes else None)
            )
            y -= ax_h
        for ax, values, name in (
            (axes[0], correlogram.acf[:shown], "ACF"),
            (axes[1], correlogram.pacf[:shown], "PACF"),
        ):
            poly: Artist
            if name == "ACF" and band == "bartlett":
                b = correlogram.bartlett_band[:shown]
                # a step per lag, from lag - 1/2 to lag + 1/2: lag 1 has its band too (z/sqrt(n) there)
                edges = np.append(lags - 0.5, shown + 0.5)
                poly = ax.fill_between(
                    edges,
                    -np.append(b, b[-1]),
                    np.append(b, b[-1]),
                    step="post",
                    color=PALETTE["blue_light"],
                    lw=0,
                    zorder=0,
                )
            else:
                b = np.full(shown, correlogram.white_band)
                poly = ax.axhspan(
                    -correlogram.white_band, correlogram.white_band, color=PALETTE["blue_light"], lw=0, zorder=0
                )
            poly.set_gid(f"lgs-band-{name.lower()}")
            if seasonal:
                for m in range(every, shown + 1, every):
                    guide = ax.axvline(m, color=PALETTE["muted"], lw=0.9, ls=(0, (1, 2)), zorder=0)
                    guide.set_gid("lgs-period")
            outside = np.abs(values) > b
            # stems as one path (NaN breaks) keeps the SVG small
            sx = np.repeat(lags.astype(float), 3)
            sy = np.column_stack([np.zeros(shown), values, np.full(shown, np.nan)]).ravel()
            sx[2::3] = np.nan
            ax.plot(sx, sy, color=PALETTE["muted"], lw=1.1, zorder=2, solid_capstyle="butt")
            ax.axhline(0, color=PALETTE["ink"], lw=0.7, zorder=1)
            ms = 3.6 if shown <= 40 else 2.8
            (inn,) = ax.plot(lags[~outside], values[~outside], "o", ms=ms, color=PALETTE["blue"], zorder=3)
            (out,) = ax.plot(lags[outside], values[outside], "s", ms=ms + 0.6, color=PALETTE["orange"], zorder=4)
            inn.set_gid(f"lgs-{name.lower()}-inside")
            out.set_gid(f"lgs-{name.lower()}-outside")
            ax.set_title(f"{name}: {int(outside.sum()):,} of {shown:,} lags outside", fontsize=9)
            ax.set_ylabel("correlation" if name == "ACF" else "partial", fontsize=MIN_FONT_PT)
        axes[0].set_title(
            f"Ljung-Box, lags 1\u2013{shown:,}: p-value {format_pvalue(q_p)}",
            loc="right",
            fontsize=MIN_FONT_PT,
            fontweight="normal",
            color=PALETTE["muted"],
        )
        axes[0].tick_params(labelbottom=False)
        axes[1].set_xlim(0.5, shown + 0.5)
        axes[1].set_xlabel("lag")
        _group_digits(*axes)
        if seasonal:
            step = every * max(1, math.ceil(shown / every / 8))
            axes[1].set_xticks([1, *range(step, shown + 1, step)] if step > 3 else range(step, shown + 1, step))
        peak = float(np.max(np.abs(np.concatenate([correlogram.acf[:shown], correlogram.pacf[:shown]]))))
        lim = max(
            0.25, peak * 1.15, float(np.max(correlogram.bartlett_band[:shown])) * 1.1 if band == "bartlett" else 0
        )
        for ax in axes:
            ax.set_ylim(-lim, lim)
        band_words = "Bartlett band (ACF)" if band == "bartlett" else "white-noise band"
        figure_title(fig, left, height, f"Residual autocorrelation, lags 1\u2013{shown:,}", top=0.16)
        handles = [
            Line2D([], [], marker="s", ls="none", color=PALETTE["orange"], ms=4.5, label="outside the band"),
            Line2D([], [], color=PALETTE["blue_light"], lw=6, label=f"{z_note} {band_words}"),
        ]
        if seasonal:
            handles.append(Line2D([], [], color=PALETTE["muted"], lw=0.9, ls=(0, (1, 2)), label=f"period {every:,}"))
        fig.legend(
            handles=handles,
            loc="lower left",
            bbox_to_anchor=(left - 0.01, 0.04 / height),
            ncol=len(handles),
            fontsize=MIN_FONT_PT,
            handlelength=1.6,
            columnspacing=1.2,
            borderaxespad=0,
            frameon=False,
        )
    which = (
        "Bartlett band for the ACF (white-noise band for the PACF)"
        if band == "bartlett"
        else "white-noise band, z/\u221an"
    )
    cap = (
        f"Sample ACF and PACF (Yule-Walker) of the residuals at lags 1\u2013{shown:,}, n = {n:,}. The shaded band "
        f"is the {z_note} {which}; points outside it are orange squares."
    )
    if seasonal:
        cap += f" Dotted lines mark the seasonal period, {every:,}, and its multiples."
    cap += (
        f" Ljung-Box over the {shown:,} lags drawn: Q = {q:,.2f}, p-value {format_pvalue(q_p)} "
        f"(chi-square with {shown:,} degrees of freedom)."
    )
    if max_lag is not None and int(max_lag) > available:
        cap += f" Only {available:,} lags were computed."
    return _finish(fig, cap, caveat)


# ---------------------------------------------------------------------------
def _thin_even(m: int, max_points: int) -> np.ndarray:
    if m <= max_points:
        return np.arange(m)
    return np.unique(np.linspace(0, m - 1, max_points).round().astype(np.intp))


def lag_scatter_figure(
    resid, *, lag: int, max_points: int = MAX_POINTS, width: float = FIG_WIDTH, caveat: str = ""
) -> Figure:
    """e_t against e_{t-lag}, with the correlation of the pairs in the title.

    ``resid`` is a residual array (or a Diagnosis, whose residuals are used).
    At most ``max_points`` evenly spaced pairs are drawn; the correlation uses all.
    ``caveat`` is drawn on the figure and put before the caption.
    """
    data = getattr(resid, "data", None)
    e = data.resid if data is not None and hasattr(data, "resid") else resid
    pairs = lag_pairs(e, lag=lag)
    h = pairs.lag
    m = pairs.lagged.size
    keep = _thin_even(m, max_points)
    x, y = pairs.lagged[keep], pairs.current[keep]
    r = pairs.correlation
    with figure_rc():
        height = 3.3
        fig = Figure(figsize=(width, height))
        ax = fig.add_axes((0.62 / width, 0.5 / height, 1 - 0.78 / width, 1 - 0.86 / height))
        (pts,) = ax.plot(x, y, "o", ms=2.6, alpha=0.55, color=PALETTE["blue"], mec="none", zorder=2)
        pts.set_gid("lgs-lag-points")
        if keep.size > RASTER_MARKERS:
            pts.set_rasterized(True)
        ax.axhline(0, color=PALETTE["rule"], lw=0.8, zorder=1)
        ax.axvline(0, color=PALETTE["rule"], lw=0.8, zorder=1)
        lagged, top_l = scaled(pairs.lagged)  # unit scale: the spreads stay finite near 1e200
        current, top_c = scaled(pairs.current)
        if not math.isnan(r) and np.std(lagged) > 0:
            slope = r * (np.std(current) / np.std(lagged)) * (top_c / top_l)
            mx, my = float(np.mean(lagged)) * top_l, float(np.mean(current)) * top_c
            xs = np.array([np.min(pairs.lagged), np.max(pairs.lagged)])
            (fit,) = ax.plot(xs, my + slope * (xs - mx), color=PALETTE["orange"], lw=1.5, zorder=3)
            fit.set_gid("lgs-lag-fit")
        r_text = "n/a" if math.isnan(r) else f"{r:.3f}"
        ax.set_title(f"Lag {h:,}: correlation r = {r_text}", fontsize=9.5)
        ax.set_xlabel(f"residual at t \u2212 {h:,}")
        ax.set_ylabel("residual at t")
        _group_digits(ax)
    cap = f"Each point pairs a residual with the one {h:,} step{'s' * (h != 1)} earlier; {m:,} pairs."
    if keep.size < m:
        cap += f" {keep.size:,} evenly spaced pairs are drawn for display; the correlation uses all {m:,}."
    return _finish(fig, cap, caveat)


# ---------------------------------------------------------------------------
#: residuals scanned at a time when thinning a long series (bounds the work arrays)
_THIN_CHUNK = 1 << 20


def _thin_series(e: np.ndarray, max_points: int) -> np.ndarray:
    """Positions of the first lowest and first highest residual of each of max_points / 2 blocks of
    neighbours (and both ends), found a chunk of blocks at a time: no array of length n is made."""
    n = e.size
    if n <= max_points:
        return np.arange(n)
    blocks = max(1, max_points // 2)
    edges = np.linspace(0, n, blocks + 1).astype(np.intp)
    per_chunk = max(1, _THIN_CHUNK // max(1, n // blocks))
    found = [np.array([0, n - 1])]
    for b0 in range(0, blocks, per_chunk):
        b1 = min(blocks, b0 + per_chunk)
        s, t = edges[b0], edges[b1]
        seg = e[s:t]
        starts = edges[b0:b1] - s
        lo = np.minimum.reduceat(seg, starts)
        hi = np.maximum.reduceat(seg, starts)
        block_id = np.repeat(np.arange(b1 - b0), np.diff(edges[b0 : b1 + 1]))
        pos = np.arange(s, t)
        for extreme in (lo, hi):
            hit = seg == extreme[block_id]
            first = np.full(b1 - b0, n, np.intp)
            np.minimum.at(first, block_id[hit], pos[hit])
            found.append(first)
    return np.unique(np.concatenate(found))


def _x_values(index: pd.Index):
    """(x at given row positions, is time, time stamps) for plotting in test order.  The x values
    are computed only where they are drawn, never for all n rows."""

    def positions(p):
        return np.asarray(p, dtype=float) + 1.0

    if isinstance(index, pd.PeriodIndex):
        stamps = index.to_timestamp()
    elif isinstance(index, pd.DatetimeIndex):
        stamps = index.tz_localize(None) if index.tz is not None else index
    else:
        return positions, False, None
    if stamps.hasnans or not stamps.is_monotonic_increasing:
        return positions, False, None
    return (lambda p: mdates.date2num(stamps[np.asarray(p, dtype=np.intp)].to_numpy())), True, index


def _gap_positions(index: pd.Index) -> np.ndarray:
    """Positions i with a gap between row i and i + 1 (time stamps more than one usual step apart)."""
    if not index.is_unique or len(index) < 3:
        return np.empty(0, np.intp)
    pos, _ = _time_axis(index)
    steps = np.diff(pos)
    values, counts = np.unique(steps, return_counts=True)
    return np.flatnonzero(steps > values[np.argmax(counts)])


def residuals_figure(diag, *, max_points: int = MAX_POINTS, width: float = FIG_WIDTH) -> Figure:
    """Residuals in the order they were tested, time on the x-axis when there is one, gaps shaded."""
    e = np.asarray(diag.data.resid, float)
    n = e.size
    x_at, is_time, stamps = _x_values(diag.data.index)
    gaps = np.empty(0, np.intp)
    if is_time and diag.data.groups is None and diag.order.flags.get("gaps"):
        gaps = _gap_positions(stamps)
    keep = _thin_series(e, max_points)
    xs, ys = x_at(keep), e[keep]
    if gaps.size:
        left = np.searchsorted(gaps, keep[:-1], "left")
        right = np.searchsorted(gaps, keep[1:], "left")
        cut = np.flatnonzero(right > left) + 1
        xs = np.insert(xs, cut, np.nan)
        ys = np.insert(ys, cut, np.nan)
    with figure_rc():
        height = 2.4
        fig = Figure(figsize=(width, height))
        ax = fig.add_axes((0.62 / width, 0.5 / height, 1 - 0.78 / width, 1 - 0.86 / height))
        shown_gaps = gaps
        if gaps.size > 200:
            widths = x_at(gaps + 1) - x_at(gaps)
            shown_gaps = np.sort(gaps[np.argsort(widths)[-200:]])
        for x0, x1 in zip(x_at(shown_gaps), x_at(shown_gaps + 1)):
            span = ax.axvspan(
                x0,
                x1,
                facecolor=PALETTE["orange_light"],
                hatch="||",
                hatchcolor=PALETTE["orange"],
                edgecolor="none",
                lw=0,
                zorder=0,
            )
            span.set_gid("lgs-gap")
        ax.axhline(0, color=PALETTE["muted"], lw=0.7, zorder=1)
        (line,) = ax.plot(xs, ys, color=PALETTE["blue"], lw=0.8, zorder=2)
        line.set_gid("lgs-residuals")
        if diag.data.groups is not None and not is_time:
            codes = pd.factorize(np.asarray(diag.data.groups))[0]
            bounds = np.flatnonzero(codes[1:] != codes[:-1])
            if 0 < bounds.size <= 60:
                ax.vlines(
                    x_at(bounds) + 0.5,
                    0,
                    1,
                    transform=ax.get_xaxis_transform(),
                    color=PALETTE["rule"],
                    lw=0.8,
                    zorder=0,
                )
        if is_time:
            loc = mdates.AutoDateLocator(minticks=3, maxticks=6)
            ax.xaxis.set_major_locator(loc)
            ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(loc))
            name = diag.data.index.name
            ax.set_xlabel(_plain(name) if name is not None else "time")
        else:
            ax.set_xlabel("position in test order")
        ax.set_ylabel("residual")
        _group_digits(ax)
        first, last = x_at([0, n - 1])
        ax.set_xlim(first, last if n > 1 else first + 1)
        figure_title(fig, 0.62 / width, height, "Residuals in test order")
    cap = f"Residuals in the order tested ({diag.order.order_used}), n = {n:,}."
    if keep.size < n:
        cap += (
            f" For display the line keeps {keep.size:,} of {n:,} points (the lowest and highest of each "
            "block of neighbours); every test uses all points."
        )
    if gaps.size:
        cap += (
            f" {gaps.size:,} gap{'s' * (gaps.size != 1)} in the time stamps "
            f"{'are' if gaps.size != 1 else 'is'} shaded with cross-hatching"
            + (f" (the {shown_gaps.size:,} widest drawn)" if shown_gaps.size < gaps.size else "")
            + "; the line is broken there."
        )
        if diag.order.flags.get("largest_gap"):
            cap += f" Largest gap: {diag.order.flags['largest_gap']}."
    elif diag.order.flags.get("gaps") and not is_time:
        cap += f" The time stamps have {diag.order.flags['gaps']:,} irregular gaps (see the order check)."
    return _finish(fig, cap, order_caveat(diag))


# ---------------------------------------------------------------------------
def power_figure(curve, *, width: float = FIG_WIDTH) -> Figure:
    """Power of the exact Durbin-Watson test along AR(1) coefficients, with a 95% Monte Carlo band."""
    with figure_rc():
        height = 2.8
        fig = Figure(figsize=(width, height))
        ax = fig.add_axes((0.62 / width, 0.5 / height, 1 - 0.78 / width, 1 - 0.86 / height))
        band = ax.fill_between(
            curve.rhos,
            np.clip(curve.power - 1.96 * curve.se, 0, 1),
            np.clip(curve.power + 1.96 * curve.se, 0, 1),
            color=PALETTE["blue_light"],
            lw=0,
        )
        band.set_gid("lgs-power-band")
        (line,) = ax.plot(curve.rhos, curve.power, color=PALETTE["blue"], lw=1.6, marker="o", ms=2.5)
        line.set_gid("lgs-power")
        ax.axhline(TARGET_POWER, color=PALETTE["ink"], lw=0.8, ls=(0, (1, 2)))
        ax.axhline(curve.alpha, color=PALETTE["muted"], lw=0.8, ls=(0, (4, 2)))
        # labels at the end of the grid where the curve is farther from them
        end = 0 if abs(curve.power[0] - TARGET_POWER) > abs(curve.power[-1] - TARGET_POWER) else -1
        ha = "left" if end == 0 else "right"
        ax.text(
            curve.rhos[end], TARGET_POWER + 0.02, f" power {TARGET_POWER:g} ", fontsize=MIN_FONT_PT, va="bottom", ha=ha
        )
        ax.text(
            curve.rhos[end],
            curve.alpha + 0.02,
            f" \u03b1 = {curve.alpha:g} ",
            fontsize=MIN_FONT_PT,
            va="bottom",
            ha=ha,
            color=PALETTE["muted"],
        )
        rho = curve.min_detectable_rho
        if rho is not None and not math.isnan(rho):
            ax.axvline(rho, color=PALETTE["orange"], lw=1.2)
            ax.text(
                rho,
                0.5,
                f" \u03c1 = {rho:.3f}",
                color=PALETTE["orange"],
                fontsize=MIN_FONT_PT,
                va="center",
                ha="left" if rho <= np.median(curve.rhos) else "right",
            )
        ax.set_ylim(0, 1.02)
        ax.set_xlabel("AR(1) coefficient \u03c1 of the errors")
        ax.set_ylabel("probability of detection")
        figure_title(fig, 0.62 / width, height, f"Power of the exact Durbin-Watson test, n = {curve.n:,}")
    cap = (
        f"Share of {curve.n_sim:,} simulated series with AR(1) errors per \u03c1 in which the exact test "
        f"rejects at \u03b1 = {curve.alpha:g} ({ALTERNATIVE_WORDS.get(curve.alternative, 'two-sided')}), "
        f"against its exact critical value; the same innovations for every \u03c1 (seed {curve.seed}). "
        "Shaded: \u00b11.96 Monte Carlo standard errors."
    )
    return _finish(fig, cap)


def groups_figure(summary, *, width: float = FIG_WIDTH, max_labels: int = 30) -> Figure:
    """Per-group Durbin-Watson d: a dot per group (few groups) or a histogram (many)."""
    table = summary.table
    with figure_rc():
        if len(table) == 0 or "dw" not in table:
            fig = Figure(figsize=(width, 1.2))
            fig.text(0.05, 0.5, "No group could be tested.", fontsize=9.0, va="center")
            return _finish(fig, "No group could be tested.")
        d = table["dw"].to_numpy(float)
        found = ~table["finding"].isin(["none", "unknown"]).to_numpy() if "finding" in table else np.zeros(d.size, bool)
        few = len(table) <= max_labels
        names = [_plain(g) for g in table["group"]]
        # layout in inches: header, the axis, tick labels and axis label, two legend rows
        head_h, foot_h, legend_h = 0.34, 0.44, 0.4
        ax_h = max(1.2, 0.2 * len(table)) if few else 1.4
        height = head_h + ax_h + foot_h + legend_h
        # room for the group names: about 0.6 em per character at 8 pt (common for sans-serif fonts)
        left = (min(0.45 * width, 0.2 + 0.068 * max(len(g) for g in names)) if few else 0.52) / width
        fig = Figure(figsize=(width, height))
        ax = fig.add_axes((left, (foot_h + legend_h) / height, 1 - left - 0.14 / width, ax_h / height))
        if few:
            y = np.arange(len(table))[::-1]
            (a,) = ax.plot(d[~found], y[~found], "o", color=PALETTE["blue"], ms=5)
            (b,) = ax.plot(d[found], y[found], "s", color=PALETTE["orange"], ms=5.5)
            a.set_gid("lgs-group-none")
            b.set_gid("lgs-group-evidence")
            ax.set_yticks(y, names)
            ax.set_ylim(-0.7, len(table) - 0.3)
        else:
            ok = d[np.isfinite(d)]
            ax.hist(
                ok,
                bins=int(min(40, max(8, np.sqrt(ok.size)))),
                color=PALETTE["blue_light"],
                edgecolor=PALETTE["blue"],
                lw=0.5,
            )
            ax.set_ylabel("groups")
        if not math.isnan(summary.pooled_dw):
            ax.axvline(summary.pooled_dw, color=PALETTE["ink"], lw=1.4, label="pooled within-group d")
        if not math.isnan(summary.naive_dw):
            ax.axvline(
                summary.naive_dw,
                color=PALETTE["orange"],
                lw=1.0,
                ls=(0, (4, 2)),
                label="d of the groups stacked end to end",
            )
        ax.axvline(2.0, color=PALETTE["rule"], lw=0.8)
        ax.set_xlabel("Durbin-Watson d within the group")
        _group_digits(ax)
        handles, _ = ax.get_legend_handles_labels()
        if few:
            handles += [
                Line2D([], [], marker="s", ls="none", color=PALETTE["orange"], label="evidence (adjusted)"),
                Line2D([], [], marker="o", ls="none", color=PALETTE["blue"], label="no evidence"),
            ]
        fig.legend(
            handles=handles,
            loc="lower left",
            ncol=2,
            fontsize=MIN_FONT_PT,
            handlelength=1.6,
            columnspacing=1.2,
            borderaxespad=0,
            bbox_to_anchor=(0.14 / width, 0.04 / height),
            frameon=False,
        )
        figure_title(fig, 0.14 / width, height, f"Durbin-Watson d by group ({_groups_count(summary)})")
    cap = (
        "Each group is tested in its own time order; squares (orange) mark groups with evidence after the "
        "Benjamini-Hochberg adjustment."
        if few
        else f"Distribution of the per-group d over {len(table):,} tested groups."
    )
    return _finish(fig, cap)


def _groups_count(summary) -> str:
    """'2 groups', or '2 of 3 groups tested' when some were skipped (the table lists them)."""
    if summary.n_tested == summary.n_groups:
        return f"{summary.n_groups} groups"
    return f"{summary.n_tested} of {summary.n_groups} groups tested"
