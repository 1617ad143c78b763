"""Views of a diagnosis: matplotlib figures, self-contained HTML and plain text.

Figures are :class:`matplotlib.figure.Figure` objects built without pyplot, in
a local ``rc_context``; HTML puts every style under ``.lgs-root`` and escapes
every string where it is written.
"""

from .figures import (
    bounds_figure,
    correlogram_figure,
    figure_to_png,
    figure_to_png_data_uri,
    figure_to_svg,
    groups_figure,
    lag_scatter_figure,
    power_figure,
    residuals_figure,
    scale_figure,
)
from .html import View, build_view, diagnosis_html, render_html, save_html
from .style import PALETTE
from .text import TEST_GUIDE, diagnosis_text, format_pvalue, key_figures, report_sentence

__all__ = [
    "PALETTE",
    "TEST_GUIDE",
    "View",
    "bounds_figure",
    "build_view",
    "correlogram_figure",
    "diagnosis_html",
    "diagnosis_text",
    "figure_to_png",
    "figure_to_png_data_uri",
    "figure_to_svg",
    "format_pvalue",
    "groups_figure",
    "key_figures",
    "lag_scatter_figure",
    "power_figure",
    "render_html",
    "report_sentence",
    "residuals_figure",
    "save_html",
    "scale_figure",
]
