"""Streaming peak, mean and RMS per channel, and the RMS in a frequency band."""

from __future__ import annotations

import math

import numpy as np

from piezo import validate
from piezo._kernels.cache import cached_arrays, code_digest
from piezo._kernels.filters import sosfilt_inplace
from piezo.errors import InputError

__all__ = ["VELOCITY_BAND_HZ", "BandRms", "SignalStats"]

#: The band of machine-vibration velocity measurements, Hz: 10 Hz to 1 kHz, the range of
#: the broadband vibration severity of ISO 20816-1 (and ISO 2954 instruments).
VELOCITY_BAND_HZ = (10.0, 1000.0)


class SignalStats:
    """Running peak (absolute), mean and RMS of each channel.

    Sums are accumulated in float64 per block; for a 4-hour 48 kHz file the relative
    rounding error of the mean square stays near 1e-12, far below any level resolution.

    Parameters
    ----------
    channels
        Number of channels in each block.

    Examples
    --------
    >>> stats = SignalStats(2)
    >>> stats.update(np.array([[1.0, -2.0], [3.0, 2.0]]))
    >>> stats.peak.tolist(), stats.mean.tolist(), stats.frames
    ([3.0, 2.0], [2.0, 0.0], 2)
    >>> [round(float(r), 4) for r in stats.rms]  # sqrt(5) and 2
    [2.2361, 2.0]
    """

    def __init__(self, channels: int) -> None:
        self.channels = channels
        self.frames = 0
        self._peak = np.zeros(channels)
        self._sum = np.zeros(channels)
        self._sum2 = np.zeros(channels)

    def update(self, block: np.ndarray) -> None:
        """Add a ``(frames, channels)`` block."""
        if block.shape[0] == 0:
            return
        np.maximum(self._peak, np.abs(block).max(axis=0), out=self._peak)
        self._sum += block.sum(axis=0)
        self._sum2 += np.einsum("ij,ij->j", block, block)
        self.frames += block.shape[0]

    @property
    def peak(self) -> np.ndarray:
        """Largest absolute sample per channel."""
        return self._peak.copy()

    @property
    def mean(self) -> np.ndarray:
        """Mean per channel (DC offset)."""
        return self._sum / max(self.frames, 1)

    @property
    def rms(self) -> np.ndarray:
        """Root mean square per channel (DC included)."""
        return np.sqrt(self._sum2 / max(self.frames, 1))


class BandRms:
    """Running RMS of each channel inside a band (a 4th-order Butterworth band-pass).

    The band-pass (two second-order sections from :func:`scipy.signal.butter`, −3 dB at
    the band edges) is designed once per sample rate and band and kept in the design
    cache; its state is carried between blocks. Its start-up counts in the RMS (about
    ``2/low_hz`` seconds of settling: 0.2 s for a 10 Hz edge).

    Parameters
    ----------
    sample_rate_hz, channels
        As the blocks fed.
    band_hz
        Lower and upper band edges, hertz (the upper edge below 0.45·fs).

    Examples
    --------
    A 100 Hz sine of amplitude 1 in the 10 Hz to 1 kHz band keeps its RMS 1/√2; a 5 kHz
    one, 2.3 octaves above the edge where each side falls 12 dB per octave, reads
    about 29 dB lower:

    >>> t = np.arange(48000) / 48000
    >>> rms = BandRms(48000.0, 2)
    >>> rms.update(np.column_stack([np.sin(2 * np.pi * 100 * t), np.sin(2 * np.pi * 5000 * t)]))
    >>> [round(float(v), 3) for v in rms.rms]
    [0.707, 0.026]
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        band_hz: tuple[float, float] = VELOCITY_BAND_HZ,
    ) -> None:
        self.sample_rate_hz = validate.sample_rate(sample_rate_hz)
        low, high = (float(band_hz[0]), float(band_hz[1]))
        if not (math.isfinite(low) and math.isfinite(high) and 0 < low < high):
            raise InputError(f"band must have 0 < low < high, got {low:g} to {high:g} Hz")
        if high >= 0.45 * self.sample_rate_hz:
            raise InputError(
                f"band edge {high:g} Hz is too close to the Nyquist frequency at "
                f"{self.sample_rate_hz:g} Hz sampling (at most 0.45·fs)"
            )
        self.band_hz = (low, high)
        self.channels = channels
        key = f"{self.sample_rate_hz!r} {low!r} {high!r} {code_digest(__file__)}"
        stored = cached_arrays("band-rms", key, lambda: {"sos": self._design()})
        self._sos = np.ascontiguousarray(stored["sos"], dtype=np.float64)
        self._zi = np.zeros((self._sos.shape[0], 2, channels))
        self._sum2 = np.zeros(channels)
        self.frames = 0

    def _design(self) -> np.ndarray:
        from scipy import signal

        return np.asarray(
            signal.butter(2, self.band_hz, btype="bandpass", fs=self.sample_rate_hz, output="sos")
        )

    def update(self, block: np.ndarray) -> None:
        """Add a ``(frames, channels)`` block."""
        y = np.array(block, dtype=np.float64, order="C", copy=True)
        sosfilt_inplace(self._sos, y, self._zi)
        self._sum2 += np.einsum("ij,ij->j", y, y)
        self.frames += y.shape[0]

    @property
    def rms(self) -> np.ndarray:
        """RMS in the band of each channel so far (0 before any sample)."""
        return np.sqrt(self._sum2 / max(self.frames, 1))
