"""The project's plot style: one look for every figure of a report.

Designed to read in greyscale and on paper: traces differ by lightness *and* by line
style, never by hue alone; grids are light; every axis carries its quantity and unit.
The palette is our own (ink, terracotta, sage, slate); the colour map of images is
``cividis``, whose lightness rises monotonically (it stays ordered in greyscale).
"""

from __future__ import annotations

import contextlib
import io
from collections.abc import Iterator
from dataclasses import dataclass

import matplotlib
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

__all__ = [
    "COLORMAP",
    "FIGURE_DPI",
    "INK",
    "TRACES",
    "TraceStyle",
    "figure",
    "plot_style",
    "png_bytes",
    "trace",
]

#: Text and axes colour (not pure black: softer on screen, still black on paper).
INK = "#1f2328"
#: Light rules and grid lines.
RULE = "#c9ccd1"
#: Resolution of the embedded PNGs (dots per inch); 6.6 in wide figures give ~1000 px.
FIGURE_DPI = 150
#: Colour map of spectrograms.
COLORMAP = "cividis"


@dataclass(frozen=True)
class TraceStyle:
    """Colour, dash pattern, width and marker of one trace."""

    color: str
    linestyle: str | tuple
    linewidth: float
    marker: str | None


#: Trace styles in order of use. Lightness steps of about 20 % between neighbours and a
#: different dash pattern each, so they stay apart in greyscale.
TRACES: tuple[TraceStyle, ...] = (
    TraceStyle("#1d3557", "-", 1.4, None),  # ink blue, solid
    TraceStyle("#b5543a", (0, (5, 2)), 1.4, None),  # terracotta, dashed
    TraceStyle("#6f8f72", (0, (1, 1.5)), 1.8, None),  # sage, dotted
    TraceStyle("#5d6670", (0, (6, 2, 1, 2)), 1.3, None),  # slate, dash-dot
)

_RC = {
    "figure.dpi": FIGURE_DPI,
    "savefig.dpi": FIGURE_DPI,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
    "axes.titlesize": 10.0,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 9.0,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.grid.which": "both",
    "grid.color": RULE,
    "grid.linewidth": 0.5,
    "grid.alpha": 1.0,
    "xtick.color": INK,
    "ytick.color": INK,
    "xtick.labelsize": 8.0,
    "ytick.labelsize": 8.0,
    "legend.fontsize": 8.0,
    "legend.frameon": False,
    "lines.solid_capstyle": "butt",
    "image.cmap": COLORMAP,
}


@contextlib.contextmanager
def plot_style() -> Iterator[None]:
    """Apply the project style for the figures made inside the block."""
    with matplotlib.rc_context(_RC):
        yield


def figure(width_in: float = 6.6, height_in: float = 2.8) -> Figure:
    """A new figure in the project style (call inside :func:`plot_style`).

    The default size fits an A4 page's text width. The figure is drawn by the Agg
    backend directly (no pyplot, no display, nothing global), and is freed when it goes
    out of scope.
    """
    fig = Figure(figsize=(width_in, height_in), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def png_bytes(fig: Figure) -> bytes:
    """Render ``fig`` to PNG bytes with the Agg backend."""
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=FIGURE_DPI, metadata={"Software": None})
    return buffer.getvalue()


def trace(index: int) -> dict:
    """Keyword arguments for ``Axes.plot`` of the ``index``-th trace."""
    style = TRACES[index % len(TRACES)]
    kw: dict = {"color": style.color, "linestyle": style.linestyle, "linewidth": style.linewidth}
    if style.marker:
        kw["marker"] = style.marker
    return kw
