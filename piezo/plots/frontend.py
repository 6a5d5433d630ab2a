"""The ``piezo frontend --plot`` figure: modelled level, phase and input-referred noise
of a front-end design.

Drawn in the project style (:mod:`piezo.plots.style`); matplotlib loads only when a
figure is drawn. The curves are the model's own (:mod:`piezo.frontend`).
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from piezo.frontend.model import Frontend, frequency_response, phase_deg, summarise_response
from piezo.frontend.noise import noise_budget
from piezo.plots.style import INK, SHADE, axis_label, panels, plot_style, save_figure, trace

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = ["frontend_design_figure", "write_plot"]

#: Reference of the input-referred noise levels: 20 µPa (acoustic reference pressure,
#: ISO 1683:2015 Table 1).
_P_REF_PA = 20e-6


def frontend_design_figure(fe: Frontend, *, title: str) -> Figure:
    """Level re midband (with a ±1 dB band), phase, and the input-referred noise budget
    (each source and the total) of ``fe``, from a twentieth of its corner to 40 kHz (or
    three times the sensor's resonance).

    Examples
    --------
    >>> from piezo.frontend.model import load_frontend
    >>> fe = load_frontend("recordings/designs/film-buffer-voltage.toml")
    >>> fig = frontend_design_figure(fe, title="film buffer")
    >>> [ax.get_ylabel() for ax in fig.axes]
    ['level re midband / dB', 'phase / °', 'input noise / dB re 20 µPa/√Hz']
    >>> fig.axes[2].get_legend().get_texts()[-1].get_text()
    'total'
    """
    summary = summarise_response(fe)
    top = max(40e3, 3 * (fe.sensor.resonance_hz or 0.0))
    f = np.geomspace(max(summary.corner_hz / 20, 1e-4), top, 1500)
    h = frequency_response(fe, f)
    level = 20 * np.log10(np.abs(h) / summary.sensitivity_v_per_pa)
    budget = noise_budget(fe, f)
    with plot_style():
        fig, axes = panels(3, 8.0, 3.0, sharex=True)
        axes[0].semilogx(f, level, **trace(0))
        axes[0].set_ylabel(axis_label("level re midband", "dB"))
        axes[0].axhspan(-1, 1, color=SHADE, zorder=0)
        axes[0].set_ylim(max(-40.0, float(level.min()) - 3), min(40.0, float(level.max()) + 3))
        axes[0].set_title(title)
        axes[1].semilogx(f, phase_deg(fe, f), **trace(0))
        axes[1].set_ylabel(axis_label("phase", "°"))
        for i, (label, row) in enumerate(
            zip(budget.labels, budget.input_psd_pa2_per_hz, strict=True)
        ):
            axes[2].semilogx(f, 10 * np.log10(row / _P_REF_PA**2), **trace(i + 1), label=label)
        axes[2].semilogx(
            f,
            10 * np.log10(budget.total_input_psd_pa2_per_hz / _P_REF_PA**2),
            color=INK,
            linewidth=1.6,
            label="total",
        )
        axes[2].set_ylabel(axis_label("input noise", "dB re 20 µPa/√Hz"))
        axes[2].set_xlabel(axis_label("frequency", "Hz"))
        axes[2].legend(loc="best")
    return fig


def write_plot(fe: Frontend, path: Path, *, title: str) -> None:
    """Write :func:`frontend_design_figure` to ``path`` atomically (PNG, SVG or PDF by
    the suffix).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from piezo.frontend.model import load_frontend
    >>> fe = load_frontend("recordings/designs/film-buffer-voltage.toml")
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     path = pathlib.Path(tmp) / "design.png"
    ...     write_plot(fe, path, title="film buffer")
    ...     path.read_bytes()[:4]
    b'\\x89PNG'
    """
    save_figure(frontend_design_figure(fe, title=title), path)
