"""The one tone-line estimator: frequency and mean square of a line in a density spectrum.

Used by the tone metrics (:mod:`piezo.tone.analysis`), the calibrator's tone search
(:mod:`piezo.tone.calibrator`) and the hum check (:mod:`piezo.diagnostics.spectral`).

A steady tone seen through a window spreads over the window's main lobe. In a one-sided
density spectrum (unit²/Hz, :mod:`piezo.spectral.averaging`; the scaling divides by
``fs·Σw²``, which is the window's power correction), the density summed over the lobe's
bins times the bin width is the tone's mean square wherever it lies between two bins
(Parseval: no scalloping loss), less the fraction of its power in the sidelobes. The
frequency is the power-weighted centroid of the same bins, the energy barycenter
correction of the discrete spectrum (K. Ding, C. Zheng, Z. Yang, "Frequency estimation
accuracy analysis and improvement of energy barycenter correction method for discrete
spectrum", Journal of Mechanical Engineering 46(5), 43-48, 2010): the power kernel of a
symmetric window is symmetric about the tone, so its centroid is the tone frequency, up to
the truncation of the kernel to the bins summed.

A noise floor (a density, measured by the caller beside the line) is taken off the power
as ``floor · bins · Δf``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from piezo.errors import InputError

__all__ = ["SpectralLine", "spectral_line"]


@dataclass(frozen=True)
class SpectralLine:
    """A spectral line measured in a one-sided density spectrum.

    Attributes
    ----------
    frequency_hz
        Power-weighted centroid of the line's bins (energy barycenter).
    power
        Density summed over the line's bins times the bin width, unit².
    floor_power
        The noise floor's share of ``power``: floor density × bins × bin width, unit².
    first_bin, last_bin
        The bins summed (inclusive).
    bin_width_hz
        Bin spacing of the spectrum, hertz.

    Examples
    --------
    >>> line = SpectralLine(1000.0, 0.5, 0.1, 99, 101, 10.0)
    >>> round(line.mean_square, 12), line.bins, round(line.with_floor(0.0).rms, 6)
    (0.4, 3, 0.707107)
    """

    frequency_hz: float
    power: float
    floor_power: float
    first_bin: int
    last_bin: int
    bin_width_hz: float

    def with_floor(self, floor_density: float) -> SpectralLine:
        """The same line with the floor ``floor_density`` (unit²/Hz) under its bins."""
        return replace(self, floor_power=float(floor_density) * self.bin_width_hz * self.bins)

    @property
    def mean_square(self) -> float:
        """``power - floor_power`` (unit²); negative when nothing stands above the floor."""
        return self.power - self.floor_power

    @property
    def rms(self) -> float:
        """RMS of the line, ``sqrt(max(mean_square, 0))``, in the input unit."""
        return math.sqrt(max(self.mean_square, 0.0))

    @property
    def bins(self) -> int:
        """Number of bins summed."""
        return self.last_bin - self.first_bin + 1


def spectral_line(
    frequency_hz: np.ndarray,
    density: np.ndarray,
    peak_bin: int,
    *,
    half_width_bins: int,
    floor_density: float = 0.0,
) -> SpectralLine:
    """Measure the line around ``peak_bin`` of a one-sided density spectrum.

    Parameters
    ----------
    frequency_hz
        Bin frequencies, hertz, uniformly spaced from 0, shape ``(bins,)``.
    density
        One-sided power spectral density, unit²/Hz, shape ``(bins,)``.
    peak_bin
        The line's strongest bin.
    half_width_bins
        Bins either side of ``peak_bin`` that belong to the line: the window's main
        lobe (Hann ±2, 4-term Blackman-Harris ±4); the DC bin is never counted.
    floor_density
        Noise density under the line, unit²/Hz, taken off the power.

    Returns
    -------
    SpectralLine

    Examples
    --------
    A tone of RMS 2 V a quarter bin above 1 kHz, 4-term Blackman-Harris window, 10 Hz
    bins: its RMS and frequency, read from the density.

    >>> from piezo.spectral.averaging import AutoSpectra
    >>> fs, n = 48000.0, 4800
    >>> t = np.arange(20 * n) / fs
    >>> auto = AutoSpectra(fs, 1, segment_frames=n, window="blackmanharris")
    >>> auto.update(2 * np.sqrt(2) * np.sin(2 * np.pi * 1002.5 * t))
    >>> psd = auto.result()
    >>> peak = int(np.argmax(psd.density[:, 0]))
    >>> line = spectral_line(psd.frequency_hz, psd.density[:, 0], peak, half_width_bins=6)
    >>> round(line.frequency_hz, 4), round(line.rms, 6)
    (1002.5, 2.0)
    """
    f = np.asarray(frequency_hz, dtype=np.float64)
    p = np.asarray(density, dtype=np.float64)
    if f.ndim != 1 or f.shape != p.shape or f.size < 2:
        raise InputError(
            "frequency_hz and density must be 1-D arrays of equal length (2 or more), got "
            f"shapes {f.shape} and {p.shape}"
        )
    if not 0 <= peak_bin < p.size:
        raise InputError(f"peak_bin must be one of 0 … {p.size - 1}, got {peak_bin!r}")
    if not (isinstance(half_width_bins, int | np.integer) and half_width_bins >= 0):
        raise InputError(f"half_width_bins must be an integer >= 0, got {half_width_bins!r}")
    df = float(f[1] - f[0])
    a = max(int(peak_bin) - int(half_width_bins), 1)
    b = min(int(peak_bin) + int(half_width_bins), p.size - 1)
    weights = p[a : b + 1]
    total = float(weights.sum())
    centroid = float(np.dot(weights, f[a : b + 1]) / total) if total > 0 else float(f[peak_bin])
    return SpectralLine(
        frequency_hz=centroid,
        power=total * df,
        floor_power=float(floor_density) * df * (b - a + 1),
        first_bin=a,
        last_bin=b,
        bin_width_hz=df,
    )
