"""How a Diagnosis shows itself: a static snapshot that survives sharing, and the live panel.

In a running kernel with ipywidgets a diagnosis is shown as two outputs:

1. a *static snapshot* (``text/html`` + ``text/plain``) published with a display
   id and kept current by the panel through ``update_display``.  nbconvert drops
   every other mimetype of a widget output, so the snapshot has to be an output
   of its own; it is what exported, kernel-less, untrusted and HTML-only views
   show.
2. the *widget* (:class:`~lagsight.panel.DiagnosisPanel`).  It carries a
   ``<style>`` that hides its own snapshot, so a live page shows the panel once;
   wherever the widget does not render, the style is absent and the snapshot
   shows instead.

Everywhere else (a terminal, a plain ``InteractiveShell``, ``--static``) the
diagnosis is shown as one static bundle.  Nothing here runs at import time.
"""

from __future__ import annotations

import html
import warnings
import weakref
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from .stats.bounds import BoundsResult

__all__ = [
    "MODES",
    "SNAPSHOT_CLASS",
    "BoundsView",
    "mimebundle",
    "static_html",
    "snapshot_bundle",
    "quiet_bundle",
    "show",
    "set_preferences",
    "preferences",
    "silence_in_cell",
    "widgets_available",
    "widget_bundle",
    "error_box",
    "headline_html",
    "next_html",
    "cautions_html",
    "test_html",
    "remedies_html",
    "groups_html",
    "figure_html",
]

#: display modes: the live panel, one static bundle, or the verdict alone
MODES = ("panel", "static", "quiet")
#: class of the snapshot's wrapper; ``SNAPSHOT_CLASS-<uid>`` names one panel's snapshot
SNAPSHOT_CLASS = "lgs-snapshot"

_VIEW_KEYS = ("max_lag", "band", "lag", "test", "figures")
_PREFS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def set_preferences(diag, *, mode: str | None = None, name: str | None = None, **view_options) -> None:
    """Remember how ``diag`` is to be displayed (used by the magic's ``--static`` / ``--quiet``).

    Parameters
    ----------
    mode : {'panel', 'static', 'quiet'}, optional
    name : str, optional
        The model's variable name (names a downloaded report).
    **view_options
        ``max_lag``, ``band``, ``lag``, ``test`` or ``figures`` for the views.
    """
    if mode is not None and mode not in MODES:
        raise ValueError(f"'mode' must be one of {', '.join(map(repr, MODES))} (got {mode!r})")
    unknown = sorted(set(view_options) - set(_VIEW_KEYS))
    if unknown:
        raise TypeError(f"unknown view option(s) {unknown}; expected some of {list(_VIEW_KEYS)}")
    prefs = dict(_PREFS.get(diag, {}))
    if mode is not None:
        prefs["mode"] = mode
    if name is not None:
        prefs["name"] = str(name)
    prefs.update({k: v for k, v in view_options.items() if v is not None})
    _PREFS[diag] = prefs


def silence_in_cell(diag, shell) -> None:
    """Show nothing for ``diag`` during the cell now running (a magic line ending in ';').

    IPython hands a line magic its trailing ';' instead of silencing the result,
    so the magic marks the diagnosis with the running cell's execution count;
    later cells display it as usual.
    """
    prefs = dict(_PREFS.get(diag, {}))
    prefs["silent_cell"] = getattr(shell, "execution_count", None)
    _PREFS[diag] = prefs


def _silenced(diag) -> bool:
    cell = _PREFS.get(diag, {}).get("silent_cell")
    if cell is None:
        return False
    from IPython import get_ipython

    shell = get_ipython()
    return shell is not None and shell.execution_count == cell


def preferences(diag) -> dict:
    """The display preferences stored for ``diag`` (mode defaults to 'panel')."""
    prefs = {"mode": "panel"}
    prefs.update({k: v for k, v in _PREFS.get(diag, {}).items() if k != "silent_cell"})
    return prefs


def _view(diag, view_options) -> dict:
    prefs = preferences(diag)
    out = {k: prefs[k] for k in _VIEW_KEYS if k in prefs}
    out.update({k: v for k, v in view_options.items() if v is not None})
    return out


def _filter(bundle: dict, include=None, exclude=None) -> dict:
    if include:
        bundle = {k: v for k, v in bundle.items() if k in include}
    if exclude:
        bundle = {k: v for k, v in bundle.items() if k not in exclude}
    return bundle


def static_html(diag, **view_options) -> str:
    """The self-contained HTML view of ``diag`` (verdict, scale figure, test table, ...).

    Figures are PNG unless ``figures='svg'`` is asked for: this HTML is what
    shared notebooks show, and sanitizing viewers drop inline SVG.
    """
    from .render.html import diagnosis_html

    options = _view(diag, view_options)
    options.setdefault("figures", "png")
    return diagnosis_html(diag, **options)


def mimebundle(diag, include=None, exclude=None, **view_options) -> dict:
    """``text/plain`` and a static, escaped ``text/html`` for ``diag`` (``_repr_mimebundle_``)."""
    if preferences(diag)["mode"] == "quiet":
        return _filter(quiet_bundle(diag), include, exclude)
    bundle = {"text/plain": str(diag)}
    if not include or "text/html" in include:
        try:
            bundle["text/html"] = static_html(diag, **view_options)
        except Exception as err:  # keep the text readable in HTML viewers, and say what failed
            bundle["text/html"] = _fallback_html(diag, err)
    return _filter(bundle, include, exclude)


def _message(err: BaseException) -> str:
    return (str(err).splitlines() or [""])[0] or type(err).__name__


def _fallback_html(diag, err: BaseException) -> str:
    message = _message(err)
    return (
        f'<div class="lgs-fallback"><pre>{html.escape(str(diag))}</pre>'
        f"<p>(The rich view could not be drawn: {html.escape(message)})</p></div>"
    )


def snapshot_bundle(diag, uid: str, *, body: str | None = None, **view_options) -> dict:
    """The static snapshot of a panel: the static bundle, wrapped so the live panel can hide it.

    ``body`` is the snapshot's HTML when the caller already has it (the panel
    assembles it from figures it has drawn); default :func:`static_html`.
    """
    if not uid.replace("-", "").isalnum():
        raise ValueError(f"'uid' must hold only letters, digits and '-' (got {uid!r})")
    if body is None:
        try:
            body = static_html(diag, **view_options)
        except Exception as err:  # never leave the snapshot blank
            body = _fallback_html(diag, err)
    wrapped = f'<div class="{SNAPSHOT_CLASS} {SNAPSHOT_CLASS}-{uid}">\n{body}\n</div>'
    return {"text/plain": str(diag), "text/html": wrapped}


def quiet_bundle(diag) -> dict:
    """The verdict's headline and the sentence to paste, nothing else."""
    from .render.text import report_sentence

    headline = diag.verdict.headline
    sentence = report_sentence(diag, "text")
    text = f"{headline}\n{sentence}"
    markup = (
        '<div class="lgs-quiet">'
        f"<p><strong>{html.escape(headline)}</strong></p>"
        f"<p><code>{html.escape(sentence)}</code></p>"
        "</div>"
    )
    return {"text/plain": text, "text/html": markup}


def widget_bundle(widget) -> dict:
    """The output of a widget: its view, and a short text line instead of the widget's repr."""
    return {
        "application/vnd.jupyter.widget-view+json": {
            "version_major": 2,
            "version_minor": 0,
            "model_id": widget.model_id,
        },
        "text/plain": "lagsight interactive panel (needs a running kernel; where widgets do not render, "
        "the static report above stands in)",
    }


def widgets_available() -> bool:
    """True in a live Jupyter kernel where ipywidgets can be shown."""
    try:
        from IPython import get_ipython
    except ImportError:  # pragma: no cover - IPython is a dependency
        return False
    shell = get_ipython()
    if shell is None or getattr(shell, "kernel", None) is None:
        return False
    try:
        import ipywidgets  # noqa: F401
    except ImportError:  # pragma: no cover - ipywidgets is a dependency
        return False
    return True


def _publish(bundle: dict, **kwargs) -> None:
    from IPython.display import display

    display(bundle, raw=True, **kwargs)


def show(diag, *, mode: str | None = None, widgets: bool | None = None, **view_options):
    """Display ``diag`` in the current frontend (``Diagnosis._ipython_display_``).

    Parameters
    ----------
    mode : {'panel', 'static', 'quiet'}, optional
        Default: the stored preference ('panel').
    widgets : bool, optional
        Whether widgets can render; default: detected (a live kernel with ipywidgets).
    **view_options
        Passed to the panel and the static views.

    Returns
    -------
    DiagnosisPanel or None
        The panel when one was shown.
    """
    if _silenced(diag):
        return None
    mode = preferences(diag)["mode"] if mode is None else mode
    if mode not in MODES:
        raise ValueError(f"'mode' must be one of {', '.join(map(repr, MODES))} (got {mode!r})")
    if mode == "quiet":
        _publish(quiet_bundle(diag))
        return None
    if widgets is None:
        widgets = widgets_available()
    if mode == "static" or not widgets:
        _publish(mimebundle(diag, **view_options))
        return None
    from .panel import DiagnosisPanel

    try:
        prefs = preferences(diag)
        panel = DiagnosisPanel(
            diag,
            name=prefs.get("name"),
            **_view(diag, view_options),
        )
    except Exception as err:  # the static view still shows; say why the panel did not
        warnings.warn(
            f"lagsight: the interactive panel could not be built ({_message(err)}); showing the static view",
            RuntimeWarning,
            stacklevel=2,
        )
        _publish(mimebundle(diag, **view_options))
        return None
    panel.show()
    return panel


# ---------------------------------------------------------------------------
# fragments of the panel's views (plain functions of a diagnosis; every string escaped here)
def _esc(value) -> str:
    return html.escape(str(value), quote=True)


def error_box(title: str, message: str) -> str:
    """A boxed message for a view or test that could not be drawn or run."""
    return f'<div class="lgs-error"><strong>{_esc(title)}</strong> {_esc(message)}</div>'


#: key figures the panel's top line leaves out: the finding is the headline's colour, α and the alternative
#: are the controls beside it, the rule is in the test view
_TOP_LEFT_OUT = ("finding", "alpha", "\u03b1", "alternative", "rule")


def headline_html(diag) -> str:
    """Verdict, key figures, order-guard warnings and notes (the top of the panel).

    The α and alternative are left out of the key figures: the panel's controls beside them show those.
    """
    from .render.html import headline_html as verdict_html
    from .render.html import warnings_html
    from .render.text import key_figures

    v = diag.verdict
    keys = [(k, val) for k, val in key_figures(diag) if k not in _TOP_LEFT_OUT]
    keyline = " \u00b7 ".join(f"<b>{_esc(k)}</b> {_esc(val)}" for k, val in keys)
    parts = [verdict_html(v.finding, v.headline), f'<p class="lgs-keyline">{keyline}</p>']
    parts.append(warnings_html(diag.order.warnings))
    notes = [n for n in diag.notes if n not in diag.order.warnings]
    if notes:
        parts.append('<ul class="lgs-list lgs-notes">' + "".join(f"<li>{_esc(n)}</li>" for n in notes) + "</ul>")
    return "".join(parts)


def next_html(diag) -> str:
    """What to do next, and the sentence to paste into a report."""
    from .render.text import report_sentence

    parts = []
    if diag.verdict.next_steps:
        parts.append(
            '<ul class="lgs-list">' + "".join(f"<li>{_esc(s)}</li>" for s in diag.verdict.next_steps) + "</ul>"
        )
    parts.append('<div class="lgs-caption">To report:</div>')
    parts.append(f'<div class="lgs-sentence">{_esc(report_sentence(diag, "text"))}</div>')
    return "".join(parts)


def cautions_html(diag, shown=()) -> str:
    """A short cautions line (what the leading test assumes; failing to reject is not proof) that opens in
    the browser, with no kernel, to the full list.  ``shown``: names of the views on offer (the power
    section is pointed at only when it is there)."""
    from .verdict import ASSUMPTIONS

    v = diag.verdict
    lead = ASSUMPTIONS.get(v.leading or "")
    short = [lead[0].upper() + lead[1:] + "." if lead else "", "Not rejecting is not proof of independence."]
    full = list(v.cautions)
    if "power" in shown:
        full[0] = full[0] + " The power section below shows how much power the test has here."
    summary = " ".join(p for p in short if p)
    return (
        f'<details class="lgs-cautions"><summary><b>Cautions:</b> {_esc(summary)} <u>All cautions</u></summary>'
        + '<ul class="lgs-list">'
        + "".join(f"<li>{_esc(c)}</li>" for c in full)
        + "</ul></details>"
    )


def test_html(diag, name: str | None) -> str:
    """One test: statistic, p-value, what it looks for, the reading, how to read it; or why it did not run."""
    from .formats import format_level
    from .render.html import keys_html
    from .render.text import TEST_COLUMNS, TEST_GUIDE, test_rows

    if name is None:
        return error_box("No test could be run.", "")
    if name in diag.errors:
        return error_box(f"{name} could not be run:", diag.errors[name])
    row = next(r for r in test_rows(diag) if r[0] == name)
    pairs = [(k, v) for k, v in zip(TEST_COLUMNS[1:], row[1:]) if v] + [("\u03b1", format_level(diag.alpha))]
    if name in diag.verdict.family and diag.verdict.rule:
        pairs.append(("rule", diag.verdict.rule))
    parts = [f"<h4>{_esc(name)}</h4>", keys_html(pairs)]
    parts.append(f'<p class="lgs-caption">{_esc(TEST_GUIDE.get(name, ""))}</p>')
    parts += [f'<p class="lgs-caption">{_esc(n)}</p>' for n in diag.tests[name].notes]
    return "".join(parts)


def remedies_html(diag) -> str:
    """The OLS / HAC / FGLS table, or why there is none."""
    from .render.html import remedies_table, table_html
    from .render.text import order_caveat

    finding = diag.verdict.finding
    if diag.remedies is None:
        why = {
            "evidence": "it needs the response and the design of a fitted regression",
            "no evidence": "no correlation was found at this \u03b1",
            "not meaningful": "not meaningful, because the rows are not in time order",
        }.get(finding, f"cannot judge ({diag.verdict.reason})")
        return f'<p class="lgs-caption">No corrected inference: {_esc(why)}.</p>'
    return table_html(remedies_table(diag.remedies, order_caveat(diag)), "lgs-remedies")


def groups_html(diag) -> str:
    """The per-group table (strongest evidence first)."""
    from .render.html import groups_table, table_html

    return table_html(groups_table(diag.groups), "lgs-groups")


def figure_html(markup: str, caption: str = "") -> str:
    """A figure's markup (SVG or ``<img>``) with its caption."""
    cap = f"<figcaption>{_esc(caption)}</figcaption>" if caption else ""
    return f"<figure>{markup}{cap}</figure>"


@dataclass(frozen=True)
class BoundsView:
    """Durbin-Watson bounds shown as a small table and the 0-4 scale (``%lagsight_bounds``).

    ``bounds`` is the :class:`~lagsight.stats.durbin_watson.BoundsResult`.
    """

    bounds: BoundsResult

    @property
    def lower(self) -> float:
        return self.bounds.lower

    @property
    def upper(self) -> float:
        return self.bounds.upper

    def rows(self) -> list[tuple[str, str]]:
        from .formats import format_count, format_level, format_statistic

        b = self.bounds
        return [
            ("n", format_count(b.n)),
            ("k' (regressors without the constant)", str(b.k_prime)),
            ("\u03b1", format_level(b.alpha)),
            ("model has a constant", "yes" if b.has_constant else "no"),
            ("dL", format_statistic(b.lower)),
            ("dU", format_statistic(b.upper)),
            ("4 \u2212 dU", format_statistic(4 - b.upper)),
            ("4 \u2212 dL", format_statistic(4 - b.lower)),
            ("method", str(b.method)),
        ]

    def __str__(self) -> str:
        width = max(len(k) for k, _ in self.rows())
        lines = ["Durbin-Watson bounds"] + [f"  {k:<{width}}  {v}" for k, v in self.rows()]
        return "\n".join(lines)

    __repr__ = __str__

    def figure(self):
        """The 0-4 scale with the five regions for these bounds (a matplotlib Figure)."""
        from .render.figures import bounds_figure

        return bounds_figure(self.bounds)

    def _repr_mimebundle_(self, include=None, exclude=None):
        cells = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>" for k, v in self.rows())
        parts = ['<div class="lgs-bounds">', '<table class="lgs-table">', cells, "</table>"]
        try:  # PNG: shared notebooks are shown by viewers that drop inline SVG
            from .render.export import figure_to_png_data_uri

            uri = figure_to_png_data_uri(self.figure(), dpi=96)
            parts.append(f'<figure><img src="{uri}" alt="Durbin-Watson bounds on the 0-4 scale"></figure>')
        except (ImportError, ValueError, TypeError) as err:
            parts.append(f"<p>No figure: {html.escape(_message(err))}</p>")
        parts.append("</div>")
        return _filter({"text/plain": str(self), "text/html": "".join(parts)}, include, exclude)
