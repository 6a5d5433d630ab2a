"""The ``piezo spectrum --plot`` figure: PSD of every channel and a spectrogram.

Drawn in the project style (:mod:`piezo.plots.style`); matplotlib loads only when a
figure is drawn.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from piezo.plots.style import (
    COLORMAP,
    axis_label,
    panels,
    plot_style,
    save_figure,
    trace,
)

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from piezo.spectral.welch import PSDResult, Spectrogram

__all__ = ["spectrum_figure", "write_plot"]


def spectrum_figure(
    result: PSDResult,
    spectro: Spectrogram,
    channels: tuple[int, ...],
    name: str,
    level_unit: str,
    reference: float,
    *,
    start_time_s: float = 0.0,
) -> Figure:
    """PSD level of every channel over log frequency, and the first channel's spectrogram
    (time-decimated by averaging); ``level_unit`` is the PSD's level unit text. The time
    axis is the recording's: it starts at ``start_time_s``, the time of the first sample
    (:attr:`piezo.io.reader.Recording.start_time_s`, e.g. a scope's pre-trigger).

    Examples
    --------
    >>> from piezo.spectral.welch import Spectrogram, WelchPSD
    >>> x = np.random.default_rng(1).standard_normal((8000, 2))
    >>> psd, sg = WelchPSD(8000, 2, segment_frames=1024), Spectrogram(8000, 2, segment_frames=256)
    >>> psd.update(x); sg.update(x)
    >>> fig = spectrum_figure(psd.result(), sg, (0, 1), "x.wav", "dB re (1 V)²/Hz", 1.0)
    >>> ax_psd = fig.axes[0]  # then the spectrogram and its colour bar
    >>> len(fig.axes), [t.get_text() for t in ax_psd.get_legend().get_texts()]
    (3, ['channel 0', 'channel 1'])
    """
    f = result.frequency_hz[1:]
    s = spectro.result()
    fs_ = s.frequency_hz[1:]
    levels = s.level_db(reference)[:, 1:, 0]
    finite = levels[np.isfinite(levels)]
    top = float(finite.max()) if finite.size else 0.0
    # Cell edges: time between column centres, frequency half a bin either side.
    t = s.time_s + start_time_s
    dt = float(np.median(np.diff(t))) if t.size > 1 else 2 * s.time_s[0]
    t_edges = np.concatenate([t - dt / 2, [t[-1] + dt / 2]])
    df = fs_[0]
    f_edges = np.concatenate([fs_ - df / 2, [fs_[-1] + df / 2]])
    with plot_style():
        fig, (ax_p, ax_s) = panels(2, 9.0, 4.0)
        with np.errstate(divide="ignore"):
            for i, ch in enumerate(channels):
                ax_p.semilogx(
                    f,
                    10 * np.log10(result.psd[1:, i] / reference**2),
                    **{**trace(i), "linewidth": 0.9},
                    label=f"channel {ch}",
                )
        ax_p.set_xlabel(axis_label("frequency", "Hz"))
        ax_p.set_ylabel(axis_label("PSD", level_unit))
        ax_p.set_title(
            f"{name}: {result.window} window, {result.resolution_hz:.3g} Hz bins, "
            f"{result.averages} averages ({result.average})"
        )
        ax_p.legend(loc="best")
        img = ax_s.pcolormesh(
            t_edges,
            f_edges,
            np.where(np.isfinite(levels), levels, top - 200.0).T,
            vmin=top - 90,
            vmax=top,
            cmap=COLORMAP,
            shading="flat",
            rasterized=True,
        )
        ax_s.set_yscale("log")
        ax_s.grid(False, which="both")  # after the scale change, which makes new ticks
        ax_s.set_xlabel(axis_label("time", "s"))
        ax_s.set_ylabel(axis_label("frequency", "Hz"))
        most = int(s.segments_per_column.max())
        ax_s.set_title(
            f"channel {channels[0]}: {df:.3g} Hz bins, "
            f"each column averages up to {most} segment(s)"
        )
        bar = fig.colorbar(img, ax=ax_s)
        bar.set_label(axis_label("PSD", level_unit))
        bar.outline.set_visible(False)
    return fig


def write_plot(
    path: Path,
    result: PSDResult,
    spectro: Spectrogram,
    channels: tuple[int, ...],
    name: str,
    level_unit: str,
    reference: float,
    *,
    start_time_s: float = 0.0,
) -> None:
    """Write :func:`spectrum_figure` to ``path`` atomically (format from the suffix).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from piezo.spectral.welch import Spectrogram, WelchPSD
    >>> x = np.random.default_rng(1).standard_normal((8000, 1))
    >>> psd, sg = WelchPSD(8000, 1, segment_frames=1024), Spectrogram(8000, 1, segment_frames=256)
    >>> psd.update(x); sg.update(x)
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     path = pathlib.Path(tmp) / "psd.png"
    ...     write_plot(path, psd.result(), sg, (0,), "x.wav", "dB re (1 V)²/Hz", 1.0)
    ...     path.read_bytes()[:4]
    b'\\x89PNG'
    """
    fig = spectrum_figure(
        result, spectro, channels, name, level_unit, reference, start_time_s=start_time_s
    )
    save_figure(fig, path)
