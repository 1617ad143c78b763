"""Self-contained HTML for a diagnosis: a view model first, then markup.

:func:`build_view` turns a :class:`~lagsight.Diagnosis` into a :class:`View`
of already formatted (but not yet escaped) strings, tables and figure markup;
:func:`render_html` writes it, escaping every string with :func:`html.escape`
where it is written.  Figure markup is generated here (inline SVG, or a PNG
data URI for viewers that strip SVG) and never contains user text unescaped.
All CSS lives under ``.lgs-root``; nothing is fetched from the network.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from html import escape
from pathlib import Path

from ..battery_run import DW
from ..diagnosis import Diagnosis
from ..formats import format_count, format_level, format_p, format_statistic
from ..stats._arrays import check_flag, check_optional_int
from ..stats._caught import caught_warnings
from ..stats.remedies import HAC_RULE_WORDS
from . import figures as F
from .style import CSS
from .text import (
    TEST_COLUMNS,
    TEST_GUIDE,
    diagnosis_text,
    format_number,
    format_pvalue,
    key_figures,
    order_caveat,
    primary_test,
    report_sentence,
    test_rows,
)

__all__ = [
    "Table",
    "FigureView",
    "View",
    "build_view",
    "render_html",
    "diagnosis_html",
    "save_html",
    "FIGURE_MODES",
    "MAX_GROUP_ROWS",
]

FIGURE_MODES = ("svg", "png", "none")
#: rows of the per-group table shown (strongest evidence first)
MAX_GROUP_ROWS = 20


@dataclass(frozen=True)
class Table:
    """A table of display strings; ``numeric`` marks right-aligned columns, ``focus`` a highlighted row."""

    columns: tuple
    rows: tuple
    numeric: tuple = ()
    focus: int | None = None
    caption: str = ""


@dataclass(frozen=True)
class FigureView:
    """One figure: ``markup`` is generated SVG or ``<img>`` markup; the other fields are plain text."""

    key: str
    title: str
    markup: str
    caption: str = ""
    error: str = ""


@dataclass(frozen=True)
class View:
    """Everything one diagnosis shows, formatted but not escaped."""

    title: str
    source: str
    finding: str
    headline: str
    key_figures: tuple
    warnings: tuple
    focus_test: str | None
    focus_guide: str
    sentence_text: str
    tests: Table
    figures: tuple = ()
    remedies: Table | None = None
    groups: Table | None = None
    details: tuple = ()
    next_steps: tuple = ()
    cautions: tuple = ()
    notes: tuple = ()
    test_notes: tuple = ()
    text: str = ""
    options: dict = field(default_factory=dict)


# ---------------------------------------------------------------------------
def _markup(fig, title: str, figures: str) -> str:
    if figures == "png":
        uri = F.figure_to_png_data_uri(fig, dpi=96)
        return f'<img src="{uri}" alt="{escape(title, quote=True)}">'
    return F.figure_to_svg(fig, title=title)


def _figure(key: str, title: str, build, figures: str) -> FigureView:
    with caught_warnings() as caught:  # e.g. matplotlib on a glyph its font lacks: said in the caption
        try:
            fig = build()
            markup = _markup(fig, title, figures)
        except Exception as err:  # a figure that fails must not take the report down with it
            return FigureView(key, title, "", "", f"{title} could not be drawn: {str(err).splitlines()[0]}")
    caption = " ".join([getattr(fig, "lagsight_caption", ""), *(f"({n})" for n in caught.notes())]).strip()
    return FigureView(key, title, markup, caption)


def _check_options(diag, max_lag, band, lag, test, figures) -> None:
    if not isinstance(diag, Diagnosis):
        raise TypeError(f"'diag' must be a lagsight Diagnosis (got {type(diag).__name__})")
    if band not in F.BANDS:
        raise ValueError(f"'band' must be 'white' or 'bartlett' (got {band!r})")
    if figures not in FIGURE_MODES:
        raise ValueError(f"'figures' must be 'svg', 'png' or 'none' (got {figures!r})")
    check_optional_int(max_lag, "max_lag", minimum=1)
    if check_optional_int(lag, "lag", minimum=1) is not None and lag > diag.n - 2:
        raise ValueError(f"'lag' must be an integer from 1 to n - 2 = {diag.n - 2} (got {lag!r})")
    if test is not None and test not in diag.tests and test not in diag.errors:
        known = ", ".join(repr(t) for t in list(diag.tests) + list(diag.errors))
        raise ValueError(f"'test' must be one of the tests ({known}) (got {test!r})")


def remedies_table(rem, caveat: str = "") -> Table:
    t = rem.table
    cols = ("term", "OLS coef", "OLS SE", "OLS p", "HAC SE", "HAC p", "FGLS coef", "FGLS SE", "FGLS p", "changes")
    rows = []
    for term, r in t.iterrows():
        rows.append(
            (
                str(term),
                format_number(r["coef_ols"]),
                format_number(r["se_ols"]),
                format_pvalue(r["p_ols"]),
                format_number(r["se_hac"]),
                format_pvalue(r["p_hac"]),
                format_number(r["coef_fgls"]),
                format_number(r["se_fgls"]),
                format_pvalue(r["p_fgls"]),
                str(r["changes"]) or "\u2013",
            )
        )
    rho = "" if math.isnan(rem.rho) else f", estimated \u03c1 = {format_statistic(rem.rho)}"
    rule = HAC_RULE_WORDS.get(str(rem.lag_rule), str(rem.lag_rule))
    cap = (
        f"HAC: Newey-West with {format_count(rem.hac_lag)} lags ({rule}). FGLS: {rem.fgls_method}{rho}. "
        f"'changes' names the corrections that change significance at \u03b1 = {format_level(rem.alpha)}."
    )
    if caveat:
        cap = (
            f"Not meaningful: the rows are not in time order, so these corrections for serial correlation "
            f"do not apply as they stand. {cap}"
        )
    return Table(cols, tuple(rows), numeric=(False,) + (True,) * 8 + (False,), caption=cap)


def groups_table(summary) -> Table:
    t = summary.table
    cols = ("group", "n", "d", "implied \u03c1", "p (DW)", "p adjusted", "finding")
    rows = []
    for _, r in t.head(MAX_GROUP_ROWS).iterrows():
        rows.append(
            (
                str(r["group"]),
                f"{int(r['n']):,}",
                format_statistic(r.get("dw")),
                format_statistic(r.get("rho_hat")),
                format_pvalue(r.get("dw_pvalue")),
                format_pvalue(r.get("dw_p_adjusted")),
                str(r.get("finding", "")),
            )
        )
    parts = [
        f"Pooled within-group d = {format_statistic(summary.pooled_dw)}"
        + ("" if math.isnan(summary.pooled_pvalue) else f" ({format_p(summary.pooled_pvalue)})")
        + f"; the groups stacked end to end would give {format_statistic(summary.naive_dw)}."
    ]
    if len(t) > MAX_GROUP_ROWS:
        parts.append(f"Showing the {MAX_GROUP_ROWS} groups with the strongest evidence of {format_count(len(t))}.")
    if summary.skipped:
        shown = list(summary.skipped.items())[:5]
        parts.append(
            f"Skipped {format_count(len(summary.skipped))}: "
            + "; ".join(f"{k} ({v})" for k, v in shown)
            + (" \u2026" if len(summary.skipped) > 5 else "")
        )
    return Table(cols, tuple(rows), numeric=(False, True, True, True, True, True, False), caption=" ".join(parts))


def build_view(
    diag,
    *,
    max_lag: int | None = None,
    band: str = "white",
    lag: int | None = 1,
    test: str | None = None,
    figures: str = "svg",
    residuals: bool = True,
) -> View:
    """The view model of a diagnosis.

    Parameters
    ----------
    diag : Diagnosis
    max_lag : int, optional
        Largest correlogram lag shown.
    band : {'white', 'bartlett'}
        Band of the ACF panel.
    lag : int or None
        Lag of the e_t against e_{t-h} scatter (None leaves it out).
    test : str, optional
        Test to put first in the reading (default: the one the verdict leads with).
    figures : {'svg', 'png', 'none'}
        Inline SVG, PNG data URIs (for viewers that strip SVG), or no figures.
    residuals : bool
        Include the residuals-in-test-order figure.
    """
    _check_options(diag, max_lag, band, lag, test, figures)
    focus = test or primary_test(diag)
    rows = test_rows(diag)
    names = [r[0] for r in rows]
    tests = Table(
        TEST_COLUMNS,
        tuple(rows),
        numeric=(False, False, True, False, False, False),
        focus=names.index(focus) if focus in names else None,
    )
    figs = []
    caveat = order_caveat(diag)
    if figures != "none":
        if DW in diag.tests:
            figs.append(_figure("scale", "Durbin-Watson d on its 0-4 scale", lambda: F.scale_figure(diag), figures))
        if diag.correlogram is not None:
            figs.append(
                _figure(
                    "correlogram",
                    "ACF and PACF of the residuals",
                    lambda: F.correlogram_figure(
                        diag.correlogram, max_lag=max_lag, band=band, period=diag.period, caveat=caveat
                    ),
                    figures,
                )
            )
        if lag is not None:
            figs.append(
                _figure(
                    "lag",
                    f"Residuals against their lag {lag}",
                    lambda: F.lag_scatter_figure(diag.data.resid, lag=int(lag), caveat=caveat),
                    figures,
                )
            )
        if residuals:
            figs.append(_figure("residuals", "Residuals in test order", lambda: F.residuals_figure(diag), figures))
        if diag.groups is not None:
            figs.append(_figure("groups", "Durbin-Watson d by group", lambda: F.groups_figure(diag.groups), figures))
        if diag.power is not None:
            figs.append(
                _figure("power", "Power of the exact Durbin-Watson test", lambda: F.power_figure(diag.power), figures)
            )
    notes = list(diag.notes)
    if DW not in diag.tests and DW in diag.errors:
        notes.insert(0, f"The 0-4 scale is not shown: Durbin-Watson {diag.errors[DW]}")
    v = diag.verdict
    return View(
        title="lagsight: serial correlation in the residuals",
        source=str(diag.data.source),
        finding=str(v.finding),
        headline=str(v.headline),
        key_figures=tuple(key_figures(diag)),
        warnings=tuple(diag.order.warnings),
        focus_test=focus,
        focus_guide=TEST_GUIDE.get(focus, "") if focus else "",
        sentence_text=report_sentence(diag, "text"),
        tests=tests,
        figures=tuple(figs),
        remedies=remedies_table(diag.remedies, caveat) if diag.remedies is not None else None,
        groups=groups_table(diag.groups) if diag.groups is not None else None,
        details=tuple(v.details),
        next_steps=tuple(v.next_steps),
        cautions=tuple(v.cautions),
        notes=tuple(n for n in notes if n not in diag.order.warnings),
        test_notes=diag.test_notes,
        text=diagnosis_text(diag),
        options={"max_lag": max_lag, "band": band, "lag": lag, "test": test, "figures": figures},
    )


# ---------------------------------------------------------------------------
def _e(text) -> str:
    return escape(str(text), quote=True)


def table_html(t: Table, cls: str) -> str:
    out = [f'<table class="lgs-table {cls}"><thead><tr>']
    out += [f"<th>{_e(c)}</th>" for c in t.columns]
    out.append("</tr></thead><tbody>")
    for i, row in enumerate(t.rows):
        out.append('<tr class="lgs-focus">' if i == t.focus else "<tr>")
        for j, cell in enumerate(row):
            num = j < len(t.numeric) and t.numeric[j]
            label = f' data-label="{_e(t.columns[j])}"' if j < len(t.columns) else ""  # narrow layout: cell names
            out.append(f'<td class="lgs-num"{label}>{_e(cell)}</td>' if num else f"<td{label}>{_e(cell)}</td>")
        out.append("</tr>")
    out.append("</tbody></table>")
    if t.caption:
        out.append(f'<p class="lgs-caption">{_e(t.caption)}</p>')
    return "".join(out)


def headline_html(finding: str, headline: str) -> str:
    """The verdict sentence, coloured by its finding."""
    cls = {"evidence": "lgs-evidence", "no evidence": "lgs-no-evidence"}.get(finding, "lgs-not-meaningful")
    return f'<div class="lgs-headline {cls}">{_e(headline)}</div>'


def keys_html(pairs) -> str:
    """Label: value chips (key figures, a test's figures)."""
    return '<ul class="lgs-keys">' + "".join(f"<li><b>{_e(k)}:</b> {_e(v)}</li>" for k, v in pairs) + "</ul>"


def warnings_html(warnings) -> str:
    """The row-order warnings, one box each."""
    return "".join(f'<div class="lgs-warning"><strong>Row order: </strong>{_e(w)}</div>' for w in warnings)


def _list(items, cls: str = "lgs-list") -> str:
    return f'<ul class="{cls}">' + "".join(f"<li>{_e(i)}</li>" for i in items) + "</ul>"


def _figure_html(f: FigureView) -> str:
    if f.error:
        return f'<p class="lgs-warning lgs-figure-error">{_e(f.error)}</p>'
    cap = f"<figcaption>{_e(f.caption)}</figcaption>" if f.caption else ""
    return f'<figure class="lgs-figure lgs-figure-{_e(f.key)}">{f.markup}{cap}</figure>'


def render_html(view: View) -> str:
    """HTML for a :class:`View`: one ``<div class="lgs-root">`` with its own stylesheet."""
    if not isinstance(view, View):
        raise TypeError(f"'view' must be a View from build_view (got {type(view).__name__})")
    out = [
        f'<div class="lgs-root" data-lgs-finding="{_e(view.finding)}">',
        f"<style>{CSS}</style>",
        f'<h3 class="lgs-title">{_e(view.title)}</h3>',
        f'<p class="lgs-source">{_e(view.source)}</p>',
        headline_html(view.finding, view.headline),
        keys_html(view.key_figures),
    ]
    if view.warnings:
        out.append(warnings_html(view.warnings))
    figs = {f.key: f for f in view.figures}
    if "scale" in figs:
        out.append(_figure_html(figs["scale"]))
    out.append("<h4>Tests</h4>")
    out.append(table_html(view.tests, "lgs-tests"))
    if view.focus_test and view.focus_guide:
        out.append(f'<p class="lgs-caption"><b>How to read {_e(view.focus_test)}:</b> {_e(view.focus_guide)}</p>')
    rest = [f for f in view.figures if f.key != "scale"]
    if rest:
        out.append("<h4>Figures</h4>")
        out += [_figure_html(f) for f in rest]
    if view.remedies is not None:
        out.append("<h4>Corrected inference: OLS, HAC and FGLS</h4>")
        out.append(table_html(view.remedies, "lgs-remedies"))
    if view.groups is not None:
        out.append("<h4>By group</h4>")
        out.append(table_html(view.groups, "lgs-groups"))
    if view.next_steps:
        out.append("<h4>What to do next</h4>" + _list(view.next_steps))
    out.append("<h4>To report</h4>")
    out.append(f'<p class="lgs-sentence">{_e(view.sentence_text)}</p>')
    more = []
    if view.details:
        more.append("<b>Findings</b>" + _list(view.details))
    if view.notes:
        more.append("<b>Notes</b>" + _list(view.notes))
    if view.test_notes:
        more.append("<b>Notes on the tests</b>" + _list(view.test_notes))
    if view.cautions:
        more.append("<b>Cautions</b>" + _list(view.cautions))
    if more:
        out.append("<details><summary>Findings, notes and cautions</summary>" + "".join(more) + "</details>")
    out.append(f'<pre class="lgs-text">{_e(view.text)}</pre>')
    out.append("</div>")
    return "\n".join(out)


def diagnosis_html(diag, **view_options) -> str:
    """Self-contained HTML for a diagnosis (options as for :func:`build_view`)."""
    return render_html(build_view(diag, **view_options))


_PAGE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="color-scheme" content="light dark">
<title>{title}</title>
<style>body{{margin:24px;background:#ffffff;color:#1e2630}}
@media (prefers-color-scheme: dark){{body{{background:#16191d;color:#e4e7eb}}}}</style>
</head>
<body>
{body}
<p style="font-size:11px;opacity:.7">Written by lagsight {version}.</p>
</body>
</html>
"""


def report_page(diag, *, body: str | None = None, **view_options) -> str:
    """The standalone HTML report as a string (one page, figures inline, no network).

    ``body`` is the diagnosis's HTML when the caller has it already (the panel assembles it from the
    figures it has drawn); default :func:`diagnosis_html`.
    """
    from .. import __version__

    body = diagnosis_html(diag, **view_options) if body is None else body
    return _PAGE.format(title=_e(f"lagsight report: {diag.data.source}"), body=body, version=_e(__version__))


def save_html(diag, path, *, overwrite: bool = False, **view_options) -> Path:
    """Write a standalone HTML report (one file, figures inline, no network); returns its path.

    An existing file is replaced only with ``overwrite=True`` (else FileExistsError).
    """
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"'path' must be a str or path (got {type(path).__name__})")
    overwrite = check_flag(overwrite, "overwrite")
    target = Path(path).expanduser()
    if not str(path).strip():
        raise ValueError("'path' must be a file name (got an empty string)")
    if not target.parent.is_dir():
        raise ValueError(f"'path' must be in an existing folder (got {str(target)!r})")
    if target.is_dir():
        raise ValueError(f"'path' is a folder, not a file (got {str(target)!r})")
    if target.exists() and not overwrite:
        raise FileExistsError(f"{str(target)!r} exists; pass overwrite=True to replace it")
    target.write_text(report_page(diag, **view_options), encoding="utf-8")
    return target
