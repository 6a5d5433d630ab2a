"""Figures of a report, drawn from the same result objects as its JSON document.

Nothing is computed here but the drawing: every number plotted is a field of a result
object (or the same value the JSON document carries). Each function returns PNG bytes.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from piezo.chain.measurement import Chain
from piezo.diagnostics.checker import ChannelDiagnostics
from piezo.levels.summary import Levels
from piezo.plots.style import (
    COLORMAP,
    FONT_SIZES,
    INK,
    SHADE,
    TRACES,
    axis_label,
    figure,
    legend_below,
    panels,
    plot_style,
    png_bytes,
    trace,
)
from piezo.report.run import FrontendResponse
from piezo.response.model import highpass_db
from piezo.spectral.bands import BandResult
from piezo.spectral.summary import psd_level_unit
from piezo.spectral.welch import PSDResult, SpectrogramResult

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = [
    "bands_figure",
    "frontend_figure",
    "level_history_figure",
    "psd_figure",
    "rolloff_figure",
    "spectrogram_figure",
]


def rolloff_figure(ch: ChannelDiagnostics, level_unit: str) -> bytes | None:
    """Band levels seen by the roll-off check, with the fitted high-pass shape.

    Returns None when the check saw no bands (nothing to show).

    Examples
    --------
    >>> import piezo
    >>> from piezo.diagnostics.summary import check_of
    >>> from piezo.plots.style import capture_figures
    >>> checked = check_of(piezo.open("recordings/pd27-golden/PD27-23001.flac"))
    >>> with capture_figures() as figs:
    ...     png = rolloff_figure(checked.diagnostics.channels[0], "dB re 1 V")
    >>> png[:4], figs[0].axes[0].get_xlabel()
    (b'\x89PNG', 'frequency / Hz')
    """
    r = ch.rolloff
    if not r.band_hz:
        return None
    f = np.asarray(r.band_hz)
    level = np.asarray(r.band_level_db)
    with plot_style():
        fig, ax = figure(6.6, 3.0, legend_rows=1)
        ax.semilogx(
            f,
            level,
            linestyle="none",
            marker="o",
            markersize=3.0,
            color=INK,
            label="sixth-octave band levels",
        )
        if r.fit_corner_hz is not None and r.fit_level_db is not None:
            order = r.fit_order or 1
            tilt = r.tilt_db_per_decade or 0.0
            fit = (
                r.fit_level_db
                + tilt * (np.log10(f) - 3.0)
                + highpass_db(f, corner_hz=r.fit_corner_hz, order=order)
            )
            kind = "first" if order == 1 else "second"
            label = f"fitted {kind}-order high-pass, corner {r.fit_corner_hz:.3g} Hz"
            if r.status != "estimated":
                label += " (not accepted)"
            ax.semilogx(f, fit, label=label, **trace(1))
            ax.axvline(r.fit_corner_hz, **{**trace(3), "linewidth": 0.9})
        if r.expected_corner_hz is not None:
            ax.axvline(
                r.expected_corner_hz,
                label=f"expected {r.expected_corner_hz:.3g} Hz",
                **{**trace(2), "linewidth": 1.2},
            )
        if r.lowest_content_hz is not None:
            ax.axvspan(
                f[0] / 1.2,
                r.lowest_content_hz,
                color=SHADE,
                zorder=0,
                label="no usable content" if r.lowest_content_hz > f[0] else None,
            )
        ax.set_xlabel(axis_label("frequency", "Hz"))
        ax.set_ylabel(axis_label("PSD", psd_level_unit(level_unit, "density")))
        ax.set_title(f"Channel {ch.channel}: low-frequency roll-off ({r.status})")
        finite = level[np.isfinite(level)]
        if finite.size:
            top = float(finite.max())
            ax.set_ylim(max(float(finite.min()), top - 90.0) - 3.0, top + 6.0)
        ax.set_xlim(f[0] / 1.2, f[-1] * 1.2)
        legend_below(fig, 2)
        return png_bytes(fig)


def _unit_groups(units: Sequence[str]) -> list[tuple[str, list[int]]]:
    """Positions of the channels by unit, units in order of first appearance."""
    groups: dict[str, list[int]] = {}
    for i, unit in enumerate(units):
        groups.setdefault(unit, []).append(i)
    return list(groups.items())


def _axes_per_unit(
    groups: list[tuple[str, list[int]]], height_in: float, legend_rows: int
) -> tuple[Figure, list[Axes]]:
    """One axes for channels of one unit (legend below), else one panel per unit: an
    axis is never shared by channels of different units."""
    if len(groups) == 1:
        fig, ax = figure(6.6, height_in + 0.2 * legend_rows, legend_rows=legend_rows)
        return fig, [ax]
    return panels(len(groups), 6.6, height_in)


def _legend(fig: Figure, ax: Axes, panels_drawn: int, entries: int) -> None:
    if panels_drawn == 1:
        legend_below(fig, min(4, entries))
    else:
        ax.legend(loc="best", ncol=min(2, entries))


def _channels_text(channels: Sequence[int]) -> str:
    return ("channel " if len(channels) == 1 else "channels ") + ", ".join(map(str, channels))


def level_history_figure(levels: Levels, *, start_time_s: float = 0.0) -> bytes:
    """LAeq per interval (steps) and the LAF trace, per channel, against the recording's
    time, which starts at ``start_time_s`` (the time of the first sample, e.g. a scope's
    pre-trigger).

    Channels of different level units (a microphone's dB re 20 µPa, an accelerometer's
    dB re 1 µm/s²) get a panel each; a channel without A weighting (not sound pressure,
    :func:`piezo.levels.summary.levels_of`) shows its LZeq per interval.

    Examples
    --------
    >>> import tempfile
    >>> import soundfile as sf
    >>> import piezo
    >>> from piezo.levels.summary import levels_of
    >>> from piezo.plots.style import capture_figures
    >>> path = f"{tempfile.mkdtemp()}/tone.wav"
    >>> sf.write(path, np.sin(2 * np.pi * 1000 * np.arange(8000) / 8000), 8000, subtype="FLOAT")
    >>> levels = levels_of(piezo.open(path), interval_s=0.25)
    >>> with capture_figures() as figs:
    ...     _ = level_history_figure(levels)
    >>> ax = figs[0].axes[0]
    >>> ax.get_title(loc="left"), ax.get_xlabel(), ax.get_ylabel()
    ('Level history', 'time / s', 'level / dB re 1 V')
    """
    h = levels.result.history
    assert h is not None
    n = len(levels.channel_indices)
    weighted = levels.weighted or (True,) * n
    level_units = levels.level_units or (str(levels.level_unit),) * n
    groups = _unit_groups(level_units)
    rows = math.ceil(2 * n / 4) if len(groups) == 1 else 0
    end = start_time_s + h.interval_start_s[-1] + h.interval_duration_s[-1]
    edges = np.append(start_time_s + h.interval_start_s, end)
    with plot_style():
        fig, axes = _axes_per_unit(groups, 3.0, rows)
        for ax, (level_unit, members) in zip(axes, groups, strict=True):
            shown = []
            for i in members:
                ch = levels.channel_indices[i]
                style = trace(i)
                if weighted[i]:
                    ax.plot(
                        start_time_s + h.trace_time_s,
                        h.LAF[:, i],
                        **{**style, "linewidth": 0.7},
                        alpha=0.55,
                        label=f"channel {ch}: LAF",
                    )
                    shown.append(h.LAF[:, i])
                name = "LAeq" if weighted[i] else "LZeq"
                steps = (h.LAeq if weighted[i] else h.LZeq)[:, i]
                ax.stairs(
                    steps,
                    edges,
                    **{**style, "linewidth": 1.8},
                    label=f"channel {ch}: {name} per {h.interval_s:g} s",
                )
                shown.append(steps)
            ax.set_xlabel(axis_label("time", "s"))
            ax.set_ylabel(axis_label("level", level_unit))
            ax.set_title(
                "Level history"
                if len(groups) == 1
                else "Level history: "
                + _channels_text([levels.channel_indices[i] for i in members])
            )
            ax.set_xlim(float(start_time_s), float(end))
            values = np.concatenate(shown)
            finite = values[np.isfinite(values)]
            if finite.size:
                top = float(finite.max())
                ax.set_ylim(max(float(finite.min()), top - 60.0) - 2.0, top + 3.0)
            _legend(fig, ax, len(groups), len(shown))
        return png_bytes(fig)


def frontend_figure(fr: FrontendResponse) -> bytes:
    """Magnitude (re midband) and phase of a front-end design against frequency.

    Examples
    --------
    >>> from piezo.plots.style import capture_figures
    >>> from piezo.report.run import frontend_response
    >>> fr = frontend_response("recordings/designs/film-buffer-voltage.toml", top_hz=20e3)
    >>> with capture_figures() as figs:
    ...     _ = frontend_figure(fr)
    >>> [ax.get_ylabel() for ax in figs[0].axes]  # magnitude, and phase on a twin axis
    ['level re midband / dB', 'phase / °']
    """
    sm = fr.summary
    with plot_style():
        fig, ax = figure(6.6, 4.2)
        f = fr.frequency_hz
        ax.semilogx(f, fr.level_db, **trace(0), label="magnitude")
        ax.axhspan(-1.0, 1.0, color=SHADE, zorder=0)
        ax.axvline(sm.corner_hz, **{**trace(3), "linewidth": 0.9})
        ax.annotate(
            f" corner {sm.corner_hz:.3g} Hz",
            (sm.corner_hz, -3.0),
            fontsize=FONT_SIZES["note"],
            color=INK,
            va="top",
        )
        finite = fr.level_db[np.isfinite(fr.level_db)]
        ax.set_ylim(max(-40.0, float(finite.min()) - 3.0), min(30.0, float(finite.max()) + 3.0))
        ax.set_xlabel(axis_label("frequency", "Hz"))
        ax.set_ylabel(axis_label("level re midband", "dB"))
        ax.set_title(f"Front-end response: {fr.name or fr.design}")
        ax.set_xlim(float(f[0]), float(f[-1]))
        twin = ax.twinx()
        twin.semilogx(f, fr.phase_deg, **trace(1), label="phase")
        twin.set_ylabel(axis_label("phase", "°"))
        twin.grid(False)
        twin.spines["right"].set_visible(True)
        lines = ax.get_lines()[:1] + twin.get_lines()[:1]
        ax.legend(lines, [str(ln.get_label()) for ln in lines], loc="lower right")
        fig.subplots_adjust(right=1.0 - 0.75 / 6.6)
        return png_bytes(fig)


def _references(chains: Sequence[Chain]) -> np.ndarray:
    return np.array([c.reference for c in chains], dtype=float)


def psd_figure(psd: PSDResult, channels: list[int], chains: Sequence[Chain]) -> bytes:
    """Welch PSD per channel, each in dB re its own reference squared per hertz, on a
    logarithmic frequency axis; one panel per level unit when the channels' differ.

    Examples
    --------
    >>> from piezo.plots.style import capture_figures
    >>> from piezo.spectral.welch import WelchPSD
    >>> psd = WelchPSD(8000, 2, segment_frames=1024)
    >>> psd.update(np.random.default_rng(1).standard_normal((8000, 2)))
    >>> with capture_figures() as figs:
    ...     png = psd_figure(psd.result(), [0, 1], [Chain(), Chain()])
    >>> png[:4], [ax.get_ylabel() for ax in figs[0].axes]
    (b'\x89PNG', ['PSD / dB re (1 V)²/Hz'])

    A microphone (Pa) and an accelerometer (m/s²) get a panel each:

    >>> mic = Chain(sensitivity_v_per_unit=0.05)
    >>> acc = Chain(sensitivity_v_per_unit=1e-3, quantity="acceleration")
    >>> with capture_figures() as figs:
    ...     _ = psd_figure(psd.result(), [0, 1], [mic, acc])
    >>> [ax.get_ylabel() for ax in figs[0].axes]
    ['PSD / dB re (20 µPa)²/Hz', 'PSD / dB re (1 µm/s²)²/Hz']
    """
    f = psd.frequency_hz[1:]
    with np.errstate(divide="ignore"):
        level = 10.0 * np.log10(psd.psd[1:] / _references(chains) ** 2)
    groups = _unit_groups([psd_level_unit(c.level_unit, psd.scaling) for c in chains])
    rows = math.ceil(len(channels) / 4) if len(groups) == 1 else 0
    with plot_style():
        fig, axes = _axes_per_unit(groups, 3.0, rows)
        for ax, (level_unit, members) in zip(axes, groups, strict=True):
            for i in members:
                ax.semilogx(
                    f,
                    level[:, i],
                    **{**trace(i), "linewidth": 1.0},
                    label=f"channel {channels[i]}",
                )
            ax.set_xlabel(axis_label("frequency", "Hz"))
            ax.set_ylabel(axis_label("PSD", level_unit))
            ax.set_title(
                f"Power spectral density ({psd.resolution_hz:.3g} Hz bins, "
                f"{psd.averages} averages)"
            )
            ax.set_xlim(float(f[0]), float(f[-1]))
            finite = level[:, members][np.isfinite(level[:, members])]
            if finite.size:
                top = float(finite.max())
                ax.set_ylim(max(float(finite.min()), top - 100.0) - 3.0, top + 5.0)
            _legend(fig, ax, len(groups), len(members))
        return png_bytes(fig)


_HATCHES = ("", "////", "....", "xxxx")


def bands_figure(bands: BandResult, channels: list[int], chains: Sequence[Chain]) -> bytes:
    """Band levels per channel as grouped bars (hatched per channel, for greyscale), each
    channel in dB re its own reference; one panel per level unit when the channels'
    differ.

    Examples
    --------
    >>> from piezo.plots.style import capture_figures
    >>> from piezo.spectral.bands import BandAnalyzer
    >>> bank = BandAnalyzer(8000, 2, fraction=1, low_hz=250.0, high_hz=2000.0)
    >>> bank.update(np.random.default_rng(1).standard_normal((8000, 2)))
    >>> with capture_figures() as figs:
    ...     _ = bands_figure(bank.result(), [0, 1], [Chain(), Chain()])
    >>> ax = figs[0].axes[0]
    >>> len(ax.patches), ax.get_ylabel()  # 4 octaves (250 Hz to 2 kHz), 2 channels
    (8, 'band level / dB re 1 V')
    >>> acc = Chain(sensitivity_v_per_unit=1e-3, quantity="acceleration")
    >>> with capture_figures() as figs:
    ...     _ = bands_figure(bank.result(), [0, 1], [Chain(), acc])
    >>> [(len(ax.patches), ax.get_ylabel()) for ax in figs[0].axes]
    [(4, 'band level / dB re 1 V'), (4, 'band level / dB re 1 µm/s²')]
    """
    level = bands.level_db(_references(chains))
    labels = [b.label for b in bands.bands]
    n = len(labels)
    x = np.arange(n)
    groups = _unit_groups([c.level_unit for c in chains])
    rows = math.ceil(len(channels) / 4) if len(groups) == 1 else 0
    with plot_style():
        fig, axes = _axes_per_unit(groups, 3.2, rows)
        for ax, (level_unit, members) in zip(axes, groups, strict=True):
            k = len(members)
            width = 0.8 / k
            shown = level[:, members]
            finite = shown[np.isfinite(shown)]
            floor = (float(finite.min()) - 5.0) if finite.size else 0.0
            floor = max(floor, float(finite.max()) - 80.0) if finite.size else 0.0
            for j, i in enumerate(members):
                style = TRACES[i % len(TRACES)]
                heights = np.where(np.isfinite(level[:, i]), level[:, i] - floor, 0.0)
                ax.bar(
                    x + (j - (k - 1) / 2) * width,
                    heights,
                    width,
                    bottom=floor,
                    color=style.color,
                    edgecolor="white" if i == 0 else style.color,
                    hatch=_HATCHES[i % len(_HATCHES)],
                    fill=i == 0,
                    linewidth=0.6,
                    label=f"channel {channels[i]}",
                )
            step = max(1, math.ceil(n / 16))
            ax.set_xticks(x[::step], labels[::step], rotation=0)
            ax.set_xlim(-0.6, n - 0.4)
            ax.grid(axis="x", visible=False)
            ax.set_xlabel(
                axis_label(f"1/{bands.fraction}-octave band, nominal mid-band frequency", "Hz")
            )
            ax.set_ylabel(axis_label("band level", level_unit))
            ax.set_title("Band levels (Leq per band)")
            if finite.size:
                ax.set_ylim(floor, float(finite.max()) + 5.0)
            _legend(fig, ax, len(groups), k)
        return png_bytes(fig)


def _edges(centres: np.ndarray, *, log: bool) -> np.ndarray:
    """Cell edges halfway between centres (geometrically when ``log``), ends extended."""
    if centres.size == 1:
        c = float(centres[0])
        return np.array([c * 0.9, c * 1.1]) if log else np.array([c - 0.5, c + 0.5])
    v = np.log(centres) if log else centres
    mid = (v[1:] + v[:-1]) / 2
    e = np.concatenate([[2 * v[0] - mid[0]], mid, [2 * v[-1] - mid[-1]]])
    return np.exp(e) if log else e


def spectrogram_figure(
    sg: SpectrogramResult,
    index: int,
    channel: int,
    chain: Chain,
    *,
    start_time_s: float = 0.0,
) -> bytes:
    """Spectrogram of one channel: time against frequency (logarithmic), level in dB; the
    time axis is the recording's, starting at ``start_time_s`` (the first sample's);
    levels in dB re the reference of the channel's ``chain`` squared per hertz.

    Examples
    --------
    >>> from piezo.plots.style import capture_figures
    >>> from piezo.spectral.welch import Spectrogram
    >>> sg = Spectrogram(8000, 1, segment_frames=256)
    >>> sg.update(np.sin(2 * np.pi * 1000 * np.arange(8000) / 8000)[:, None])
    >>> with capture_figures() as figs:
    ...     _ = spectrogram_figure(sg.result(), 0, 0, Chain())
    >>> ax, bar = figs[0].axes  # the image and its colour bar
    >>> ax.get_title(loc="left"), ax.get_yscale(), bar.get_ylabel()
    ('Channel 0: spectrogram', 'log', 'PSD / dB re (1 V)²/Hz')
    """
    level = sg.level_db(chain.reference)[:, 1:, index]  # drop DC for the log axis
    f = sg.frequency_hz[1:]
    t = start_time_s + sg.time_s

    finite = level[np.isfinite(level)]
    top = float(finite.max()) if finite.size else 0.0
    with plot_style():
        fig, ax = figure(6.6, 3.4)
        mesh = ax.pcolormesh(
            _edges(t, log=False),
            _edges(f, log=True),
            np.where(np.isfinite(level), level, top - 200.0).T,
            cmap=COLORMAP,
            vmin=top - 80.0,
            vmax=top,
            shading="flat",
            rasterized=True,
        )
        ax.set_yscale("log")
        ax.set_ylim(max(float(f[0]), 10.0), float(f[-1]))
        ax.grid(False, which="both")  # after the scale change, which makes new ticks
        ax.set_xlabel(axis_label("time", "s"))
        ax.set_ylabel(axis_label("frequency", "Hz"))
        ax.set_title(f"Channel {channel}: spectrogram")
        bar = fig.colorbar(mesh, ax=ax, pad=0.015, fraction=0.05)
        bar.set_label(axis_label("PSD", psd_level_unit(chain.level_unit, "density")))
        bar.outline.set_visible(False)
        fig.subplots_adjust(right=0.9)
        return png_bytes(fig)
