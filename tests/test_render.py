"""The render layer: figures, SVG/PNG export, HTML views, the report sentence.

Outside references: Savin & White (1977, Econometrica 45) Durbin-Watson bounds
tables at 5% and 1%; statsmodels' own test-suite reference values for its
macrodata regression; statsmodels' acf; numpy's corrcoef; the PNG file
signature (PNG specification, ISO/IEC 15948).  The escaping checks parse the
HTML with the standard library's html.parser.
"""

from __future__ import annotations

import base64
import dataclasses
import math
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from html import escape
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from matplotlib.figure import Figure
from statsmodels.tsa.stattools import acf as sm_acf

import lagsight
from lagsight.battery_run import BG, DW
from lagsight.render import figures as F
from lagsight.render import html as H
from lagsight.render import text as T
from lagsight.render.scale import density_grid
from lagsight.scenarios import water_demand
from lagsight.stats.bounds import BOUNDS_MAX_N


@pytest.fixture(scope="module")
def water():
    fit = smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=water_demand()).fit()
    return lagsight.diagnose(fit)


def _regions(fig: Figure) -> dict:
    out = {}
    for ax in fig.axes[:1]:
        for p in ax.patches:
            gid = p.get_gid() or ""
            if gid.startswith("lgs-region-"):
                out[gid[len("lgs-region-") :]] = p
    return out


def _by_gid(fig: Figure, gid: str, ax_index: int = 0) -> list:
    ax = fig.axes[ax_index]
    return [a for a in list(ax.lines) + list(ax.patches) + list(ax.collections) if a.get_gid() == gid]


def _design_case(n, k, seed=0, rho=0.0):
    rng = np.random.default_rng(seed)
    X = sm.add_constant(rng.normal(size=(n, k)))
    u = np.zeros(n)
    eps = rng.normal(size=n)
    for t in range(1, n):
        u[t] = rho * u[t - 1] + eps[t]
    fit = sm.OLS(X @ np.ones(k + 1) + u, X).fit()
    return lagsight.diagnose(fit.resid, exog=X)


# ---------------------------------------------------------------------------
# the 0-4 scale
# ---------------------------------------------------------------------------
def test_scale_figure_has_five_hatched_regions_density_and_observed_d(water):
    fig = F.scale_figure(water)
    assert isinstance(fig, Figure)
    regions = _regions(fig)
    assert set(regions) == {"positive", "inconclusive-low", "none", "inconclusive-high", "negative"}
    b = water.tests[DW].bounds
    edges = {k: (p.get_x(), p.get_x() + p.get_width()) for k, p in regions.items()}
    assert edges["positive"] == pytest.approx((0.0, b.lower))
    assert edges["inconclusive-low"] == pytest.approx((b.lower, b.upper))
    assert edges["none"] == pytest.approx((b.upper, 4 - b.upper))
    assert edges["negative"] == pytest.approx((4 - b.lower, 4.0))
    hatches = {k: p.get_hatch() for k, p in regions.items()}
    # evidence regions and inconclusive regions are hatched, each meaning with its own pattern
    assert all(hatches[k] for k in ("positive", "inconclusive-low", "inconclusive-high", "negative"))
    assert len({hatches["positive"], hatches["inconclusive-low"], hatches["negative"]}) == 3
    assert hatches["inconclusive-low"] == hatches["inconclusive-high"]
    assert not hatches["none"]
    faces = {k: p.get_facecolor() for k, p in regions.items()}
    assert len({faces["positive"], faces["inconclusive-low"], faces["none"], faces["negative"]}) == 4
    # the density and the observed d, with its p-value written beside it
    (dens,) = _by_gid(fig, "lgs-density")
    assert np.nanmax(dens.get_ydata()) > 0
    (mark,) = _by_gid(fig, "lgs-observed-marker")
    assert mark.get_xdata()[0] == pytest.approx(water.tests[DW].statistic)
    texts = " ".join(t.get_text() for t in fig.axes[0].texts)
    assert f"d = {water.tests[DW].statistic:.3f}, exact p-value" in texts
    assert T.format_pvalue(water.tests[DW].pvalue) in texts
    for words in ("evidence of positive", "evidence of negative"):
        assert words in texts.replace("\n", " ")
    # n = 730: the density is narrow, so a close-up with the words of the middle regions follows
    assert len(fig.axes) == 2
    zoom_texts = " ".join(t.get_text() for t in fig.axes[1].texts)
    assert "no evidence" in zoom_texts and "dL" in zoom_texts and "dU" in zoom_texts


@pytest.mark.parametrize(
    "n,k,alpha,lower,upper",
    [
        (100, 5, None, 1.571, 1.780),  # Savin & White (1977), 5% table
        (150, 3, 0.01, 1.584, 1.665),  # Savin & White (1977), 1% table
    ],
)
def test_scale_regions_match_published_bounds(n, k, alpha, lower, upper):
    d = _design_case(n, k, seed=n)
    fig = F.scale_figure(d, alpha=alpha)
    regions = _regions(fig)
    # three decimals in the table; 0.001 allows for a value on a rounding edge
    assert abs(regions["positive"].get_width() - lower) <= 0.001 + 1e-9
    assert abs(regions["none"].get_x() - upper) <= 0.001 + 1e-9
    assert abs(regions["negative"].get_x() - (4 - lower)) <= 0.001 + 1e-9


def test_density_curve_is_the_exact_density_and_integrates_to_one():
    d = _design_case(40, 3, seed=3)
    dist = d.distribution
    c, pdf = density_grid(dist)
    assert c.size == 161
    assert density_grid(dist)[0] is c  # cached: the same arrays come back
    pick = c[10:150:14]
    exact = dist.pdf(pick)
    assert np.max(np.abs(np.interp(pick, c, pdf) - exact)) < 1e-3 * pdf.max()
    # a density: its integral over the covered range is the probability of that range (~1)
    covered = dist.cdf(c[-1]) - dist.cdf(c[0])
    assert np.trapezoid(pdf, c) == pytest.approx(covered, abs=2e-3)
    fig = F.scale_figure(d)
    (crit,) = _by_gid(fig, "lgs-exact-critical")
    assert crit.get_xdata()[0] == pytest.approx(dist.ppf(d.alpha), abs=1e-9)


def test_scale_without_design_says_there_is_no_density():
    rng = np.random.default_rng(5)
    d = lagsight.diagnose(pd.Series(rng.normal(size=60)))
    fig = F.scale_figure(d)
    assert not _by_gid(fig, "lgs-density")
    assert len(_regions(fig)) == 5  # bounds (k' = 1 assumed, with a note) are drawn
    assert "No exact density" in " ".join(fig.lagsight_notes)
    assert any("No exact density" in t.get_text() for t in fig.texts)


def test_scale_without_bounds_says_why():
    # k' = 0: only a constant
    rng = np.random.default_rng(6)
    y = rng.normal(size=80)
    d = lagsight.diagnose(sm.OLS(y, np.ones((80, 1))).fit())
    fig = F.scale_figure(d)
    assert not _regions(fig)
    assert _by_gid(fig, "lgs-density")
    assert any("k\u2032 = 0" in note for note in fig.lagsight_notes)
    # n beyond the bounds limit: a message, no regions (a stand-in diagnosis carrying a long series)
    w = _design_case(60, 2, seed=7)
    big = dataclasses.replace(
        w,
        data=w.data.replace(resid=np.zeros(BOUNDS_MAX_N + 1)),
        tests={DW: dataclasses.replace(w.tests[DW], bounds=None)},
    )
    fig = F.scale_figure(big)
    assert not _regions(fig)
    assert any(f"n > {BOUNDS_MAX_N:,}" in note for note in fig.lagsight_notes)


def test_arima_diagnosis_has_no_scale_and_the_report_says_why():
    from statsmodels.tsa.arima.model import ARIMA

    rng = np.random.default_rng(8)
    y = np.cumsum(rng.normal(size=120)) * 0.1 + rng.normal(size=120)
    d = lagsight.diagnose(ARIMA(y, order=(1, 0, 0)).fit())
    fig = F.scale_figure(d)
    assert any("not available" in note for note in fig.lagsight_notes)
    page = H.diagnosis_html(d)
    assert "lgs-figure-scale" not in page
    assert "The 0-4 scale is not shown" in page


def test_bounds_figure_matches_published_bounds():
    # Savin & White (1977), 5% table, n = 20, k' = 1: dL 1.201, dU 1.411
    fig = F.bounds_figure(lagsight.dw_bounds(20, 1))
    regions = _regions(fig)
    assert abs(regions["positive"].get_width() - 1.201) <= 0.001
    assert abs(regions["none"].get_x() - 1.411) <= 0.001
    with pytest.raises(TypeError, match="'bounds'"):
        F.bounds_figure(1.5)


# ---------------------------------------------------------------------------
# other figures
# ---------------------------------------------------------------------------
def test_correlogram_figure_shows_statsmodels_acf(water):
    cg = water.correlogram
    fig = F.correlogram_figure(cg, max_lag=20)
    acf_ax, pacf_ax = fig.axes[:2]
    inside = _by_gid(fig, "lgs-acf-inside")[0]
    outside = _by_gid(fig, "lgs-acf-outside")[0]
    xs = np.concatenate([inside.get_xdata(), outside.get_xdata()])
    ys = np.concatenate([inside.get_ydata(), outside.get_ydata()])
    order = np.argsort(xs)
    # statsmodels' acf (general-purpose reference)
    ref = sm_acf(water.data.resid, nlags=20, fft=False)[1:]
    assert np.allclose(ys[order], ref, atol=1e-10)
    assert list(xs[order]) == list(range(1, 21))
    # points outside the white-noise band are the ones drawn as outside
    assert set(outside.get_xdata()) == set(np.flatnonzero(np.abs(ref) > cg.white_band) + 1)
    assert acf_ax.get_title(loc="left").startswith("ACF") and pacf_ax.get_title(loc="left").startswith("PACF")
    bart = F.correlogram_figure(cg, max_lag=20, band="bartlett")
    assert "Bartlett" in bart.lagsight_caption
    with pytest.raises(ValueError, match="'band'"):
        F.correlogram_figure(cg, band="wide")
    with pytest.raises(ValueError, match="'max_lag'"):
        F.correlogram_figure(cg, max_lag=0)


def test_lag_scatter_reports_the_pair_correlation_and_thins_for_display():
    rng = np.random.default_rng(9)
    e = rng.normal(size=10_000).cumsum() * 0.05 + rng.normal(size=10_000)
    fig = F.lag_scatter_figure(e, lag=3)
    r = np.corrcoef(e[:-3], e[3:])[0, 1]  # numpy reference
    assert f"r = {r:.3f}" in fig.axes[0].get_title(loc="left")
    (pts,) = _by_gid(fig, "lgs-lag-points")
    assert len(pts.get_xdata()) <= F.MAX_POINTS
    assert pts.get_rasterized()
    assert "for display" in fig.lagsight_caption and "9,997" in fig.lagsight_caption
    small = F.lag_scatter_figure(e[:200], lag=1)
    assert len(_by_gid(small, "lgs-lag-points")[0].get_xdata()) == 199


def test_residuals_figure_time_axis_gaps_and_thinning():
    frame = water_demand(400)
    frame = frame.drop(frame.index[[50, 51, 200, 300]])  # three gaps in the daily stamps
    d = lagsight.diagnose(smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=frame).fit())
    fig = F.residuals_figure(d)
    gaps = _by_gid(fig, "lgs-gap")
    assert len(gaps) == 3
    (line,) = _by_gid(fig, "lgs-residuals")
    assert int(np.isnan(line.get_ydata()).sum()) == 3  # the line is broken at each gap
    assert fig.axes[0].get_xlabel() == "date"
    assert "3 gaps" in fig.lagsight_caption
    # a long series without time: positions, thinned to the extremes of each block
    rng = np.random.default_rng(10)
    long = lagsight.diagnose(pd.Series(rng.normal(size=50_000)))
    fig = F.residuals_figure(long)
    (line,) = _by_gid(fig, "lgs-residuals")
    y = line.get_ydata()
    assert len(y) <= F.MAX_POINTS + 2
    assert np.nanmax(y) == long.data.resid.max() and np.nanmin(y) == long.data.resid.min()
    assert fig.axes[0].get_xlabel() == "position in test order"
    assert "every test uses all points" in fig.lagsight_caption


def test_power_and_groups_figures():
    d = _design_case(60, 2, seed=11)
    from lagsight.stats.power import dw_power

    curve = dw_power(d.data.exog, n_sim=200)
    fig = F.power_figure(curve)
    (line,) = _by_gid(fig, "lgs-power")
    assert np.allclose(line.get_ydata(), curve.power)
    rng = np.random.default_rng(12)
    frame = pd.DataFrame({"g": np.repeat(["$a$", "b&c", "<d>"], 30), "x": rng.normal(size=90)})
    frame["y"] = 1 + frame["x"] + rng.normal(size=90)
    g = lagsight.diagnose(frame, response="y", predictors=["x"], groups="g")
    fig = F.groups_figure(g.groups)
    dots = sum(len(a.get_xdata()) for a in fig.axes[0].lines if (a.get_gid() or "").startswith("lgs-group-"))
    assert dots == 3
    labels = [t.get_text() for t in fig.axes[0].get_yticklabels()]
    assert r"\$a\$" in labels  # dollar signs stay literal, never mathtext
    svg = F.figure_to_svg(fig)
    assert "$a$" in svg and "b&amp;c" in svg and "&lt;d&gt;" in svg


# ---------------------------------------------------------------------------
# export
# ---------------------------------------------------------------------------
def test_svg_is_inline_ready_without_external_references(water):
    fig = F.scale_figure(water)
    svg = F.figure_to_svg(fig, title='scale <"x">')
    assert svg.startswith("<svg ")
    for bad in ("http:", "https:", "<!DOCTYPE", "<?xml", "<script", "xlink:", "<metadata", "*{"):
        assert bad not in svg
    assert 'aria-label="scale &lt;&quot;x&quot;&gt;"' in svg
    assert "<text" in svg and "Durbin-Watson d on its 0" in svg  # text kept as text
    root = ET.fromstring(svg)  # well-formed XML
    assert root.tag == "svg"
    ids = re.findall(r'\sid="([^"]+)"', svg)
    refs = re.findall(r'(?:url\(#|href="#)([^")]+)', svg)
    assert refs and set(refs) <= set(ids)
    assert len(ids) == len(set(ids))
    # regions carry classes, hatches are patterns
    assert 'class="lgs-region-positive"' in svg and "<pattern" in svg
    # two copies of one figure never share an id; a fixed prefix gives identical text
    other = F.figure_to_svg(fig)
    assert not set(ids) & set(re.findall(r'\sid="([^"]+)"', other))
    assert F.figure_to_svg(fig, id_prefix="a1-") == F.figure_to_svg(fig, id_prefix="a1-")
    with pytest.raises(ValueError, match="'id_prefix'"):
        F.figure_to_svg(fig, id_prefix='x"><script>')
    with pytest.raises(TypeError, match="'fig'"):
        F.figure_to_svg("not a figure")


def test_png_data_uri_decodes_to_png(water):
    uri = F.figure_to_png_data_uri(F.correlogram_figure(water.correlogram))
    assert uri.startswith("data:image/png;base64,")
    raw = base64.b64decode(uri.split(",", 1)[1])
    assert raw[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification)
    with pytest.raises(ValueError, match="'colors'"):
        F.figure_to_png(F.correlogram_figure(water.correlogram), colors=1)


def test_rendering_never_uses_pyplot_or_changes_global_settings():
    code = (
        "import matplotlib as mpl, sys, numpy as np, pandas as pd\n"
        "import lagsight\n"
        "from lagsight.render import diagnosis_html\n"
        "before = mpl.rcParams.copy()  # copy() does not resolve the backend (reading it would load pyplot)\n"
        "d = lagsight.diagnose(pd.Series(np.random.default_rng(0).normal(size=300)))\n"
        "html = diagnosis_html(d)\n"
        "assert 'matplotlib.pyplot' not in sys.modules, 'pyplot imported'\n"
        "changed = [k for k in before if k != 'backend' and before[k] != mpl.rcParams[k]]\n"
        "assert not changed, changed\n"
        "print('ok')\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "ok"


# ---------------------------------------------------------------------------
# HTML
# ---------------------------------------------------------------------------
class _Collector(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags, self.attrs, self.text = [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs += [name for name, _ in attrs]

    def handle_data(self, data):
        self.text.append(data)


def _parse(page: str) -> _Collector:
    c = _Collector()
    c.feed(page)
    c.close()
    return c


def test_diagnosis_html_structure(water):
    page = H.diagnosis_html(water)
    assert page.startswith('<div class="lgs-root"') and page.rstrip().endswith("</div>")
    assert page.count('class="lgs-root"') == 1
    style = re.search(r"<style>(.*?)</style>", page, re.S).group(1)
    # every rule is scoped under .lgs-root
    for selector_group in re.findall(r"(?:^|})\s*([^{}@]+)\{", style):
        for selector in selector_group.split(","):
            assert ".lgs-root" in selector, selector
    assert "prefers-color-scheme: dark" in style and "--jp-" in style
    assert page.count("<svg") == 4  # scale, correlogram, lag scatter, residuals
    for name in water.tests:
        assert re.search(rf'<td( data-label="[^"]*")?>{re.escape(escape(name))}</td>', page), name
    assert 'class="lgs-table lgs-remedies"' in page  # correlation was found: remedies shown
    assert '<pre class="lgs-text">' in page and escape(water.verdict.headline) in page
    assert ".lgs-root .lgs-text{display:none}" in style
    assert "lgs-focus" in page  # the test the verdict leads with is highlighted
    png = H.diagnosis_html(water, figures="png")
    assert "<svg" not in png and png.count('<img src="data:image/png;base64,') == 4
    bare = H.diagnosis_html(water, figures="none", lag=None)
    assert "<svg" not in bare and "<img" not in bare and "lgs-tests" in bare


def test_view_options_are_checked(water):
    with pytest.raises(ValueError, match="'lag'"):
        H.build_view(water, lag=water.n)
    with pytest.raises(ValueError, match="'test'"):
        H.build_view(water, test="Unknown test")
    with pytest.raises(ValueError, match="'figures'"):
        H.build_view(water, figures="gif")
    with pytest.raises(ValueError, match="'band'"):
        H.build_view(water, band="red")
    with pytest.raises(TypeError, match="'diag'"):
        H.build_view("model")
    view = H.build_view(water, test=BG, max_lag=10, band="bartlett", lag=7)
    assert view.focus_test == BG and view.focus_guide == T.TEST_GUIDE[BG]
    assert view.tests.rows[view.tests.focus][0] == BG
    assert [f.key for f in view.figures] == ["scale", "correlogram", "lag", "residuals"]


def test_a_failing_figure_leaves_the_rest_of_the_report(water, monkeypatch):
    def broken(diag):
        raise RuntimeError("drawing failed on purpose")

    monkeypatch.setattr(F, "residuals_figure", broken)
    page = H.diagnosis_html(water)
    assert "Residuals in test order could not be drawn: drawing failed on purpose" in page
    assert "lgs-figure-scale" in page and "lgs-tests" in page


def test_save_html_writes_one_offline_file(water, tmp_path):
    path = H.save_html(water, tmp_path / "report.html")
    assert path == tmp_path / "report.html" and list(tmp_path.iterdir()) == [path]
    page = path.read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and '<meta charset="utf-8">' in page
    assert "<title>lagsight report: statsmodels OLS results (formula), 730 rows</title>" in page
    assert not re.search(r"https?:", page)
    assert not re.search(r'\s(?:src|href)="(?!data:|#)', page)  # nothing to fetch
    with pytest.raises(ValueError, match="'path'"):
        H.save_html(water, tmp_path / "missing" / "r.html")
    with pytest.raises(TypeError, match="'path'"):
        H.save_html(water, 42)


def test_size_budget(water):
    # one panel's saved output must stay within 300 KB
    assert len(H.diagnosis_html(water).encode()) <= 300_000
    assert len(H.diagnosis_html(water, figures="png").encode()) <= 300_000
    long = _design_case(20_000, 4, seed=13, rho=0.2)
    assert len(H.diagnosis_html(long).encode()) <= 300_000


_NASTY = st.text(alphabet=st.sampled_from(list("<>&\"'=/ ab")), min_size=0, max_size=8)


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(resp=_NASTY, pred=_NASTY, group=_NASTY, idx=_NASTY, g1=_NASTY, g2=_NASTY)
def test_user_strings_are_escaped_in_every_html_output(tmp_path_factory, resp, pred, group, idx, g1, g2):
    names = {"resp": "<script>r" + resp, "pred": 'x"&' + pred, "group": "g'<" + group}
    labels = ["<script>alert(1)</script>" + g1, "a&b\"c'" + g2 + "!"]
    n = 40
    rng = np.random.default_rng(0)
    frame = pd.DataFrame(
        {
            names["resp"]: rng.normal(size=n),
            names["pred"]: rng.normal(size=n),
            names["group"]: np.repeat(labels, n // 2),
        },
        index=pd.Index([f"<i>{idx}{i:03d}" for i in range(n)], name="<b>when"),
    )
    d = lagsight.diagnose(frame, response=names["resp"], predictors=[names["pred"]], groups=names["group"])
    path = tmp_path_factory.mktemp("esc") / "r.html"
    outputs = [
        H.diagnosis_html(d),
        H.diagnosis_html(d, figures="png"),
        H.save_html(d, path).read_text(encoding="utf-8"),
    ]
    # shown: response and predictor names (source, remedies table), group labels, index values (span)
    shown = [names["resp"], names["pred"]] + labels + [str(d.data.index[0])]
    for page in outputs:
        parsed = _parse(page)
        assert "script" not in parsed.tags
        assert not [a for a in parsed.attrs if a.startswith("on")]
        text = "".join(parsed.text)
        for s in shown:
            assert escape(s, quote=True) in page  # written escaped ...
            assert s in text  # ... and reads back as plain text
        for s in shown + [names["group"], "<b>when"]:
            assert s not in page  # never raw (each holds '<' or '&')


# ---------------------------------------------------------------------------
# text
# ---------------------------------------------------------------------------
def _macro_fit():
    # statsmodels' macrodata regression from its own test suite:
    # 400 dlog(realinv) on a constant, 400 dlog(realgdp) and realint lagged one quarter
    data = sm.datasets.macrodata.load_pandas().data
    frame = pd.DataFrame(
        {
            "inv": 400 * np.diff(np.log(data["realinv"].to_numpy())),
            "gdp": 400 * np.diff(np.log(data["realgdp"].to_numpy())),
            "rate": data["realint"].to_numpy()[:-1],
        },
        index=pd.period_range("1959Q2", periods=len(data) - 1, freq="Q"),
    )
    return smf.ols("inv ~ gdp + rate", data=frame).fit()


def test_report_sentence_against_statsmodels_reference_values():
    d = lagsight.diagnose(_macro_fit())
    md = T.report_sentence(d)
    text = T.report_sentence(d, "text")
    # statsmodels test-suite reference: DW 2.213805 on n = 202 observations, 2 regressors
    assert text.startswith("Durbin-Watson d = 2.214 (n = 202, k' = 2), exact p-value ")
    assert T.format_pvalue(d.tests[DW].pvalue) in text
    assert "against positive autocorrelation (Imhof inversion);" in text
    # quarterly index: the verdict's family is Durbin-Watson and its order-4 twin, weighted Holm
    assert text.endswith(
        f"; Durbin-Watson and the order-4 test, weighted Holm (0.8 : 0.2) at α = 0.05: "
        f"adjusted p = "
        f"{T.format_pvalue(d.verdict.adjusted_pvalue(DW))}."
    )
    assert md.startswith("Durbin-Watson *d* = 2.214 (*n* = 202, *k*\u2032 = 2), exact *p*-value ")
    # statsmodels test-suite reference: Breusch-Godfrey(4) LM 4.771042651230007, p 0.3116067133066697
    bg = T.report_sentence(d, "text", test=BG)
    assert bg.startswith("Breusch-Godfrey LM = 4.771 (n = 202, df 4), p-value 0.312 against autocorrelation")
    with pytest.raises(ValueError, match="'fmt'"):
        T.report_sentence(d, "html")
    with pytest.raises(ValueError, match="'test'"):
        T.report_sentence(d, test="nope")


def test_sentence_without_design_gives_bounds_and_no_p_value():
    rng = np.random.default_rng(14)
    d = lagsight.diagnose(pd.Series(rng.normal(size=50)))
    s = T.report_sentence(d, "text", test=DW)
    assert "no exact p-value" in s and "dL = " in s and "dU = " in s


def test_format_pvalue():
    assert T.format_pvalue(0.0123) == "0.012"
    assert T.format_pvalue(4.4037e-61) == "4.4e-61"
    assert T.format_pvalue(float("nan")) == "n/a"
    assert T.format_pvalue(0.0) == "< 1e-300"
    assert T.format_pvalue(1.0) == "1.000"


def test_plain_text_view_lists_every_test(water):
    txt = T.diagnosis_text(water)
    assert water.verdict.headline in txt
    for name in water.tests:
        assert name in txt
    assert "To report: Durbin-Watson d = 0.889" in txt
    assert not math.isnan(water.tests[DW].pvalue)


# ---------------------------------------------------------------------------
# notes reach every view
# ---------------------------------------------------------------------------
def test_test_notes_and_data_notes_reach_the_static_html():
    rng = np.random.default_rng(2)
    x = rng.normal(size=60)
    frame = pd.DataFrame(
        {
            "y<&": rng.normal(size=60),
            "x": x,
            "x2": 2 * x,
            "g": np.array(["a"] * 25 + ["b"] * 25 + [None] * 10, dtype=object),
        }
    )
    d = lagsight.diagnose(frame, response="y<&", predictors=["x", "x2"], groups="g")
    page = H.diagnosis_html(d, figures="none")
    assert escape("Durbin-Watson: the design has rank 2 < 3 columns; it was reduced to its column space") in page
    assert "10 rows have no group label and were left out." in page
    assert "y<&" not in page


def test_assumed_k_prime_in_the_key_figures_and_the_scale_subtitle():
    e = np.random.default_rng(4).normal(size=60)
    d = lagsight.diagnose(e)
    page = H.diagnosis_html(d, figures="none")
    assert "k&#x27;:</b> 1 (assumed: no design given)" in page
    fig = F.scale_figure(d)
    texts = [t.get_text() for t in fig.texts]
    # the subtitle says the value is assumed; the note under the axes says why (no design matrix)
    assert any("k\u2032 = 1 (assumed)" in t for t in texts)
    assert any("design matrix is not known" in t for t in texts)


@pytest.mark.parametrize("scale", [1e200, 1e-200])
def test_lag_scatter_correlation_is_scale_free(scale):
    # Pearson's correlation does not depend on the units; numpy's corrcoef on unit data is the reference
    from lagsight.stats.correlogram import lag_pairs

    e = np.random.default_rng(8).normal(size=50)
    ref = float(np.corrcoef(e[:-1], e[1:])[0, 1])
    assert lag_pairs(e * scale, lag=1).correlation == pytest.approx(ref, rel=1e-12)


def test_a_warning_while_drawing_becomes_a_caption_note(water, monkeypatch):
    # e.g. matplotlib on a glyph its font lacks (a label in a script the font does not cover)
    import warnings

    real = F.residuals_figure

    def warns(diag, **kwargs):
        warnings.warn("Glyph 26085 missing from font(s) DejaVu Sans.", UserWarning, stacklevel=2)
        return real(diag, **kwargs)

    monkeypatch.setattr(F, "residuals_figure", warns)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        view = H.build_view(water, figures="png")
    caption = next(f.caption for f in view.figures if f.key == "residuals")
    assert "Glyph 26085 missing from font(s) DejaVu Sans." in caption
