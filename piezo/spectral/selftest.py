"""Self-test of the fractional-octave filter bank at a recording's sample rate.

:mod:`piezo.spectral.bands` documents that every band meets the class 1 acceptance limits of
IEC 61260-1:2014; a report re-checks it at the sample rate of the file it describes,
with the bank's own steady-state response model
(:meth:`piezo.spectral.bands.FilterBank.response_db`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from piezo.spectral.bands import OCTAVE_RATIO, FilterBank, fractional_octave_bands

__all__ = ["BandConformance", "band_conformance", "class1_limits_db"]

G = OCTAVE_RATIO  # 10^(3/10), IEC 61260-1:2014

# IEC 61260-1:2014, table 1: class 1 acceptance limits on the relative attenuation (dB)
# of an octave filter at Omega = f/f_m (above f_m; mirrored below with 1/Omega). The band
# edge G^(1/2) has a pass-side row (max 5.3) and a stop-side row (min 1.2).
# (IEC 61260-1:2014, acceptance limits for class 1 filters.)
_OCTAVE_ROWS = (
    (1.0, -0.4, 0.4),
    (G ** (1 / 8), -0.4, 0.5),
    (G ** (1 / 4), -0.4, 0.7),
    (G ** (3 / 8), -0.4, 1.4),
    (G ** (1 / 2), -0.4, 5.3),
    (G ** (1 / 2), 1.2, math.inf),
    (G, 16.6, math.inf),
    (G**2, 40.5, math.inf),
    (G**3, 60.0, math.inf),
    (G**4, 70.0, math.inf),
)


def _breakpoints(fraction: int) -> np.ndarray:
    """Omega_b = 1 + (G^(1/2b) - 1)/(G^(1/2) - 1)·(Omega_octave - 1), IEC 61260-1:2014."""
    k = (G ** (1 / (2 * fraction)) - 1) / (G**0.5 - 1)
    return np.array([1 + k * (row[0] - 1) for row in _OCTAVE_ROWS])


def class1_limits_db(omega: np.ndarray, fraction: int) -> tuple[np.ndarray, np.ndarray]:
    """Class 1 (minimum, maximum) relative attenuation at ``omega = f/f_m`` (dB).

    Linear interpolation in lg Omega between the breakpoints; on the pass side of the
    band edge the pass-side row applies, beyond it the stop-side row. Beyond G^4
    (octave) the minimum stays 70 dB.

    Examples
    --------
    At the mid-band frequency the attenuation must lie within ±0.4 dB; one octave away
    from an octave band (either side) it must be at least 16.6 dB (IEC 61260-1:2014,
    table 1):

    >>> lo, hi = class1_limits_db(np.array([1.0, G, 1 / G]), 1)
    >>> lo.round(1).tolist(), hi.tolist()
    ([-0.4, 16.6, 16.6], [0.4, inf, inf])
    """
    om = np.asarray(omega, dtype=float)
    om = np.where(om < 1.0, 1.0 / om, om)
    bp = _breakpoints(fraction)
    lo_rows = np.array([r[1] for r in _OCTAVE_ROWS])
    hi_rows = np.array([r[2] for r in _OCTAVE_ROWS])
    lo = np.full(om.shape, lo_rows[-1])
    hi = np.full(om.shape, math.inf)
    x = np.log10(om)
    # Pass side: rows 0..4, from Omega = 1 up to and including the edge.
    pass_side = om <= bp[4]
    lo[pass_side] = -0.4
    hi[pass_side] = np.interp(x[pass_side], np.log10(bp[:5]), hi_rows[:5])
    # Stop side: rows 5..9, beyond the edge.
    stop = (om > bp[4]) & (om <= bp[-1])
    lo[stop] = np.interp(x[stop], np.log10(bp[5:]), lo_rows[5:])
    return lo, hi


@dataclass(frozen=True)
class BandConformance:
    """Worst margin of a filter bank against the class 1 limits (dB; > 0 passes).

    Examples
    --------
    >>> c = band_conformance(1, 48000.0, low_hz=1000.0, high_hz=1000.0)
    >>> c.bands, c.worst_band, c.passed, bool(0.0 < c.worst_margin_db <= 0.4)
    (1, '1k', True, True)
    """

    fraction: int
    sample_rate_hz: float
    bands: int
    worst_margin_db: float
    worst_band: str
    worst_omega: float
    passed: bool


def band_conformance(
    fraction: int, sample_rate_hz: float, *, low_hz: float = 20.0, high_hz: float = 20000.0
) -> BandConformance:
    """Check every band of the bank the report uses against IEC 61260-1:2014 class 1.

    The relative attenuation (gain at the exact mid-band frequency less the gain at f) of
    each band's whole multirate chain is evaluated at the breakpoints (both sides) and
    on a grid of 401 points from f_m/40 to 40 f_m (below Nyquist), and compared with
    :func:`class1_limits_db`.

    Examples
    --------
    The octave bank from 31.5 Hz to 16 kHz at 48 kHz meets class 1:

    >>> c = band_conformance(1, 48000.0)
    >>> c.bands, c.passed
    (10, True)
    """
    bands = fractional_octave_bands(
        fraction, low_hz=low_hz, high_hz=high_hz, sample_rate_hz=sample_rate_hz
    )
    bank = FilterBank(sample_rate_hz, bands)
    bp = _breakpoints(fraction)
    omega = np.unique(np.concatenate([np.geomspace(1 / 40, 40, 401), bp, 1 / bp]))
    worst = (math.inf, "", 1.0)
    for j, band in enumerate(bands):
        om = omega[band.exact_hz * omega < sample_rate_hz / 2]
        gain = bank.response_db(np.concatenate([[band.exact_hz], band.exact_hz * om]))[:, j]
        attenuation = gain[0] - gain[1:]
        lo, hi = class1_limits_db(om, fraction)
        margin = np.minimum(attenuation - lo, hi - attenuation)
        i = int(np.argmin(margin))
        if margin[i] < worst[0]:
            worst = (float(margin[i]), band.label, float(om[i]))
    return BandConformance(
        fraction=fraction,
        sample_rate_hz=float(sample_rate_hz),
        bands=len(bands),
        worst_margin_db=worst[0],
        worst_band=worst[1],
        worst_omega=worst[2],
        passed=worst[0] > 0,
    )
