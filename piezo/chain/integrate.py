"""Streamed integration of acceleration to velocity and displacement, drift bounded.

Each integration step is one IIR filter: the trapezoidal rule (the bilinear transform of
``1/s``) combined with a second-order Butterworth high-pass at ``highpass_hz``
(:data:`INTEGRATION_HIGHPASS_HZ` by default). The integrator's pole at DC cancels one of
the high-pass's two zeros there, so the combined filter keeps a zero at DC: a DC offset
or a slow drift of the input gives a bounded output instead of a ramp. Above a few times
the corner the step is ``1/(j 2π f)`` to within the trapezoidal rule's warping,
``(πf/fs) / tan(πf/fs)`` (−3.6·10⁻⁵ relative at 159 Hz and 48 kHz), and the high-pass's
``1/√(1 + (f_c/f)⁴)`` (below 10⁻⁴ dB from 10 Hz up with the default 1 Hz corner, so the
10 Hz to 1 kHz band of machine-vibration practice is untouched).

The filter state is carried between blocks (one code path for the recursion,
:func:`piezo._kernels.filters.sosfilt_inplace`), so a file read in blocks gives the same
values as read whole.
"""

from __future__ import annotations

import numpy as np

from piezo._kernels.filters import sosfilt_inplace
from piezo.errors import InputError

__all__ = ["INTEGRATED", "INTEGRATION_HIGHPASS_HZ", "Integrator", "integrated_quantity"]

#: Corner of the high-pass that each integration step includes, Hz.
INTEGRATION_HIGHPASS_HZ = 1.0

#: What one integration makes of a quantity.
INTEGRATED = {"acceleration": "velocity", "velocity": "displacement"}


def integrated_quantity(quantity: str, times: int) -> str:
    """The quantity after ``times`` integrations (0, 1 or 2).

    Examples
    --------
    >>> integrated_quantity("acceleration", 2)
    'displacement'
    >>> integrated_quantity("pressure", 1)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: integrate: only acceleration (to velocity, displacement) and \
velocity (to displacement) integrate; this channel measures pressure
    """
    if times not in (0, 1, 2):
        raise InputError(f"integrate must be 0, 1 or 2, got {times!r}")
    q = quantity
    for _ in range(times):
        if q not in INTEGRATED:
            raise InputError(
                "integrate: only acceleration (to velocity, displacement) and velocity (to "
                f"displacement) integrate; this channel measures {quantity}"
            )
        q = INTEGRATED[q]
    return q


class Integrator:
    """Integrate a stream ``times`` times (trapezoidal rule with a DC-blocking high-pass).

    Parameters
    ----------
    sample_rate_hz
        Sample rate of the stream.
    channels
        Channels of each block.
    times
        Number of integrations, 1 or 2.
    highpass_hz
        Corner of the second-order Butterworth high-pass of each step.

    Examples
    --------
    >>> fs = 48000.0
    >>> t = np.arange(48000) / fs
    >>> a = np.cos(2 * np.pi * 159.155 * t)[:, None]          # 1 m/s² peak
    >>> integ = Integrator(fs, 1, 1)
    >>> v = np.concatenate([integ.process(a[:20000]), integ.process(a[20000:])])
    >>> round(float(np.abs(v[24000:]).max()) * 1e3, 4)        # mm/s: 1/(2π·159.155)
    1.0
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        times: int,
        *,
        highpass_hz: float = INTEGRATION_HIGHPASS_HZ,
    ) -> None:
        if times not in (1, 2):
            raise InputError(f"integrate must be 1 or 2, got {times!r}")
        if not 0 < highpass_hz < sample_rate_hz / 2:
            raise InputError(
                f"the integration high-pass must lie below Nyquist, got {highpass_hz!r}"
            )
        from scipy import signal  # filter design only when integrating (start-up time)

        z, p, k = signal.butter(2, highpass_hz, "highpass", fs=sample_rate_hz, output="zpk")
        # Trapezoidal integrator T/2 (1 + z^-1)/(1 - z^-1): its pole at z = 1 cancels one of
        # the high-pass's two zeros there; a zero at z = -1 is added.
        zeros = np.concatenate(
            [np.asarray(z)[np.argsort(np.abs(np.asarray(z) - 1.0))][1:], [-1.0]]
        )
        step = signal.zpk2sos(zeros, p, k / (2.0 * sample_rate_hz))
        self.sos = np.ascontiguousarray(np.vstack([step] * times), dtype=float)
        self.highpass_hz = float(highpass_hz)
        self.times = times
        self._zi = np.zeros((self.sos.shape[0], 2, channels))

    def process(self, block: np.ndarray) -> np.ndarray:
        """Integrate one ``(frames, channels)`` block; the state carries to the next."""
        out = np.ascontiguousarray(block, dtype=float).copy()
        sosfilt_inplace(self.sos, out, self._zi)
        return out
