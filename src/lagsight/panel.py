"""The interactive diagnostics panel: a plain object holding state, with ipywidgets for controls.

Every control is a widget whose ``value`` tests (and users) may set; observers
redraw only the views that depend on it, synchronously.  Figures come from
:mod:`lagsight.render.figures`, are drawn once per state (and cached), and are
shown as inline SVG (or PNG) in ``ipywidgets.HTML`` views, so the panel works
headless.  The static snapshot is assembled from the same figures.  A view that
fails shows its error message in place; the others keep working.
"""

from __future__ import annotations

import asyncio
import dataclasses
import datetime
import re
import time
import uuid
from collections import OrderedDict
from html import escape
from pathlib import Path

from . import display as views
from .battery_run import BG, DALT, DH, DW, LB, RUNS, SEASONAL, SEASONAL_GIVEN
from .display import SNAPSHOT_CLASS, _message, error_box, snapshot_bundle, widget_bundle
from .stats._arrays import check_choice, check_int
from .stats._caught import caught_warnings

__all__ = [
    "DiagnosisPanel",
    "ALPHAS",
    "ALTERNATIVES",
    "BANDS",
    "TEST_ORDER",
    "SECTIONS",
    "download_name",
    "open_section",
]

#: alpha levels offered by the selector (the diagnosis's own alpha is added when missing)
ALPHAS = (0.001, 0.01, 0.05, 0.1)
ALTERNATIVES = ("positive", "negative", "two-sided")
#: correlogram bands: (label, value)
BANDS = (("white noise", "white"), ("Bartlett", "bartlett"))
#: order of the test toggles
TEST_ORDER = (DW, DH, DALT, BG, LB, SEASONAL, SEASONAL_GIVEN, RUNS)

#: figures in the static snapshot, as PNG (sanitizing viewers drop inline SVG); the rest stay live only
SNAPSHOT_FIGURES = ("scale", "correlogram")
#: resolution of the snapshot's PNG figures
SNAPSHOT_DPI = 96
#: seconds of quiet after a change before the snapshot refresh while an event loop runs (a live kernel)
SNAPSHOT_DELAY = 0.6
#: seconds of quiet after the panel is shown (or changed) before it draws, in idle time and one figure per
#: step, the views for the other alpha and alternative choices, so that picking one later only swaps markup
PREFETCH_DELAY = 0.5
#: seconds between two prefetch steps (messages from the front end are served in between)
_PREFETCH_STEP = 0.02

_CACHE_SIZE = 96
#: lag h positions drawn ahead either side of the current one
_LAG_AHEAD = 3
#: max-lag positions drawn ahead either side of the current one
_MAX_LAG_AHEAD = 4
#: control choices drawn ahead before the α and alternative choices
_NEAR = 5
#: the sections that open on demand, in order: key -> title
SECTIONS = {
    "next": "What to do next, and the sentence to paste",
    "residuals": "Residuals in test order",
    "remedies": "Corrected inference",
    "groups": "Groups",
    "power": "Power of the exact Durbin-Watson test",
    "report": "Download the report",
}
_PANEL_CSS = """
.lgs-panel.lgs-root{max-width:1240px;width:100%}
.lgs-panel .lgs-row{display:grid!important;grid-template-columns:repeat(auto-fit,minmax(min(100%,460px),1fr));
  gap:6px 18px;align-items:start;width:100%}
.lgs-panel .lgs-row > *{min-width:0;max-width:100%}
.lgs-panel .lgs-cell{min-width:0}
.lgs-panel .widget-html-content{line-height:1.4}
.lgs-panel .widget-html,.lgs-panel .widget-label{margin-top:0;margin-bottom:0}
.lgs-panel .lgs-nowrap{flex-wrap:nowrap;width:auto!important}
.lgs-panel .lgs-keyline{font-size:12.5px;margin:4px 0;color:var(--lgs-fg)}
.lgs-panel .lgs-keyline b{font-weight:600;color:var(--lgs-muted)}
.lgs-panel .lgs-about{font-size:12px;color:var(--lgs-muted);margin:0 0 4px 0}
.lgs-panel .lgs-about summary{cursor:pointer}
.lgs-panel .lgs-section{font-weight:600;font-size:13px;margin:6px 0 2px 0;color:var(--lgs-fg)}
.lgs-panel .lgs-view{overflow:visible;min-width:0;max-width:100%}
.lgs-panel .lgs-view figure{margin:2px 0}
.lgs-panel .lgs-view figure svg,.lgs-panel .lgs-view figure img{width:100%;max-width:500px;height:auto}
.lgs-panel .jupyter-widget-Collapse-header{color:var(--lgs-fg);opacity:1}
.lgs-panel .jupyter-widget-Collapse-contents{padding:6px 4px}
.lgs-panel .jupyter-widget-Collapse-header *{color:var(--lgs-fg)}
@media (max-width: 1000px){.lgs-panel.lgs-root{padding:4px 4px}}
.lgs-panel .lgs-controls{align-items:center;flex-wrap:wrap;gap:2px 6px;min-width:0}
.lgs-panel .lgs-controls .widget-toggle-buttons{flex-wrap:wrap}
.lgs-panel .lgs-control-label{color:var(--lgs-muted);font-size:13px}
.lgs-panel .lgs-headline{margin:2px 0}
.lgs-panel .lgs-keys{margin:4px 0}
.lgs-panel .lgs-cautions{font-size:12px;color:var(--lgs-muted);margin:2px 0}
.lgs-panel .lgs-cautions summary{color:var(--lgs-muted)}
.lgs-panel .lgs-cautions ul{margin:4px 0 2px 18px;padding:0}
.lgs-panel .lgs-download{display:inline-block;padding:4px 12px;border-radius:4px;border:1px solid var(--lgs-border);
  background:var(--lgs-card);color:var(--lgs-fg);text-decoration:none;font-weight:600}
.lgs-panel .lgs-error{border:1px solid var(--lgs-orange);border-radius:6px;padding:6px 10px;
  background:var(--lgs-warn-bg)}
"""


def _esc(value) -> str:
    return escape(str(value), quote=True)


def _running_loop():
    """The asyncio loop running this code (a live kernel's), or None (a script, a headless test)."""
    try:
        return asyncio.get_running_loop()
    except RuntimeError:
        return None


def _bound(widget: str, doc: str) -> property:
    """A property reading and setting the ``value`` of one of the panel's widgets."""
    return property(
        lambda self: getattr(self, widget).value,
        lambda self, value: setattr(getattr(self, widget), "value", value),
        doc=doc,
    )


def _figure_view(markup: str, caption: str = "") -> str:
    """A figure in the panel: the drawing, and its caption folded under "How to read it" (one click, in the
    browser) so the figures stay on one screen; the stored copy and the report print captions in full."""
    about = f'<details class="lgs-about"><summary>How to read it</summary>{_esc(caption)}</details>' if caption else ""
    return f"<figure>{markup}</figure>{about}"


def download_name(name: str | None, when: datetime.datetime | None = None) -> str:
    """File name of a downloaded report: the model's variable name (letters, digits, '-', '_', '.') and the time,
    e.g. ``fit-2026-12-03-1630.html``; 'lagsight-report' when there is no usable name."""
    stem = re.sub(r"[^A-Za-z0-9_.-]+", "-", str(name or "")).strip("-.")[:48] or "lagsight-report"
    when = when or datetime.datetime.now()
    return f"{stem}-{when:%Y-%m-%d-%H%M}.html"


def open_section(diag) -> str:
    """The section that matters for this finding, open when the panel is shown."""
    if diag.groups is not None:
        return "groups"
    if diag.verdict.finding == "evidence" and diag.remedies is not None:
        return "remedies"
    if diag.verdict.finding == "no evidence" and diag.power is not None:
        return "power"
    return "next"


class DiagnosisPanel:
    """Interactive view of a :class:`~lagsight.diagnosis.Diagnosis`.

    The layout leads with the answer: the verdict, its key figures, the α and
    alternative controls and a cautions line at the top; the 0-4 scale beside the
    test toggles; the correlogram with its controls beside the lag scatter; the
    rest in sections that open on demand (the one that matters for the finding
    open).  Two columns reflow to one in narrow windows.

    Parameters
    ----------
    diag : Diagnosis
    max_lag : int, optional
        Largest lag of the correlogram shown (default: every lag computed).
    band : {'white', 'bartlett'}
        Band drawn around the ACF.
    test : str, optional
        Test in the test view (default: the one the verdict leads with).
    lag : int
        Lag h of the e_t against e_{t-h} scatter.
    figures : {'svg', 'png'}
        How the live views embed figures (the snapshot always uses PNG).
    name : str, optional
        The model's variable name, used to name a downloaded report.
    snapshot_delay : float
        Seconds of quiet after a change before the snapshot is refreshed, while an
        event loop runs (a live kernel): changes in between are merged and
        callbacks return at once.  0, or no running loop, refreshes within the
        callback.
    prefetch_delay : float or None
        Seconds of quiet, once the panel is shown in a running event loop, before
        it draws in idle time, one figure per loop step, the views a user may ask
        for next (the other band, the neighbouring lags, the other α and
        alternative choices); None turns this off.  Without a running loop
        nothing is drawn ahead.

    Attributes
    ----------
    base, current : Diagnosis
        The diagnosis given, and the one at the selected α and alternative.
    figures : dict
        Figure name ('scale', 'correlogram', 'lag', 'residuals', 'groups', 'power')
        -> the ``matplotlib.figure.Figure`` on show.
    errors : dict
        View name -> message of the view that could not be drawn.
    timings : dict
        Callback name -> seconds its last redraw took.
    renders : int
        Figures drawn so far (each state of each figure is drawn once, then cached).
    widget : ipywidgets.VBox
        The panel itself (class ``lgs-panel``).
    """

    def __init__(
        self,
        diag,
        *,
        max_lag=None,
        band="white",
        test=None,
        lag=1,
        figures="svg",
        name=None,
        snapshot_delay=SNAPSHOT_DELAY,
        prefetch_delay=PREFETCH_DELAY,
    ):
        import ipywidgets as w

        from .render.text import primary_test

        band = check_choice(band, "band", tuple(dict(BANDS).values()))
        figures = check_choice(figures, "figures", ("svg", "png"))
        names = [t for t in TEST_ORDER if t in diag.tests or t in diag.errors]
        names += [t for t in [*diag.tests, *diag.errors] if t not in names and t != "Correlogram"]
        test = test if test is not None else (primary_test(diag) or (names[0] if names else None))
        if names and test not in names:
            raise ValueError(f"'test' must be one of {names} (got {test!r})")
        nlags = len(diag.correlogram.lags) if diag.correlogram is not None else 1
        max_lag = nlags if max_lag is None else max_lag
        max_lag = check_int(max_lag, "max_lag", minimum=1)
        lag = check_int(lag, "lag", minimum=1)
        self.base = self.current = diag
        self.figure_format = figures
        self.name = None if name is None else str(name)
        self.snapshot_delay = float(snapshot_delay)
        self.prefetch_delay = None if prefetch_delay is None else float(prefetch_delay)
        self.renders = 0
        self.errors: dict = {}
        self.timings: dict = {}
        self.saved_path: Path | None = None
        self._prepared: str | None = None
        self.uid = uuid.uuid4().hex[:12]
        self.display_id = f"lagsight-{self.uid}"
        self.snapshot_updates = 0
        self._shown = False
        self._pending = None
        self._prefetch_handle = None
        self._not_ahead: set = set()
        self._diagnoses = {(diag.alpha, diag.alternative): diag}
        # cache key -> [Figure or None, {format: markup}, caption]; only the states on show keep their Figure
        # (a few thousand Python objects each, which every full garbage collection walks), the rest their markup
        self._cache: OrderedDict = OrderedDict()
        self._shown_keys: dict = {}

        def tag(widget, *classes):
            for c in classes:
                widget.add_class(c)
            return widget

        def view(cls):
            return tag(w.HTML(), cls, "lgs-view")

        def label(text):
            return tag(w.Label(text, layout=w.Layout(margin="0 2px 0 8px")), "lgs-control-label")

        def box(children, *classes, kind=w.VBox):
            return tag(kind(children, layout=w.Layout(min_width="0", width="100%")), *classes)

        def controls(first, text, buttons):
            """A control, then toggle buttons with their label kept beside them (the row may wrap between)."""
            beside = box([label(text), buttons], "lgs-controls", "lgs-nowrap", kind=w.HBox)
            return box([first, beside], "lgs-controls", kind=w.HBox)

        alphas = sorted(set(ALPHAS) | {diag.alpha})
        self.style = tag(w.HTML(self._style_markup()), "lgs-style")
        self.headline = view("lgs-headline-view")
        self.cautions_view = view("lgs-cautions-line")
        self.alpha_picker = tag(
            w.Dropdown(
                options=[(f"{a:g}", a) for a in alphas],
                value=diag.alpha,
                description="\u03b1",
                style={"description_width": "14px"},
                layout=w.Layout(width="110px"),
            ),
            "lgs-alpha",
        )
        # toggle buttons get their label beside them (a description would wrap the buttons onto a second line)
        inline = dict(layout=w.Layout(width="auto"), style={"button_width": "auto"})
        self.alternative_picker = tag(
            w.ToggleButtons(
                options=list(ALTERNATIVES),
                value=diag.alternative,
                tooltips=["alternative hypothesis: " + a for a in ALTERNATIVES],
                **inline,
            ),
            "lgs-alternative",
        )
        self.test_toggle = tag(
            w.ToggleButtons(options=names, value=test if names else None, **inline), "lgs-test-toggle"
        )
        # one view per test in a Stack that the toggle switches in the browser (linked there, no kernel round trip)
        self.test_views = {t: view("lgs-test-one") for t in names}
        self.test_stack = tag(
            w.Stack(
                list(self.test_views.values()) or [view("lgs-test-one")],
                selected_index=names.index(test) if names else 0,
            ),
            "lgs-test-view",
        )
        if names:
            w.jslink((self.test_toggle, "index"), (self.test_stack, "selected_index"))
        self.scale_view = view("lgs-scale-view")
        self.lag_slider = tag(
            w.IntSlider(
                value=min(max_lag, nlags),
                min=1,
                max=nlags,
                continuous_update=False,
                description="max lag",
                disabled=diag.correlogram is None,
                layout=w.Layout(width="260px"),
            ),
            "lgs-lag-slider",
        )
        self.band_toggle = tag(w.ToggleButtons(options=list(BANDS), value=band, **inline), "lgs-band")
        self.correlogram_view = view("lgs-correlogram-view")
        top = max(1, min(nlags, diag.n - 2))
        self.lag_picker = tag(
            w.IntSlider(
                value=min(lag, top),
                min=1,
                max=top,
                continuous_update=False,
                description="lag h",
                layout=w.Layout(width="260px"),
            ),
            "lgs-lag-picker",
        )
        self.scatter_view = view("lgs-scatter-view")
        self.next_view = view("lgs-next-view")
        self.residuals_view = view("lgs-residuals-view")
        self.remedies_view = view("lgs-remedies-view")
        self.groups_view = view("lgs-groups-view")
        self.power_view = view("lgs-power-view")
        self.save_button = tag(
            w.Button(
                description="Prepare the report",
                icon="file-text",
                tooltip="Build the standalone HTML report of the current view, then download it from the link",
                layout=w.Layout(width="auto"),
            ),
            "lgs-prepare",
        )
        self.save_status = tag(w.HTML(), "lgs-save-status", "lgs-save")

        def section(title):
            return tag(w.HTML(f'<div class="lgs-section">{_esc(title)}</div>'), "lgs-section-title")

        self._section_views = {
            "next": self.next_view,
            "residuals": self.residuals_view,
            "remedies": self.remedies_view,
            "groups": self.groups_view,
            "power": self.power_view,
            "report": box([self.save_button, self.save_status], "lgs-controls", "lgs-report", kind=w.HBox),
        }
        keys = [
            k
            for k in SECTIONS
            if (k != "groups" or diag.groups is not None) and (k != "power" or diag.power is not None)
        ]
        self.section_keys = tuple(keys)
        opened = open_section(diag)
        self.sections = tag(
            w.Accordion(
                children=[self._section_views[k] for k in keys],
                titles=tuple(SECTIONS[k] for k in keys),
                selected_index=keys.index(opened),
            ),
            "lgs-more",
        )
        self._stale: set = set(keys)

        level = box(
            [
                controls(self.alpha_picker, "alternative", self.alternative_picker),
                self.cautions_view,
            ],
            "lgs-level",
        )
        children = [
            self.style,
            box([self.headline, level], "lgs-row", "lgs-top"),
            box(
                [
                    box([self.scale_view], "lgs-cell"),  # the figure carries its own title
                    box([section("Tests"), self.test_toggle, self.test_stack], "lgs-cell", "lgs-tests-box"),
                ],
                "lgs-row",
            ),
            box(
                [
                    box(
                        [
                            section("Correlogram of the residuals"),
                            controls(self.lag_slider, "band", self.band_toggle),
                            self.correlogram_view,
                        ],
                        "lgs-cell",
                        "lgs-correlogram-box",
                    ),
                    box(
                        [section("Residual against its own past"), self.lag_picker, self.scatter_view],
                        "lgs-cell",
                        "lgs-scatter-box",
                    ),
                ],
                "lgs-row",
            ),
            self.sections,
        ]
        self.widget = tag(w.VBox(children), "lgs-panel", "lgs-root")

        self.alpha_picker.observe(self._on_level, names="value")
        self.alternative_picker.observe(self._on_level, names="value")
        self.test_toggle.observe(self._on_test, names="value")
        redraw_cg = lambda _change: self._timed("correlogram", self._draw_correlogram)  # noqa: E731
        self.lag_slider.observe(redraw_cg, names="value")
        self.band_toggle.observe(redraw_cg, names="value")
        self.lag_picker.observe(lambda _change: self._timed("lag", self._draw_scatter), names="value")
        self.sections.observe(self._on_section, names="selected_index")
        self.save_button.on_click(lambda _button: self.prepare_download())
        self.refresh()

    # -- state ---------------------------------------------------------------------
    @property
    def alpha(self) -> float:
        """Selected significance level."""
        return self.alpha_picker.value

    @alpha.setter
    def alpha(self, value: float) -> None:
        value = float(value)
        known = [v for _, v in self.alpha_picker.options]
        if value not in known:
            if not 0 < value < 1:
                raise ValueError(f"'alpha' must be in (0, 1) (got {value!r})")
            self.alpha_picker.options = [(f"{a:g}", a) for a in sorted({*known, value})]
        self.alpha_picker.value = value

    alternative = _bound("alternative_picker", "Selected alternative ('positive', 'negative', 'two-sided').")
    test = _bound("test_toggle", "Name of the test in the main view.")
    max_lag = _bound("lag_slider", "Largest lag of the correlogram shown.")
    band = _bound("band_toggle", "Correlogram band: 'white' or 'bartlett'.")
    lag = _bound("lag_picker", "Lag h of the e_t against e_{t-h} scatter.")

    @property
    def test_view(self):
        """The view of the test on show (one of :attr:`test_views`)."""
        return self.test_views.get(self.test, self.test_stack.children[0])

    @property
    def section(self) -> str | None:
        """Key of the open section (see :data:`SECTIONS`), or None when all are closed."""
        i = self.sections.selected_index
        return None if i is None else self.section_keys[i]

    @section.setter
    def section(self, key: str | None) -> None:
        if key is not None:
            key = check_choice(key, "section", self.section_keys)
        self.sections.selected_index = None if key is None else self.section_keys.index(key)

    @property
    def view_options(self) -> dict:
        """Options that make the static views match the panel."""
        opts = {"max_lag": self.max_lag, "band": self.band, "lag": self.lag, "figures": self.figure_format}
        if self.test is not None:
            opts["test"] = self.test
        return opts

    # -- figures -------------------------------------------------------------------
    def _correlogram(self, alpha: float | None = None):
        """The correlogram with its bands at ``alpha`` (default: the selected alpha; the bands scale with
        z_{1-alpha/2})."""
        cg = self.base.correlogram
        return None if cg is None else cg.at_alpha(self.alpha if alpha is None else alpha)

    def _specs(self, diag=None, *, max_lag=None, band=None, lag=None) -> dict:
        """Figure name -> (cache key, maker, title) for the current state, or for another state a user may
        pick next: ``diag``'s alpha and alternative, another ``max_lag``, ``band`` or ``lag`` (drawn ahead)."""
        from .render import figures as F
        from .render.text import order_caveat

        d = self.current if diag is None else diag
        max_lag = self.max_lag if max_lag is None else max_lag
        band = self.band if band is None else band
        h, cg = (self.lag if lag is None else lag), self._correlogram(d.alpha)
        caveat = order_caveat(self.base)  # rows out of time order: the same at every alpha and alternative
        specs: dict[str, tuple] = {}
        if DW in d.tests:
            specs["scale"] = (
                ("scale", d.alpha, d.alternative),
                lambda: F.scale_figure(d, alpha=d.alpha),
                "Durbin-Watson d on its 0-4 scale",
            )
        if cg is not None:
            specs["correlogram"] = (
                ("correlogram", max_lag, band, cg.alpha),
                lambda: F.correlogram_figure(cg, max_lag=max_lag, band=band, period=self.base.period, caveat=caveat),
                "ACF and PACF of the residuals",
            )
        specs["lag"] = (
            ("lag", h),
            lambda: F.lag_scatter_figure(self.base.data.resid, lag=h, caveat=caveat),
            f"Residuals against their lag {h}",
        )
        specs["residuals"] = (("residuals",), lambda: F.residuals_figure(self.base), "Residuals in test order")
        if d.groups is not None:
            specs["groups"] = (
                ("groups", d.alpha, d.alternative),
                lambda: F.groups_figure(d.groups),
                "Durbin-Watson d by group",
            )
        if d.power is not None:
            specs["power"] = (("power",), lambda: F.power_figure(d.power), "Power of the exact Durbin-Watson test")
        return specs

    def _figure(self, name: str, fmt: str | None = None, diag=None, **state) -> tuple[str, str]:
        """(markup, caption) of figure ``name`` as 'svg' or 'png'; each state is drawn and converted once.

        ``diag`` (another alpha/alternative) or ``state`` (another ``max_lag``, ``band`` or ``lag``) draws it
        ahead without showing it.
        """
        from .render import export

        ahead = diag is not None or bool(state)
        key, make, title = self._specs(diag, **state)[name]
        fmt = fmt or self.figure_format
        entry = self._entry(key)
        markups = entry[1]
        if fmt not in markups:
            with caught_warnings() as caught:  # e.g. matplotlib on a missing glyph: said in the caption
                fig = entry[0] if entry[0] is not None else self._draw_figure(make, entry)
                if fmt == "png":
                    uri = export.figure_to_png_data_uri(fig, dpi=SNAPSHOT_DPI)
                    markups[fmt] = f'<img src="{uri}" alt="{_esc(title)}">'
                else:
                    markups[fmt] = export.figure_to_svg(fig, title=title)
            extra = [f"({n})" for n in caught.notes() if f"({n})" not in entry[2]]
            entry[2] = " ".join([entry[2], *extra]).strip()
        if not ahead:
            old = self._shown_keys.get(name)
            if old != key and old in self._cache:
                self._cache[old][0] = None  # no longer on show: keep its markup only
            self._shown_keys[name] = key
        elif self._shown_keys.get(name) != key:
            entry[0] = None  # drawn ahead: keep the markup only
        return markups[fmt], entry[2]

    def _entry(self, key) -> list:
        if key not in self._cache:
            self._cache[key] = [None, {}, ""]
            while len(self._cache) > _CACHE_SIZE:
                self._cache.popitem(last=False)
        self._cache.move_to_end(key)
        return self._cache[key]

    def _draw_figure(self, make, entry: list):
        fig = make()
        self.renders += 1
        entry[0], entry[2] = fig, getattr(fig, "lagsight_caption", "")
        return fig

    @property
    def figures(self) -> dict:
        """Figure name ('scale', 'correlogram', 'lag', 'residuals', 'groups', 'power') -> the
        ``matplotlib.figure.Figure`` on show (drawn again if only its markup was kept)."""
        specs = self._specs()
        out = {}
        for name, key in self._shown_keys.items():
            entry = self._cache.get(key)
            if (entry is None or entry[0] is None) and name in specs and specs[name][0] == key:
                entry = self._entry(key)
                self._draw_figure(specs[name][1], entry)
            if entry is not None and entry[0] is not None:
                out[name] = entry[0]
        return out

    def _cached(self, name: str, diag=None, **state) -> bool:
        """Figure ``name`` at ``diag``'s level (or another ``state``) is cached (or absent, or failed when drawn
        ahead)."""
        spec = self._specs(diag, **state).get(name)
        return (
            spec is None or spec[0] in self._not_ahead or self.figure_format in self._cache.get(spec[0], (None, {}))[1]
        )

    # -- drawing -------------------------------------------------------------------
    def refresh(self) -> None:
        """Redraw every view on show (the closed sections are drawn when opened)."""
        self._stale = set(self.section_keys)
        for draw in (
            self._draw_headline,
            self._draw_tests,
            self._draw_scale,
            self._draw_correlogram,
            self._draw_scatter,
            self._draw_open_section,
        ):
            draw()

    def _style_markup(self) -> str:
        from .render.style import CSS

        return f"<style>{CSS}{_PANEL_CSS}.{SNAPSHOT_CLASS}-{self.uid}{{display:none}}</style>"

    def _draw(self, name: str, widget, build) -> None:
        try:
            value = build()
            self.errors.pop(name, None)
        except Exception as err:  # a failing view must not take the panel down
            self.errors[name] = _message(err)
            value = error_box("This view could not be drawn:", self.errors[name])
        if widget.value != value:  # an unchanged view sends nothing to the browser
            widget.value = value

    def _draw_headline(self) -> None:
        self._draw("headline", self.headline, lambda: views.headline_html(self.current))
        self._draw("cautions", self.cautions_view, lambda: views.cautions_html(self.current, self._shown_views()))

    def _shown_views(self) -> set:
        """Names of the views this panel offers (a caution may point only at these)."""
        return {"scale", "correlogram", "lag", "residuals", *(k for k in self.section_keys)}

    def _draw_tests(self) -> None:
        for name, widget in self.test_views.items():
            self._draw("test", widget, lambda name=name: views.test_html(self.current, name))

    def _draw_scale(self) -> None:
        def build():
            if DW not in self.current.tests:
                why = self.current.errors.get(DW, "the Durbin-Watson test was not run for this input")
                return error_box("No 0\u20134 scale:", why)
            return _figure_view(*self._figure("scale"))

        self._draw("scale", self.scale_view, build)

    def _draw_correlogram(self) -> None:
        def build():
            if self.base.correlogram is None:
                return error_box("No correlogram:", self.base.errors.get("Correlogram", "too few residuals"))
            return _figure_view(*self._figure("correlogram"))

        self._draw("correlogram", self.correlogram_view, build)

    def _draw_scatter(self) -> None:
        self._draw("lag", self.scatter_view, lambda: _figure_view(*self._figure("lag")))

    def _draw_section(self, key: str) -> None:
        self._stale.discard(key)
        if key == "next":
            self._draw("next", self.next_view, lambda: views.next_html(self.current))
        elif key == "residuals":
            self._draw("residuals", self.residuals_view, lambda: _figure_view(*self._figure("residuals")))
        elif key == "remedies":
            self._draw("remedies", self.remedies_view, lambda: views.remedies_html(self.current))
        elif key == "groups":
            self._draw(
                "groups",
                self.groups_view,
                lambda: _figure_view(*self._figure("groups")) + views.groups_html(self.current),
            )
        elif key == "power":
            self._draw("power", self.power_view, lambda: _figure_view(*self._figure("power")))
        elif key == "report":
            self.save_status.value = ""  # a report prepared earlier shows an older state

    def _draw_open_section(self) -> None:
        if self.section is not None and self.section in self._stale:
            self._draw_section(self.section)

    # -- callbacks -----------------------------------------------------------------
    def _timed(self, name: str, redraw) -> None:
        start = time.perf_counter()
        redraw()
        if self._prepared is not None:  # the report prepared earlier shows an older state
            self._prepared = None
            self.save_status.value = '<span class="lgs-caption">The view changed: prepare the report again.</span>'
        self.timings[name] = time.perf_counter() - start
        self._snapshot_changed()
        self._schedule_prefetch(self.prefetch_delay)

    def _on_test(self, _change=None) -> None:
        def switch():  # the browser switched the view already (linked); keep the kernel's copy in step
            if self.test in self.test_views:
                self.test_stack.selected_index = list(self.test_views).index(self.test)

        self._timed("test", switch)

    def _on_section(self, _change=None) -> None:
        self._timed("section", self._draw_open_section)

    def _at_level(self, alpha: float, alternative: str):
        """The diagnosis at ``alpha`` and ``alternative`` (re-assessed once, then kept)."""
        key = (alpha, alternative)
        if key not in self._diagnoses:
            self._diagnoses[key] = self.base.reassess(alpha=alpha, alternative=alternative)
        return self._diagnoses[key]

    def _on_level(self, _change=None) -> None:
        def redraw():
            try:
                current = self._at_level(self.alpha, self.alternative)
            except Exception as err:  # keep the previous diagnosis and say why
                self.errors["reassess"] = _message(err)
                self.headline.value = error_box("Could not re-assess:", self.errors["reassess"])
                return
            self.errors.pop("reassess", None)
            self.current = current
            self._stale = set(self.section_keys)
            for draw in (
                self._draw_headline,
                self._draw_tests,
                self._draw_scale,
                self._draw_correlogram,
                self._draw_open_section,
            ):
                draw()

        self._timed("alpha/alternative", redraw)

    def report_html(self) -> str:
        """The standalone HTML report of the current view (what the download holds), with every figure as
        SVG from the panel's cache."""
        from .render.html import report_page

        body = self._assembled_html(tuple(self._specs()), "svg")
        return report_page(self.current, body=body, **self.view_options)

    def prepare_download(self) -> str | None:
        """Build the report of the current view and offer it as a browser download (the panel's button).

        Nothing is written on the server: the report travels to the browser as a
        ``data:`` link named after the model's variable and the time (see
        :func:`download_name`).  Returns the file name, or None when it failed (the
        panel says why).
        """
        import base64

        start = time.perf_counter()
        try:
            page = self.report_html()
        except Exception as err:  # shown to the user in the panel
            self.errors["save"] = _message(err)
            self.save_status.value = error_box("No report:", self.errors["save"])
            return None
        self.errors.pop("save", None)
        file_name = download_name(self.name)
        data = base64.b64encode(page.encode("utf-8")).decode("ascii")
        size = len(page.encode("utf-8"))
        self.save_status.value = (
            f'<a class="lgs-download" download="{_esc(file_name)}" href="data:text/html;charset=utf-8;base64,{data}">'
            f"Download {_esc(file_name)}</a> "
            f'<span class="lgs-caption">{size / 1024:,.0f} KB, one file, opens offline</span>'
        )
        self._prepared = file_name
        self.timings["report"] = time.perf_counter() - start
        return file_name

    def save(self, path, *, overwrite: bool = False) -> Path:
        """Write the standalone HTML report of the current view to ``path`` on the kernel's machine.

        Refuses to replace an existing file unless ``overwrite=True``.  (The panel's
        button offers the report as a browser download instead and writes nothing.)
        """
        from .render.html import save_html

        written = Path(save_html(self.current, path, overwrite=overwrite, **self.view_options))
        self.saved_path = written.resolve()
        return self.saved_path

    # -- the static snapshot and display -------------------------------------------
    def snapshot_html(self) -> str:
        """The static HTML of the current view: verdict, tables and the :data:`SNAPSHOT_FIGURES` as PNG.

        Assembled from the panel's own figures (each drawn once); PNG because
        sanitizing viewers (an untrusted notebook in JupyterLab) drop inline SVG.
        """
        return self._assembled_html(SNAPSHOT_FIGURES, "png")

    def _assembled_html(self, names, fmt: str) -> str:
        """The static HTML of the current view with the figures ``names`` (those drawn here) as ``fmt``, taken
        from the panel's cache (each state is drawn and converted once)."""
        from .render.html import FigureView, build_view, render_html

        view = build_view(self.current, **{**self.view_options, "figures": "none"})
        figs = []
        for name, (_, _, title) in self._specs().items():
            if name not in names:
                continue
            try:
                figs.append(FigureView(name, title, *self._figure(name, fmt)))
            except Exception as err:  # shown in place of the figure
                figs.append(FigureView(name, title, "", "", f"{title} could not be drawn: {_message(err)}"))
        return render_html(dataclasses.replace(view, figures=tuple(figs)))

    def snapshot(self) -> dict:
        """The static snapshot bundle (text/plain + text/html) of the current view."""
        try:
            body = self.snapshot_html()
        except Exception:  # the full static view (or, failing that, the text) stands in
            body = None
        return snapshot_bundle(self.current, self.uid, body=body, **{**self.view_options, "figures": "png"})

    def show(self) -> None:
        """Display the static snapshot (with a display id) and then the widget."""
        from IPython.display import display

        display(self.snapshot(), raw=True, display_id=self.display_id)
        display(widget_bundle(self.widget), raw=True)
        self._shown = True
        self._schedule_prefetch(self.prefetch_delay)

    def _ipython_display_(self) -> None:
        self.show()

    def _snapshot_changed(self) -> None:
        """Refresh the snapshot after :attr:`snapshot_delay` seconds of quiet (each change restarts the wait);
        the figures it needs are drawn one per event-loop step, so a control moved meanwhile waits for one
        figure at most."""
        if not self._shown:
            return
        loop = _running_loop()
        if self.snapshot_delay <= 0 or loop is None:
            self.flush_snapshot()
            return
        if self._pending is not None:
            self._pending.cancel()
        self._pending = loop.call_later(self.snapshot_delay, self._snapshot_step)

    def _snapshot_step(self) -> None:
        """One step of a deferred refresh: draw one missing PNG of the snapshot, or publish it."""
        loop = _running_loop()
        for name in SNAPSHOT_FIGURES:
            spec = self._specs().get(name)
            if spec is None or "png" in self._cache.get(spec[0], (None, {}))[1]:
                continue
            try:
                self._figure(name, "png")
            except Exception:  # the snapshot shows the error in place of the figure
                break
            if loop is not None:
                self._pending = loop.call_soon(self._snapshot_step)
                return
        self.flush_snapshot()

    def flush_snapshot(self) -> None:
        """Publish the current static snapshot to its display id now."""
        from IPython.display import update_display

        if self._pending is not None:
            self._pending.cancel()
        self._pending = None
        start = time.perf_counter()
        update_display(self.snapshot(), raw=True, display_id=self.display_id)
        self.snapshot_updates += 1
        self.timings["snapshot"] = time.perf_counter() - start

    # -- drawing ahead in idle time --------------------------------------------------
    def _level_choices(self):
        """(alpha, alternative) pairs a user may pick next, most costly to draw on demand first: every alpha at
        the current alternative (a new alpha redraws the scale and the correlogram), then the other pairs (a new
        alternative redraws the scale only)."""
        alphas = [self.alpha] + [a for _, a in self.alpha_picker.options if a != self.alpha]
        alternatives = [self.alternative] + [a for a in ALTERNATIVES if a != self.alternative]
        return [(a, alt) for alt in alternatives for a in alphas]

    def _control_choices(self):
        """(figure, state) pairs a user may ask for next with the correlogram and lag controls, nearest first:
        the other band, then the max lag and the lag h one, two, ... steps either side of their values."""
        out = [("correlogram", {"band": b}) for _, b in BANDS if b != self.band]
        top_cg, top_h = self.lag_slider.max, self.lag_picker.max
        for step in range(1, max(_MAX_LAG_AHEAD, _LAG_AHEAD) + 1):
            for sign in (-1, 1):
                m, h = self.max_lag + sign * step, self.lag + sign * step
                if 1 <= m <= top_cg and step <= _MAX_LAG_AHEAD:
                    out.append(("correlogram", {"max_lag": m}))
                if 1 <= h <= top_h and step <= _LAG_AHEAD:
                    out.append(("lag", {"lag": h}))
        return out

    def prefetch_step(self) -> bool:
        """Draw one figure that a next choice would need and is not cached; False when none is left.

        First the other α and alternative choices (the scale and the correlogram bands:
        tables and text are cheap to redo), then the correlogram and the lag
        scatter at the control positions nearest the current ones; the nearest few
        (the other band, one step either side) before everything else.
        """
        choices = self._control_choices()
        for name, state in choices[:_NEAR]:
            if self._draw_ahead(name, None, **state):
                return True
        for alpha, alternative in self._level_choices():
            if (alpha, alternative) in self._not_ahead:
                continue
            if (alpha, alternative) not in self._diagnoses:
                try:  # one step of its own: re-assessing may fit the remedies
                    self._at_level(alpha, alternative)
                except Exception:  # not retried ahead; the callback says why if the user picks it
                    self._not_ahead.add((alpha, alternative))
                return True
            diag = self._diagnoses[(alpha, alternative)]
            for name in ("scale", "correlogram"):
                if self._draw_ahead(name, diag):
                    return True
        return any(self._draw_ahead(name, None, **state) for name, state in choices)

    def _draw_ahead(self, name: str, diag, **state) -> bool:
        """Draw figure ``name`` for a state not on show, unless cached, in two steps (build the figure, then
        convert it), so a control moved meanwhile waits for half a figure at most; True when a step ran."""
        if self._cached(name, diag, **state):
            return False
        key, make, _ = self._specs(diag, **state)[name]
        entry = self._entry(key)
        try:
            if entry[0] is None:  # step 1: build; the conversion is the next step
                with caught_warnings() as caught:
                    self._draw_figure(make, entry)
                entry[2] = " ".join([entry[2], *(f"({n})" for n in caught.notes())]).strip()
            else:  # step 2: convert (only the markup is kept)
                self._figure(name, diag=diag, **state)
        except Exception:  # not retried ahead; the view shows the error if it is picked
            self._not_ahead.add(key)
        return True

    def _schedule_prefetch(self, delay) -> None:
        loop = _running_loop()
        if delay is None or not self._shown or loop is None:
            return
        if self._prefetch_handle is not None:
            self._prefetch_handle.cancel()
        self._prefetch_handle = loop.call_later(delay, self._prefetch_tick)

    def _prefetch_tick(self) -> None:
        self._prefetch_handle = None
        if self.prefetch_step():
            self._schedule_prefetch(_PREFETCH_STEP)
