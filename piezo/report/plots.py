"""Figures of a report, drawn from the same result objects as its JSON document.

Nothing is computed here but the drawing: every number plotted is a field of a result
object (or the same value the JSON document carries). Each function returns PNG bytes.
"""

from __future__ import annotations

import math

import numpy as np

from piezo.diagnostics import ChannelDiagnostics
from piezo.levels import LevelResult
from piezo.report.run import FrontendResponse
from piezo.report.style import INK, figure, legend_below, plot_style, png_bytes, trace

__all__ = ["frontend_figure", "level_history_figure", "rolloff_figure"]


def _hp_db(f: np.ndarray, corner_hz: float, order: int) -> np.ndarray:
    """10 lg |H|² of the high-pass shape the roll-off check fits (same formula)."""
    q = (f / corner_hz) ** (2 * order)
    return 10 * np.log10(q / (1.0 + q))


def rolloff_figure(ch: ChannelDiagnostics, level_unit: str) -> bytes | None:
    """Band levels seen by the roll-off check, with the fitted high-pass shape.

    Returns None when the check saw no bands (nothing to show).
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
            fit = r.fit_level_db + tilt * (np.log10(f) - 3.0) + _hp_db(f, r.fit_corner_hz, order)
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
                color="#e4e6ea",
                zorder=0,
                label="no usable content" if r.lowest_content_hz > f[0] else None,
            )
        ax.set_xlabel("frequency / Hz")
        ax.set_ylabel(f"PSD / {_density_unit(level_unit)}")
        ax.set_title(f"Channel {ch.channel}: low-frequency roll-off ({r.status})")
        finite = level[np.isfinite(level)]
        if finite.size:
            top = float(finite.max())
            ax.set_ylim(max(float(finite.min()), top - 90.0) - 3.0, top + 6.0)
        ax.set_xlim(f[0] / 1.2, f[-1] * 1.2)
        legend_below(fig, 2)
        return png_bytes(fig)


def _density_unit(level_unit: str) -> str:
    """'dB re 20 µPa' -> 'dB re (20 µPa)²/Hz'."""
    prefix = "dB re "
    if level_unit.startswith(prefix):
        return f"{prefix}({level_unit[len(prefix) :]})²/Hz"
    return f"{level_unit} per Hz"


def level_history_figure(levels: LevelResult, channels: list[int], level_unit: str) -> bytes:
    """LAeq per interval (steps) and the LAF trace, per channel, against time."""
    h = levels.history
    assert h is not None
    rows = math.ceil(2 * len(channels) / 4)
    end = h.interval_start_s[-1] + h.interval_duration_s[-1]
    edges = np.append(h.interval_start_s, end)
    with plot_style():
        fig, ax = figure(6.6, 3.0 + 0.2 * rows, legend_rows=rows)
        for i, ch in enumerate(channels):
            style = trace(i)
            ax.plot(
                h.trace_time_s,
                h.LAF[:, i],
                **{**style, "linewidth": 0.7},
                alpha=0.55,
                label=f"channel {ch}: LAF",
            )
            ax.stairs(
                h.LAeq[:, i],
                edges,
                **{**style, "linewidth": 1.8},
                label=f"channel {ch}: LAeq per {h.interval_s:g} s",
            )
        ax.set_xlabel("time / s")
        ax.set_ylabel(f"level / {level_unit}")
        ax.set_title("Level history")
        ax.set_xlim(0.0, float(end))
        finite = np.concatenate([h.LAF[np.isfinite(h.LAF)], h.LAeq[np.isfinite(h.LAeq)]])
        if finite.size:
            top = float(finite.max())
            ax.set_ylim(max(float(finite.min()), top - 60.0) - 2.0, top + 3.0)
        legend_below(fig, min(4, 2 * len(channels)))
        return png_bytes(fig)


def frontend_figure(fr: FrontendResponse) -> bytes:
    """Magnitude (re midband) and phase of a front-end design against frequency."""
    sm = fr.summary
    with plot_style():
        fig, ax = figure(6.6, 4.2)
        f = fr.frequency_hz
        ax.semilogx(f, fr.level_db, **trace(0), label="magnitude")
        ax.axhspan(-1.0, 1.0, color="#e4e6ea", zorder=0)
        ax.axvline(sm.corner_hz, **{**trace(3), "linewidth": 0.9})
        ax.annotate(
            f" corner {sm.corner_hz:.3g} Hz",
            (sm.corner_hz, -3.0),
            fontsize=8,
            color=INK,
            va="top",
        )
        finite = fr.level_db[np.isfinite(fr.level_db)]
        ax.set_ylim(max(-40.0, float(finite.min()) - 3.0), min(30.0, float(finite.max()) + 3.0))
        ax.set_xlabel("frequency / Hz")
        ax.set_ylabel("level re midband / dB")
        ax.set_title(f"Front-end response: {fr.name or fr.design}")
        ax.set_xlim(float(f[0]), float(f[-1]))
        twin = ax.twinx()
        twin.semilogx(f, fr.phase_deg, **trace(1), label="phase")
        twin.set_ylabel("phase / degree")
        twin.grid(False)
        twin.spines["right"].set_visible(True)
        lines = ax.get_lines()[:1] + twin.get_lines()[:1]
        ax.legend(lines, [ln.get_label() for ln in lines], loc="lower right")
        fig.subplots_adjust(right=1.0 - 0.75 / 6.6)
        return png_bytes(fig)
