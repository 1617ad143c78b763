"""The Durbin-Watson statistic on its 0-4 scale, with the exact null density of this design.

Five shaded regions (evidence of positive correlation below dL, inconclusive
from dL to dU, no evidence from dU to 4-dU, inconclusive from 4-dU to 4-dL,
evidence of negative correlation above 4-dL) told apart by hatching as well as
colour and labelled in words; the exact density drawn over them; the observed d
marked with its p-value beside it.  When the density is narrow (large n) a
close-up around 2 is added below the full scale.
"""

from __future__ import annotations

import math
import textwrap

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle

from ..battery_run import DW
from ..stats.bounds import BOUNDS_MAX_N, dw_bounds
from ..verdict import log10_p
from .density import density_grid, exact_point, grid_entry
from .style import FIG_WIDTH, PALETTE, REGION_STYLE, figure_rc
from .text import K_PRIME_ASSUMED, format_pvalue, order_caveat

__all__ = ["scale_figure", "bounds_figure", "density_grid", "exact_point"]


# ---------------------------------------------------------------------------

#: the legend below the 0-4 scale and below the bounds figure: two columns, no frame
_LEGEND_STYLE = dict(ncol=2, fontsize=7.5, handlelength=2.2, columnspacing=1.5, borderaxespad=0, frameon=False)


def _bounds(res, alpha: float):
    b = getattr(res, "bounds", None) if res is not None else None
    if b is not None and abs(b.alpha - alpha) > 1e-12:
        b = dw_bounds(b.n, b.k_prime, alpha=alpha, has_constant=b.has_constant)
    return b


def _regions(b) -> list[tuple[str, str, float, float]]:
    lo, up = b.lower, min(b.upper, 2.0)
    return [
        ("positive", "positive", 0.0, lo),
        ("inconclusive", "inconclusive-low", lo, up),
        ("none", "none", up, 4.0 - up),
        ("inconclusive", "inconclusive-high", 4.0 - up, 4.0 - lo),
        ("negative", "negative", 4.0 - lo, 4.0),
    ]


def _missing_notes(diag, res, b, dist) -> list[str]:
    notes = []
    if res is None:
        why = diag.errors.get(DW, "it was not run")
        notes.append(f"Durbin-Watson is not available: {why}")
        return notes
    if dist is None:
        notes.append("No exact density: the design matrix is not known, so only the bounds apply.")
    if b is None:
        kp = None if dist is None else dist.k_prime
        if kp == 0:
            notes.append(
                "No bounds dL/dU: the model has no regressor besides the constant (k' = 0); "
                "the exact p-value does not need them."
            )
        elif diag.n > BOUNDS_MAX_N:
            notes.append(f"Bounds dL/dU are not computed for n > {BOUNDS_MAX_N:,}; the exact p-value replaces them.")
        else:
            notes.append("Bounds dL/dU are not available for this model.")
    return notes


def _zoom_window(dist_entry, b, d: float):
    """(lo, hi) of a close-up around 2, or None when the full scale is readable."""
    half = 0.0
    if dist_entry is not None:
        m, sd = dist_entry["mean"], dist_entry["sd"]
        half = max(2.0 - (m - 5 * sd), (m + 5 * sd) - 2.0)
    if b is not None:
        half = max(half, 2.0 - b.lower)
    if half <= 0 or half > 0.45:
        return None
    half *= 1.15
    lo, hi = 2.0 - half, 2.0 + half
    if not math.isnan(d) and abs(d - 2.0) < 1.6 * half:
        lo, hi = min(lo, d - 0.15 * half), max(hi, d + 0.15 * half)
    return lo, hi


def _draw_regions(ax, b, x0: float, x1: float, words: bool) -> None:
    for key, tag, a, z in _regions(b):
        if z <= a:
            continue
        label, face, hatch, hcolor = REGION_STYLE[key]
        patch = ax.axvspan(
            a, z, facecolor=face, hatch=hatch or None, hatchcolor=hcolor, edgecolor="none", linewidth=0, zorder=0
        )
        patch.set_gid(f"lgs-region-{tag}")
        patch.set_label(label)
        vis = min(z, x1) - max(a, x0)
        if words and vis >= 0.11 * (x1 - x0):
            width = 12 if vis < 0.3 * (x1 - x0) else 22
            ax.text(
                (max(a, x0) + min(z, x1)) / 2,
                0.95,
                textwrap.fill(label, width),
                transform=ax.get_xaxis_transform(),
                ha="center",
                va="top",
                fontsize=7.5,
                color=PALETTE["ink"],
                zorder=6,
                bbox=dict(boxstyle="round,pad=0.25", facecolor=PALETTE["paper"], edgecolor="none", alpha=0.85),
            )
    for x in sorted({b.lower, min(b.upper, 2.0), 4 - min(b.upper, 2.0), 4 - b.lower}):
        ax.axvline(x, color=PALETTE["muted"], lw=0.6, zorder=1)


def _bound_labels(ax, b) -> None:
    up = min(b.upper, 2.0)
    tr = ax.get_xaxis_transform()
    style = dict(transform=tr, fontsize=7.5, color=PALETTE["ink"], va="bottom", clip_on=False)
    ax.text(b.lower, 1.02, f"dL {b.lower:.3f} ", ha="right", **style)
    ax.text(4 - b.lower, 1.02, f" 4\u2212dL {4 - b.lower:.3f}", ha="left", **style)
    ax.text(up, 1.13, f"dU {b.upper:.3f} ", ha="right", **style)
    ax.text(4 - up, 1.13, f" 4\u2212dU {4 - b.upper:.3f}", ha="left", **style)


def _observed(ax, d: float, text: str | None, x0: float, x1: float) -> None:
    if d < x0 or d > x1:
        left = d < x0
        ax.annotate(
            f"observed d = {d:.3f}",
            xy=(0.0 if left else 1.0, 0.55),
            xycoords="axes fraction",
            xytext=(14 if left else -14, 0),
            textcoords="offset points",
            ha="left" if left else "right",
            va="center",
            fontsize=7.5,
            color=PALETTE["mark"],
            bbox=dict(boxstyle="round,pad=0.2", facecolor=PALETTE["paper"], edgecolor="none", alpha=0.9),
            arrowprops=dict(arrowstyle="-|>", color=PALETTE["mark"], lw=1.0, shrinkA=0, shrinkB=0),
        )
        return
    line = ax.axvline(d, color=PALETTE["mark"], lw=1.8, zorder=5)
    line.set_gid("lgs-observed")
    (mark,) = ax.plot(
        [d],
        [0.0],
        marker="D",
        ms=7,
        color=PALETTE["mark"],
        mec=PALETTE["paper"],
        mew=0.8,
        linestyle="none",
        clip_on=False,
        zorder=7,
        transform=ax.get_xaxis_transform(),
    )
    mark.set_gid("lgs-observed-marker")
    if text:
        right = d < x0 + 0.62 * (x1 - x0)
        ax.text(
            d + (0.012 if right else -0.012) * (x1 - x0),
            0.63,
            text,
            transform=ax.get_xaxis_transform(),
            ha="left" if right else "right",
            va="center",
            fontsize=8,
            color=PALETTE["mark"],
            zorder=8,
            bbox=dict(boxstyle="round,pad=0.35", facecolor=PALETTE["paper"], edgecolor=PALETTE["mark"], linewidth=0.6),
        )


def _p_text(res, alt: str, verdict) -> str:
    """The words beside the observed d: its p-value and how the verdict reads it."""
    if verdict.finding == "not meaningful":
        return "not meaningful:\nrows not in time order"
    if verdict.finding == "cannot judge":
        return "cannot judge"
    if math.isnan(res.pvalue):
        dec = getattr(res, "bounds_decision", None)
        return "no exact p-value" + (f"\nbounds: {dec}" if dec else "")
    method = str(res.method)
    p = format_pvalue(res.pvalue, log10_p(res))
    value = f"exact p = {p}" if method.startswith("exact") else f"p = {p}"
    side = {"positive": "positive alternative", "negative": "negative alternative"}.get(alt, "two-sided")
    if DW not in verdict.family:
        role = f"support; {verdict.leading} leads" if verdict.leading else "support"
    elif len(verdict.family) > 1:
        role = f"adjusted p = {format_pvalue(verdict.adjusted_pvalue(DW))}"
    else:
        role = f"{verdict.finding} at \u03b1 = {verdict.alpha:g}"
    return f"{value}\n({side})\n{role}"


def _critical(dist, alpha: float, alt: str) -> list[float]:
    qs = {"positive": [alpha], "negative": [1 - alpha]}.get(alt, [alpha / 2, 1 - alpha / 2])
    return [exact_point(dist, q) for q in qs]


def _zoom_box(ax, window) -> None:
    ax.add_patch(
        Rectangle(
            (window[0], 0),
            window[1] - window[0],
            1,
            transform=ax.get_xaxis_transform(),
            fill=False,
            edgecolor=PALETTE["muted"],
            lw=0.9,
            ls=(0, (1, 1.5)),
            zorder=6,
            clip_on=False,
        )
    )


def _draw_axis(ax, *, b, grid, crit, d, obs_text, x0, x1, words, bound_labels, crit_labels):
    ax.set_xlim(x0, x1)
    if b is not None:
        _draw_regions(ax, b, x0, x1, words)
        if bound_labels:
            _bound_labels(ax, b)
    top = 1.0
    if grid is not None:
        c, pdf = grid
        c = np.concatenate(([0.0], c, [4.0]))
        pdf = np.concatenate(([0.0], np.nan_to_num(pdf), [0.0]))
        (dens,) = ax.plot(c, pdf, color=PALETTE["ink"], lw=1.5, zorder=3)
        dens.set_gid("lgs-density")
        top = float(pdf.max()) * 2.5 or 1.0
        for q in crit:
            cl = ax.axvline(q, color=PALETTE["ink"], lw=1.0, ls=(0, (4, 2)), zorder=4)
            cl.set_gid("lgs-exact-critical")
            if crit_labels and x0 <= q <= x1:
                low = q < 2
                ax.text(
                    q + (-0.01 if low else 0.01) * (x1 - x0),
                    0.06,
                    f"exact critical value {q:.3f}",
                    transform=ax.get_xaxis_transform(),
                    fontsize=7,
                    ha="right" if low else "left",
                    va="bottom",
                    color=PALETTE["ink"],
                    zorder=6,
                    bbox=dict(boxstyle="round,pad=0.2", facecolor=PALETTE["paper"], edgecolor="none", alpha=0.9),
                )
    ax.set_ylim(0, top)
    ax.set_yticks([])
    ax.set_ylabel("null density", fontsize=7.5, color=PALETTE["muted"])
    if not math.isnan(d):
        _observed(ax, d, obs_text, x0, x1)


def scale_figure(diag, *, alpha: float | None = None, zoom: bool | None = None, width: float = FIG_WIDTH) -> Figure:
    """The Durbin-Watson scale figure for a :class:`~lagsight.Diagnosis`.

    Parameters
    ----------
    diag : Diagnosis
    alpha : float, optional
        Level of the bounds and of the exact critical value (default ``diag.alpha``).
    zoom : bool, optional
        Add a close-up around 2 (default: when the density or bounds are too
        narrow to read on the full scale).
    width : float
        Figure width in inches.
    """
    alpha = float(diag.alpha if alpha is None else alpha)
    if not 0 < alpha < 1:
        raise ValueError(f"'alpha' must be in (0, 1) (got {alpha!r})")
    res = diag.tests.get(DW)
    dist = diag.distribution if res is not None else None
    b = _bounds(res, alpha)
    entry = grid_entry(dist) if dist is not None else None
    grid = entry["grid"] if entry is not None else None
    alt = str(res.alternative) if res is not None else str(diag.alternative)
    crit = _critical(dist, alpha, alt) if dist is not None else []
    d = float(res.statistic) if res is not None else math.nan
    window = _zoom_window(entry, b, d)
    if zoom is False:
        window = None
    elif zoom is True and window is None:
        window = (1.5, 2.5)
    caveat = order_caveat(diag)
    notes = _missing_notes(diag, res, b, dist) + ([caveat] if caveat else [])

    # layout in inches, from the top
    title_h, label_h, ax_h, tick_h = 0.52, (0.34 if b is not None else 0.1), 1.5, 0.42
    zoom_h = (0.34 if b is not None else 0.1) + 1.25 + tick_h if window else 0.0
    legend_rows = 2 + (b is not None) + (dist is not None)
    foot_h = 0.2 * len(notes) + 0.19 * legend_rows + 0.12
    height = title_h + (label_h if not window else 0.1) + ax_h + tick_h + zoom_h + foot_h
    left, right = 0.42 / width, 1 - 0.2 / width

    with figure_rc():
        fig = Figure(figsize=(width, height))
        y = height - title_h - (label_h if not window else 0.1)
        ax = fig.add_axes((left, (y - ax_h) / height, right - left, ax_h / height))
        obs = None if res is None else f"observed d = {d:.3f}\n" + _p_text(res, alt, diag.verdict)
        _draw_axis(
            ax,
            b=b,
            grid=grid,
            crit=crit,
            d=d,
            obs_text=obs,
            x0=0.0,
            x1=4.0,
            words=True,
            bound_labels=window is None,
            crit_labels=window is None,
        )
        ax.set_xticks(np.arange(0, 4.01, 0.5))
        ax.set_xlabel("Durbin-Watson d (0 to 4; 2 means no lag-1 correlation)", fontsize=8)
        if window:
            zx0, zx1 = window
            _zoom_box(ax, window)
            y -= ax_h + tick_h + (0.34 if b is not None else 0.1)
            zax = fig.add_axes((left, (y - 1.25) / height, right - left, 1.25 / height))
            _draw_axis(
                zax,
                b=b,
                grid=grid,
                crit=crit,
                d=d,
                obs_text=f"d = {d:.3f}",
                x0=zx0,
                x1=zx1,
                words=True,
                bound_labels=True,
                crit_labels=True,
            )
            zax.set_xlabel(f"close-up of d from {zx0:.3f} to {zx1:.3f} (dotted box above)", fontsize=8)
        fig.text(
            left,
            1 - 0.2 / height,
            "Durbin-Watson d on its 0\u20134 scale",
            fontsize=10.5,
            fontweight="bold",
            va="center",
            color=PALETTE["ink"],
        )
        fig.text(
            left,
            1 - 0.42 / height,
            _subtitle(diag, res, b, alpha, alt),
            fontsize=8,
            va="center",
            color=PALETTE["muted"],
        )
        yb = 0.08
        fig.legend(
            handles=_legend(b, dist, alpha),
            loc="lower left",
            bbox_to_anchor=(left - 0.01, yb / height),
            **_LEGEND_STYLE,
        )
        for i, note in enumerate(reversed(notes)):
            fig.text(
                left,
                (yb + 0.19 * legend_rows + 0.1 + 0.2 * i) / height,
                note,
                fontsize=7.5,
                style="italic",
                color=PALETTE["orange"],
                va="bottom",
            )
        fig.lagsight_caption = " ".join(filter(None, [caveat, _caption(res, b, dist, alpha, window, alt)]))  # type: ignore[attr-defined]
        fig.lagsight_notes = tuple(notes)  # type: ignore[attr-defined]
    return fig


def _subtitle(diag, res, b, alpha: float, alt: str) -> str:
    parts = [f"n = {diag.n:,}"]
    if b is not None:
        assumed = bool(getattr(res, "k_prime_assumed", False))
        parts.append(f"k\u2032 = {b.k_prime}" + (f" ({K_PRIME_ASSUMED})" if assumed else ""))
        parts.append(f"bounds at \u03b1 = {alpha:g}: dL = {b.lower:.3f}, dU = {b.upper:.3f}")
    else:
        parts.append(f"\u03b1 = {alpha:g}")
    parts.append(
        {"positive": "alternative: positive correlation", "negative": "alternative: negative correlation"}.get(
            alt, "two-sided test"
        )
    )
    return "  \u00b7  ".join(parts)


def _legend(b, dist, alpha: float) -> list:
    handles: list = []
    if b is not None:
        texts = {
            "positive": "evidence of positive correlation: d < dL",
            "inconclusive": "inconclusive: dL to dU and 4\u2212dU to 4\u2212dL",
            "none": "no evidence: dU to 4\u2212dU",
            "negative": "evidence of negative correlation: d > 4\u2212dL",
        }
        for key in ("positive", "inconclusive", "none", "negative"):
            _, face, hatch, hcolor = REGION_STYLE[key]
            handles.append(
                Patch(
                    facecolor=face,
                    hatch=hatch or None,
                    hatchcolor=hcolor,
                    edgecolor=PALETTE["rule"],
                    lw=0.6,
                    label=texts[key],
                )
            )
    if dist is not None:
        handles.append(Line2D([], [], color=PALETTE["ink"], lw=1.5, label="exact null density of d (this design)"))
        handles.append(
            Line2D(
                [],
                [],
                color=PALETTE["ink"],
                lw=1.0,
                ls=(0, (4, 2)),
                label=f"exact critical value at \u03b1 = {alpha:g}",
            )
        )
    handles.append(Line2D([], [], color=PALETTE["mark"], lw=1.8, marker="D", ms=5, label="observed d"))
    return handles


def _caption(res, b, dist, alpha, window, alt) -> str:
    if res is None:
        return "Durbin-Watson scale: the test could not be run."
    parts = [
        "Shaded regions are the classical bounds decision"
        + (f" at \u03b1 = {alpha:g}" if b is not None else " (not available here)")
        + "."
    ]
    if alt == "two-sided" and dist is not None:
        parts.append(
            f"Two-sided: the regions use the one-sided bounds in each tail (the classical convention), "
            f"the dashed lines the exact critical values at \u03b1/2 = {alpha / 2:g} per tail."
        )
    if dist is not None:
        parts.append(
            "The curve is the exact null density of d for this model's design; the dashed line is "
            "its exact critical value, which settles what the inconclusive band leaves open."
        )
    if window:
        parts.append("The lower panel is a close-up around 2.")
    return " ".join(parts)


def bounds_figure(bounds, *, width: float = FIG_WIDTH) -> Figure:
    """The five regions of the 0-4 scale for given bounds (a :class:`~lagsight.BoundsResult`), no data."""
    for attr in ("lower", "upper", "n", "k_prime", "alpha"):
        if not hasattr(bounds, attr):
            raise TypeError(f"'bounds' must be a BoundsResult (got {type(bounds).__name__})")
    window = None
    if 2.0 - bounds.lower < 0.35:
        half = (2.0 - bounds.lower) * 1.3
        window = (2.0 - half, 2.0 + half)
    height = 2.8 if window is None else 4.62
    left, right = 0.42 / width, 1 - 0.2 / width
    with figure_rc():
        fig = Figure(figsize=(width, height))
        y = height - 0.52 - 0.34
        ax = fig.add_axes((left, (y - 1.0) / height, right - left, 1.0 / height))
        _draw_axis(
            ax,
            b=bounds,
            grid=None,
            crit=[],
            d=math.nan,
            obs_text=None,
            x0=0.0,
            x1=4.0,
            words=True,
            bound_labels=window is None,
            crit_labels=False,
        )
        ax.set_ylabel("")
        ax.set_xticks(np.arange(0, 4.01, 0.5))
        ax.set_xlabel("Durbin-Watson d", fontsize=8)
        if window:
            _zoom_box(ax, window)
            y -= 1.0 + 0.42 + 0.34
            zax = fig.add_axes((left, (y - 1.0) / height, right - left, 1.0 / height))
            _draw_axis(
                zax,
                b=bounds,
                grid=None,
                crit=[],
                d=math.nan,
                obs_text=None,
                x0=window[0],
                x1=window[1],
                words=True,
                bound_labels=True,
                crit_labels=False,
            )
            zax.set_ylabel("")
            zax.set_xlabel(f"close-up of d from {window[0]:.3f} to {window[1]:.3f}", fontsize=8)
        const = "with" if bounds.has_constant else "without"
        fig.text(left, 1 - 0.2 / height, "Durbin-Watson bounds", fontsize=10.5, fontweight="bold", va="center")
        fig.text(
            left,
            1 - 0.42 / height,
            f"n = {bounds.n:,}   \u00b7   k\u2032 = {bounds.k_prime} ({const} constant)   "
            f"\u00b7   \u03b1 = {bounds.alpha:g}   \u00b7   dL = {bounds.lower:.3f}, dU = {bounds.upper:.3f}",
            fontsize=8,
            va="center",
            color=PALETTE["muted"],
        )
        fig.legend(
            handles=_legend(bounds, None, bounds.alpha)[:4],
            loc="lower left",
            bbox_to_anchor=(left - 0.01, 0.06 / height),
            **_LEGEND_STYLE,
        )
        fig.lagsight_caption = (  # type: ignore[attr-defined]
            f"Classical bounds decision for a test against positive correlation at "
            f"\u03b1 = {bounds.alpha:g}; mirrored above 2 for negative correlation."
        )
    return fig
