"""Rich display of a Diagnosis: the static bundle, the snapshot + widget pair, quiet mode, fallbacks.

These are behaviour tests of the display glue; the statistics shown are checked
in the stats and render tests.  The displayed Durbin-Watson value is compared
with statsmodels' ``durbin_watson`` as an outside reference.
"""

from __future__ import annotations

import re

import pytest
import statsmodels.formula.api as smf
from IPython.core.interactiveshell import InteractiveShell
from IPython.display import display
from IPython.utils.capture import capture_output
from statsmodels.stats.stattools import durbin_watson as sm_durbin_watson

import lagsight
import lagsight.display as glue
from lagsight.panel import DiagnosisPanel
from lagsight.scenarios import water_demand

WIDGET_MIME = "application/vnd.jupyter.widget-view+json"
InteractiveShell.instance()


@pytest.fixture(scope="module")
def fit():
    return smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=water_demand()).fit()


@pytest.fixture
def diag(fit):
    return lagsight.diagnose(fit)  # a new object per test: display preferences are per object


def test_mimebundle_is_text_and_static_html(diag, fit):
    bundle = diag._repr_mimebundle_()
    assert set(bundle) == {"text/plain", "text/html"}
    assert bundle["text/plain"] == str(diag)
    html = bundle["text/html"]
    assert html.lstrip().startswith('<div class="lgs-root"')
    # figures as PNG data URIs: sanitizing viewers (untrusted notebooks) drop inline SVG
    assert '<img src="data:image/png;base64,' in html and "<svg" not in html
    assert "<script" not in html and "http://" not in html and "https://" not in html
    assert f"{sm_durbin_watson(fit.resid):.3f}" in html  # statsmodels reference value, shown as d
    assert set(diag._repr_mimebundle_(include=["text/plain"])) == {"text/plain"}
    assert set(diag._repr_mimebundle_(exclude=["text/html"])) == {"text/plain"}


def test_without_widgets_display_is_one_static_output(diag):
    with capture_output() as cap:
        display(diag)
    assert len(cap.outputs) == 1
    data = cap.outputs[0].data
    assert "text/html" in data and "text/plain" in data and WIDGET_MIME not in data


def test_with_widgets_the_snapshot_and_the_widget_are_separate_outputs(diag):
    with capture_output() as cap:
        panel = glue.show(diag, widgets=True)
    assert isinstance(panel, DiagnosisPanel)
    snap, widget = cap.outputs
    # the snapshot: static HTML + text, with a display id so the panel can keep it current
    assert snap.transient == {"display_id": panel.display_id}
    assert set(snap.data) == {"text/plain", "text/html"}
    assert f'class="lgs-snapshot lgs-snapshot-{panel.uid}"' in snap.data["text/html"]
    assert "display:none" not in snap.data["text/html"].split("<style>")[0]
    # the widget output: the view and a short text line (no widget repr)
    assert widget.data[WIDGET_MIME]["model_id"] == panel.widget.model_id
    assert "lagsight interactive panel" in widget.data["text/plain"]
    assert "VBox" not in widget.data["text/plain"]
    # the live panel hides exactly its own snapshot
    assert f".lgs-snapshot-{panel.uid}{{display:none}}" in panel.style.value
    assert re.findall(r"\.lgs-snapshot[^{]*\{display:none\}", panel.style.value) == [
        f".lgs-snapshot-{panel.uid}{{display:none}}"
    ]


def test_two_panels_hide_only_their_own_snapshots(diag, fit):
    other = lagsight.diagnose(fit, alpha=0.01)
    with capture_output():
        a = glue.show(diag, widgets=True)
        b = glue.show(other, widgets=True)
    assert a.uid != b.uid and a.display_id != b.display_id
    assert f"lgs-snapshot-{b.uid}" not in a.style.value


def test_snapshot_is_kept_current(diag):
    with capture_output() as cap:
        panel = glue.show(diag, widgets=True)
        panel.snapshot_delay = 0
        panel.lag_slider.value = 6
        panel.alternative_picker.value = "two-sided"
    updates = [o for o in cap.outputs if o.update]
    assert len(updates) == 2
    assert all(u.transient == {"display_id": panel.display_id} for u in updates)
    last = updates[-1].data["text/html"]
    assert "two-sided" in last
    # the correlogram in the snapshot is the one for the slider's lag (PNG is deterministic)
    from lagsight.panel import SNAPSHOT_DPI
    from lagsight.render.export import figure_to_png_data_uri
    from lagsight.render.figures import correlogram_figure

    six = correlogram_figure(diag.correlogram, max_lag=6, band="white", period=diag.period)
    uri = figure_to_png_data_uri(six, dpi=SNAPSHOT_DPI)
    assert uri in last and uri not in cap.outputs[0].data["text/html"]  # not in the first snapshot


def test_static_and_quiet_preferences(diag):
    glue.set_preferences(diag, mode="static")
    with capture_output() as cap:
        assert glue.show(diag, widgets=True) is None
    assert len(cap.outputs) == 1 and WIDGET_MIME not in cap.outputs[0].data
    glue.set_preferences(diag, mode="quiet")
    bundle = diag._repr_mimebundle_()
    assert bundle["text/plain"].splitlines()[0] == diag.verdict.headline
    assert "<svg" not in bundle["text/html"]
    with pytest.raises(ValueError, match="'mode' must be one of"):
        glue.set_preferences(diag, mode="loud")
    with pytest.raises(TypeError, match="unknown view option"):
        glue.set_preferences(diag, colour="red")


def test_view_preferences_reach_the_static_html(diag):
    glue.set_preferences(diag, max_lag=5, band="bartlett", figures="svg")
    html = diag._repr_mimebundle_()["text/html"]
    assert "lags 1\u20135" in html and "Bartlett band" in html


def test_a_failing_render_still_shows_readable_text(diag, monkeypatch):
    import lagsight.render.html as render_html

    def broken(*args, **kwargs):
        raise RuntimeError("renderer is down")

    monkeypatch.setattr(render_html, "diagnosis_html", broken)
    bundle = diag._repr_mimebundle_()
    assert bundle["text/plain"] == str(diag)
    assert "renderer is down" in bundle["text/html"] and "<pre>" in bundle["text/html"]
    snap = glue.snapshot_bundle(diag, "abc123")
    assert "lgs-snapshot-abc123" in snap["text/html"] and "renderer is down" in snap["text/html"]


def test_snapshot_uid_is_checked(diag):
    with pytest.raises(ValueError, match="'uid'"):
        glue.snapshot_bundle(diag, 'x" onload="y')


def test_save_html_and_panel_methods(diag, tmp_path):
    path = diag.save_html(tmp_path / "report.html")
    text = path.read_text(encoding="utf-8")
    assert text.startswith("<!DOCTYPE html>") and "<svg" in text  # a standalone file keeps crisp SVG
    assert "http://" not in text and "https://" not in text
    panel = diag.panel(band="bartlett")
    assert isinstance(panel, DiagnosisPanel) and panel.base is diag and panel.band == "bartlett"


def test_bounds_view_text(diag):
    from lagsight.stats.bounds import dw_bounds

    view = glue.BoundsView(dw_bounds(20, 1))
    # Savin & White (1977) table, n = 20, k' = 1, 5 %: dL = 1.201, dU = 1.411 (from memory)
    assert "1.201" in str(view) and "1.411" in str(view)
    from matplotlib.figure import Figure

    fig = view.figure()
    assert isinstance(fig, Figure)
    regions = [a for ax in fig.axes for a in ax.patches if str(a.get_gid()).startswith("lgs-region-")]
    assert len(regions) >= 5  # the five regions of the scale


def test_panel_snapshot_matches_the_static_report(diag):
    panel = DiagnosisPanel(diag, max_lag=9, band="bartlett", lag=2)

    def words(text):
        return re.sub(r"\n\s*\n", "\n", re.sub(r"<figure.*?</figure>", "", text, flags=re.S))

    # the panel assembles its snapshot from the figures it has drawn; the words must be the same
    snap = panel.snapshot_html()
    assert words(snap) == words(glue.static_html(diag, **panel.view_options))
    # the scale and the correlogram, as PNG
    assert snap.count('<img src="data:image/png;base64,') == 2 and "<svg" not in snap


def test_a_panel_that_cannot_be_built_falls_back_to_the_static_view(diag, monkeypatch):
    import lagsight.panel as panel_module

    def broken(*args, **kwargs):
        raise RuntimeError("no widgets here")

    monkeypatch.setattr(panel_module, "DiagnosisPanel", broken)
    with pytest.warns(RuntimeWarning, match="no widgets here"), capture_output() as cap:
        assert glue.show(diag, widgets=True) is None
    assert len(cap.outputs) == 1 and "text/html" in cap.outputs[0].data
