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
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

__all__ = [
    "COLORMAP",
    "FIGURE_DPI",
    "INK",
    "TRACES",
    "TraceStyle",
    "figure",
    "legend_below",
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


def figure(
    width_in: float = 6.6, height_in: float = 2.8, *, legend_rows: int = 0
) -> tuple[Figure, Axes]:
    """A new figure with one axes in the project style (call inside :func:`plot_style`).

    The default size fits an A4 page's text width. Margins are fixed in inches (room for
    the title, the axis labels and ``legend_rows`` rows of a legend below the axes, see
    :func:`legend_below`): faster than an automatic layout and the same on every figure.
    The figure is drawn by the Agg backend directly (no pyplot, no display, nothing
    global) and is freed when it goes out of scope.
    """
    fig = Figure(figsize=(width_in, height_in))
    FigureCanvasAgg(fig)
    bottom_in = 0.5 + 0.2 * legend_rows + (0.08 if legend_rows else 0.0)
    fig.subplots_adjust(
        left=0.75 / width_in,
        right=1.0 - 0.2 / width_in,
        top=1.0 - 0.32 / height_in,
        bottom=bottom_in / height_in,
    )
    return fig, fig.add_subplot()


def legend_below(fig: Figure, ncol: int) -> None:
    """The figure's legend in the room :func:`figure` left under the axes."""
    fig.legend(loc="lower center", ncol=ncol, bbox_to_anchor=(0.5, 0.0))


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
