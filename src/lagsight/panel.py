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
import time
import uuid
from collections import OrderedDict
from html import escape
from pathlib import Path

from . import display as views
from .battery_run import BG, DALT, DH, DW, LB, RUNS, SEASONAL, SEASONAL_GIVEN
from .display import SNAPSHOT_CLASS, _message, error_box, snapshot_bundle, widget_bundle
from .stats._arrays import check_int
from .stats._caught import caught_warnings

__all__ = ["DiagnosisPanel", "ALPHAS", "ALTERNATIVES", "BANDS", "TEST_ORDER"]

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
#: seconds between a change and the snapshot refresh while an event loop runs (a live kernel)
SNAPSHOT_DELAY = 0.25
#: seconds of quiet after the panel is shown (or changed) before it draws, in idle time and one figure per
#: step, the views for the other alpha and alternative choices, so that picking one later only swaps markup
PREFETCH_DELAY = 1.0
#: seconds between two prefetch steps (messages from the front end are served in between)
_PREFETCH_STEP = 0.02

_CACHE_SIZE = 32
_PANEL_CSS = """
.lgs-panel.lgs-root{max-width:820px}
.lgs-panel .lgs-section{font-weight:600;font-size:13px;margin:10px 0 2px 0;color:var(--lgs-fg)}
.lgs-panel .lgs-view{overflow:auto}
.lgs-panel .lgs-controls{align-items:center;flex-wrap:wrap}
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


class DiagnosisPanel:
    """Interactive view of a :class:`~lagsight.diagnosis.Diagnosis`.

    Parameters
    ----------
    diag : Diagnosis
    max_lag : int, optional
        Largest lag of the correlogram shown (default: every lag computed).
    band : {'white', 'bartlett'}
        Band drawn around the ACF.
    test : str, optional
        Test in the main view (default: the one the verdict leads with).
    lag : int
        Lag h of the e_t against e_{t-h} scatter.
    figures : {'svg', 'png'}
        How the live views embed figures (the snapshot always uses PNG).
    snapshot_delay : float
        Seconds from a change to the snapshot refresh while an event loop runs (a
        live kernel): changes in between are merged and callbacks return at once.
        0, or no running loop, refreshes within the callback.
    prefetch_delay : float or None
        Seconds of quiet, once the panel is shown in a running event loop, before
        it draws the views for the other alpha and alternative choices in idle
        time, one figure per loop step; None turns this off.  Without a running
        loop nothing is drawn ahead.

    Attributes
    ----------
    base, current : Diagnosis
        The diagnosis given, and the one at the selected alpha and alternative.
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
        snapshot_delay=SNAPSHOT_DELAY,
        prefetch_delay=PREFETCH_DELAY,
    ):
        import ipywidgets as w

        from .render.text import primary_test

        if band not in dict(BANDS).values():
            raise ValueError(f"'band' must be 'white' or 'bartlett' (got {band!r})")
        if figures not in ("svg", "png"):
            raise ValueError(f"'figures' must be 'svg' or 'png' (got {figures!r})")
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
        self.snapshot_delay = float(snapshot_delay)
        self.prefetch_delay = None if prefetch_delay is None else float(prefetch_delay)
        self.renders = 0
        self.errors: dict = {}
        self.timings: dict = {}
        self.saved_path: Path | None = None
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

        def view(cls, height=None):
            return tag(w.HTML(layout=w.Layout(min_height=height) if height else w.Layout()), cls, "lgs-view")

        alphas = sorted(set(ALPHAS) | {diag.alpha})
        self.style = tag(w.HTML(self._style_markup()), "lgs-style")
        self.headline = view("lgs-headline-view")
        self.alpha_picker = tag(
            w.Dropdown(
                options=[(f"{a:g}", a) for a in alphas],
                value=diag.alpha,
                description="alpha",
                layout=w.Layout(width="160px"),
            ),
            "lgs-alpha",
        )
        # toggle buttons get their label beside them (a description would wrap the buttons onto a second line)
        inline = dict(layout=w.Layout(width="auto"), style={"button_width": "auto"})
        self.alternative_picker = tag(
            w.ToggleButtons(
                options=list(ALTERNATIVES),
                value=diag.alternative,
                tooltips=["alternative: " + a for a in ALTERNATIVES],
                **inline,
            ),
            "lgs-alternative",
        )
        self.test_toggle = tag(
            w.ToggleButtons(options=names, value=test if names else None, style={"button_width": "auto"}),
            "lgs-test-toggle",
        )
        self.test_view = view("lgs-test-view", "120px")
        self.lag_slider = tag(
            w.IntSlider(
                value=min(max_lag, nlags),
                min=1,
                max=nlags,
                continuous_update=False,
                description="max lag",
                disabled=diag.correlogram is None,
            ),
            "lgs-lag-slider",
        )
        self.band_toggle = tag(w.ToggleButtons(options=list(BANDS), value=band, **inline), "lgs-band")
        self.correlogram_view = view("lgs-correlogram-view", "280px")
        top = max(1, min(nlags, diag.n - 2))
        self.lag_picker = tag(
            w.IntSlider(value=min(lag, top), min=1, max=top, continuous_update=False, description="lag h"),
            "lgs-lag-picker",
        )
        self.scatter_view = view("lgs-scatter-view", "280px")
        self.residuals_view = view("lgs-residuals-view", "240px")
        self.remedies_view = view("lgs-remedies-view")
        self.groups_view = view("lgs-groups-view")
        self.power_view = view("lgs-power-view")
        self.save_path = tag(
            w.Text(value="lagsight-report.html", description="report file", layout=w.Layout(width="360px")),
            "lgs-save-path",
        )
        self.save_button = tag(
            w.Button(description="Save HTML report", icon="download", layout=w.Layout(width="auto")), "lgs-save"
        )
        self.save_status = tag(w.HTML(), "lgs-save-status")

        def label(text):
            return tag(w.Label(text, layout=w.Layout(margin="0 4px 0 12px")), "lgs-control-label")

        def section(title):
            return tag(w.HTML(f'<div class="lgs-section">{_esc(title)}</div>'), "lgs-section-title")

        children = [
            self.style,
            self.headline,
            tag(w.HBox([self.alpha_picker, label("alternative"), self.alternative_picker]), "lgs-controls"),
            section("Tests"),
            self.test_toggle,
            self.test_view,
            section("Correlogram of the residuals"),
            tag(w.HBox([self.lag_slider, label("band"), self.band_toggle]), "lgs-controls"),
            self.correlogram_view,
            section("Residual against its own past"),
            self.lag_picker,
            self.scatter_view,
            section("Residuals in test order"),
            self.residuals_view,
            section("Corrected inference"),
            self.remedies_view,
        ]
        if diag.groups is not None:
            children += [section("Groups"), self.groups_view]
        if diag.power is not None:
            children += [section("Power of the exact Durbin-Watson test"), self.power_view]
        children += [tag(w.HBox([self.save_path, self.save_button]), "lgs-controls"), self.save_status]
        self.widget = tag(w.VBox(children), "lgs-panel", "lgs-root")

        self.alpha_picker.observe(self._on_level, names="value")
        self.alternative_picker.observe(self._on_level, names="value")
        self.test_toggle.observe(lambda _change: self._timed("test", self._draw_test), names="value")
        redraw_cg = lambda _change: self._timed("correlogram", self._draw_correlogram)  # noqa: E731
        self.lag_slider.observe(redraw_cg, names="value")
        self.band_toggle.observe(redraw_cg, names="value")
        self.lag_picker.observe(lambda _change: self._timed("lag", self._draw_scatter), names="value")
        self.save_button.on_click(lambda _button: self.save())
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

    def _specs(self, diag=None) -> dict:
        """Figure name -> (cache key, maker, title) for the current state (or for the panel's other
        controls at ``diag``'s alpha and alternative), in report order."""
        from .render import figures as F
        from .render.text import order_caveat

        d = self.current if diag is None else diag
        h, cg = self.lag, self._correlogram(d.alpha)
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
                ("correlogram", self.max_lag, self.band, cg.alpha),
                lambda: F.correlogram_figure(
                    cg, max_lag=self.max_lag, band=self.band, period=self.base.period, caveat=caveat
                ),
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

    def _figure(self, name: str, fmt: str | None = None, diag=None) -> tuple[str, str]:
        """(markup, caption) of figure ``name`` as 'svg' or 'png'; each state is drawn and converted once.

        ``diag`` draws it for another alpha/alternative (prefetch) without showing it.
        """
        from .render import export

        key, make, title = self._specs(diag)[name]
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
        if diag is None:
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

    def _cached(self, name: str, diag) -> bool:
        """Figure ``name`` at ``diag``'s level is cached (or absent, or failed when drawn ahead)."""
        spec = self._specs(diag).get(name)
        return (
            spec is None or spec[0] in self._not_ahead or self.figure_format in self._cache.get(spec[0], (None, {}))[1]
        )

    # -- drawing -------------------------------------------------------------------
    def refresh(self) -> None:
        """Redraw every view."""
        for draw in (
            self._draw_headline,
            self._draw_test,
            self._draw_correlogram,
            self._draw_scatter,
            self._draw_residuals,
            self._draw_remedies,
            self._draw_groups,
            self._draw_power,
        ):
            draw()

    def _style_markup(self) -> str:
        from .render.style import CSS

        return f"<style>{CSS}{_PANEL_CSS}.{SNAPSHOT_CLASS}-{self.uid}{{display:none}}</style>"

    def _draw(self, name: str, widget, build) -> None:
        try:
            widget.value = build()
            self.errors.pop(name, None)
        except Exception as err:  # a failing view must not take the panel down
            self.errors[name] = _message(err)
            widget.value = error_box("This view could not be drawn:", self.errors[name])

    def _draw_headline(self) -> None:
        self._draw("headline", self.headline, lambda: views.headline_html(self.current))

    def _draw_test(self) -> None:
        def build():
            body = views.test_html(self.current, self.test)
            if self.test == DW and DW in self.current.tests:
                body += views.figure_html(*self._figure("scale"))
            return body

        self._draw("test", self.test_view, build)

    def _draw_correlogram(self) -> None:
        def build():
            if self.base.correlogram is None:
                return error_box("No correlogram:", self.base.errors.get("Correlogram", "too few residuals"))
            return views.figure_html(*self._figure("correlogram"))

        self._draw("correlogram", self.correlogram_view, build)

    def _draw_scatter(self) -> None:
        self._draw("lag", self.scatter_view, lambda: views.figure_html(*self._figure("lag")))

    def _draw_residuals(self) -> None:
        self._draw("residuals", self.residuals_view, lambda: views.figure_html(*self._figure("residuals")))

    def _draw_remedies(self) -> None:
        self._draw("remedies", self.remedies_view, lambda: views.remedies_html(self.current))

    def _draw_groups(self) -> None:
        if self.current.groups is not None:
            self._draw(
                "groups",
                self.groups_view,
                lambda: views.figure_html(*self._figure("groups")) + views.groups_html(self.current),
            )

    def _draw_power(self) -> None:
        if self.current.power is not None:
            self._draw("power", self.power_view, lambda: views.figure_html(*self._figure("power")))

    # -- callbacks -----------------------------------------------------------------
    def _timed(self, name: str, redraw) -> None:
        start = time.perf_counter()
        redraw()
        self.timings[name] = time.perf_counter() - start
        self._snapshot_changed()
        self._schedule_prefetch(self.prefetch_delay)

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
            for draw in (
                self._draw_headline,
                self._draw_test,
                self._draw_correlogram,
                self._draw_remedies,
                self._draw_groups,
            ):
                draw()

        self._timed("alpha/alternative", redraw)

    def save(self, path=None) -> Path | None:
        """Write the standalone HTML report of the current view (the save button); say where in the panel."""
        from .render.html import save_html

        path = str(self.save_path.value if path is None else path).strip()
        try:
            if not path:
                raise ValueError("'path' must be a file name (got an empty string)")
            written = Path(save_html(self.current, Path(path).expanduser(), **self.view_options))
        except Exception as err:  # shown to the user in the panel
            self.errors["save"] = _message(err)
            self.save_status.value = error_box("Not saved:", self.errors["save"])
            return None
        self.errors.pop("save", None)
        self.saved_path = written.resolve()
        self.save_status.value = f'<span class="lgs-caption">Saved the report to {_esc(self.saved_path)}</span>'
        return self.saved_path

    # -- the static snapshot and display -------------------------------------------
    def snapshot_html(self) -> str:
        """The static HTML of the current view: verdict, tables and the :data:`SNAPSHOT_FIGURES` as PNG.

        Assembled from the panel's own figures (each drawn once); PNG because
        sanitizing viewers (an untrusted notebook in JupyterLab) drop inline SVG.
        """
        from .render.html import FigureView, build_view, render_html

        view = build_view(self.current, **{**self.view_options, "figures": "none"})
        figs = []
        for name, (_, _, title) in self._specs().items():
            if name not in SNAPSHOT_FIGURES:
                continue
            try:
                figs.append(FigureView(name, title, *self._figure(name, "png")))
            except Exception as err:  # shown in the snapshot in place of the figure
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
        if not self._shown:
            return
        loop = _running_loop()
        if self.snapshot_delay <= 0 or loop is None:
            self.flush_snapshot()
        elif self._pending is None:
            self._pending = loop.call_later(self.snapshot_delay, self.flush_snapshot)

    def flush_snapshot(self) -> None:
        """Publish the current static snapshot to its display id now."""
        from IPython.display import update_display

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

    def prefetch_step(self) -> bool:
        """Draw one figure that a level choice would need and is not cached; False when none is left.

        Only the views that change with alpha and alternative (the scale and the
        correlogram bands) are drawn ahead; tables and text are cheap to redo.
        """
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
                if not self._cached(name, diag):
                    try:
                        self._figure(name, diag=diag)
                    except Exception:  # not retried ahead; the view shows the error if it is picked
                        self._not_ahead.add(self._specs(diag)[name][0])
                    return True
        return False

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
