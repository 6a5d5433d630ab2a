"""The project's plot style: one look for every figure piezo draws.

Designed to read in greyscale and on paper: traces differ by lightness *and* by line
style, never by hue alone; grids are light; every axis carries its quantity and unit in
one form, ``quantity / unit`` (the quotient form of ISO 80000-1:2009, 7.1: the axis shows
the number the quantity divided by its unit gives), made by :func:`axis_label`. The
palette is our own (ink, terracotta, sage, slate); the colour map of images is
``cividis``, whose lightness rises monotonically (it stays ordered in greyscale).

matplotlib is imported lazily, inside the functions that draw: importing this module (or
any figure module of :mod:`piezo.plots`) costs nothing, so commands that draw no figure
never load matplotlib. Figures are drawn by the Agg backend directly (no pyplot, no
display, nothing global) and rendered with fixed metadata (no dates, no random ids), so
the same data give the same bytes.

Examples
--------
>>> axis_label("frequency", "Hz")
'frequency / Hz'
>>> axis_label("number of captures")
'number of captures'
>>> trace(1)["linestyle"]
(0, (5, 2))
"""

from __future__ import annotations

import contextlib
import contextvars
import io
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = [
    "COLORMAP",
    "FIGURE_DPI",
    "FONT_FAMILY",
    "FONT_SIZES",
    "INK",
    "LIMIT_STYLES",
    "PALETTE",
    "RULE",
    "SHADE",
    "TRACES",
    "TraceStyle",
    "axis_label",
    "capture_figures",
    "figure",
    "legend_below",
    "limit_line",
    "panels",
    "plot_style",
    "png_bytes",
    "save_figure",
    "trace",
]

#: Text and axes colour (not pure black: softer on screen, still black on paper).
INK = "#1f2328"
#: Light rules and grid lines.
RULE = "#c9ccd1"
#: Shaded regions (a tolerance band, a range without content).
SHADE = "#e4e6ea"
#: Resolution of embedded and written PNGs (dots per inch); 6.6 in wide gives ~1000 px.
FIGURE_DPI = 150
#: Colour map of spectrograms and every other image.
COLORMAP = "cividis"
#: The one font family (shipped with matplotlib, so every machine draws the same).
FONT_FAMILY = "DejaVu Sans"
#: The font sizes in points: titles, axis labels, tick labels and legends, annotations.
FONT_SIZES = {"title": 10.0, "label": 9.0, "tick": 8.0, "legend": 8.0, "note": 8.0}


@dataclass(frozen=True)
class TraceStyle:
    """Colour, dash pattern, width and marker of one trace.

    Examples
    --------
    >>> TraceStyle("#1d3557", "-", 1.4, None).linewidth
    1.4
    >>> len({t.linestyle for t in TRACES}) == len(TRACES)  # no two share a dash pattern
    True
    """

    color: str
    linestyle: str | tuple[int, tuple[float, ...]]
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

#: Limit lines by severity: a fail limit is solid and dark red, a warn limit dashed ochre
#: (the same two colours as the pages' badges).
LIMIT_STYLES: dict[str, dict[str, Any]] = {
    "fail": {"color": "#8c1c13", "linestyle": "-", "linewidth": 1.4},
    "warn": {"color": "#8a5a00", "linestyle": (0, (4, 2)), "linewidth": 1.2},
}

#: Every colour a figure may use (traces, ink, rules, shades, limits, white).
PALETTE: frozenset[str] = frozenset(
    {t.color for t in TRACES}
    | {INK, RULE, SHADE, "#ffffff"}
    | {s["color"] for s in LIMIT_STYLES.values()}
)

_RC: dict[str, Any] = {
    "figure.dpi": FIGURE_DPI,
    "savefig.dpi": FIGURE_DPI,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
    "font.family": FONT_FAMILY,
    "font.size": FONT_SIZES["label"],
    "axes.titlesize": FONT_SIZES["title"],
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": FONT_SIZES["label"],
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.grid.which": "both",
    "axes.prop_cycle": None,  # set below from TRACES
    "grid.color": RULE,
    "grid.linewidth": 0.5,
    "grid.alpha": 1.0,
    "grid.minor.color": SHADE,  # decades stand out from the lines between them
    "grid.minor.linewidth": 0.4,
    "xtick.color": INK,
    "ytick.color": INK,
    "xtick.labelsize": FONT_SIZES["tick"],
    "ytick.labelsize": FONT_SIZES["tick"],
    "legend.fontsize": FONT_SIZES["legend"],
    "legend.title_fontsize": FONT_SIZES["legend"],
    "legend.frameon": False,
    "lines.solid_capstyle": "butt",
    "image.cmap": COLORMAP,
    "text.color": INK,
    "svg.hashsalt": "piezo",  # fixed element ids: the same figure gives the same SVG
    "svg.fonttype": "path",
}

#: Rendering metadata per format: nothing that changes from run to run.
_METADATA: dict[str, dict[str, None]] = {
    "png": {"Software": None},
    "svg": {"Date": None, "Creator": None},
    "pdf": {"CreationDate": None, "ModDate": None, "Creator": None, "Producer": None},
}

_captured: contextvars.ContextVar[list[Figure] | None] = contextvars.ContextVar(
    "piezo_captured_figures", default=None
)


def axis_label(quantity: str, unit: str | None = None) -> str:
    """The one axis-label form: ``"quantity / unit"``, or the quantity alone for a count.

    Examples
    --------
    >>> axis_label("PSD", "dB re (1 V)²/Hz")
    'PSD / dB re (1 V)²/Hz'
    """
    return f"{quantity} / {unit}" if unit else quantity


def _rc() -> dict[str, Any]:
    import matplotlib
    from cycler import cycler

    # Settings this matplotlib does not know (grid.minor.* came with 3.10) are left out.
    rc = {k: v for k, v in _RC.items() if k in matplotlib.rcParams}
    rc["axes.prop_cycle"] = cycler(
        color=[t.color for t in TRACES], linestyle=[t.linestyle for t in TRACES]
    )
    return rc


@contextlib.contextmanager
def plot_style() -> Iterator[None]:
    """Apply the project style to the figures made and rendered inside the block.

    Examples
    --------
    >>> import matplotlib
    >>> with plot_style():
    ...     matplotlib.rcParams["font.family"], matplotlib.rcParams["axes.grid"]
    (['DejaVu Sans'], True)
    """
    import matplotlib

    rc: Any = _rc()  # matplotlib types the keys as literals; ours are checked at run time
    with matplotlib.rc_context(rc):
        yield


def _new_figure(width_in: float, height_in: float, **kw: Any) -> Figure:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width_in, height_in), **kw)
    FigureCanvasAgg(fig)
    return fig


def figure(
    width_in: float = 6.6, height_in: float = 2.8, *, legend_rows: int = 0
) -> tuple[Figure, Axes]:
    """A new figure with one axes in the project style (call inside :func:`plot_style`).

    The default size fits an A4 page's text width. Margins are fixed in inches (room for
    the title, the axis labels and ``legend_rows`` rows of a legend below the axes, see
    :func:`legend_below`): faster than an automatic layout and the same on every figure.

    Examples
    --------
    >>> with plot_style():
    ...     fig, ax = figure(6.6, 3.0)
    >>> [round(float(v), 2) for v in fig.get_size_inches()]
    [6.6, 3.0]
    """
    fig = _new_figure(width_in, height_in)
    bottom_in = 0.5 + 0.2 * legend_rows + (0.08 if legend_rows else 0.0)
    fig.subplots_adjust(
        left=0.75 / width_in,
        right=1.0 - 0.2 / width_in,
        top=1.0 - 0.32 / height_in,
        bottom=bottom_in / height_in,
    )
    return fig, fig.add_subplot()


def panels(
    rows: int, width_in: float = 8.0, panel_height_in: float = 2.8, *, sharex: bool = False
) -> tuple[Figure, list[Axes]]:
    """A figure of ``rows`` stacked axes (call inside :func:`plot_style`).

    Laid out by matplotlib's constrained layout, which is deterministic.

    Examples
    --------
    >>> with plot_style():
    ...     fig, axes = panels(3, sharex=True)
    >>> len(axes)
    3
    """
    fig = _new_figure(width_in, panel_height_in * rows, layout="constrained")
    axes = fig.subplots(rows, 1, sharex=sharex, squeeze=False)
    return fig, [row[0] for row in axes]


def legend_below(fig: Figure, ncol: int) -> None:
    """The figure's legend in the room :func:`figure` left under the axes.

    Examples
    --------
    >>> with plot_style():
    ...     fig, ax = figure(legend_rows=1)
    ...     for i in range(2):
    ...         _ = ax.plot([0, 1], [i, i], label=f"channel {i}", **trace(i))
    ...     legend_below(fig, ncol=2)
    >>> [t.get_text() for t in fig.legends[0].get_texts()]
    ['channel 0', 'channel 1']
    """
    fig.legend(loc="lower center", ncol=ncol, bbox_to_anchor=(0.5, 0.0))


def limit_line(severity: str) -> dict[str, Any]:
    """Keyword arguments for ``Axes.axvline``/``plot`` of a limit of ``severity``.

    Examples
    --------
    >>> limit_line("warn")["color"] != limit_line("fail")["color"]
    True
    """
    return dict(LIMIT_STYLES[severity])


def trace(index: int) -> dict[str, Any]:
    """Keyword arguments for ``Axes.plot`` of the ``index``-th trace.

    Examples
    --------
    >>> trace(0)
    {'color': '#1d3557', 'linestyle': '-', 'linewidth': 1.4}
    >>> trace(len(TRACES)) == trace(0)  # the styles repeat after the last one
    True
    """
    style = TRACES[index % len(TRACES)]
    kw: dict[str, Any] = {
        "color": style.color,
        "linestyle": style.linestyle,
        "linewidth": style.linewidth,
    }
    if style.marker:
        kw["marker"] = style.marker
    return kw


@contextlib.contextmanager
def capture_figures() -> Iterator[list[Figure]]:
    """Collect every Figure rendered (by :func:`png_bytes` or :func:`save_figure`) inside
    the block: for notebooks that want the objects, and for tests of the style.

    Examples
    --------
    >>> with capture_figures() as figs:
    ...     with plot_style():
    ...         fig, ax = figure()
    ...     _ = png_bytes(fig)
    >>> len(figs)
    1
    """
    figs: list[Figure] = []
    token = _captured.set(figs)
    try:
        yield figs
    finally:
        _captured.reset(token)


def _render(fig: Figure, target: Any, fmt: str) -> None:
    figs = _captured.get()
    if figs is not None:
        figs.append(fig)
    with plot_style():
        fig.savefig(target, format=fmt, dpi=FIGURE_DPI, metadata=_METADATA.get(fmt))


def png_bytes(fig: Figure) -> bytes:
    """Render ``fig`` to PNG bytes (Agg backend, no metadata that changes between runs).

    Examples
    --------
    >>> with plot_style():
    ...     fig, ax = figure()
    >>> png_bytes(fig)[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
    True
    """
    buffer = io.BytesIO()
    _render(fig, buffer, "png")
    return buffer.getvalue()


def save_figure(fig: Figure, path: str | Path) -> None:
    """Write ``fig`` to ``path`` atomically, with fixed metadata (no dates): SVG or PDF
    when the suffix says so, PNG otherwise (also for an unknown or missing suffix).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> with plot_style():
    ...     fig, ax = figure()
    >>> save_figure(fig, folder / "a.plot")
    >>> (folder / "a.plot").read_bytes()[1:4] == b"PNG"
    True
    """
    from piezo.io.atomic import atomic_output

    suffix = Path(path).suffix.lstrip(".").lower()
    fmt = suffix if suffix in _METADATA else "png"
    with atomic_output(path) as tmp:
        _render(fig, tmp, fmt)
