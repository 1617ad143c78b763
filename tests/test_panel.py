"""The interactive panel, headless: setting widget values changes the panel's state and figures.

Numbers the panel shows are checked against general-purpose references:
statsmodels' Breusch-Godfrey and Ljung-Box functions, numpy's correlation, and
the white-noise band z_{1-alpha/2}/sqrt(n) of the sample ACF (Bartlett 1946;
Box & Jenkins), with z from scipy.
"""

from __future__ import annotations

import asyncio
import math
import re

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from IPython.core.interactiveshell import InteractiveShell
from IPython.utils.capture import capture_output
from matplotlib.figure import Figure
from scipy import stats
from statsmodels.stats.diagnostic import acorr_breusch_godfrey, acorr_ljungbox

import lagsight
from lagsight.battery_run import BG, DW, LB, SEASONAL
from lagsight.panel import DiagnosisPanel
from lagsight.scenarios import water_demand

InteractiveShell.instance()  # display() needs a shell


@pytest.fixture(scope="module")
def fit():
    return smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=water_demand()).fit()


@pytest.fixture(scope="module")
def diag(fit):
    return lagsight.diagnose(fit)


@pytest.fixture
def panel(diag):
    return DiagnosisPanel(diag, snapshot_delay=0)


def _gid(ax, gid):
    return [a for a in ax.get_children() if a.get_gid() == gid]


def _widgets(widget):
    yield widget
    for child in getattr(widget, "children", ()):
        yield from _widgets(child)


def test_initial_state(panel, diag):
    assert panel.current is diag
    assert panel.test == DW and panel.band == "white" and panel.lag == 1
    assert panel.max_lag == len(diag.correlogram.lags)
    assert panel.alpha == 0.05 and panel.alternative == "positive"
    assert panel.errors == {}
    for name in ("scale", "correlogram", "lag"):
        assert isinstance(panel.figures[name], Figure), name
    assert "<svg" in panel.scale_view.value and "<svg" in panel.correlogram_view.value
    # the sections open on demand: only the open one is drawn (here the corrections, for evidence)
    assert panel.section == "remedies" and "residuals" not in panel.figures and panel.residuals_view.value == ""
    panel.section = "residuals"
    assert isinstance(panel.figures["residuals"], Figure) and "<svg" in panel.residuals_view.value


def test_every_widget_has_a_lagsight_class(panel):
    for widget in _widgets(panel.widget):
        assert any(c.startswith("lgs-") for c in widget._dom_classes), type(widget).__name__
    named = {c for w in _widgets(panel.widget) for c in w._dom_classes}
    for cls in (
        "lgs-lag-slider",
        "lgs-test-toggle",
        "lgs-alpha",
        "lgs-alternative",
        "lgs-band",
        "lgs-lag-picker",
        "lgs-save",
        "lgs-prepare",
        "lgs-scale-view",
        "lgs-cautions-line",
        "lgs-more",
        "lgs-panel",
    ):
        assert cls in named, cls
    assert panel.lag_slider.continuous_update is False and panel.lag_picker.continuous_update is False


def test_lag_slider_redraws_the_correlogram(panel):
    before = panel.correlogram_view.value
    panel.lag_slider.value = 10
    assert panel.max_lag == 10
    assert panel.correlogram_view.value != before
    acf_ax = panel.figures["correlogram"].axes[0]
    marks = _gid(acf_ax, "lgs-acf-inside") + _gid(acf_ax, "lgs-acf-outside")
    assert sum(len(m.get_xdata()) for m in marks) == 10  # one marker per lag shown
    assert panel.timings["correlogram"] > 0


def test_band_toggle_and_alpha_change_the_band(panel, diag):
    n = diag.n
    panel.band_toggle.value = "white"
    band = _gid(panel.figures["correlogram"].axes[0], "lgs-band-acf")[0]
    # white-noise band at alpha 0.05: z_0.975 / sqrt(n)
    assert band.get_y() + band.get_height() == pytest.approx(stats.norm.ppf(0.975) / math.sqrt(n), rel=1e-9)
    panel.alpha_picker.value = 0.01
    assert panel.current.alpha == 0.01
    assert panel._correlogram().white_band == pytest.approx(stats.norm.ppf(0.995) / math.sqrt(n), rel=1e-12)
    view = panel.correlogram_view.value
    panel.band_toggle.value = "bartlett"
    assert panel.band == "bartlett" and panel.correlogram_view.value != view
    cg = panel._correlogram()
    # Bartlett: z * sqrt((1 + 2 sum_{j<h} r_j^2) / n), at alpha 0.01
    r = cg.acf
    h = 5
    expected = stats.norm.ppf(0.995) * math.sqrt((1 + 2 * np.sum(r[: h - 1] ** 2)) / n)
    assert cg.bartlett_band[h - 1] == pytest.approx(expected, rel=1e-10)


def test_test_toggles_show_each_statistic(panel, fit):
    assert set(panel.test_toggle.options) >= {DW, BG, LB, SEASONAL, "Runs test"}
    panel.test_toggle.value = BG
    assert panel.test == BG
    lm = acorr_breusch_godfrey(fit, nlags=7, result_object=False)[0]  # statsmodels reference, same order 7
    assert f"{lm:.4g}" in panel.test_view.value
    panel.test_toggle.value = LB
    q = acorr_ljungbox(fit.resid, lags=[14])["lb_stat"].iloc[0]  # statsmodels reference at lag 14
    assert f"{q:.4g}" in panel.test_view.value
    assert "<svg" not in panel.test_view.value and "<svg" in panel.scale_view.value  # the scale shows beside
    panel.test_toggle.value = DW
    assert panel.test_stack.selected_index == list(panel.test_views).index(DW)


def test_alternative_updates_every_view(panel, fit):
    head, positive_view = panel.headline.value, panel.test_view.value
    positive_scale = panel.figures["scale"]
    panel.alternative_picker.value = "negative"
    assert panel.alternative == "negative"
    fresh = lagsight.diagnose(fit, alternative="negative")
    assert panel.current.tests[DW].pvalue == pytest.approx(fresh.tests[DW].pvalue, rel=1e-9)
    assert panel.current.tests[DW].pvalue > 0.99  # d = 0.889 is far in the positive tail
    assert panel.current.verdict.headline == fresh.verdict.headline
    assert panel.headline.value != head
    # a new figure for the new alternative; switching back reuses the markup already drawn
    assert panel.figures["scale"] is not positive_scale
    drawn = panel.renders
    panel.alternative_picker.value = "positive"
    assert panel.renders == drawn and panel.test_view.value == positive_view
    assert panel.headline.value == head


def test_lag_picker_redraws_the_scatter(panel, diag):
    e = diag.data.resid
    panel.lag_picker.value = 3
    assert panel.lag == 3
    r = np.corrcoef(e[:-3], e[3:])[0, 1]  # numpy reference
    title = panel.figures["lag"].axes[0].get_title(loc="left")
    assert f"{r:.3f}" in title and "Lag 3" in title


def test_a_failing_view_shows_its_message_and_the_rest_works(panel, monkeypatch):
    import lagsight.render.figures as figures

    def broken(*args, **kwargs):
        raise ValueError("the drawing broke")

    monkeypatch.setattr(figures, "correlogram_figure", broken)
    panel.lag_slider.value = 7
    assert "the drawing broke" in panel.correlogram_view.value
    assert panel.errors["correlogram"] == "the drawing broke"
    panel.test_toggle.value = BG
    assert BG in panel.test_view.value and "test" not in panel.errors
    monkeypatch.undo()
    panel.lag_slider.value = 8
    assert "correlogram" not in panel.errors and "<svg" in panel.correlogram_view.value


def test_a_test_that_could_not_run_shows_why():
    frame = water_demand()
    fit = smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=frame).fit()
    d = lagsight.diagnose(fit.resid)  # residuals without their design
    assert SEASONAL in d.errors
    panel = DiagnosisPanel(d, test=SEASONAL, snapshot_delay=0)
    assert d.errors[SEASONAL] in panel.test_view.value.replace("&#x27;", "'")
    panel.test_toggle.value = DW
    assert "bounds" in panel.test_view.value.lower()
    assert panel.errors == {}


def test_remedies_table_follows_alpha(panel, diag):
    terms = list(diag.remedies.table.index)
    for term in terms:
        assert term in panel.remedies_view.value
    panel.alpha_picker.value = 0.001
    assert panel.current.remedies.alpha == 0.001
    assert "\u03b1 = 0.001" in panel.remedies_view.value


def test_no_remedies_when_no_evidence():
    rng = np.random.default_rng(11)
    x = rng.normal(size=200)
    frame = pd.DataFrame({"x": x, "y": 1 + x + rng.normal(size=200)})
    d = lagsight.diagnose(smf.ols("y ~ x", data=frame).fit())
    assert d.verdict.finding == "no evidence"
    panel = DiagnosisPanel(d, snapshot_delay=0)
    assert panel.section == "next" and panel.remedies_view.value == ""  # drawn when opened
    panel.section = "remedies"
    assert "No corrected inference" in panel.remedies_view.value


def test_groups_view():
    rng = np.random.default_rng(5)
    frame = pd.DataFrame({"store": np.repeat(["a<b>", "c&d"], 60), "x": rng.normal(size=120)})
    frame["y"] = frame["x"] + rng.normal(size=120)
    d = lagsight.diagnose(smf.ols("y ~ x", data=frame).fit(), groups="store")
    panel = DiagnosisPanel(d, snapshot_delay=0)
    assert "a&lt;b&gt;" in panel.groups_view.value and "c&amp;d" in panel.groups_view.value
    assert "<b>" not in panel.groups_view.value.replace("<b>n</b>", "")
    assert isinstance(panel.figures["groups"], Figure)


def test_groups_view_follows_the_alternative():
    # store "up" has positive AR(1) errors, store "down" negative ones: the alternative decides which shows evidence
    rng = np.random.default_rng(8)
    parts = []
    for name, rho in (("up", 0.7), ("down", -0.7)):
        u = np.zeros(150)
        for t in range(1, 150):
            u[t] = rho * u[t - 1] + rng.normal()
        x = rng.normal(size=150)
        parts.append(pd.DataFrame({"store": name, "x": x, "y": x + u}))
    d = lagsight.diagnose(smf.ols("y ~ x", data=pd.concat(parts, ignore_index=True)).fit(), groups="store")
    panel = DiagnosisPanel(d, snapshot_delay=0)

    def finding(store):
        table = panel.current.groups.table.set_index("group")
        return table.loc[store, "finding"]

    assert finding("up") != "none" and finding("down") == "none"
    positive_view = panel.groups_view.value
    panel.alternative_picker.value = "negative"
    assert finding("up") == "none" and finding("down") != "none"
    figure = re.compile(r"<svg\b.*?</svg>", re.S)
    assert figure.search(panel.groups_view.value).group(0) != figure.search(positive_view).group(0), (
        "the groups figure was not drawn again for the new alternative"
    )


def test_hostile_names_are_escaped_in_every_view():
    rng = np.random.default_rng(2)
    n = 150
    u = np.zeros(n)
    for t in range(1, n):
        u[t] = 0.7 * u[t - 1] + rng.normal()
    bad = '<script>alert("x")</script>&'
    frame = pd.DataFrame({bad: rng.normal(size=n)}, index=pd.date_range("2024-01-01", periods=n, freq="D"))
    frame["y'q"] = 2 + frame[bad] + u
    d = lagsight.diagnose(frame, response="y'q", predictors=[bad])
    assert d.remedies is not None
    panel = DiagnosisPanel(d, snapshot_delay=0)
    values = [w.value for w in _widgets(panel.widget) if hasattr(w, "value") and isinstance(w.value, str)]
    joined = "".join(v for v in values if v is not panel.style.value)
    assert "<script" not in joined
    assert "&lt;script&gt;" in panel.remedies_view.value


def test_the_report_button_offers_a_browser_download_and_writes_nothing(panel, tmp_path, monkeypatch):
    import base64
    import datetime
    import html

    from lagsight.panel import download_name

    monkeypatch.chdir(tmp_path)
    panel.name = "fit"
    panel.section = "report"
    panel.save_button.click()
    assert list(tmp_path.iterdir()) == [], "the report button wrote a file on the server"
    link = re.search(
        r'<a class="lgs-download" download="([^"]+)" href="data:text/html;charset=utf-8;base64,([^"]+)"',
        panel.save_status.value,
    )
    assert link, panel.save_status.value
    name = html.unescape(link.group(1))
    assert re.fullmatch(r"fit-\d{4}-\d{2}-\d{2}-\d{4}\.html", name), name
    page = base64.b64decode(link.group(2)).decode("utf-8")
    same_ids = lambda text: re.sub(r"lgs[0-9a-f]+[a-z]+\d+-", "", text)  # noqa: E731  (SVG id prefixes count up)
    assert same_ids(page) == same_ids(panel.report_html())
    # assembled from the panel's own figures, it is the report save_html writes for this view
    from lagsight.render.html import diagnosis_html

    assert same_ids(diagnosis_html(panel.current, **panel.view_options)) in same_ids(page)
    assert "<svg" in page and "http://" not in page and "https://" not in page
    # the link is withdrawn when the view changes (it would hold an older state)
    panel.lag_slider.value = 4
    assert "lgs-download" not in panel.save_status.value and "prepare the report again" in panel.save_status.value
    assert download_name("my model/<x>", datetime.datetime(2026, 1, 2, 3, 4)) == "my-model-x-2026-01-02-0304.html"
    assert download_name(None, datetime.datetime(2026, 1, 2, 3, 4)) == "lagsight-report-2026-01-02-0304.html"


def test_save_writes_only_where_asked_and_never_overwrites_unasked(panel, tmp_path):
    target = tmp_path / "report.html"
    assert panel.save(target) == target.resolve() and target.exists()
    first = target.read_text(encoding="utf-8")
    with pytest.raises(FileExistsError, match="overwrite=True"):
        panel.save(target)
    assert target.read_text(encoding="utf-8") == first
    panel.lag_slider.value = 4
    panel.save(target, overwrite=True)
    assert target.read_text(encoding="utf-8") != first
    with pytest.raises(ValueError, match="existing folder"):
        panel.save(tmp_path / "missing-dir" / "report.html")
    with pytest.raises(FileExistsError):
        panel.current.save_html(target)


def test_snapshot_follows_the_panel(panel):
    with capture_output() as cap:
        panel.show()
        panel.lag_slider.value = 9
    first, widget, update = cap.outputs
    assert first.transient == {"display_id": panel.display_id}
    assert widget.data["application/vnd.jupyter.widget-view+json"]["model_id"] == panel.widget.model_id
    assert update.update and update.transient == {"display_id": panel.display_id}
    assert f"lgs-snapshot-{panel.uid}" in update.data["text/html"]
    assert update.data["text/html"] != first.data["text/html"]
    assert panel.snapshot_updates == 1


def test_snapshot_refresh_is_deferred_and_merged_in_a_running_loop(diag):
    panel = DiagnosisPanel(diag, snapshot_delay=0.05)

    async def moves():
        panel.show()
        panel.lag_slider.value = 5
        panel.lag_slider.value = 6
        panel.band_toggle.value = "bartlett"
        assert panel.snapshot_updates == 0
        await asyncio.sleep(0.5)

    with capture_output() as cap:
        asyncio.run(moves())
    assert panel.snapshot_updates == 1
    updates = [o for o in cap.outputs if o.update]
    assert len(updates) == 1 and updates[0].transient == {"display_id": panel.display_id}


def test_idle_prefetch_draws_every_level_choice_so_picking_one_draws_nothing(diag):
    panel = DiagnosisPanel(diag, snapshot_delay=0, prefetch_delay=0.01)
    choices = panel._level_choices()
    assert len(choices) == len(panel.alpha_picker.options) * 3

    async def idle_then_pick():
        panel.show()
        for _ in range(400):  # each step draws one figure
            await asyncio.sleep(0.02)
            if panel._prefetch_handle is None:
                break
        assert panel._prefetch_handle is None and not panel.prefetch_step(), "prefetch did not finish"
        panel.snapshot_delay = 60  # the snapshot refresh (PNG) would run later, outside these callbacks
        drawn, views = panel.renders, panel.test_view.value
        for alpha, alternative in choices:
            panel.alpha_picker.value = alpha
            panel.alternative_picker.value = alternative
            assert panel.current.alpha == alpha and panel.current.alternative == alternative
            assert not panel.errors, panel.errors
        assert panel.renders == drawn, "a level choice drew a figure the prefetch should have drawn"
        assert panel.test_view.value != views  # the views did switch to the prefetched markup
        panel._pending.cancel()

    with capture_output():
        asyncio.run(idle_then_pick())
    # figures drawn ahead keep their markup only (a Figure holds thousands of objects); the ones on show
    # keep their Figure
    kept = {key for key, (fig, _, _) in panel._cache.items() if fig is not None}
    assert kept <= set(panel._shown_keys.values()) and len(panel._cache) > len(kept) + 10
    assert set(panel.figures) >= {"scale", "correlogram"}  # drawn again on request
    # the prefetched scale is the one a cold panel draws at that level (same bounds text in the SVG)
    cold = DiagnosisPanel(diag, snapshot_delay=0, prefetch_delay=None)
    cold.alpha_picker.value, cold.alternative_picker.value = panel.alpha, panel.alternative
    assert _svg_texts(cold.scale_view.value) == _svg_texts(panel.scale_view.value)
    assert _svg_texts(cold.correlogram_view.value) == _svg_texts(panel.correlogram_view.value)


def test_idle_prefetch_draws_the_neighbouring_control_states(diag):
    panel = DiagnosisPanel(diag, snapshot_delay=0, prefetch_delay=None, max_lag=10, lag=3)
    while panel.prefetch_step():
        pass
    drawn = panel.renders
    for change in (
        lambda: setattr(panel, "band", "bartlett"),
        lambda: setattr(panel, "band", "white"),
        lambda: setattr(panel, "max_lag", 11),
        lambda: setattr(panel, "max_lag", 8),
        lambda: setattr(panel, "lag", 1),
        lambda: setattr(panel, "lag", 5),
    ):
        change()
        assert panel.renders == drawn, "a neighbouring state was not drawn ahead"
    panel.max_lag = 20  # far away: drawn on demand
    assert panel.renders == drawn + 1


def test_a_deferred_snapshot_draws_one_figure_per_loop_step_then_publishes(diag):
    panel = DiagnosisPanel(diag, snapshot_delay=0.01, prefetch_delay=None)
    steps = []
    real = panel._snapshot_step

    def step():
        steps.append(panel.snapshot_updates)
        real()

    panel._snapshot_step = step

    async def change():
        panel.show()
        panel.alpha = 0.01  # new PNG figures for the snapshot: the scale and the correlogram
        await asyncio.sleep(0.3)

    with capture_output():
        asyncio.run(change())
    assert panel.snapshot_updates == 1
    assert len(steps) == 3, steps  # the scale, the correlogram, then the publication: one step each


def _svg_texts(markup: str) -> list[str]:
    """The words of a view's inline SVG figure (matplotlib writes text as <text> elements here)."""
    texts = re.findall(r"<text\b[^>]*>(.*?)</text>", markup, flags=re.S)
    assert texts, "no SVG text in the view"
    return texts


def test_a_figure_that_fails_ahead_is_skipped_and_shows_its_error_when_picked(diag, monkeypatch):
    from lagsight.render import figures

    real = figures.scale_figure

    def broken(d, **kw):
        if d.alpha == 0.001:
            raise RuntimeError("scale broken at 0.001")
        return real(d, **kw)

    monkeypatch.setattr(figures, "scale_figure", broken)
    panel = DiagnosisPanel(diag, snapshot_delay=0, prefetch_delay=None)
    steps = 0
    while panel.prefetch_step():
        steps += 1
        assert steps < 100, "prefetch keeps retrying"
    assert ("scale", 0.001, panel.alternative) in panel._not_ahead
    panel.alpha_picker.value = 0.001
    assert "scale broken at 0.001" in panel.scale_view.value and "scale" in panel.errors
    assert "<svg" in panel.correlogram_view.value  # the other views still work


def test_no_prefetch_without_a_running_loop_or_when_off(diag):
    panel = DiagnosisPanel(diag, snapshot_delay=0)
    with capture_output():
        panel.show()
    assert panel._prefetch_handle is None
    drawn = panel.renders
    panel.alpha_picker.value = 0.01
    assert panel.renders > drawn  # drawn on demand

    off = DiagnosisPanel(diag, snapshot_delay=0, prefetch_delay=None)

    async def idle():
        off.show()
        await asyncio.sleep(0.1)

    with capture_output():
        asyncio.run(idle())
    assert off._prefetch_handle is None and off.prefetch_step()  # work was left for later


def test_state_setters_and_bad_options(diag):
    panel = DiagnosisPanel(diag, max_lag=12, band="bartlett", lag=2, test=BG, snapshot_delay=0)
    assert (panel.max_lag, panel.band, panel.lag, panel.test) == (12, "bartlett", 2, BG)
    panel.alpha = 0.2
    assert panel.current.alpha == 0.2 and 0.2 in [v for _, v in panel.alpha_picker.options]
    with pytest.raises(ValueError, match="'alpha' must be in"):
        panel.alpha = 1.5
    with pytest.raises(ValueError, match="'band'"):
        DiagnosisPanel(diag, band="wide")
    with pytest.raises(ValueError, match="'test'"):
        DiagnosisPanel(diag, test="Nope")
    with pytest.raises(ValueError, match="'figures'"):
        DiagnosisPanel(diag, figures="gif")


def test_png_figures(diag):
    panel = DiagnosisPanel(diag, figures="png", snapshot_delay=0)
    assert 'src="data:image/png;base64,' in panel.correlogram_view.value
    assert "<svg" not in panel.correlogram_view.value


def test_notes_show_in_the_headline_and_test_notes_in_the_test_view():
    rng = np.random.default_rng(2)
    x = rng.normal(size=60)
    frame = pd.DataFrame(
        {
            "y": rng.normal(size=60),
            "x": x,
            "x2": 2 * x,
            "g": np.array(["a<"] * 25 + ["b&"] * 25 + [None] * 10, dtype=object),
        }
    )
    d = lagsight.diagnose(frame, response="y", predictors=["x", "x2"], groups="g")
    panel = DiagnosisPanel(d, test=DW, snapshot_delay=0)
    assert "10 rows have no group label and were left out." in panel.headline.value
    assert "the design has rank 2 &lt; 3 columns" in panel.test_view.value
    assert "10 rows have no group label" in panel.snapshot()["text/html"]


def test_residuals_only_show_the_scale_at_once_and_the_cautions_line():
    # residuals alone (no design): Durbin-Watson runs with k' assumed, and its 0-4 scale is on show from the
    # start, beside whichever test leads (before, it appeared only once Durbin-Watson was picked)
    rng = np.random.default_rng(4)
    u = np.zeros(300)
    for t in range(1, 300):
        u[t] = 0.5 * u[t - 1] + rng.normal()
    d = lagsight.diagnose(u)
    panel = DiagnosisPanel(d, snapshot_delay=0, prefetch_delay=None)
    assert panel.test != DW and "<svg" in panel.scale_view.value
    line = panel.cautions_view.value
    assert "Not rejecting is not proof of independence." in line and "<details" in line
    assert "power section" not in line and "power curve" not in line  # none shown, so none pointed at
