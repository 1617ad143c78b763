"""One palette, one set of figure settings and one stylesheet for every lagsight view.

The palette is built on a blue / orange / grey triad, which stays distinct
under the common forms of colour-vision deficiency; meaning is never carried
by colour alone (hatching, marker shape and words carry it too).  Figures are
drawn on their own light "paper" so they read the same on light and dark
pages; the HTML takes its colours from CSS variables with light and dark values.
"""

from __future__ import annotations

from contextlib import contextmanager

import matplotlib as mpl

__all__ = ["PALETTE", "REGION_STYLE", "FIGURE_RC", "figure_rc", "figure_title", "CSS", "FIG_WIDTH", "MIN_FONT_PT"]

#: named colours used by every figure (hex strings)
PALETTE = {
    "ink": "#1e2630",  # text, axes, the null density
    "muted": "#5b6570",  # secondary text, captions
    "rule": "#c9ced5",  # grid lines, frames
    "paper": "#fcfcfa",  # figure background
    "blue": "#2f6db5",  # evidence of positive correlation; ACF bars
    "blue_light": "#d3e2f4",
    "orange": "#c8640f",  # evidence of negative correlation; values outside a band
    "orange_light": "#f7dcc2",
    "grey": "#8b939c",  # inconclusive
    "grey_light": "#e6e8eb",
    "none": "#fcfcfa",  # no evidence (plain paper)
    "mark": "#111418",  # the observed statistic
}

#: the five regions of the 0-4 scale: key -> (words, face colour, hatch, hatch colour)
REGION_STYLE = {
    "positive": ("evidence of positive correlation", PALETTE["blue_light"], "///", PALETTE["blue"]),
    "inconclusive": ("inconclusive", PALETTE["grey_light"], "xx", PALETTE["grey"]),
    "none": ("no evidence", PALETTE["none"], "", PALETTE["rule"]),
    "negative": ("evidence of negative correlation", PALETTE["orange_light"], "\\\\\\", PALETTE["orange"]),
}

#: default figure width in inches: 360 pt, which a browser draws 480 CSS px wide
FIG_WIDTH = 5.0
#: smallest font size on any figure, pt: 11.1 CSS px at FIG_WIDTH, so still 10 px when the figure is drawn
#: 432 px wide (the narrowest panel column seen: JupyterLab at 900 px with its file browser open)
MIN_FONT_PT = 8.3

#: matplotlib settings applied through a local rc_context only (never globally)
FIGURE_RC = {
    "svg.fonttype": "none",  # keep text as text
    "svg.hashsalt": "lagsight",  # deterministic ids
    "svg.image_inline": True,
    "path.simplify": True,
    "path.simplify_threshold": 0.5,
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans", "Verdana", "Arial"],
    "font.size": 8.5,
    "axes.titlesize": 9.0,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 8.5,
    "axes.labelcolor": PALETTE["ink"],
    "axes.edgecolor": PALETTE["muted"],
    "axes.linewidth": 0.7,
    "axes.facecolor": PALETTE["paper"],
    "axes.spines.top": False,
    "axes.spines.right": False,
    "xtick.color": PALETTE["muted"],
    "ytick.color": PALETTE["muted"],
    "xtick.labelcolor": PALETTE["ink"],
    "ytick.labelcolor": PALETTE["ink"],
    "xtick.labelsize": MIN_FONT_PT,
    "ytick.labelsize": MIN_FONT_PT,
    "legend.fontsize": MIN_FONT_PT,
    "legend.frameon": False,
    "figure.facecolor": PALETTE["paper"],
    "savefig.facecolor": PALETTE["paper"],
    "hatch.linewidth": 0.6,
    "text.color": PALETTE["ink"],
    "axes.unicode_minus": True,
}


#: size of a figure's title, pt
TITLE_PT = 10.0


def figure_title(fig, left: float, height: float, text: str, *, top: float = 0.17) -> None:
    """The title every lagsight figure carries: bold, ``top`` inches below the top edge, at ``left`` (a figure
    fraction); ``height`` is the figure's height in inches."""
    fig.text(left, 1 - top / height, text, fontsize=TITLE_PT, fontweight="bold", va="center", color=PALETTE["ink"])


@contextmanager
def figure_rc():
    """Context in which lagsight figures are built and saved (a local ``rc_context``)."""
    with mpl.rc_context(FIGURE_RC):
        yield


# ---------------------------------------------------------------------------
# the stylesheet: every selector under .lgs-root, colours from variables
# ---------------------------------------------------------------------------
_LIGHT = """
  --lgs-fg: var(--jp-content-font-color1, #1e2630);
  --lgs-muted: var(--jp-content-font-color2, #5b6570);
  --lgs-bg: var(--jp-layout-color0, #ffffff);
  --lgs-card: var(--jp-layout-color1, #f6f7f8);
  --lgs-border: var(--jp-border-color2, #d5d9de);
  --lgs-blue: #2f6db5;
  --lgs-orange: #b5580b;
  --lgs-warn-bg: #fbeee0;
  --lgs-good-bg: #e6eef8;
"""
_DARK = """
  --lgs-fg: var(--jp-content-font-color1, #e4e7eb);
  --lgs-muted: var(--jp-content-font-color2, #a9b1ba);
  --lgs-bg: var(--jp-layout-color0, #16191d);
  --lgs-card: var(--jp-layout-color1, #20242a);
  --lgs-border: var(--jp-border-color2, #3a4048);
  --lgs-blue: #7fb0ea;
  --lgs-orange: #f0a766;
  --lgs-warn-bg: #3a2a1a;
  --lgs-good-bg: #1d2b3c;
"""

CSS = (
    ".lgs-root{" + _LIGHT + "}\n"
    "@media (prefers-color-scheme: dark){.lgs-root{" + _DARK + "}}\n"
    "body[data-jp-theme-light='false'] .lgs-root{" + _DARK + "}\n"
    """.lgs-root{color:var(--lgs-fg);
  font-family:var(--jp-ui-font-family,system-ui,-apple-system,'Segoe UI',sans-serif);font-size:13px;
  line-height:1.45;max-width:780px;padding:10px 12px;border:1px solid var(--lgs-border);
  border-radius:8px;background:var(--lgs-bg);box-sizing:border-box}
.lgs-root .lgs-text{display:none}
.lgs-root h3.lgs-title{font-size:15px;margin:0 0 2px 0;color:var(--lgs-fg)}
.lgs-root h4{font-size:13px;margin:14px 0 4px 0;color:var(--lgs-fg)}
.lgs-root .lgs-source{color:var(--lgs-muted);font-size:12px;margin:0 0 8px 0}
.lgs-root .lgs-headline{padding:8px 10px;border-radius:6px;border-left:4px solid var(--lgs-muted);
  background:var(--lgs-card);margin:6px 0;font-weight:600}
.lgs-root .lgs-evidence{border-left-color:var(--lgs-orange);background:var(--lgs-warn-bg)}
.lgs-root .lgs-no-evidence{border-left-color:var(--lgs-blue);background:var(--lgs-good-bg)}
.lgs-root .lgs-not-meaningful{border-left-color:var(--lgs-orange);background:var(--lgs-warn-bg)}
.lgs-root .lgs-warning{border:1px solid var(--lgs-orange);border-radius:6px;padding:6px 10px;margin:6px 0;
  background:var(--lgs-warn-bg)}
.lgs-root .lgs-warning strong{color:var(--lgs-orange)}
.lgs-root .lgs-keys{display:flex;flex-wrap:wrap;gap:6px;margin:8px 0;padding:0;list-style:none}
.lgs-root .lgs-keys li{background:var(--lgs-card);border:1px solid var(--lgs-border);border-radius:6px;
  padding:3px 8px;font-size:12px}
.lgs-root .lgs-keys b{font-weight:600;color:var(--lgs-muted);margin-right:4px}
.lgs-root figure{margin:8px 0}
.lgs-root figure svg,.lgs-root figure img{max-width:100%;height:auto;border-radius:6px;display:block}
.lgs-root figcaption{color:var(--lgs-muted);font-size:12px;margin-top:2px}
.lgs-root table.lgs-table{border-collapse:collapse;font-size:12px;margin:4px 0;width:auto}
.lgs-root table.lgs-table th,.lgs-root table.lgs-table td{border-bottom:1px solid var(--lgs-border);
  padding:3px 8px;text-align:left;vertical-align:top;color:var(--lgs-fg);background:transparent}
.lgs-root table.lgs-table th{font-weight:600;color:var(--lgs-muted)}
.lgs-root table.lgs-table td.lgs-num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
.lgs-root table.lgs-table tr.lgs-focus td{background:var(--lgs-card);font-weight:600}
.lgs-root .lgs-caption{color:var(--lgs-muted);font-size:12px;margin:2px 0}
.lgs-root .lgs-sentence{font-family:var(--jp-code-font-family,monospace);font-size:12px;background:var(--lgs-card);
  border:1px solid var(--lgs-border);border-radius:6px;padding:6px 8px}
.lgs-root ul.lgs-list{margin:2px 0 2px 18px;padding:0}
.lgs-root{container-type:inline-size}
@container (max-width: 700px){
  .lgs-root table.lgs-table thead{display:none}
  .lgs-root table.lgs-table,.lgs-root table.lgs-table tbody,.lgs-root table.lgs-table tr{display:block;width:100%}
  .lgs-root table.lgs-table tr{border-bottom:1px solid var(--lgs-border);padding:3px 0}
  .lgs-root table.lgs-table td,.lgs-root table.lgs-table td.lgs-num{display:inline-block;border:0;
    padding:1px 10px 1px 0;text-align:left}
  .lgs-root table.lgs-table td[data-label]::before{content:attr(data-label) " ";color:var(--lgs-muted);
    font-weight:600}
}
.lgs-root details{margin:6px 0}
.lgs-root details summary{cursor:pointer;color:var(--lgs-muted)}
"""
)
