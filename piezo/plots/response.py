"""The ``piezo response``/``sweep analyze --plot`` figure: magnitude, phase and
distortion or coherence of a measured response.

Drawn in the project style (:mod:`piezo.plots.style`); matplotlib loads only when a
figure is drawn.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from piezo.plots.style import INK, TRACES, axis_label, panels, plot_style, save_figure, trace
from piezo.response.measure import smooth_fractional_octave

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from piezo.response.fit import ResponseTable

__all__ = ["response_figure", "write_plot"]


def response_figure(
    table: ResponseTable,
    *,
    title: str,
    smooth: int,
    golden: ResponseTable | None = None,
    lower: str = "distortion",
) -> Figure:
    """Magnitude (raw and, when ``smooth``, 1/smooth-octave smoothed), phase, and in the
    lowest panel the harmonic distortion or (``lower="coherence"``) the coherence.

    Examples
    --------
    >>> from piezo.response.fit import ResponseTable
    >>> f = np.geomspace(20.0, 20e3, 200)
    >>> mag = -40.0 - 10 * np.log10(1 + (40.0 / f) ** 2)  # a first-order 40 Hz high-pass
    >>> extra = {"coherence": np.full(f.size, 0.99)}
    >>> table = ResponseTable(f, mag, np.degrees(np.arctan(40.0 / f)), "dB re 1 V/Pa", extra)
    >>> fig = response_figure(table, title="unit A", smooth=6, lower="coherence")
    >>> [ax.get_ylabel() for ax in fig.axes]
    ['magnitude / dB re 1 V/Pa', 'phase / °', 'coherence γ² / 1']
    """
    f = table.frequency_hz
    unit = table.magnitude_unit or "dB (relative)"
    with plot_style():
        fig, (ax_m, ax_p, ax_l) = panels(3, 8.0, 3.0, sharex=True)
        ax_m.semilogx(
            f, table.magnitude_db, color=TRACES[3].color, linewidth=0.7, label="measured"
        )
        if smooth:
            ax_m.semilogx(
                f,
                smooth_fractional_octave(f, table.magnitude_db, fraction=smooth),
                **trace(0),
                label=f"1/{smooth}-octave smoothed (display only)",
            )
        if golden is not None:
            ax_m.semilogx(
                golden.frequency_hz, golden.magnitude_db, **trace(1), label="golden response"
            )
        ax_m.set_ylabel(axis_label("magnitude", unit))
        ax_m.legend(loc="best")
        ax_m.set_title(title)
        if table.phase_deg is not None:
            ax_p.semilogx(f, table.phase_deg, **trace(0))
        ax_p.set_ylabel(axis_label("phase", "°"))
        ax_p.set_ylim(-185, 185)
        if lower == "coherence" and "coherence" in table.extra:
            ax_l.semilogx(f, table.extra["coherence"], **trace(0))
            ax_l.set_ylabel(axis_label("coherence γ²", "1"))
            ax_l.set_ylim(0, 1.05)
        else:
            drew = 0
            for name in sorted(k for k in table.extra if k.endswith("_percent")):
                values = table.extra[name]
                if np.any(np.isfinite(values) & (values > 0)):
                    label = name.removesuffix("_percent").upper()
                    if label == "THD":  # the sum of the harmonics: the strongest line
                        ax_l.loglog(f, values, color=INK, linewidth=1.8, label=label)
                        continue
                    ax_l.loglog(f, values, **trace(drew), label=label)
                    drew += 1
            if ax_l.get_lines():
                ax_l.legend(loc="best")
            ax_l.set_ylabel(axis_label("distortion", "% of fundamental"))
        ax_l.set_xlabel(axis_label("frequency", "Hz"))
    return fig


def write_plot(
    path: Path,
    table: ResponseTable,
    *,
    title: str,
    smooth: int,
    golden: ResponseTable | None = None,
    lower: str = "distortion",
) -> None:
    """Write :func:`response_figure` to ``path`` atomically (format from the suffix).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from piezo.response.fit import ResponseTable
    >>> f = np.geomspace(20.0, 20e3, 50)
    >>> table = ResponseTable(f, np.full(f.size, -40.0), None, "dB re 1 V/Pa", {})
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     path = pathlib.Path(tmp) / "response.png"
    ...     write_plot(path, table, title="flat", smooth=0)
    ...     path.read_bytes()[:4]
    b'\x89PNG'
    """
    save_figure(
        response_figure(table, title=title, smooth=smooth, golden=golden, lower=lower), path
    )
