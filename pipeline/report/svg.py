"""Matplotlib figures as inline SVG fragments that are safe to paste into one HTML page.

Matplotlib's SVG file is made for standing alone: it starts with an XML prolog and a DOCTYPE, carries
RDF metadata and namespace declarations (all of them URLs), and names its clip paths and glyphs with
ids that would collide between two charts on one page. :func:`figure_svg` keeps the drawing and
drops the rest: the HTML parser puts an ``<svg>`` element in the SVG namespace by itself, and every
id gets a per-chart prefix. Text is drawn as glyph outlines (``svg.fonttype = "path"``), so the page
needs no font at all and looks the same on every machine.
"""

from __future__ import annotations

import html
import io
import re
from collections.abc import Iterator
from contextlib import contextmanager

import matplotlib
from cycler import cycler
from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.figure import Figure

__all__ = ["OKABE_ITO", "RC", "chart_style", "figure_svg", "new_figure"]

#: Okabe & Ito's palette for colour-blind readers (black first, then the seven hues)
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky": "#56B4E9", "green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "purple": "#CC79A7",
}
INK = "#22262b"
MUTED = "#5d636b"
RULE = "#d8d4cc"

RC: dict[str, object] = {
    "svg.fonttype": "path",
    "svg.hashsalt": "afterward-report",  # stable ids: the same data draws the same file
    "svg.image_inline": True,
    "font.family": "DejaVu Sans",       # ships with matplotlib; nothing is looked up or fetched
    "font.size": 8.5,
    "axes.titlesize": 9.5,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.titlecolor": INK,
    "axes.labelsize": 8.5,
    "axes.labelcolor": INK,
    "axes.edgecolor": MUTED,
    "axes.linewidth": 0.7,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.axisbelow": True,
    "axes.prop_cycle": cycler(color=[OKABE_ITO[k] for k in ("blue", "vermillion", "green", "orange", "purple",
                                                            "sky", "black", "yellow")]),
    "grid.color": RULE,
    "grid.linewidth": 0.5,
    "xtick.color": MUTED,
    "ytick.color": MUTED,
    "xtick.labelcolor": INK,
    "ytick.labelcolor": INK,
    "xtick.labelsize": 7.5,
    "ytick.labelsize": 7.5,
    "legend.frameon": False,
    "legend.fontsize": 7.5,
    "lines.linewidth": 1.1,
    "path.simplify": True,
    "path.simplify_threshold": 0.3,
    "figure.facecolor": "#ffffff",
    "axes.facecolor": "#ffffff",
    "savefig.facecolor": "#ffffff",
    "figure.titlesize": 10.5,
    "figure.titleweight": "bold",
}


@contextmanager
def chart_style() -> Iterator[None]:
    """The report's chart style, applied only inside the block (global settings are left alone)."""
    with matplotlib.rc_context(RC):
        yield


def new_figure(width_in: float, height_in: float) -> Figure:
    """A figure on the SVG canvas (no pyplot, no GUI, no global figure registry)."""
    fig = Figure(figsize=(width_in, height_in), layout="constrained")
    FigureCanvasSVG(fig)
    return fig


_PROLOG = re.compile(r"\A.*?(?=<svg\b)", re.S)
_METADATA = re.compile(r"\s*<metadata>.*?</metadata>", re.S)
# the same rule for every chart is in the page's stylesheet; inside an inline SVG it would apply page-wide
_DEFAULT_STYLE = re.compile(r'\s*<style type="text/css">\*\{stroke-linejoin: round; stroke-linecap: butt\}</style>')
_XMLNS = re.compile(r'\s+xmlns(?::\w+)?="[^"]*"')
_SIZE = re.compile(r'\s+(width|height)="[\d.]+pt"')
_GROUP_ID = re.compile(r'<g id="[^"]*"')
_ID = re.compile(r'\bid="([^"]+)"')
_HREF = re.compile(r'(xlink:href|href)="#([^"]+)"')
_URL = re.compile(r"url\(#([^)]+)\)")


def figure_svg(fig: Figure, prefix: str, label: str) -> str:
    """``fig`` as an ``<svg>`` element for inline use: ids prefixed with ``prefix``, width 100 %.

    ``label`` becomes the element's accessible name (``role="img"``, ``aria-label``).
    """
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
    text = buf.getvalue()
    text = _PROLOG.sub("", text, count=1)
    text = _METADATA.sub("", text, count=1)
    text = _DEFAULT_STYLE.sub("", text, count=1)
    head_end = text.index(">")
    head, body = text[:head_end], text[head_end:]
    head = _XMLNS.sub("", head)
    head = _SIZE.sub("", head)
    safe_label = html.escape(label, quote=True)
    head += f' width="100%" role="img" aria-label="{safe_label}" class="chart-svg"'
    body = _GROUP_ID.sub("<g", body)  # group ids are never referenced; dropping them saves bytes
    body = _ID.sub(lambda m: f'id="{prefix}-{m.group(1)}"', body)
    body = _HREF.sub(lambda m: f'{m.group(1)}="#{prefix}-{m.group(2)}"', body)
    body = _URL.sub(lambda m: f"url(#{prefix}-{m.group(1)})", body)
    return (head + body).strip()
