"""Text on the figures: readable in the panel's narrowest column, never overlapping, in the trade's words.

Outside references: the CSS and SVG units (CSS Values and Units Level 3: 1in = 96px = 72pt; an SVG's
width in pt sets its natural size); statsmodels' ``acorr_ljungbox`` and ``acf``; scipy's normal
quantile; Bartlett (1946, J. R. Statist. Soc. Suppl. 8) for the variance of r_h,
(1 + 2 sum_{j<h} r_j^2) / n, which is 1/n at lag 1 (as in any time-series text, e.g. Box & Jenkins).
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.diagnostic import acorr_ljungbox
from statsmodels.tsa.stattools import acf as sm_acf

import lagsight
from figure_cases import (
    COLUMN_PX,
    MIN_TEXT_PX,
    design_case,
    drawn_texts,
    figure_kinds,
    outside_figure,
    overlaps,
    seasonal_series,
    svg_font_sizes,
)
from lagsight.battery_run import DW
from lagsight.render import figures as F
from lagsight.render.style import REGION_STYLE


@pytest.fixture(scope="module")
def kinds():
    return figure_kinds()


KIND_NAMES = [
    "scale close-up",
    "scale two-sided close-up",
    "scale low d",
    "scale high d",
    "scale two-sided",
    "scale forced close-up",
    "scale bare residuals",
    "bounds",
    "bounds close-up",
    "correlogram seasonal",
    "correlogram bartlett",
    "lag scatter",
    "residuals time gaps",
    "residuals positions",
    "groups",
    "groups histogram",
    "power",
    "correlogram with caveat",
    "lag scatter with caveat",
    "residuals out of order",
]


def test_the_cases_cover_every_kind(kinds):
    assert list(kinds) == KIND_NAMES


@pytest.mark.parametrize("name", KIND_NAMES)
def test_every_text_is_at_least_10_css_px_in_a_480_px_column(kinds, name):
    fig = kinds[name]
    width_px, sizes = svg_font_sizes(fig)
    # natural width: about 5 in, i.e. 480 CSS px (an SVG 360pt wide is drawn 480 px wide)
    assert width_px == pytest.approx(480, abs=10)
    assert sizes, "the SVG keeps its text as text"
    smallest = min(sizes) * COLUMN_PX / width_px
    assert smallest >= MIN_TEXT_PX, f"{name}: smallest text {smallest:.2f} px"


@pytest.mark.parametrize("name", KIND_NAMES)
def test_no_two_texts_overlap_and_none_is_cut_off(kinds, name):
    fig = kinds[name]
    assert overlaps(fig) == []
    assert outside_figure(fig) == []


@pytest.mark.parametrize(
    "name,tallest",
    [
        ("scale close-up", 2.8),
        ("scale two-sided close-up", 2.8),
        ("scale forced close-up", 2.8),
        ("correlogram seasonal", 3.2),
        ("correlogram bartlett", 3.2),
        ("lag scatter", 3.4),
        ("residuals time gaps", 2.45),
    ],
)
def test_compact_heights(kinds, name, tallest):
    w, h = kinds[name].get_size_inches()
    assert w == pytest.approx(5.0)
    assert h <= tallest


def _region_label_boxes(fig, ax):
    r = fig.canvas.get_renderer()
    words = {v[0] for v in REGION_STYLE.values()}
    return [t.get_window_extent(r) for t in ax.texts if " ".join(t.get_text().split()) in words]


@pytest.mark.parametrize("name", [n for n in KIND_NAMES if n.startswith("scale")])
def test_the_observed_d_line_crosses_no_region_label(kinds, name):
    fig = kinds[name]
    fig.canvas.draw()
    crossed = 0
    for ax in fig.axes:
        for line in ax.lines:
            if line.get_gid() != "lgs-observed":
                continue
            x = ax.transData.transform((line.get_xdata()[0], 0))[0]
            for box in _region_label_boxes(fig, ax):
                crossed += box.x0 < x < box.x1
    assert crossed == 0


def test_region_label_moves_aside_when_d_falls_in_its_region(kinds):
    # d = 0.401 lies in the evidence region (0, dL): its words are drawn, beside the line
    fig = kinds["scale low d"]
    texts = " ".join(" ".join(t.get_text().split()) for t in fig.axes[0].texts)
    assert "evidence of positive correlation" in texts


@pytest.mark.parametrize("alternative", ["positive", "negative", "two-sided"])
def test_critical_value_legend_states_the_level_the_lines_are_drawn_at(alternative):
    d = design_case(40, 3, seed=6, alternative=alternative)
    alpha = 0.01
    fig = F.scale_figure(d, alpha=alpha)
    lines = [ln for ln in fig.axes[0].lines if ln.get_gid() == "lgs-exact-critical"]
    xs = sorted(ln.get_xdata()[0] for ln in lines)
    dist = d.distribution
    legend = " ".join(t.get_text() for leg in fig.legends for t in leg.get_texts())
    if alternative == "two-sided":
        # lines at the alpha/2 and 1 - alpha/2 points: the legend gives alpha/2 per tail
        assert xs == pytest.approx([dist.ppf(alpha / 2), dist.ppf(1 - alpha / 2)], abs=1e-9)
        assert "critical values, \u03b1/2 = 0.005 per tail" in legend
        assert "\u03b1 = 0.01" not in legend
    else:
        q = alpha if alternative == "positive" else 1 - alpha
        assert xs == pytest.approx([dist.ppf(q)], abs=1e-9)
        assert "critical value, \u03b1 = 0.01" in legend


@pytest.mark.parametrize("name", [n for n in KIND_NAMES if n.startswith("scale")])
def test_one_caption_matches_the_dashed_lines_drawn(kinds, name):
    fig = kinds[name]
    cap = fig.lagsight_caption
    count = sum(ln.get_gid() == "lgs-exact-critical" for ln in fig.axes[0].lines)
    if count == 2:
        assert "The two dashed lines are" in cap and "The dashed line" not in cap
    elif count == 1:
        assert "The dashed line is" in cap and "dashed lines" not in cap
    else:
        assert "dashed" not in cap


def test_ljung_box_guide_follows_max_lag():
    e = seasonal_series()
    d = lagsight.diagnose(e, period=24, max_lag=72)
    for h in (24, 72):
        fig = F.correlogram_figure(d.correlogram, max_lag=h, period=24)
        guide = fig.axes[0].get_title(loc="right")
        assert f"lags 1\u2013{h}" in guide
        assert f"Ljung-Box over the {h} lags drawn" in fig.lagsight_caption
        # statsmodels' acorr_ljungbox is the reference for Q and its p-value
        ref = acorr_ljungbox(e, lags=[h])
        q = float(ref["lb_stat"].iloc[0])
        assert f"Q = {q:,.2f}" in fig.lagsight_caption
        assert F.format_pvalue(float(ref["lb_pvalue"].iloc[0])) in guide


def test_bartlett_band_starts_at_lag_1_with_z_over_root_n(kinds):
    water = kinds["correlogram bartlett"]
    (band,) = [c for c in water.axes[0].collections if c.get_gid() == "lgs-band-acf"]
    paths = band.get_paths()
    resid = _water_resid()
    n = resid.size
    z = stats.norm.ppf(0.975)  # scipy's normal quantile

    def height_at(lag):
        """The band's upper edge above a lag: inside just below it, outside just above."""
        lo, hi = 0.0, 1.0  # bisection: (lag, lo) is inside the band, (lag, hi) is not
        for _ in range(50):
            mid = (lo + hi) / 2
            lo, hi = (mid, hi) if any(p.contains_point((lag, mid)) for p in paths) else (lo, mid)
        return lo

    # Bartlett (1946): var(r_1) = 1/n, so the band at lag 1 is z / sqrt(n), drawn from lag 1/2
    assert height_at(1.0) == pytest.approx(z / math.sqrt(n), rel=1e-9)
    assert height_at(0.6) == pytest.approx(z / math.sqrt(n), rel=1e-9)
    # and at lag 2 it is z sqrt((1 + 2 r_1^2) / n), r_1 from statsmodels' acf
    r1 = sm_acf(resid, nlags=1, fft=False)[1]
    assert height_at(2.0) == pytest.approx(z * math.sqrt((1 + 2 * r1**2) / n), rel=1e-9)


def _water_resid():
    import statsmodels.formula.api as smf

    from lagsight.scenarios import water_demand

    return smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=water_demand()).fit().resid.to_numpy()


def test_seasonal_guides_are_labelled(kinds):
    fig = kinds["correlogram seasonal"]
    guides = [ln.get_xdata()[0] for ln in fig.axes[1].lines if ln.get_gid() == "lgs-period"]
    assert guides == [24, 48, 72]
    ticks = {t.get_text() for t in fig.axes[1].get_xticklabels()}
    assert {"24", "48", "72"} <= ticks
    legend = [t.get_text() for leg in fig.legends for t in leg.get_texts()]
    assert "period 24" in legend


_CODE_WORD = re.compile(r"\b[A-Za-z]+_\w+")
_BARE_THOUSANDS = re.compile(r"(?<![\d,.\-])\d{4,}(?![\d\-])")


def _words_problems(text: str) -> list[str]:
    low = text.lower()
    found = [w for w in ("alpha", "rho", "pvalue", "p value") if re.search(rf"\b{w}\b", low)]
    found += _CODE_WORD.findall(text)
    found += [m for m in _BARE_THOUSANDS.findall(re.sub(r"seed \d+", "", text))]
    return found


@pytest.mark.parametrize("name", KIND_NAMES)
def test_words_on_figures_and_captions_are_the_trade_s(kinds, name):
    fig = kinds[name]
    on_figure = [t.get_text() for t in drawn_texts(fig)]
    if name == "residuals time gaps":
        # date tick labels carry years (2022), which are not quantities
        dates = {t.get_text() for t in fig.axes[0].get_xticklabels()} | {fig.axes[0].xaxis.get_offset_text().get_text()}
        on_figure = [t for t in on_figure if t not in dates]
    problems = [p for t in on_figure + [fig.lagsight_caption] for p in _words_problems(t)]
    assert problems == []


def test_word_check_catches_what_it_is_for():
    assert _words_problems("alpha = 0.05, rho 0.3, d_24 and n = 2016") == ["alpha", "rho", "d_24", "2016"]
    assert _words_problems("\u03b1 = 0.05, n = 2,016, 2023-02-19, seed 12345, p-value 1.000") == []


def test_thousands_separators_on_a_long_series():
    e = np.random.default_rng(3).normal(size=2016)
    d = lagsight.diagnose(e)
    for fig in (F.scale_figure(d), F.residuals_figure(d), F.correlogram_figure(d.correlogram)):
        text = " ".join(t.get_text() for t in drawn_texts(fig)) + " " + fig.lagsight_caption
        assert "2,016" in text and "2016" not in text
        assert _words_problems(text) == []
    # tick labels too: positions up to 50,000 and residuals in the thousands
    big = lagsight.diagnose(np.random.default_rng(4).normal(size=50_000) * 3000)
    for fig in (F.residuals_figure(big), F.lag_scatter_figure(big, lag=1)):
        ticks = [
            t.get_text() for t in drawn_texts(fig) if t in fig.axes[0].get_xticklabels() + fig.axes[0].get_yticklabels()
        ]
        assert any("," in t for t in ticks)
        assert _words_problems(" ".join(ticks)) == []


def test_scale_figure_draws_from_bare_residuals():
    e = np.random.default_rng(21).normal(size=80)
    d = lagsight.diagnose(np.array(e))
    fig = F.scale_figure(d)
    regions = {p.get_gid() for p in fig.axes[0].patches if (p.get_gid() or "").startswith("lgs-region-")}
    assert len(regions) == 5  # bounds at the assumed k' = 1
    (mark,) = [ln for ln in fig.axes[0].lines if ln.get_gid() == "lgs-observed-marker"]
    # the Durbin-Watson d of the series itself: sum of squared differences over sum of squares
    assert mark.get_xdata()[0] == pytest.approx(np.sum(np.diff(e) ** 2) / np.sum(e**2), rel=1e-12)
    assert d.tests[DW].statistic == pytest.approx(mark.get_xdata()[0])
    assert overlaps(fig) == [] and outside_figure(fig) == []
    svg = F.figure_to_svg(fig)
    assert "<text" in svg
