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
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle

from ..battery_run import DW
from ..stats.bounds import BOUNDS_MAX_N, dw_bounds
from ..verdict import log10_p
from .density import density_grid, exact_point, grid_entry
from .style import FIG_WIDTH, MIN_FONT_PT, PALETTE, REGION_STYLE, figure_rc, figure_title
from .text import format_pvalue, order_caveat

__all__ = ["scale_figure", "bounds_figure", "density_grid", "exact_point", "LabelPlacer"]


# ---------------------------------------------------------------------------

#: the legend below the 0-4 scale and below the bounds figure: one row of columns, no frame
_LEGEND_STYLE = dict(ncol=2, fontsize=MIN_FONT_PT, handlelength=1.8, columnspacing=1.2, borderaxespad=0, frameon=False)


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
                "No bounds dL/dU: the model has no regressor besides the constant (k\u2032 = 0); "
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


class LabelPlacer:
    """Puts text labels where they collide with no label placed before and cross no guarded line.

    Each label gets a list of candidate positions, tried in order; the first one whose box stays
    inside its axes, clear of every box claimed so far and of every guarded vertical line is kept.
    A label with no free candidate is left out (the caption carries its content).
    """

    #: clearance around a label's text, display px: more than the rounded box drawn behind it,
    #: so neighbouring labels never touch
    PAD = 6.0
    #: clearance between a label's text and a guarded line, display px
    LINE_PAD = 3.0

    def __init__(self, fig: Figure):
        canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
        self.renderer = canvas.get_renderer()
        self.boxes: list = []
        self.lines: list[tuple[float, float, float]] = []  # (x, y0, y1) in display px

    def guard_line(self, ax, x: float) -> None:
        """No label may cross the vertical line at data x of ``ax``."""
        px = float(ax.transData.transform((x, 0.0))[0])
        self.lines.append((px, ax.bbox.y0, ax.bbox.y1))

    def gap(self, ax) -> float:
        """Data-x distance that keeps a label beside a guarded line clear of it (LINE_PAD + 2 px)."""
        x0, x1 = ax.get_xlim()
        return (self.LINE_PAD + 2.0) * (x1 - x0) / ax.bbox.width

    def claim(self, artist) -> None:
        self.boxes.append(artist.get_window_extent(self.renderer))

    def _free(self, ax, bb, inside: bool, cross: bool) -> bool:
        p = self.PAD
        x0, y0, x1, y1 = bb.x0 - p, bb.y0 - p, bb.x1 + p, bb.y1 + p
        frame = ax.bbox if inside else ax.figure.bbox
        if bb.x0 < frame.x0 or bb.x1 > frame.x1 or bb.y0 < frame.y0 or bb.y1 > frame.y1:
            return False
        q = self.LINE_PAD
        if not cross and any(
            bb.x0 - q < lx < bb.x1 + q and bb.y0 - q < ly1 and ly0 < bb.y1 + q for lx, ly0, ly1 in self.lines
        ):
            return False
        return not any(x0 < b.x1 and b.x0 < x1 and y0 < b.y1 and b.y0 < y1 for b in self.boxes)

    def place(self, ax, candidates, *, inside: bool = True, cross: bool = False, **style):
        """The first candidate (x in data, y in axes fraction, text, ha, va) that fits, drawn; or None.
        ``cross``: the label (on an opaque box) may cross guarded lines, never other labels."""
        for x, y, text, ha, va in candidates:
            t = ax.text(x, y, text, transform=ax.get_xaxis_transform(), ha=ha, va=va, **style)
            bb = t.get_window_extent(self.renderer)
            if self._free(ax, bb, inside, cross):
                self.boxes.append(bb)
                return t
            t.remove()
        return None


_LABEL_BOX = dict(boxstyle="round,pad=0.15", facecolor=PALETTE["paper"], edgecolor="none", alpha=0.9)


def _draw_regions(ax, b) -> None:
    for key, tag, a, z in _regions(b):
        if z <= a:
            continue
        label, face, hatch, hcolor = REGION_STYLE[key]
        patch = ax.axvspan(
            a, z, facecolor=face, hatch=hatch or None, hatchcolor=hcolor, edgecolor="none", linewidth=0, zorder=0
        )
        patch.set_gid(f"lgs-region-{tag}")
        patch.set_label(label)
    for x in _edges(b):
        ax.axvline(x, color=PALETTE["muted"], lw=0.6, zorder=1)


def _edges(b) -> list[float]:
    up = min(b.upper, 2.0)
    return sorted({b.lower, up, 4 - up, 4 - b.lower})


def _region_words(ax, placer: LabelPlacer, b, x0: float, x1: float, cuts: list[float]) -> None:
    """Each region's words at the top of its visible part, on the wider side of any line that
    crosses it, wrapped as little as fits; left out where they do not fit."""
    for key, _tag, a, z in _regions(b):
        lo, hi = max(a, x0), min(z, x1)
        if hi <= lo:
            continue
        inner = sorted(c for c in cuts if lo < c < hi)
        spans = sorted(zip([lo, *inner], [*inner, hi]), key=lambda s: s[0] - s[1])
        words = REGION_STYLE[key][0]
        candidates = [
            ((s0 + s1) / 2, y, textwrap.fill(words, wrap), "center", "top")
            for y in (0.96, 0.62)
            for s0, s1 in spans
            for wrap in (40, 21, 12)
        ]
        placer.place(ax, candidates, fontsize=MIN_FONT_PT, color=PALETTE["ink"], zorder=6, bbox=_LABEL_BOX)


def _edge_labels(ax, placer: LabelPlacer, b, x0: float, x1: float) -> None:
    """dL, dU, 4-dU and 4-dL written beside their lines, each on the outer side of the band it bounds."""
    up = min(b.upper, 2.0)
    gap = placer.gap(ax)
    for x, text, side in (
        (b.lower, f"dL {b.lower:.3f}", -1),
        (up, f"dU {b.upper:.3f}", 1),
        (4 - up, f"4\u2212dU {4 - b.upper:.3f}", -1),
        (4 - b.lower, f"4\u2212dL {4 - b.lower:.3f}", 1),
    ):
        if not x0 <= x <= x1:
            continue
        ha = "left" if side > 0 else "right"
        candidates = [(x + side * gap, y, text, ha, "bottom") for y in (0.04, 0.3, 0.56)]
        placer.place(ax, candidates, fontsize=MIN_FONT_PT, color=PALETTE["ink"], zorder=6, bbox=_LABEL_BOX)


def _observed(ax, placer: LabelPlacer, d: float, texts: list[str], x0: float, x1: float) -> None:
    """The observed d: a solid line with a diamond on the axis and its words beside it (or an
    arrow at the edge when d lies outside this axis)."""
    if d < x0 or d > x1:
        left = d < x0
        note = ax.annotate(
            f"d = {d:.3f}",
            xy=(0.0 if left else 1.0, 0.5),
            xycoords="axes fraction",
            xytext=(14 if left else -14, 0),
            textcoords="offset points",
            ha="left" if left else "right",
            va="center",
            fontsize=MIN_FONT_PT,
            color=PALETTE["mark"],
            zorder=8,
            bbox=_LABEL_BOX,
            arrowprops=dict(arrowstyle="-|>", color=PALETTE["mark"], lw=1.0, shrinkA=0, shrinkB=0),
        )
        placer.claim(note)
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
    gap = placer.gap(ax)
    sides = (1, -1) if d < x0 + 0.6 * (x1 - x0) else (-1, 1)
    candidates = [
        (d + side * gap, y, text, "left" if side > 0 else "right", "bottom")
        for text in texts
        for y in (0.06, 0.34)
        for side in sides
    ]
    box = dict(boxstyle="round,pad=0.2", facecolor=PALETTE["paper"], edgecolor=PALETTE["mark"], linewidth=0.6)
    placer.place(ax, candidates, cross=True, fontsize=MIN_FONT_PT, color=PALETTE["mark"], zorder=8, bbox=box)


def _p_text(res, verdict) -> str:
    """The words beside the observed d: its p-value and how the verdict reads it (the
    alternative is in the subtitle)."""
    if verdict.finding == "not meaningful":
        return "not meaningful:\nrows not in time order"
    if verdict.finding == "cannot judge":
        return "cannot judge"
    if math.isnan(res.pvalue):
        dec = getattr(res, "bounds_decision", None)
        return "no exact p-value" + (f"\nbounds: {dec}" if dec else "")
    method = str(res.method)
    p = format_pvalue(res.pvalue, log10_p(res))
    value = f"exact p-value {p}" if method.startswith("exact") else f"p-value {p}"
    if DW not in verdict.family:
        role = f"support; {verdict.leading} leads" if verdict.leading else "support"
    elif len(verdict.family) > 1:
        role = f"adjusted p-value {format_pvalue(verdict.adjusted_pvalue(DW))}"
    else:
        role = f"{verdict.finding} at \u03b1 = {verdict.alpha:g}"
    return f"{value}\n{role}"


def _critical(dist, alpha: float, alt: str) -> list[float]:
    qs = {"positive": [alpha], "negative": [1 - alpha]}.get(alt, [alpha / 2, 1 - alpha / 2])
    return [exact_point(dist, q) for q in qs]


def _level_words(alpha: float, alt: str) -> str:
    """The level each exact critical value is drawn at: alpha, or alpha/2 in each tail when two-sided."""
    return f"\u03b1/2 = {alpha / 2:g} per tail" if alt == "two-sided" else f"\u03b1 = {alpha:g}"


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


def _draw_axis(ax, placer, *, b, grid, crit, d, obs_texts, x0, x1, edge_labels, crit_labels):
    ax.set_xlim(x0, x1)
    ax.set_yticks([])
    if b is not None:
        _draw_regions(ax, b)
        for x in _edges(b):
            placer.guard_line(ax, x)
    top = 1.0
    if grid is not None:
        c, pdf = grid
        c = np.concatenate(([0.0], c, [4.0]))
        pdf = np.concatenate(([0.0], np.nan_to_num(pdf), [0.0]))
        (dens,) = ax.plot(c, pdf, color=PALETTE["ink"], lw=1.5, zorder=3)
        dens.set_gid("lgs-density")
        top = float(pdf.max()) * 2.2 or 1.0
        for q in crit:
            cl = ax.axvline(q, color=PALETTE["ink"], lw=1.0, ls=(0, (4, 2)), zorder=4)
            cl.set_gid("lgs-exact-critical")
            placer.guard_line(ax, q)
    ax.set_ylim(0, top)
    inside = not math.isnan(d) and x0 <= d <= x1
    if inside:
        placer.guard_line(ax, d)
    if not math.isnan(d) and obs_texts:
        _observed(ax, placer, d, obs_texts, x0, x1)
    if b is not None:
        _region_words(ax, placer, b, x0, x1, [q for q in crit] + ([d] if inside else []))
        if edge_labels:
            _edge_labels(ax, placer, b, x0, x1)
    if crit_labels:
        gap = placer.gap(ax)
        for q in crit:
            if x0 <= q <= x1:
                side = -1 if q < 2 else 1  # outward first
                cands = [
                    (q + s * gap, y, text, "left" if s > 0 else "right", "bottom")
                    for text in (f"critical {q:.3f}", f"{q:.3f}")
                    for y in (0.3, 0.56, 0.04)
                    for s in (side, -side)
                ]
                placer.place(ax, cands, fontsize=MIN_FONT_PT, color=PALETTE["ink"], zorder=6, bbox=_LABEL_BOX)


# layout of the scale and bounds figures, inches
_HEADER_H = 0.46  # title and subtitle
_TICK_H = 0.24  # tick labels under an axis
_XLABEL_H = 0.2  # an axis label under the tick labels
_GAP_H = 0.06  # between the full scale and the close-up
_ROW_H = 0.18  # one legend or note row
_BOTTOM_H = 0.06
_LEFT, _RIGHT = 0.32, 0.14


def _wrap_notes(notes: list[str], width: float) -> list[str]:
    chars = max(30, int((width - _LEFT - _RIGHT) * 72 / 4.9))
    return [line for note in notes for line in textwrap.wrap(note, chars)]


def _header(fig, left: float, height: float, title: str, subtitle: str) -> None:
    figure_title(fig, left, height, title)
    fig.text(left, 1 - 0.37 / height, subtitle, fontsize=MIN_FONT_PT, va="center", color=PALETTE["muted"])


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
    note_lines = _wrap_notes(notes, width)
    handles = _legend(dist, alpha, alt, len(crit))

    ax_h = 0.72 if window else 1.0
    legend_h = _ROW_H + 0.04 if handles else 0.0
    height = _HEADER_H + ax_h + _TICK_H + legend_h + _ROW_H * len(note_lines) + _BOTTOM_H
    if window:
        height += _GAP_H + ax_h + _TICK_H
    left, right = _LEFT / width, 1 - _RIGHT / width

    with figure_rc():
        fig = Figure(figsize=(width, height))
        placer = LabelPlacer(fig)
        y = height - _HEADER_H
        ax = fig.add_axes((left, (y - ax_h) / height, right - left, ax_h / height))
        obs = []
        if res is not None:
            words = _p_text(res, diag.verdict)
            first, _, rest = words.partition("\n")
            obs = [f"d = {d:.3f}, {first}" + (f"\n{rest}" if rest else ""), f"d = {d:.3f}\n{first}", f"d = {d:.3f}"]
        _draw_axis(
            ax,
            placer,
            b=b,
            grid=grid,
            crit=crit,
            d=d,
            obs_texts=obs,
            x0=0.0,
            x1=4.0,
            edge_labels=window is None,
            crit_labels=window is None,
        )
        ax.set_xticks(np.arange(0, 4.01, 0.5))
        ax.set_ylabel("full scale" if window else "null density", fontsize=MIN_FONT_PT, color=PALETTE["muted"])
        if window:
            zx0, zx1 = window
            _zoom_box(ax, window)
            y -= ax_h + _TICK_H + _GAP_H
            zax = fig.add_axes((left, (y - ax_h) / height, right - left, ax_h / height))
            _draw_axis(
                zax,
                placer,
                b=b,
                grid=grid,
                crit=crit,
                d=d,
                obs_texts=[f"d = {d:.3f}"],
                x0=zx0,
                x1=zx1,
                edge_labels=True,
                crit_labels=True,
            )
            zax.set_ylabel("close-up", fontsize=MIN_FONT_PT, color=PALETTE["muted"])
        _header(fig, left, height, "Durbin-Watson d on its 0\u20134 scale", _subtitle(diag, res, b, alpha, alt))
        yb = _BOTTOM_H + _ROW_H * len(note_lines)
        if handles:
            fig.legend(handles=handles, loc="lower left", bbox_to_anchor=(left - 0.01, yb / height), **_LEGEND_STYLE)
        for i, line in enumerate(reversed(note_lines)):
            fig.text(
                left,
                (_BOTTOM_H + _ROW_H * i) / height,
                line,
                fontsize=MIN_FONT_PT,
                style="italic",
                color=PALETTE["orange"],
                va="bottom",
            )
        fig.lagsight_caption = " ".join(filter(None, [caveat, _caption(res, b, crit, alpha, window, alt, d)]))  # type: ignore[attr-defined]
        fig.lagsight_notes = tuple(notes)  # type: ignore[attr-defined]
    return fig


#: how a figure names the alternative (two-sided otherwise)
ALTERNATIVE_WORDS = {"positive": "against positive correlation", "negative": "against negative correlation"}


def _subtitle(diag, res, b, alpha: float, alt: str) -> str:
    parts = [f"n = {diag.n:,}"]
    if b is not None:
        assumed = bool(getattr(res, "k_prime_assumed", False))
        parts.append(f"k\u2032 = {b.k_prime}" + (" (assumed)" if assumed else ""))
    parts.append(f"\u03b1 = {alpha:g}")
    parts.append(ALTERNATIVE_WORDS.get(alt, "two-sided"))
    return "  \u00b7  ".join(parts)


def _legend(dist, alpha: float, alt: str, count: int) -> list:
    """Legend of the lines of the scale figure; the regions are named on the axis itself."""
    if dist is None:
        return []
    return [
        Line2D([], [], color=PALETTE["ink"], lw=1.5, label="exact null density of d"),
        Line2D(
            [],
            [],
            color=PALETTE["ink"],
            lw=1.0,
            ls=(0, (4, 2)),
            label=f"critical value{'s' * (count > 1)}, {_level_words(alpha, alt)}",
        ),
    ]


def _region_legend() -> list:
    texts = {
        "positive": "evidence of positive correlation: d < dL",
        "inconclusive": "inconclusive: dL to dU, and 4\u2212dU to 4\u2212dL",
        "none": "no evidence: dU to 4\u2212dU",
        "negative": "evidence of negative correlation: d > 4\u2212dL",
    }
    handles = []
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
    return handles


def _caption(res, b, crit, alpha, window, alt, d) -> str:
    if res is None:
        return "Durbin-Watson scale: the test could not be run."
    parts = []
    if b is not None:
        parts.append(
            f"The shaded, hatched regions are the classical bounds decision at \u03b1 = {alpha:g} "
            f"(dL = {b.lower:.3f}, dU = {b.upper:.3f}): evidence of positive correlation below dL, inconclusive "
            "from dL to dU, no evidence from dU to 4\u2212dU, inconclusive up to 4\u2212dL, evidence of "
            "negative correlation above it."
        )
        if alt == "two-sided":
            parts.append("Two-sided, the regions use the one-sided bounds in each tail (the classical convention).")
    else:
        parts.append("No bounds regions are drawn (the bounds are not available here).")
    if crit:
        values = " and ".join(f"{q:.3f}" for q in crit)
        parts.append("The curve is the exact null density of d for this model's design.")
        level = _level_words(alpha, alt)
        if len(crit) == 2:
            parts.append(f"The two dashed lines are its exact critical values, {values}, at {level}.")
        else:
            parts.append(
                f"The dashed line is its exact critical value, {values}, at {level}; it settles what "
                "the inconclusive band leaves open."
            )
    if not math.isnan(d):
        parts.append(f"The solid line with the diamond marks the observed d = {d:.3f}.")
    if window:
        parts.append(f"The lower panel is a close-up of d from {window[0]:.3f} to {window[1]:.3f} (the dotted box).")
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
    ax_h = 0.72 if window else 0.9
    legend_h = 4 * _ROW_H + 0.04
    height = _HEADER_H + ax_h + _TICK_H + _XLABEL_H + legend_h + _BOTTOM_H
    if window:
        height += _GAP_H + ax_h + _TICK_H
    left, right = _LEFT / width, 1 - _RIGHT / width
    with figure_rc():
        fig = Figure(figsize=(width, height))
        placer = LabelPlacer(fig)
        y = height - _HEADER_H
        ax = fig.add_axes((left, (y - ax_h) / height, right - left, ax_h / height))
        common = dict(b=bounds, grid=None, crit=[], d=math.nan, obs_texts=[], crit_labels=False)
        _draw_axis(ax, placer, x0=0.0, x1=4.0, edge_labels=window is None, **common)
        ax.set_xticks(np.arange(0, 4.01, 0.5))
        last = ax
        if window:
            _zoom_box(ax, window)
            y -= ax_h + _TICK_H + _GAP_H
            last = fig.add_axes((left, (y - ax_h) / height, right - left, ax_h / height))
            _draw_axis(last, placer, x0=window[0], x1=window[1], edge_labels=True, **common)
            last.set_ylabel("close-up", fontsize=MIN_FONT_PT, color=PALETTE["muted"])
            ax.set_ylabel("full scale", fontsize=MIN_FONT_PT, color=PALETTE["muted"])
        last.set_xlabel("Durbin-Watson d", fontsize=MIN_FONT_PT)
        const = "with" if bounds.has_constant else "without"
        _header(
            fig,
            left,
            height,
            "Durbin-Watson bounds",
            f"n = {bounds.n:,}  \u00b7  k\u2032 = {bounds.k_prime} ({const} constant)  "
            f"\u00b7  \u03b1 = {bounds.alpha:g}",
        )
        fig.legend(
            handles=_region_legend(),
            loc="lower left",
            bbox_to_anchor=(left - 0.01, _BOTTOM_H / height),
            **{**_LEGEND_STYLE, "ncol": 1},
        )
        cap = (
            f"Classical bounds decision for a test against positive correlation at \u03b1 = {bounds.alpha:g}, "
            f"n = {bounds.n:,}, k\u2032 = {bounds.k_prime}: dL = {bounds.lower:.3f}, dU = {bounds.upper:.3f}; "
            "mirrored above 2 for negative correlation."
        )
        if window:
            cap += f" The lower panel is a close-up of d from {window[0]:.3f} to {window[1]:.3f} (the dotted box)."
        fig.lagsight_caption = cap  # type: ignore[attr-defined]
    return fig
