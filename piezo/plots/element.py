"""Figures of an element: |Z| and phase of a sweep with the fitted circuit of each mode.

Drawn in the one project style (:mod:`piezo.plots.style`); nothing is computed here but
the fitted circuits' impedance on the plotted frequencies.
"""

from __future__ import annotations

import numpy as np

from piezo.element.bvd import ImpedanceAnalysis
from piezo.plots import style
from piezo.plots.style import axis_label, panels, plot_style, png_bytes, trace

__all__ = ["impedance_figure"]


def impedance_figure(analysis: ImpedanceAnalysis, title: str) -> bytes:
    """PNG: |Z| (log) and phase against frequency, measured and fitted per mode.

    Examples
    --------
    >>> import numpy as np
    >>> from piezo.element.bvd import BvdCircuit, analyse_impedance
    >>> from piezo.element.impedance import ImpedanceSweep
    >>> c = BvdCircuit(2.2e-9, 35.0, 0.12, 0.25e-9)
    >>> f = np.linspace(27e3, 33e3, 601)
    >>> png = impedance_figure(analyse_impedance(ImpedanceSweep(f, c.impedance(f))), "demo")
    >>> png[:4]
    b'\\x89PNG'
    """
    sweep = analysis.sweep
    f = sweep.frequency_hz
    with plot_style():
        fig, (ax_m, ax_p) = panels(2, 6.6, 2.3, sharex=True)
        ax_m.loglog(f, sweep.magnitude_ohm, label="measured", **trace(0))
        ax_p.semilogx(f, sweep.phase_deg, **trace(0))
        for i, mode in enumerate(analysis.modes):
            lo, hi = mode.band_hz
            g = np.geomspace(lo, hi, 800)
            z = mode.circuit.impedance(g)
            label = "fitted circuit" if i == 0 else None
            ax_m.loglog(g, np.abs(z), label=label, **trace(1))
            ax_p.semilogx(g, np.degrees(np.angle(z)), **trace(1))
            ax_m.axvline(mode.fs_hz, color=style.RULE, linewidth=0.8)
            ax_m.axvline(mode.fp_hz, color=style.RULE, linewidth=0.8, linestyle=":")
        ax_m.set_ylabel(axis_label("|Z|", "Ω"))
        ax_p.set_ylabel(axis_label("phase", "°"))
        ax_p.set_xlabel(axis_label("frequency", "Hz"))
        ax_p.set_ylim(-95, 95)
        ax_m.set_title(f"{title}: impedance, fitted Butterworth–Van Dyke circuit")
        ax_m.legend(loc="best")
        return png_bytes(fig)
