"""Figures to inline SVG text and to PNG data URIs, small and deterministic.

The SVG is post-processed for inlining in HTML: no XML prolog, no DOCTYPE, no
metadata block, no namespace URLs (the HTML parser puts ``<svg>`` in the SVG
namespace itself), ``href`` instead of ``xlink:href``, coordinates rounded to
1/100 pt, ids that nothing refers to removed and the rest prefixed so several
figures on one page never clash.  ``gid`` values starting with ``lgs-`` become
CSS classes.
"""

from __future__ import annotations

import base64
import hashlib
import io
import itertools
import re

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from .style import figure_rc

__all__ = ["figure_to_svg", "figure_to_png", "figure_to_png_data_uri", "SVG_DPI", "PNG_DPI"]

#: resolution of rasterised parts (dense scatters) inside an SVG
SVG_DPI = 120
#: default resolution of PNG output
PNG_DPI = 110

_NO_META = {"Date": None, "Creator": None, "Format": None, "Type": None}
_COUNTER = itertools.count(1)

_PROLOG = re.compile(r"\A.*?(?=<svg\b)", re.S)
_METADATA = re.compile(r"<metadata>.*?</metadata>\s*", re.S)
# matplotlib's global '*{stroke-linejoin..}' rule would leak to the whole page when inlined
_GLOBAL_STYLE = re.compile(r'\s*<style type="text/css">\*\{[^}]*\}</style>')
_NS = re.compile(r'\s+xmlns(?::xlink)?="[^"]*"')
_NUM_ATTR = re.compile(r'(\s(?:d|x|y|width|height|transform|viewBox)=")([^"]*)(")')
_LONG_NUM = re.compile(r"(-?\d+\.\d\d)\d+")
_NO_ROTATE = re.compile(r' transform="rotate\(-?0 [-\d. ]*\)"')
_BETWEEN_TAGS = re.compile(r">\s+<")
_ID = re.compile(r'\sid="([^"]+)"')
_REF = re.compile(r'(url\(#|href="#)([^")]+)')


def _check_figure(fig) -> Figure:
    if not isinstance(fig, Figure):
        raise TypeError(f"'fig' must be a matplotlib.figure.Figure (got {type(fig).__name__})")
    if fig.canvas is None or not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    return fig


def _round_numbers(match: re.Match) -> str:
    inner = _LONG_NUM.sub(r"\1", match.group(2)).replace(" \n", " ").replace("\n", " ")
    return match.group(1) + inner + match.group(3)


def _rename_ids(svg: str, prefix: str) -> str:
    ids = set(_ID.findall(svg))
    used = {m.group(2) for m in _REF.finditer(svg)} & ids

    def fix_id(m: re.Match) -> str:
        name = m.group(1)
        if name in used:
            return f' id="{prefix}{name}"'
        if name.startswith("lgs-"):
            return f' class="{name}"'
        return ""

    svg = _ID.sub(fix_id, svg)
    return _REF.sub(lambda m: m.group(1) + (prefix + m.group(2) if m.group(2) in used else m.group(2)), svg)


def figure_to_svg(
    fig: Figure, *, id_prefix: str | None = None, title: str | None = None, standalone: bool = False
) -> str:
    """The figure as SVG text for inlining in HTML.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    id_prefix : str, optional
        Prefix for the ids the SVG refers to (clip paths, markers, hatches).
        Default: a hash of the content plus a per-process counter, so two
        copies of one figure on a page do not share ids.
    title : str, optional
        Accessible name (``aria-label``); escaped here.
    standalone : bool
        Keep the namespace declarations, for writing a ``.svg`` file.
    """
    fig = _check_figure(fig)
    buf = io.StringIO()
    with figure_rc():
        fig.savefig(buf, format="svg", metadata=_NO_META, dpi=SVG_DPI)
    svg = _PROLOG.sub("", buf.getvalue(), count=1)
    svg = _METADATA.sub("", svg)
    svg = _GLOBAL_STYLE.sub("", svg).replace("<defs>\n </defs>\n", "")
    svg = svg.replace("<svg ", '<svg stroke-linejoin="round" stroke-linecap="butt" ', 1)
    svg = _NUM_ATTR.sub(_round_numbers, svg)
    svg = _NO_ROTATE.sub("", svg)
    svg = _BETWEEN_TAGS.sub(">\n<", svg)
    if id_prefix is None:
        digest = hashlib.sha1(svg.encode()).hexdigest()[:6]
        id_prefix = f"lgs{digest}n{next(_COUNTER)}-"
    elif not re.fullmatch(r"[A-Za-z][\w-]*", id_prefix):
        raise ValueError(
            f"'id_prefix' must start with a letter and hold only letters, digits, '_' or '-' (got {id_prefix!r})"
        )
    svg = _rename_ids(svg, id_prefix)
    if not standalone:
        svg = _NS.sub("", svg).replace("xlink:href=", "href=")
    if title is not None:
        from html import escape

        svg = svg.replace("<svg ", f'<svg role="img" aria-label="{escape(str(title), quote=True)}" ', 1)
    return svg.strip() + "\n"


def _quantize(png: bytes, colors: int) -> bytes:
    """A palette PNG with at most ``colors`` colours (Pillow, which matplotlib itself requires)."""
    try:
        from PIL import Image
    except ImportError:  # pragma: no cover - matplotlib depends on Pillow
        return png
    with Image.open(io.BytesIO(png)) as im:
        small = im.convert("RGB").quantize(colors)
        out = io.BytesIO()
        small.save(out, format="png", optimize=True)
    data = out.getvalue()
    return data if len(data) < len(png) else png


def figure_to_png(fig: Figure, *, dpi: float = PNG_DPI, colors: int | None = None) -> bytes:
    """The figure as PNG bytes (no metadata, so the bytes are reproducible).

    ``colors`` (2 to 256) reduces the image to a palette of that many colours,
    which makes figures with hatching three to four times smaller.
    """
    fig = _check_figure(fig)
    if colors is not None and not (isinstance(colors, int) and 2 <= colors <= 256):
        raise ValueError(f"'colors' must be an integer from 2 to 256 or None (got {colors!r})")
    buf = io.BytesIO()
    with figure_rc():
        fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None})
    png = buf.getvalue()
    return png if colors is None else _quantize(png, colors)


def figure_to_png_data_uri(fig: Figure, *, dpi: float = PNG_DPI, colors: int | None = 128) -> str:
    """The figure as a ``data:image/png;base64,...`` URI for an ``<img>`` element (palette PNG by default)."""
    return "data:image/png;base64," + base64.b64encode(figure_to_png(fig, dpi=dpi, colors=colors)).decode("ascii")
